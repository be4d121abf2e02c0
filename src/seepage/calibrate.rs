//! Calibration to the piezometers: the solved head at each tip beside the measured one
//! (residuals, RMS), and a bounded Levenberg–Marquardt fit of zone permeability factors on a
//! log10 scale that minimises the residuals, with each parameter's standard error and a warning
//! when the data cannot determine it. One fit may take several load cases (the same section at
//! different water levels, each with its own measured heads): the factors are shared.
//!
//! Owns: the fit loop, the finite-difference Jacobian and the uncertainty. Must not: store fits
//! or read instruments. The damped step is a least-squares problem `[J; √λ·D]·Δ ≈ [−r; 0]`
//! solved by the domain's QR (`domain::lsq`).

use thiserror::Error;

use super::geometry::Point;
use super::mesh::Mesh;
use super::model::SectionModel;
use super::outputs::locate;
use super::solve::{solve, SeepageError, Solution, SolveOptions};
use crate::domain::lsq::least_squares;

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

/// A zone whose permeability (kh and kv together, so its anisotropy stays) is multiplied by
/// `10^p`, with `p` kept within bounds.
#[derive(Debug, Clone, PartialEq)]
pub struct FitParameter {
    /// Zone index in the model.
    pub zone: usize,
    /// Starting value of `p` (log10 of the factor).
    pub start: f64,
    /// Lower bound of `p`.
    pub lower: f64,
    /// Upper bound of `p`.
    pub upper: f64,
}

/// One fitted parameter.
#[derive(Debug, Clone, PartialEq)]
pub struct FittedParameter {
    /// Zone index.
    pub zone: usize,
    /// Fitted log10 factor.
    pub log10_factor: f64,
    /// Its standard error (log10 units), when the data determine it.
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

/// A parameter whose standard error exceeds this (log10 units) is reported as poorly
/// determined.
pub const POORLY_DETERMINED: f64 = 0.5;

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
    /// Nothing to fit, a bad bound, or an unknown zone.
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

/// The model with each fitted zone's permeability scaled by `10^p`.
fn scaled(model: &SectionModel, params: &[FitParameter], p: &[f64]) -> SectionModel {
    let mut m = model.clone();
    for (fp, v) in params.iter().zip(p) {
        m.zones[fp.zone].material = model.zones[fp.zone].material.scaled(10f64.powf(*v));
    }
    m
}

/// Inverse of a small symmetric positive definite matrix by Gauss–Jordan; `None` if singular.
fn invert(a: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let n = a.len();
    let mut m: Vec<Vec<f64>> = a
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let mut row = r.clone();
            row.extend((0..n).map(|j| f64::from(u8::from(i == j))));
            row
        })
        .collect();
    let scale = (0..n).map(|i| a[i][i].abs()).fold(0.0, f64::max);
    for c in 0..n {
        let p = (c..n).max_by(|&x, &y| m[x][c].abs().total_cmp(&m[y][c].abs()))?;
        if m[p][c].abs() <= 1e-12 * scale {
            return None;
        }
        m.swap(c, p);
        let d = m[c][c];
        m[c].iter_mut().for_each(|v| *v /= d);
        for r in 0..n {
            if r != c {
                let f = m[r][c];
                let row_c = m[c].clone();
                m[r].iter_mut().zip(&row_c).for_each(|(v, w)| *v -= f * w);
            }
        }
    }
    Some(m.into_iter().map(|r| r[n..].to_vec()).collect())
}

/// Fit the zone factors in `params` to the observed heads.
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

/// Fit the zone factors in `params` to the heads of every case at once (zone indices are the
/// same in every case's model); the residuals are the cases' in order.
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
        if cases.iter().any(|c| fp.zone >= c.model.zones.len())
            || fp.lower.is_nan()
            || fp.lower >= fp.upper
            || !(fp.lower..=fp.upper).contains(&fp.start)
        {
            return Err(CalibrationError::Parameters(format!(
                "zone {} with start {} in [{}, {}]",
                fp.zone, fp.start, fp.lower, fp.upper
            )));
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
            let sol = solve(&scaled(c.model, params, p), c.mesh, opts)?;
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
    const STEP: f64 = 1e-2;
    for _ in 0..40 {
        iterations += 1;
        for j in 0..np {
            let mut q = p.clone();
            // Step inward at the upper bound.
            q[j] += if q[j] + STEP > params[j].upper {
                -STEP
            } else {
                STEP
            };
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
            let step = q
                .iter()
                .zip(&p)
                .map(|(a, b)| (a - b).abs())
                .fold(0.0, f64::max);
            let rq = eval(&q, &mut warnings)?;
            if sse(&rq) < sse(&r) {
                small_step = step < 1e-4;
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
    // Uncertainty from the last Jacobian: cov = s²·(JᵀJ)⁻¹, s² = SSE/(n − p).
    let jtj: Vec<Vec<f64>> = (0..np)
        .map(|a| {
            (0..np)
                .map(|b| (0..n).map(|i| jac[i][a] * jac[i][b]).sum())
                .collect()
        })
        .collect();
    let cov = invert(&jtj);
    if cov.is_none() {
        warnings.push(
            "the piezometers cannot separate these parameters (only permeability ratios matter, \
             or a zone does not affect any tip)"
                .into(),
        );
    }
    let s2 = (n > np).then(|| sse(&r) / (n - np) as f64);
    if s2.is_none() {
        warnings.push(format!(
            "{n} measured heads for {np} parameters: too few piezometers to estimate uncertainty"
        ));
    }
    let mut parameters = Vec::new();
    for (j, fp) in params.iter().enumerate() {
        let std_error = match (&cov, s2) {
            (Some(c), Some(s2)) => Some((s2 * c[j][j]).sqrt()),
            _ => None,
        };
        let name = &model.zones[fp.zone].name;
        if (p[j] - fp.lower).abs() < 1e-9 || (p[j] - fp.upper).abs() < 1e-9 {
            warnings.push(format!("zone '{name}': the fit stopped on a bound"));
        }
        if let Some(se) = std_error {
            if se > POORLY_DETERMINED {
                warnings.push(format!(
                    "zone '{name}': poorly determined (standard error {se:.2} in log10)"
                ));
            }
        }
        parameters.push(FittedParameter {
            zone: fp.zone,
            log10_factor: p[j],
            std_error,
        });
    }
    let mut residuals_all = Vec::with_capacity(n);
    for c in cases {
        let sol = solve(&scaled(c.model, params, &p), c.mesh, opts)?;
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
