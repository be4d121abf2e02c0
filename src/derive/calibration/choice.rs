//! What a section calibration fits (the zones and water boundaries named on the command line,
//! checked against the model) and when a fit is used live (every parameter determined, none on
//! a bound, better than the model as written).
//!
//! Owns those two decisions. Must not solve.

use super::{BoundaryOffset, ZoneFactor, BOUND_LOG10};
use crate::config::section_model::SeepageSpec;
use crate::seepage::calibrate::{FitParameter, Target, POORLY_DETERMINED, POORLY_DETERMINED_M};

/// What to fit.
#[derive(Debug, Clone, Copy)]
pub struct Choice<'a> {
    /// Zones whose factor is fitted (none: every zone, unless boundaries are given).
    pub zones: &'a [String],
    /// Water boundaries whose level offset is fitted (none: no offset).
    pub boundaries: &'a [String],
    /// Offsets are searched within ±this, m.
    pub offset_limit_m: f64,
}

/// The parameters `choice` asks for in `spec`: zone factors from 1 within 10^±`BOUND_LOG10`,
/// boundary offsets from 0 within ±`offset_limit_m`.
pub(super) fn parameters(
    spec: &SeepageSpec,
    choice: &Choice<'_>,
) -> Result<Vec<FitParameter>, String> {
    let model = &spec.model;
    let zones: Vec<&str> = model.zones.iter().map(|z| z.name.as_str()).collect();
    let water: Vec<&str> = model
        .boundaries
        .iter()
        .zip(&spec.water)
        .filter(|(_, w)| w.is_some())
        .map(|(b, _)| b.name.as_str())
        .collect();
    let limit = choice.offset_limit_m;
    if choice.boundaries.is_empty() && zones.is_empty() {
        return Err(
            "the model has no [[section.model.zone]]: from heads alone only permeability ratios \
             to the base material can be fitted (or fit a boundary offset with --boundary)"
                .into(),
        );
    }
    if !(limit.is_finite() && limit > 0.0) {
        return Err(format!(
            "the offset limit must be a positive number of metres, not {limit}"
        ));
    }
    let chosen_zones: Vec<usize> = if choice.zones.is_empty() && choice.boundaries.is_empty() {
        (0..zones.len()).collect()
    } else {
        choice
            .zones
            .iter()
            .map(|z| {
                zones
                    .iter()
                    .position(|n| n == z)
                    .ok_or_else(|| format!("no zone {z:?} in the model (zones: {})", list(&zones)))
            })
            .collect::<Result<_, _>>()?
    };
    let mut out: Vec<FitParameter> = chosen_zones
        .into_iter()
        .map(|z| FitParameter {
            target: Target::Zone(z),
            start: 0.0,
            lower: -BOUND_LOG10,
            upper: BOUND_LOG10,
        })
        .collect();
    for name in choice.boundaries {
        let i = model
            .boundaries
            .iter()
            .position(|b| b.name == *name)
            .ok_or_else(|| {
                format!(
                    "no boundary {name:?} in the model (water boundaries: {})",
                    list(&water)
                )
            })?;
        if !water.contains(&name.as_str()) {
            return Err(format!(
                "boundary {name:?} is not a water boundary: only a water level takes an offset \
                 (water boundaries: {})",
                list(&water)
            ));
        }
        out.push(FitParameter {
            target: Target::Boundary(i),
            start: 0.0,
            lower: -limit,
            upper: limit,
        });
    }
    let mut seen = Vec::new();
    out.retain(|p| {
        let new = !seen.contains(&p.target);
        seen.push(p.target);
        new
    });
    Ok(out)
}

fn list(names: &[&str]) -> String {
    if names.is_empty() {
        "none".into()
    } else {
        names.join(", ")
    }
}

/// One parameter as the applying rule sees it.
struct Judged<'a> {
    /// "zone foundation", "boundary tail water".
    what: String,
    std_error: Option<f64>,
    /// Above this the parameter is poorly determined.
    poor: f64,
    /// " in log10", " m".
    unit: &'a str,
    at_bound: bool,
    /// "factor 10^±2", "offset ±2 m".
    bound: String,
}

/// Why a fit with these parameters is not used live (empty: it is).
pub(super) fn not_applied(
    factors: &[ZoneFactor],
    offsets: &[BoundaryOffset],
    limit_m: f64,
    rms_m: f64,
    rms_written_m: f64,
) -> Vec<String> {
    let zones = factors.iter().map(|f| Judged {
        what: format!("zone {}", f.zone),
        std_error: f.std_error,
        poor: POORLY_DETERMINED,
        unit: " in log10",
        at_bound: f.at_bound,
        bound: format!("factor 10^±{BOUND_LOG10}"),
    });
    let boundaries = offsets.iter().map(|o| Judged {
        what: format!("boundary {}", o.boundary),
        std_error: o.std_error_m,
        poor: POORLY_DETERMINED_M,
        unit: " m",
        at_bound: o.at_bound,
        bound: format!("offset ±{limit_m} m"),
    });
    let mut out = Vec::new();
    for p in zones.chain(boundaries) {
        match p.std_error {
            None => out.push(format!("{}: not determined by the data", p.what)),
            Some(se) if se > p.poor => out.push(format!(
                "{}: poorly determined (standard error {se:.2}{})",
                p.what, p.unit
            )),
            Some(_) => {}
        }
        if p.at_bound {
            out.push(format!(
                "{}: on a bound of the search ({})",
                p.what, p.bound
            ));
        }
    }
    if rms_m >= rms_written_m {
        out.push(format!(
            "not better than the model as written (RMS {rms_m:.4} m against {rms_written_m:.4} m)"
        ));
    }
    out
}
