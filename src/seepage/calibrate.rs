//! Calibration to the piezometers: the solved head at each tip beside the measured one
//! (residuals, RMS), and a bounded Levenberg–Marquardt fit that minimises the residuals, with
//! each parameter's standard error and a warning when the data cannot determine it. Two kinds
//! of parameter: a zone permeability factor on a log10 scale, and an additive offset, metres,
//! on the level of a water (or fixed-head) boundary. One fit may take several load cases (the
//! same section at different water levels, each with its own measured heads): the parameters
//! are shared.
//!
//! Owns: the fit loop, the finite-difference Jacobian and the uncertainty. Must not: store fits
//! or read instruments. The damped step is a least-squares problem `[J; √λ·D]·Δ ≈ [−r; 0]`
//! solved by the domain's QR (`domain::lsq`), with `D` the column norms of `J` (Marquardt's
//! scaling), so a step does not depend on the units of a parameter; the finite-difference
//! step and the convergence test are set per kind ([`Target::step`]).

mod uncertainty;

use thiserror::Error;

use super::geometry::Point;
use super::mesh::Mesh;
use super::model::{BoundaryKind, SectionModel};
use super::outputs::locate;
use super::solve::{solve, SeepageError, Solution, SolveOptions};
use crate::domain::lsq::least_squares;
use uncertainty::uncertainty;

/// A measured total head at a piezometer tip.
#[derive(Debug, Clone, PartialEq)]
pub struct Observation {
    /// Instrument id.
    pub id: String,
    /// Tip position.
    pub at: Point,
    /// Measured total head, m.
    pub head_m: f64,
}

/// Measured against modelled head at one tip.
#[derive(Debug, Clone, PartialEq)]
pub struct Residual {
    /// Instrument id.
    pub id: String,
    /// Measured total head, m.
    pub measured_m: f64,
    /// Solved total head at the tip, m.
    pub modelled_m: f64,
    /// Measured − modelled, m.
    pub residual_m: f64,
}

/// What a fit parameter `p` adjusts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Target {
    /// A zone (index in the model) whose permeability, kh and kv together so its anisotropy
    /// stays, is multiplied by `10^p`.
    Zone(usize),
    /// A boundary stretch (index in the model) whose water level, or fixed head, is moved by
    /// `p` metres: the head on the stretch and, for free water, how far up it is wetted.
    Boundary(usize),
}

impl Target {
    /// The finite-difference step in `p`: 0.01 in log10 (a 2.3 % change of permeability) or
    /// 0.05 m of head. Both move the tip heads by a few centimetres in a typical section: well
    /// above the solver's noise, small enough for the heads to stay close to linear.
    #[must_use]
    pub const fn step(self) -> f64 {
        match self {
            Self::Zone(_) => 1e-2,
            Self::Boundary(_) => 5e-2,
        }
    }

    /// A standard error above this is reported as poorly determined: 0.5 in log10 (a factor of
    /// about 3) or 0.25 m of head. Both are this program's choices.
    #[must_use]
    pub const fn poorly_determined(self) -> f64 {
        match self {
            Self::Zone(_) => POORLY_DETERMINED,
            Self::Boundary(_) => POORLY_DETERMINED_M,
        }
    }
}

/// A parameter to fit: what it adjusts, where it starts and the bounds it is kept within.
#[derive(Debug, Clone, PartialEq)]
pub struct FitParameter {
    /// What `p` adjusts.
    pub target: Target,
    /// Starting value of `p` (log10 of the factor, or the offset in m).
    pub start: f64,
    /// Lower bound of `p`.
    pub lower: f64,
    /// Upper bound of `p`.
    pub upper: f64,
}

/// One fitted parameter.
#[derive(Debug, Clone, PartialEq)]
pub struct FittedParameter {
    /// What it adjusts.
    pub target: Target,
    /// Fitted `p`: log10 of a zone's factor, or a boundary's offset in m.
    pub value: f64,
    /// Its standard error (log10 units or m), when the data determine it.
    pub std_error: Option<f64>,
}

/// The result of a fit.
#[derive(Debug, Clone, PartialEq)]
pub struct Calibration {
    /// Parameters in the order given.
    pub parameters: Vec<FittedParameter>,
    /// Residuals at the fitted values.
    pub residuals: Vec<Residual>,
    /// Root mean square residual, m.
    pub rms_m: f64,
    /// Warnings: parameters the data cannot determine, on a bound, or a non-converged solve.
    pub warnings: Vec<String>,
    /// Levenberg–Marquardt iterations.
    pub iterations: usize,
    /// Seepage solves done.
    pub solves: usize,
}

/// A zone factor whose standard error exceeds this (log10 units) is reported as poorly
/// determined.
pub const POORLY_DETERMINED: f64 = 0.5;

/// A boundary offset whose standard error exceeds this, m, is reported as poorly determined.
pub const POORLY_DETERMINED_M: f64 = 0.25;

/// One load case of a fit: the model at its water levels, its mesh and the heads measured then.
#[derive(Debug, Clone, Copy)]
pub struct Case<'a> {
    pub model: &'a SectionModel,
    pub mesh: &'a Mesh,
    pub obs: &'a [Observation],
}

/// Why a calibration failed.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum CalibrationError {
    /// A tip lies outside the mesh.
    #[error("piezometer '{0}' lies outside the mesh")]
    Outside(String),
    /// Nothing to fit, a bad bound, an unknown zone, or a boundary without a level.
    #[error("bad fit parameters: {0}")]
    Parameters(String),
    /// A solve failed.
    #[error(transparent)]
    Solve(#[from] SeepageError),
}

/// Tips located in the mesh: element and barycentric weights.
struct Tips(Vec<(usize, [f64; 3])>);

impl Tips {
    fn new(mesh: &Mesh, obs: &[Observation]) -> Result<Self, CalibrationError> {
        obs.iter()
            .map(|o| locate(mesh, o.at).ok_or_else(|| CalibrationError::Outside(o.id.clone())))
            .collect::<Result<_, _>>()
            .map(Self)
    }

    fn heads(&self, mesh: &Mesh, sol: &Solution) -> Vec<f64> {
        self.0
            .iter()
            .map(|(e, l)| {
                let t = mesh.triangles[*e];
                (0..3).map(|k| l[k] * sol.head_m[t[k]]).sum()
            })
            .collect()
    }
}

/// Measured against modelled heads for a solved section.
///
/// # Errors
/// [`CalibrationError::Outside`] when a tip is outside the mesh.
pub fn residuals(
    mesh: &Mesh,
    sol: &Solution,
    obs: &[Observation],
) -> Result<(Vec<Residual>, f64), CalibrationError> {
    let heads = Tips::new(mesh, obs)?.heads(mesh, sol);
    let out: Vec<Residual> = obs
        .iter()
        .zip(heads)
        .map(|(o, h)| Residual {
            id: o.id.clone(),
            measured_m: o.head_m,
            modelled_m: h,
            residual_m: o.head_m - h,
        })
        .collect();
    let rms =
        (out.iter().map(|r| r.residual_m.powi(2)).sum::<f64>() / out.len().max(1) as f64).sqrt();
    Ok((out, rms))
}

/// The model with each fitted zone's permeability scaled by `10^p` and each fitted boundary's
/// level moved by `p` m.
fn adjusted(model: &SectionModel, params: &[FitParameter], p: &[f64]) -> SectionModel {
    let mut m = model.clone();
    for (fp, v) in params.iter().zip(p) {
        match fp.target {
            Target::Zone(z) => m.zones[z].material = model.zones[z].material.scaled(10f64.powf(*v)),
            Target::Boundary(b) => m.boundaries[b].kind = offset(model.boundaries[b].kind, *v),
        }
    }
    m
}

/// A water or fixed-head condition with its level moved by `offset_m`; any other unchanged.
#[must_use]
pub fn offset(kind: BoundaryKind, offset_m: f64) -> BoundaryKind {
    match kind {
        BoundaryKind::Water { level_m } => BoundaryKind::Water {
            level_m: level_m + offset_m,
        },
        BoundaryKind::FixedHead { head_m } => BoundaryKind::FixedHead {
            head_m: head_m + offset_m,
        },
        other => other,
    }
}

/// A parameter's name for warnings: `zone 'core'`, `boundary 'tail water'`.
fn describe(model: &SectionModel, t: Target) -> String {
    match t {
        Target::Zone(z) => format!("zone '{}'", model.zones[z].name),
        Target::Boundary(b) => format!("boundary '{}'", model.boundaries[b].name),
    }
}

/// Why `fp` cannot be fitted in `model`, if it cannot.
fn unfit(model: &SectionModel, fp: &FitParameter) -> Option<String> {
    let bad_range =
        fp.lower.is_nan() || fp.lower >= fp.upper || !(fp.lower..=fp.upper).contains(&fp.start);
    let what = match fp.target {
        Target::Zone(z) if z >= model.zones.len() => return Some(format!("no zone {z}")),
        Target::Boundary(b) if b >= model.boundaries.len() => {
            return Some(format!("no boundary {b}"))
        }
        Target::Boundary(b)
            if !matches!(
                model.boundaries[b].kind,
                BoundaryKind::Water { .. } | BoundaryKind::FixedHead { .. }
            ) =>
        {
            return Some(format!(
                "boundary '{}' has no water level or head to offset",
                model.boundaries[b].name
            ))
        }
        t => describe(model, t),
    };
    bad_range.then(|| {
        format!(
            "{what} with start {} in [{}, {}]",
            fp.start, fp.lower, fp.upper
        )
    })
}

/// Fit `params` to the observed heads.
///
/// # Errors
/// [`CalibrationError`] for bad parameters, tips outside the mesh, or a failed solve.
pub fn calibrate(
    model: &SectionModel,
    mesh: &Mesh,
    opts: &SolveOptions,
    obs: &[Observation],
    params: &[FitParameter],
) -> Result<Calibration, CalibrationError> {
    calibrate_cases(&[Case { model, mesh, obs }], opts, params)
}

/// Fit `params` to the heads of every case at once (zone and boundary indices are the same in
/// every case's model); the residuals are the cases' in order.
///
/// # Errors
/// [`CalibrationError`] for bad parameters, no case, tips outside a mesh, or a failed solve.
pub fn calibrate_cases(
    cases: &[Case<'_>],
    opts: &SolveOptions,
    params: &[FitParameter],
) -> Result<Calibration, CalibrationError> {
    if params.is_empty() || cases.is_empty() {
        return Err(CalibrationError::Parameters(
            "no parameter to fit, or no case".into(),
        ));
    }
    for fp in params {
        if let Some(why) = cases.iter().find_map(|c| unfit(c.model, fp)) {
            return Err(CalibrationError::Parameters(why));
        }
    }
    let tips: Vec<Tips> = cases
        .iter()
        .map(|c| Tips::new(c.mesh, c.obs))
        .collect::<Result<_, _>>()?;
    let measured: Vec<f64> = cases
        .iter()
        .flat_map(|c| c.obs.iter().map(|o| o.head_m))
        .collect();
    let model = cases[0].model;
    let mut solves = 0;
    let mut warnings = Vec::new();
    let mut eval = |p: &[f64], warnings: &mut Vec<String>| -> Result<Vec<f64>, CalibrationError> {
        let mut heads = Vec::with_capacity(measured.len());
        for (c, t) in cases.iter().zip(&tips) {
            solves += 1;
            let sol = solve(&adjusted(c.model, params, p), c.mesh, opts)?;
            if !sol.converged && warnings.iter().all(|w| !w.starts_with("a solve")) {
                warnings.push("a solve did not converge; residuals may be noisy".into());
            }
            heads.extend(t.heads(c.mesh, &sol));
        }
        Ok(heads.iter().zip(&measured).map(|(h, m)| h - m).collect())
    };
    let sse = |r: &[f64]| r.iter().map(|v| v * v).sum::<f64>();
    let clamp = |p: &mut [f64]| {
        for (v, fp) in p.iter_mut().zip(params) {
            *v = v.clamp(fp.lower, fp.upper);
        }
    };
    let (n, np) = (measured.len(), params.len());
    let mut p: Vec<f64> = params.iter().map(|fp| fp.start).collect();
    let mut r = eval(&p, &mut warnings)?;
    let mut lambda = 1e-2;
    let mut jac = vec![vec![0.0; np]; n];
    let mut iterations = 0;
    for _ in 0..40 {
        iterations += 1;
        for j in 0..np {
            // At most half the search range, so the step stays inside it.
            let h = params[j]
                .target
                .step()
                .min((params[j].upper - params[j].lower) / 2.0);
            let mut q = p.clone();
            // Step inward at the upper bound.
            q[j] += if q[j] + h > params[j].upper { -h } else { h };
            let rq = eval(&q, &mut warnings)?;
            for i in 0..n {
                jac[i][j] = (rq[i] - r[i]) / (q[j] - p[j]);
            }
        }
        let diag: Vec<f64> = (0..np)
            .map(|j| (0..n).map(|i| jac[i][j].powi(2)).sum::<f64>().max(1e-12))
            .collect();
        let mut improved = false;
        let mut small_step = false;
        for _ in 0..10 {
            let mut rows: Vec<Vec<f64>> = jac.clone();
            let mut rhs: Vec<f64> = r.iter().map(|v| -v).collect();
            for j in 0..np {
                let mut row = vec![0.0; np];
                row[j] = (lambda * diag[j]).sqrt();
                rows.push(row);
                rhs.push(0.0);
            }
            let Ok(fit) = least_squares(&rows, &rhs) else {
                lambda *= 10.0;
                continue;
            };
            let mut q: Vec<f64> = p
                .iter()
                .zip(&fit.coefficients)
                .map(|(a, d)| a + d)
                .collect();
            clamp(&mut q);
            // The largest move, in finite-difference steps of its parameter's kind.
            let step = q
                .iter()
                .zip(&p)
                .zip(params)
                .map(|((a, b), fp)| (a - b).abs() / fp.target.step())
                .fold(0.0, f64::max);
            let rq = eval(&q, &mut warnings)?;
            if sse(&rq) < sse(&r) {
                small_step = step < 1e-2;
                p = q;
                r = rq;
                lambda = (lambda / 3.0).max(1e-9);
                improved = true;
                break;
            }
            lambda *= 4.0;
        }
        if !improved || small_step {
            break;
        }
    }
    let u = uncertainty(&jac, sse(&r));
    if u.dependent {
        warnings.push(
            "the piezometers cannot separate these parameters (only permeability ratios matter, \
             or parameters act on the tips alike)"
                .into(),
        );
    }
    if u.too_few {
        warnings.push(format!(
            "{n} measured heads for {np} parameters: too few piezometers to estimate uncertainty"
        ));
    }
    let mut parameters = Vec::new();
    for (j, fp) in params.iter().enumerate() {
        let name = describe(model, fp.target);
        if u.no_effect[j] {
            let why = match fp.target {
                Target::Zone(_) => "",
                Target::Boundary(_) => "; a level below the whole stretch leaves it dry",
            };
            warnings.push(format!(
                "{name}: no piezometer head depends on it at the fitted value (not determined{why})"
            ));
        }
        if (p[j] - fp.lower).abs() < 1e-9 || (p[j] - fp.upper).abs() < 1e-9 {
            warnings.push(format!("{name}: the fit stopped on a bound"));
        }
        if let Some(se) = u.std_errors[j] {
            if se > fp.target.poorly_determined() {
                warnings.push(match fp.target {
                    Target::Zone(_) => {
                        format!("{name}: poorly determined (standard error {se:.2} in log10)")
                    }
                    Target::Boundary(_) => {
                        format!("{name}: poorly determined (standard error {se:.2} m)")
                    }
                });
            }
        }
        parameters.push(FittedParameter {
            target: fp.target,
            value: p[j],
            std_error: u.std_errors[j],
        });
    }
    let mut residuals_all = Vec::with_capacity(n);
    for c in cases {
        let sol = solve(&adjusted(c.model, params, &p), c.mesh, opts)?;
        solves += 1;
        residuals_all.extend(residuals(c.mesh, &sol, c.obs)?.0);
    }
    let rms_m = (residuals_all
        .iter()
        .map(|r| r.residual_m.powi(2))
        .sum::<f64>()
        / n.max(1) as f64)
        .sqrt();
    Ok(Calibration {
        parameters,
        residuals: residuals_all,
        rms_m,
        warnings,
        iterations,
        solves,
    })
}
