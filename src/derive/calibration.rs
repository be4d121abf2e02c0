//! A section's calibration to its piezometers: the zone permeability factors fitted to the heads
//! measured at one or several times (each time solved at its own pool and tail levels, the
//! factors shared), the residuals before and after, whether the fit may be used live, the row
//! it is kept as in the model history, and the section model with the factors applied.
//!
//! The base material is the reference and stays as written: from heads alone only permeability
//! ratios can be determined, so the zones are fitted relative to it. A fit is used live only
//! when every factor is determined (a standard error, at most `POORLY_DETERMINED` in log10),
//! none stopped on a bound, and the RMS residual is below that of the permeabilities as
//! written; otherwise it is kept in the history with the reasons and the previous fit (or the
//! written permeabilities) stays in use.
//!
//! Owns those decisions and the stored JSON. Must not do I/O or read the clock.

use std::collections::HashMap;
use std::fmt::Write as _;

use chrono::{TimeZone, Utc};
use serde::{Deserialize, Serialize};

use crate::config::section_model::SeepageSpec;
use crate::seepage::calibrate::{
    calibrate_cases, residuals, Case, FitParameter, Observation, POORLY_DETERMINED,
};
use crate::seepage::outputs::locate;
use crate::seepage::{build_mesh, solve, MeshOptions, Point, SolveOptions};
use crate::store::ModelRow;

/// The `kind` of a section calibration in the model history.
pub const KIND: &str = "seepage";

/// Zone factors are searched within 10^±this.
pub const BOUND_LOG10: f64 = 2.0;

/// One fitted zone factor.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ZoneFactor {
    /// Zone name in the section model.
    pub zone: String,
    /// log10 of the factor on the zone's kh and kv (anisotropy kept).
    pub log10_factor: f64,
    /// Its standard error, log10 units; `None` when the data cannot determine it.
    pub std_error: Option<f64>,
    /// The fit stopped on a bound of the search.
    pub at_bound: bool,
}

impl ZoneFactor {
    /// The factor itself.
    #[must_use]
    pub fn factor(&self) -> f64 {
        10f64.powf(self.log10_factor)
    }
}

/// A piezometer at one calibration time: measured head and the modelled ones before and after.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TipFit {
    pub t_ms: i64,
    pub id: String,
    pub measured_m: f64,
    /// Modelled with the permeabilities as written, m.
    pub written_m: f64,
    /// Modelled with the fitted factors, m.
    pub calibrated_m: f64,
}

/// A section calibration, as kept in the model history.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SectionFit {
    pub section: String,
    /// When the fit ran, ms.
    pub fitted_ms: i64,
    /// The calibration times, ms.
    pub times_ms: Vec<i64>,
    pub factors: Vec<ZoneFactor>,
    /// RMS residual with the permeabilities as written, m.
    pub rms_written_m: f64,
    /// RMS residual with the fitted factors, m.
    pub rms_calibrated_m: f64,
    pub tips: Vec<TipFit>,
    pub warnings: Vec<String>,
    /// Why the fit is not used live; empty when it is.
    pub not_applied: Vec<String>,
    pub iterations: usize,
    pub solves: usize,
}

/// One calibration time: the levels then and the piezometers with a head.
#[derive(Debug, Clone, PartialEq)]
pub struct LoadCase {
    pub t_ms: i64,
    pub pool_m: f64,
    pub tail_m: Option<f64>,
    /// (id, tip, measured head m).
    pub piezometers: Vec<(String, Point, f64)>,
}

fn time(t_ms: i64) -> String {
    Utc.timestamp_millis_opt(t_ms).single().map_or_else(
        || t_ms.to_string(),
        |t| t.format("%Y-%m-%d %H:%M UTC").to_string(),
    )
}

impl SectionFit {
    /// Whether the fit is used live.
    #[must_use]
    pub fn applied(&self) -> bool {
        self.not_applied.is_empty()
    }

    /// `spec` with each fitted zone's permeability multiplied by its factor (zones are matched
    /// by name; one renamed since the fit keeps its written permeability).
    #[must_use]
    pub fn apply(&self, spec: &SeepageSpec) -> SeepageSpec {
        let mut out = spec.clone();
        for z in &mut out.model.zones {
            if let Some(f) = self.factors.iter().find(|f| f.zone == z.name) {
                z.material = z.material.scaled(f.factor());
            }
        }
        out
    }

    /// One line saying which fit this is: time, RMS, factors.
    #[must_use]
    pub fn label(&self) -> String {
        let mut s = format!(
            "calibrated {}, RMS {:.3} m (as written {:.3} m):",
            time(self.fitted_ms),
            self.rms_calibrated_m,
            self.rms_written_m
        );
        for f in &self.factors {
            let _ = write!(s, " {} ×{:.3}", f.zone, f.factor());
        }
        s
    }

    /// The model-history row (id = section id; σ the calibrated RMS; R² of the measured heads
    /// against the calibrated ones; the whole fit as JSON).
    #[must_use]
    pub fn to_row(&self) -> ModelRow {
        let n = self.tips.len().max(1) as f64;
        let mean = self.tips.iter().map(|t| t.measured_m).sum::<f64>() / n;
        let sst: f64 = self
            .tips
            .iter()
            .map(|t| (t.measured_m - mean).powi(2))
            .sum();
        let sse: f64 = self
            .tips
            .iter()
            .map(|t| (t.measured_m - t.calibrated_m).powi(2))
            .sum();
        let r_squared = if sst > 0.0 { 1.0 - sse / sst } else { 0.0 };
        ModelRow {
            id: self.section.clone(),
            kind: KIND.into(),
            fitted_ms: self.fitted_ms,
            train_start_ms: self.times_ms.iter().copied().min().unwrap_or(0),
            train_end_ms: self.times_ms.iter().copied().max().unwrap_or(0),
            a: None,
            b: None,
            lag_ms: None,
            r_squared,
            sigma: self.rms_calibrated_m,
            n: self.tips.len() as i64,
            params: serde_json::to_string(self).unwrap_or_default(),
        }
    }

    /// A stored row back.
    ///
    /// # Errors
    /// Not a calibration, or its JSON does not read.
    pub fn from_row(r: &ModelRow) -> Result<Self, String> {
        if r.kind != KIND {
            return Err(format!("model {} is not a section calibration", r.id));
        }
        serde_json::from_str(&r.params).map_err(|e| format!("calibration of {}: {e}", r.id))
    }
}

/// The fit in use per section: the newest applied one in `rows` (calibration rows, any order).
#[must_use]
pub fn in_use(rows: &[ModelRow]) -> HashMap<String, SectionFit> {
    let mut out: HashMap<String, SectionFit> = HashMap::new();
    for r in rows {
        match SectionFit::from_row(r) {
            Ok(f) if f.applied() => {
                if out
                    .get(&f.section)
                    .is_none_or(|o| o.fitted_ms < f.fitted_ms)
                {
                    out.insert(f.section.clone(), f);
                }
            }
            Ok(_) => {}
            Err(e) => tracing::warn!(error = %e, "Stored calibration ignored"),
        }
    }
    out
}

/// Fit `zones` of `spec` (all its zones when empty) to the heads of `cases`.
///
/// # Errors
/// A message: no zone to fit, an unknown zone, no piezometer head inside the model, a mesh or
/// solve failure.
pub fn fit_section(
    section: &str,
    spec: &SeepageSpec,
    cases: &[LoadCase],
    zones: &[String],
    fitted_ms: i64,
) -> Result<SectionFit, String> {
    let names: Vec<&str> = spec.model.zones.iter().map(|z| z.name.as_str()).collect();
    if names.is_empty() {
        return Err(
            "the model has no [[section.model.zone]]: from heads alone only permeability ratios \
             to the base material can be fitted"
                .into(),
        );
    }
    let chosen: Vec<usize> = if zones.is_empty() {
        (0..names.len()).collect()
    } else {
        zones
            .iter()
            .map(|z| {
                names.iter().position(|n| n == z).ok_or_else(|| {
                    format!("no zone {z:?} in the model (zones: {})", names.join(", "))
                })
            })
            .collect::<Result<_, _>>()?
    };
    let params: Vec<FitParameter> = chosen
        .iter()
        .map(|&zone| FitParameter {
            zone,
            start: 0.0,
            lower: -BOUND_LOG10,
            upper: BOUND_LOG10,
        })
        .collect();
    let opts = SolveOptions {
        unconfined: spec.unconfined,
        ..SolveOptions::default()
    };
    let mut warnings = Vec::new();
    let mut built = Vec::new();
    for c in cases {
        let model = spec.at(c.pool_m, c.tail_m);
        let mesh = build_mesh(&model, &MeshOptions::uniform(spec.element_size_m))
            .map_err(|e| format!("mesh: {e}"))?;
        let mut obs = Vec::new();
        for (id, at, head_m) in &c.piezometers {
            if locate(&mesh, *at).is_some() {
                obs.push(Observation {
                    id: id.clone(),
                    at: *at,
                    head_m: *head_m,
                });
            } else {
                warnings.push(format!(
                    "{id}: the tip is outside the model's mesh; left out"
                ));
            }
        }
        built.push((c.t_ms, model, mesh, obs));
    }
    let n: usize = built.iter().map(|b| b.3.len()).sum();
    if n == 0 {
        return Err("no piezometer head to fit".into());
    }
    // Residuals with the permeabilities as written.
    let mut written = Vec::with_capacity(n);
    for (_, model, mesh, obs) in &built {
        let sol = solve(model, mesh, &opts).map_err(|e| format!("solve: {e}"))?;
        let (r, _) = residuals(mesh, &sol, obs).map_err(|e| e.to_string())?;
        written.extend(r);
    }
    let cases_in: Vec<Case<'_>> = built
        .iter()
        .map(|(_, model, mesh, obs)| Case { model, mesh, obs })
        .collect();
    let fit = calibrate_cases(&cases_in, &opts, &params).map_err(|e| e.to_string())?;
    warnings.extend(fit.warnings.iter().cloned());
    let times: Vec<i64> = built
        .iter()
        .flat_map(|b| std::iter::repeat_n(b.0, b.3.len()))
        .collect();
    let tips: Vec<TipFit> = written
        .iter()
        .zip(&fit.residuals)
        .zip(&times)
        .map(|((w, c), &t_ms)| TipFit {
            t_ms,
            id: w.id.clone(),
            measured_m: w.measured_m,
            written_m: w.modelled_m,
            calibrated_m: c.modelled_m,
        })
        .collect();
    let rms_written_m =
        (written.iter().map(|r| r.residual_m.powi(2)).sum::<f64>() / n as f64).sqrt();
    let factors: Vec<ZoneFactor> = fit
        .parameters
        .iter()
        .map(|p| ZoneFactor {
            zone: names[p.zone].to_string(),
            log10_factor: p.log10_factor,
            std_error: p.std_error,
            at_bound: (p.log10_factor.abs() - BOUND_LOG10).abs() < 1e-9,
        })
        .collect();
    let mut not_applied = Vec::new();
    for f in &factors {
        match f.std_error {
            None => not_applied.push(format!("zone {}: not determined by the data", f.zone)),
            Some(se) if se > POORLY_DETERMINED => not_applied.push(format!(
                "zone {}: poorly determined (standard error {se:.2} in log10)",
                f.zone
            )),
            Some(_) => {}
        }
        if f.at_bound {
            not_applied.push(format!(
                "zone {}: on a bound of the search (factor 10^±{BOUND_LOG10})",
                f.zone
            ));
        }
    }
    if fit.rms_m >= rms_written_m {
        not_applied.push(format!(
            "not better than the permeabilities as written (RMS {:.4} m against {rms_written_m:.4} m)",
            fit.rms_m
        ));
    }
    Ok(SectionFit {
        section: section.to_string(),
        fitted_ms,
        times_ms: built.iter().map(|b| b.0).collect(),
        factors,
        rms_written_m,
        rms_calibrated_m: fit.rms_m,
        tips,
        warnings,
        not_applied,
        iterations: fit.iterations,
        solves: fit.solves,
    })
}

#[cfg(test)]
mod tests {
    //! The row round trip and which stored fit is in use.

    use super::*;

    fn fit(section: &str, fitted_ms: i64, applied: bool) -> SectionFit {
        SectionFit {
            section: section.into(),
            fitted_ms,
            times_ms: vec![1000, 5000],
            factors: vec![ZoneFactor {
                zone: "foundation".into(),
                log10_factor: -0.5,
                std_error: Some(0.01),
                at_bound: false,
            }],
            rms_written_m: 0.5,
            rms_calibrated_m: 0.01,
            tips: vec![TipFit {
                t_ms: 1000,
                id: "PZ".into(),
                measured_m: 10.0,
                written_m: 10.5,
                calibrated_m: 10.01,
            }],
            warnings: Vec::new(),
            not_applied: if applied {
                Vec::new()
            } else {
                vec!["zone foundation: not determined by the data".into()]
            },
            iterations: 3,
            solves: 9,
        }
    }

    #[test]
    fn a_fit_round_trips_through_its_row() {
        let f = fit("S1", 7, true);
        let row = f.to_row();
        assert_eq!((row.kind.as_str(), row.id.as_str()), (KIND, "S1"));
        assert_eq!((row.train_start_ms, row.train_end_ms), (1000, 5000));
        assert_eq!(row.sigma, 0.01);
        assert_eq!(SectionFit::from_row(&row), Ok(f));
    }

    #[test]
    fn the_newest_applied_fit_is_in_use_and_a_flagged_one_never() {
        let rows: Vec<ModelRow> = [
            fit("S1", 1, true),
            fit("S1", 3, false),
            fit("S1", 2, true),
            fit("S2", 5, false),
        ]
        .iter()
        .map(SectionFit::to_row)
        .collect();
        let used = in_use(&rows);
        assert_eq!(used.get("S1").map(|f| f.fitted_ms), Some(2));
        assert!(!used.contains_key("S2"));
    }
}
