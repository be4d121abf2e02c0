//! `seepd fit --id SECTION`: calibrate a section's seepage model to its piezometers at one or
//! several times from the store, keep the fit in the model history and print it (text, or one
//! JSON object in SI). Each time is solved at the pool and tail levels stored then; a
//! piezometer whose newest reading at the time is older than the section's `tolerance_s` is left
//! out, and a pool (or tail gauge) that moved more than the model's `resolve_change` in the
//! `STEADY_S` before a time earns a warning (the heads may not have caught up).
//!
//! Owns the choice of data and the output; the fit and whether it is used live is
//! `derive::calibration`.

use std::fmt::Write as _;

use chrono::{DateTime, Utc};
use serde_json::json;

use crate::config::{Config, Level, Section};
use crate::derive::calibration::{fit_section, LoadCase, SectionFit};
use crate::derive::excluding_flags;
use crate::derive::flownet::tips;
use crate::fit_cmd::time;
use crate::flownet_cmd::{fit_in_use, section, stored_levels};
use crate::store::Store;

/// Conditions count as steady when the driving levels stayed within `resolve_change` over this
/// long before a calibration time, s.
pub const STEADY_S: i64 = 24 * 3600;

/// The load case of section `s` at `t_ms`, with warnings about the data.
fn load_case(
    cfg: &Config,
    store: &Store,
    s: &Section,
    change_m: f64,
    t_ms: i64,
    warnings: &mut Vec<String>,
) -> anyhow::Result<LoadCase> {
    let levels = stored_levels(store, s, t_ms)?;
    let mut gauges = vec![s.pool_gauge.as_str()];
    if let Some(Level::Gauge(g)) = &s.tail {
        gauges.push(g);
    }
    for g in gauges {
        let h =
            store.heads_between(g, t_ms - STEADY_S * 1000, t_ms + 1, excluding_flags(cfg, g))?;
        let lo = h.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
        let hi = h.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max);
        if hi - lo > change_m {
            warnings.push(format!(
                "{g} moved {:.2} m in the {} h before {}: conditions may not be steady",
                hi - lo,
                STEADY_S / 3600,
                time(t_ms)
            ));
        }
    }
    let mut piezometers = Vec::new();
    for (id, tip) in tips(cfg, s) {
        let reading = levels.heads.iter().find(|h| h.0 == id).and_then(|h| h.1);
        match reading {
            Some((t, h)) if t_ms - t <= s.tolerance_s * 1000 => piezometers.push((id, tip, h)),
            Some((t, _)) => warnings.push(format!(
                "{id}: newest reading at {} is older than the section's tolerance; left out",
                time(t)
            )),
            None => warnings.push(format!("{id}: no reading at or before {}", time(t_ms))),
        }
    }
    Ok(LoadCase {
        t_ms,
        pool_m: levels.pool_m,
        tail_m: levels.tail_m,
        piezometers,
    })
}

/// The text output of a fit.
fn text(fit: &SectionFit, in_use: Option<&SectionFit>) -> String {
    let mut s = format!(
        "{}: calibrated to {} heads at {} time(s) ({}); {} iterations, {} solves\n",
        fit.section,
        fit.tips.len(),
        fit.times_ms.len(),
        fit.times_ms
            .iter()
            .map(|t| time(*t))
            .collect::<Vec<_>>()
            .join(", "),
        fit.iterations,
        fit.solves
    );
    for z in &fit.factors {
        let se = z
            .std_error
            .map_or_else(|| "not determined".into(), |e| format!("± {e:.3}"));
        let _ = writeln!(
            s,
            "  zone {}: factor {:.4} (log10 {:.4} {se}){}",
            z.zone,
            z.factor(),
            z.log10_factor,
            if z.at_bound { ", on a bound" } else { "" }
        );
    }
    let _ = writeln!(
        s,
        "  RMS residual: {:.4} m as written, {:.4} m calibrated",
        fit.rms_written_m, fit.rms_calibrated_m
    );
    for t in &fit.tips {
        let _ = writeln!(
            s,
            "  {} at {}: measured {:.3} m; as written {:.3} m (residual {:+.3}); calibrated {:.3} m (residual {:+.3})",
            t.id,
            time(t.t_ms),
            t.measured_m,
            t.written_m,
            t.measured_m - t.written_m,
            t.calibrated_m,
            t.measured_m - t.calibrated_m
        );
    }
    for w in &fit.warnings {
        let _ = writeln!(s, "  warning: {w}");
    }
    if fit.applied() {
        s += "  applied: the live re-solve (after a reload or restart), seepd flownet and seepd section use it\n";
    } else {
        let _ = writeln!(
            s,
            "  stored, not applied: {}; in use: {}",
            fit.not_applied.join("; "),
            in_use.map_or_else(|| "the permeabilities as written".into(), SectionFit::label)
        );
    }
    s
}

/// What to calibrate.
pub struct Request<'a> {
    /// Section id.
    pub id: &'a str,
    /// Calibration times (none: now).
    pub times: &'a [DateTime<Utc>],
    /// Zones to fit (none: every zone of the model).
    pub zones: &'a [String],
    /// One JSON object instead of text.
    pub json: bool,
}

/// Calibrate as `req` says, store the fit and write it to `out`. Returns the exit code: 0 when the fit is applied, 1 when it is
/// stored but not applied.
///
/// # Errors
/// Unknown section or zone, a level with no reading, no piezometer head, solve or database
/// failures.
pub fn run(
    cfg: &Config,
    store: &Store,
    req: &Request<'_>,
    now: DateTime<Utc>,
    out: &mut String,
) -> anyhow::Result<i32> {
    let Request {
        id,
        times,
        zones,
        json,
    } = *req;
    let s = section(cfg, id)?;
    let spec = s
        .model
        .as_ref()
        .ok_or_else(|| anyhow::anyhow!("section {id:?} has no [section.model]"))?;
    let times: Vec<i64> = if times.is_empty() {
        vec![now.timestamp_millis()]
    } else {
        times.iter().map(DateTime::timestamp_millis).collect()
    };
    let mut warnings = Vec::new();
    let cases = times
        .iter()
        .map(|&t| load_case(cfg, store, s, spec.resolve_change_m, t, &mut warnings))
        .collect::<anyhow::Result<Vec<_>>>()?;
    let mut fit = fit_section(id, spec, &cases, zones, now.timestamp_millis())
        .map_err(|e| anyhow::anyhow!("section {id:?}: {e}"))?;
    warnings.append(&mut fit.warnings);
    fit.warnings = warnings;
    store.insert_model(&fit.to_row())?;
    let in_use = fit_in_use(store, id)?;
    if json {
        let mut v = serde_json::to_value(&fit)?;
        v["applied"] = json!(fit.applied());
        v["in_use_fitted_ms"] = json!(in_use.as_ref().map(|f| f.fitted_ms));
        *out += &format!("{v}\n");
    } else {
        *out += &text(&fit, in_use.as_ref());
    }
    Ok(i32::from(!fit.applied()))
}
