//! `seepd section`: draw an instrumented cross-section as SVG from the stored heads at a time
//! (the latest by default), with the phreatic line and the seepage-face exit point. Each input
//! uses its newest head at or before the time; a head older than the section's tolerance is
//! still drawn, marked "stale" with its age, so a silent gauge never hides the drawing.

use std::cell::RefCell;

use chrono::{DateTime, Utc};

use crate::config::Config;
use crate::derive::section_input;
use crate::domain::section::analyse;
use crate::domain::section_svg::{render_section_svg, SvgOptions};
use crate::store::Store;

/// Render section `id` at time `at` from `store`.
///
/// # Errors
/// Unknown section, an input with no reading at or before the time, database errors.
pub fn render(cfg: &Config, store: &Store, id: &str, at: DateTime<Utc>) -> anyhow::Result<String> {
    let s = cfg
        .objects
        .sections
        .iter()
        .find(|s| s.id == id)
        .ok_or_else(|| anyhow::anyhow!("no section {id:?} in the configuration"))?;
    let units = cfg
        .sites
        .iter()
        .find(|x| x.id == s.site)
        .map_or(crate::config::DisplayUnits::Si, |x| x.display_units);
    let t_ms = at.timestamp_millis();
    let stale: RefCell<Vec<(String, String)>> = RefCell::new(Vec::new());
    let head = |inst: &str| -> Result<f64, String> {
        match store.head_at(inst, t_ms) {
            Ok(Some((t, h, _))) => {
                let age_s = (t_ms - t) / 1000;
                if age_s > s.tolerance_s {
                    let mut st = stale.borrow_mut();
                    if !st.iter().any(|(i, _)| i == inst) {
                        st.push((inst.to_string(), crate::present::format::duration(age_s)));
                    }
                }
                Ok(h)
            }
            Ok(None) => Err(format!("input {inst} has no reading at or before the time")),
            Err(e) => Err(e.to_string()),
        }
    };
    let input = section_input(cfg, s, head).map_err(|e| anyhow::anyhow!("section {id}: {e}"))?;
    let result = analyse(&input).map_err(|e| anyhow::anyhow!("section {id}: {e}"))?;
    let ages = stale.into_inner();
    let note = if ages.is_empty() {
        String::new()
    } else {
        let list: Vec<String> = ages.iter().map(|(i, a)| format!("{i} {a}")).collect();
        format!("stale heads drawn, with their age: {}", list.join(", "))
    };
    let marks = ages
        .into_iter()
        .map(|(i, a)| (i, format!("stale, {a} old")))
        .collect();
    let title = format!("Section {id} at {}", at.format("%Y-%m-%d %H:%M UTC"));
    Ok(render_section_svg(
        &input,
        &result,
        &SvgOptions {
            title,
            units,
            note,
            marks,
            ..SvgOptions::default()
        },
    ))
}
