//! `seepd fit --id SECTION`: calibrate a section's seepage model (zone permeability factors,
//! water boundary level offsets) to its piezometers at one or several times from the store, keep the fit in the model history and print it (text, or one
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
use crate::derive::calibration::{fit_section, Choice, LoadCase, SectionFit};
use crate::derive::excluding_flags;
use crate::derive::flownet::tips;
use crate::flownet_cmd::{section, stored_levels};
use crate::present::format::fixed;
use crate::present::format::utc as time;
use crate::section_cmd::fit_in_use;
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

/// `v` with `decimals` decimals and its sign, "+" included; a value that rounds to zero has none.
fn signed(v: f64, decimals: usize) -> String {
    let s = fixed(v, decimals);
    if s.starts_with('-') || s.bytes().all(|b| b == b'0' || b == b'.') {
        s
    } else {
        format!("+{s}")
    }
}

/// "1 time", "3 times".
fn count(n: usize, what: &str) -> String {
    format!("{n} {what}{}", if n == 1 { "" } else { "s" })
}

/// " ± 0.012 m" after a value, or ", not determined".
fn error(se: Option<f64>, decimals: usize, unit: &str) -> String {
    se.map_or_else(
        || ", not determined".into(),
        |e| format!(" ± {}{unit}", fixed(e, decimals)),
    )
}

/// The text output of a fit.
fn text(fit: &SectionFit, in_use: Option<&SectionFit>) -> String {
    let mut s = format!(
        "{}: calibrated to {} at {} ({}); {}, {}\n",
        fit.section,
        count(fit.tips.len(), "head"),
        count(fit.times_ms.len(), "time"),
        fit.times_ms
            .iter()
            .map(|t| time(*t))
            .collect::<Vec<_>>()
            .join(", "),
        count(fit.iterations, "iteration"),
        count(fit.solves, "solve"),
    );
    let bound = |b: bool| if b { ", on a bound" } else { "" };
    for z in &fit.factors {
        let _ = writeln!(
            s,
            "  zone {}: factor {} (log10 {}{}){}",
            z.zone,
            fixed(z.factor(), 4),
            fixed(z.log10_factor, 4),
            error(z.std_error, 3, ""),
            bound(z.at_bound)
        );
    }
    for o in &fit.boundary_offsets {
        let _ = writeln!(
            s,
            "  boundary {}: level offset {} m{}{}",
            o.boundary,
            signed(o.offset_m, 3),
            error(o.std_error_m, 3, " m"),
            bound(o.at_bound)
        );
    }
    let _ = writeln!(
        s,
        "  RMS residual: {} m as written, {} m calibrated",
        fixed(fit.rms_written_m, 4),
        fixed(fit.rms_calibrated_m, 4)
    );
    for t in &fit.tips {
        let _ = writeln!(
            s,
            "  {} at {}: measured {} m; as written {} m (residual {}); calibrated {} m (residual {})",
            t.id,
            time(t.t_ms),
            fixed(t.measured_m, 3),
            fixed(t.written_m, 3),
            signed(t.measured_m - t.written_m, 3),
            fixed(t.calibrated_m, 3),
            signed(t.measured_m - t.calibrated_m, 3)
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
            in_use.map_or_else(|| "the model as written".into(), SectionFit::label)
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
    /// Zones to fit (none: every zone of the model, unless boundaries are given).
    pub zones: &'a [String],
    /// Water boundaries whose level offset is fitted (none: no offset).
    pub boundaries: &'a [String],
    /// Offsets are searched within ±this, m.
    pub offset_limit_m: f64,
    /// One JSON object instead of text.
    pub json: bool,
}

/// Calibrate as `req` says, store the fit and write it to `out`. Returns the exit code: 0 when
/// the fit is applied, 1 when it is stored but not applied.
///
/// # Errors
/// Unknown section, zone or boundary, a level with no reading, no piezometer head, solve or database
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
        boundaries,
        offset_limit_m,
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
    let choice = Choice {
        zones,
        boundaries,
        offset_limit_m,
    };
    // A refusal says what the data warnings found (why each tip was left out, say).
    let mut fit = fit_section(id, spec, &cases, &choice, now.timestamp_millis()).map_err(|e| {
        let why: String = warnings.iter().map(|w| format!("\n  {w}")).collect();
        anyhow::anyhow!("section {id:?}: {e}{why}")
    })?;
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

#[cfg(test)]
mod tests {
    //! The wording of the text output.

    use super::*;
    use crate::derive::calibration::{BoundaryOffset, TipFit, ZoneFactor};

    #[test]
    fn values_that_round_to_zero_have_no_sign_and_counts_agree() {
        assert_eq!(signed(-0.00004, 3), "0.000");
        assert_eq!(signed(0.0, 3), "0.000");
        assert_eq!(signed(0.45, 3), "+0.450");
        assert_eq!(signed(-0.45, 3), "-0.450");
        assert_eq!(count(1, "time"), "1 time");
        assert_eq!(count(2, "time"), "2 times");
    }

    #[test]
    fn the_text_has_no_negative_zero_and_names_the_offsets() {
        let fit = SectionFit {
            section: "S1".into(),
            fitted_ms: 0,
            times_ms: vec![0],
            factors: vec![ZoneFactor {
                zone: "core".into(),
                log10_factor: -1e-7,
                std_error: Some(0.0123),
                at_bound: false,
            }],
            boundary_offsets: vec![BoundaryOffset {
                boundary: "ditch".into(),
                offset_m: -2.0,
                std_error_m: None,
                at_bound: true,
            }],
            rms_written_m: 0.2,
            rms_calibrated_m: 0.1,
            tips: vec![TipFit {
                t_ms: 0,
                id: "PZ".into(),
                measured_m: 10.0,
                written_m: 10.0000001,
                calibrated_m: 9.5,
            }],
            warnings: vec![],
            not_applied: vec!["boundary ditch: not determined by the data".into()],
            iterations: 1,
            solves: 4,
        };
        let t = text(&fit, None);
        assert!(
            t.starts_with(
                "S1: calibrated to 1 head at 1 time (1970-01-01T00:00:00Z); 1 iteration, 4 solves\n"
            ),
            "{t}"
        );
        assert!(!t.contains("-0.0"), "{t}");
        assert!(
            t.contains("  zone core: factor 1.0000 (log10 0.0000 ± 0.012)\n"),
            "{t}"
        );
        assert!(
            t.contains("  boundary ditch: level offset -2.000 m, not determined, on a bound\n"),
            "{t}"
        );
        assert!(
            t.contains("(residual 0.000); calibrated 9.500 m (residual +0.500)"),
            "{t}"
        );
        assert!(t.contains("in use: the model as written"), "{t}");
    }
}
