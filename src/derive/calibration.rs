//! A section's calibration to its piezometers: the zone permeability factors and the boundary
//! level offsets fitted to the heads measured at one or several times (each time solved at its
//! own pool and tail levels, the parameters shared), the residuals before and after, whether the
//! fit may be used live, the row it is kept as in the model history, and the section model with
//! the fit applied.
//!
//! The base material is the reference and stays as written: from heads alone only permeability
//! ratios can be determined, so the zones are fitted relative to it. A boundary offset is added
//! to a water boundary's level (gauged or written) whenever the section is solved: an ungauged
//! ditch or tail water, or a loss through a silted bed at the entry. A fit is used live only
//! when every parameter is determined (a standard error, at most `POORLY_DETERMINED` in log10
//! or `POORLY_DETERMINED_M`), none stopped on a bound, and the RMS residual is below that of the
//! model as written; otherwise it is kept in the history with the reasons and the previous fit
//! (or the model as written) stays in use.
//!
//! Owns those decisions and the stored JSON (rows written before boundary offsets existed read
//! as fits without any). Must not do I/O or read the clock.

use std::collections::HashMap;
use std::fmt::Write as _;

use chrono::{TimeZone, Utc};
use serde::{Deserialize, Serialize};

use crate::config::section_model::SeepageSpec;
use crate::seepage::calibrate::{calibrate_cases, offset, residuals, Case, Observation, Target};
use crate::seepage::outputs::locate;
use crate::seepage::{build_mesh, solve, MeshOptions, Point, SectionModel, SolveOptions};
use crate::store::ModelRow;
pub use choice::Choice;
use choice::{not_applied, parameters};

/// The `kind` of a section calibration in the model history.
pub const KIND: &str = "seepage";

/// Zone factors are searched within 10^±this.
pub const BOUND_LOG10: f64 = 2.0;

/// Boundary offsets are searched within ±this unless the command says otherwise, m: more
/// than a staff gauge read from afar or a ditch level guessed from the drawings is out, less
/// than a whole loss through a silted river bed at a high dam.
pub const OFFSET_LIMIT_M: f64 = 2.0;

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

/// One fitted boundary offset.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BoundaryOffset {
    /// Boundary name in the section model (a water boundary).
    pub boundary: String,
    /// Added to the boundary's water level, m.
    pub offset_m: f64,
    /// Its standard error, m; `None` when the data cannot determine it.
    pub std_error_m: Option<f64>,
    /// The fit stopped on a bound of the search.
    pub at_bound: bool,
}

/// A piezometer at one calibration time: measured head and the modelled ones before and after.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TipFit {
    pub t_ms: i64,
    pub id: String,
    pub measured_m: f64,
    /// Modelled with the model as written, m.
    pub written_m: f64,
    /// Modelled with the fit, m.
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
    /// Fitted boundary offsets (none in rows written before they were fitted).
    #[serde(default)]
    pub boundary_offsets: Vec<BoundaryOffset>,
    /// RMS residual with the model as written, m.
    pub rms_written_m: f64,
    /// RMS residual with the fit, m.
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
        for o in &self.boundary_offsets {
            let _ = write!(s, " {} {:+.2} m", o.boundary, o.offset_m);
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

/// The model of `spec` at `pool_m` and `tail_m` (see [`SeepageSpec::at`]) with `fit` applied,
/// when one is given: each fitted zone's permeability multiplied by its factor and each fitted
/// boundary's level moved by its offset. Both are matched by name: a zone or boundary renamed
/// since the fit stays as written.
#[must_use]
pub fn model_at(
    spec: &SeepageSpec,
    fit: Option<&SectionFit>,
    pool_m: f64,
    tail_m: Option<f64>,
) -> SectionModel {
    let mut m = spec.at(pool_m, tail_m);
    let Some(fit) = fit else { return m };
    for z in &mut m.zones {
        if let Some(f) = fit.factors.iter().find(|f| f.zone == z.name) {
            z.material = z.material.scaled(f.factor());
        }
    }
    for b in &mut m.boundaries {
        if let Some(o) = fit.boundary_offsets.iter().find(|o| o.boundary == b.name) {
            b.kind = offset(b.kind, o.offset_m);
        }
    }
    m
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

/// Fit what `choice` asks for in `spec` to the heads of `cases`.
///
/// # Errors
/// A message: nothing to fit, an unknown zone or boundary, a boundary without a water level,
/// no piezometer head inside the model, a mesh or solve failure.
pub fn fit_section(
    section: &str,
    spec: &SeepageSpec,
    cases: &[LoadCase],
    choice: &Choice<'_>,
    fitted_ms: i64,
) -> Result<SectionFit, String> {
    let params = parameters(spec, choice)?;
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
    // Residuals with the model as written.
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
    let on_bound = |v: f64, limit: f64| (v.abs() - limit).abs() < 1e-9;
    let mut factors = Vec::new();
    let mut boundary_offsets = Vec::new();
    for p in &fit.parameters {
        match p.target {
            Target::Zone(z) => factors.push(ZoneFactor {
                zone: spec.model.zones[z].name.clone(),
                log10_factor: p.value,
                std_error: p.std_error,
                at_bound: on_bound(p.value, BOUND_LOG10),
            }),
            Target::Boundary(b) => boundary_offsets.push(BoundaryOffset {
                boundary: spec.model.boundaries[b].name.clone(),
                offset_m: p.value,
                std_error_m: p.std_error,
                at_bound: on_bound(p.value, choice.offset_limit_m),
            }),
        }
    }
    let not_applied = not_applied(
        &factors,
        &boundary_offsets,
        choice.offset_limit_m,
        fit.rms_m,
        rms_written_m,
    );
    Ok(SectionFit {
        section: section.to_string(),
        fitted_ms,
        times_ms: built.iter().map(|b| b.0).collect(),
        factors,
        boundary_offsets,
        rms_written_m,
        rms_calibrated_m: fit.rms_m,
        tips,
        warnings,
        not_applied,
        iterations: fit.iterations,
        solves: fit.solves,
    })
}

mod choice;
#[cfg(test)]
mod tests;
