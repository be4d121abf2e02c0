//! `seepd section`: draw an instrumented cross-section as SVG from the stored heads at a time
//! (the latest by default), with the phreatic line and the seepage-face exit point.

use chrono::{DateTime, Utc};

use crate::config::Config;
use crate::derive::section_input;
use crate::domain::section::analyse;
use crate::domain::section_svg::{render_section_svg, SvgOptions};
use crate::store::Store;

/// Render section `id` at time `at` from `store`.
///
/// # Errors
/// Unknown section, missing or stale inputs, database errors.
pub fn render(cfg: &Config, store: &Store, id: &str, at: DateTime<Utc>) -> anyhow::Result<String> {
    let s = cfg
        .objects
        .sections
        .iter()
        .find(|s| s.id == id)
        .ok_or_else(|| anyhow::anyhow!("no section {id:?} in the configuration"))?;
    let t_ms = at.timestamp_millis();
    let head = |inst: &str| -> Result<f64, String> {
        match store.head_at(inst, t_ms) {
            Ok(Some((t, h, _))) if (t_ms - t) / 1000 <= s.tolerance_s => Ok(h),
            Ok(Some((t, _, _))) => Err(format!(
                "input {inst} is stale ({} s before the time)",
                (t_ms - t) / 1000
            )),
            Ok(None) => Err(format!("input {inst} has no reading at or before the time")),
            Err(e) => Err(e.to_string()),
        }
    };
    let input = section_input(cfg, s, head).map_err(|e| anyhow::anyhow!("section {id}: {e}"))?;
    let result = analyse(&input).map_err(|e| anyhow::anyhow!("section {id}: {e}"))?;
    let title = format!("Section {id} at {}", at.format("%Y-%m-%d %H:%M UTC"));
    Ok(render_section_svg(
        &input,
        &result,
        &SvgOptions {
            title,
            ..SvgOptions::default()
        },
    ))
}
