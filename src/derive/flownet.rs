//! A section's flow net from its configured seepage model at given water levels: mesh, solve,
//! stream function, and the quantities an engineer reads (flow, exit point, seepage-face height,
//! exit gradients along the downstream ground, the phreatic surface, each piezometer's
//! modelled head beside the measured one). Shared by `seepd flownet`, the section drawing and
//! the live re-solve.
//!
//! Owns the choice of outputs from `seepage`'s tools. Must not do I/O or read the clock.

use super::calibration::{model_at, SectionFit};
use crate::config::section_model::{SeepageSpec, WaterFrom};
use crate::config::{Config, Section};
use crate::seepage::outputs::{
    exit_gradients, exit_points, head_at, phreatic_line, phreatic_segments, total_flow, ExitPoint,
};
use crate::seepage::stream::stream_function;
use crate::seepage::{build_mesh, BoundaryKind, Mesh, MeshOptions, Point, SectionModel, Solution};
use crate::seepage::{solve, NodeCondition, SolveOptions};

/// A piezometer on the section: where its tip is, what it reads and what the model says.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelledPiezometer {
    /// Instrument id.
    pub id: String,
    /// Tip (station, elevation), m.
    pub tip: Point,
    /// Measured total head, m (none when not known).
    pub measured_m: Option<f64>,
    /// Modelled total head at the tip, m (none when the tip is outside the mesh).
    pub modelled_m: Option<f64>,
}

impl ModelledPiezometer {
    /// Measured − modelled, m.
    #[must_use]
    pub fn residual_m(&self) -> Option<f64> {
        Some(self.measured_m? - self.modelled_m?)
    }
}

/// A solved section.
#[derive(Debug, Clone)]
pub struct FlowNet {
    /// The model at the solved levels.
    pub model: SectionModel,
    /// The mesh.
    pub mesh: Mesh,
    /// Heads, conditions, wet faces.
    pub solution: Solution,
    /// Stream function at the nodes, m³/s per metre.
    pub psi: Vec<f64>,
    /// Pool level, m.
    pub pool_m: f64,
    /// Tail-water level, m, if the section has one.
    pub tail_m: Option<f64>,
    /// Flow through the section per metre of length, m³/s/m.
    pub flow_m2_per_s: f64,
    /// The highest exit point on a possible seepage face.
    pub exit: Option<ExitPoint>,
    /// (station, gradient magnitude) where water leaves the downstream ground, m and -.
    pub exit_gradients: Vec<(f64, f64)>,
    /// The phreatic surface as (station, elevation), ending at the exit point.
    pub phreatic: Vec<(f64, f64)>,
    /// The section's piezometers.
    pub piezometers: Vec<ModelledPiezometer>,
}

impl FlowNet {
    /// Largest exit gradient along the downstream ground (0 when no water leaves there).
    #[must_use]
    pub fn max_exit_gradient(&self) -> f64 {
        self.exit_gradients.iter().map(|g| g.1).fold(0.0, f64::max)
    }
}

/// The tips of a section's piezometers, (id, tip), from the instruments' stations and tip
/// elevations (those without either are left out; `seepd check` requires both).
#[must_use]
pub fn tips(cfg: &Config, s: &Section) -> Vec<(String, Point)> {
    s.piezometers
        .iter()
        .filter_map(|id| {
            let i = cfg.instruments.get(id)?;
            Some((
                id.clone(),
                Point::new(i.location.station_m?, i.tip_elevation_m?),
            ))
        })
        .collect()
}

/// Solve `spec` as written at `pool_m` and `tail_m`; `piezometers` are (id, tip, measured
/// head).
///
/// # Errors
/// A message when the mesh or the solve fails, or the free surface does not converge.
pub fn solve_section(
    spec: &SeepageSpec,
    pool_m: f64,
    tail_m: Option<f64>,
    piezometers: &[(String, Point, Option<f64>)],
) -> Result<FlowNet, String> {
    solve_calibrated(spec, None, pool_m, tail_m, piezometers)
}

/// Solve `spec` at `pool_m` and `tail_m` with `fit` applied when one is given (zone factors,
/// boundary offsets: [`model_at`]); `piezometers` are (id, tip, measured head).
///
/// # Errors
/// A message when the mesh or the solve fails, or the free surface does not converge.
pub fn solve_calibrated(
    spec: &SeepageSpec,
    fit: Option<&SectionFit>,
    pool_m: f64,
    tail_m: Option<f64>,
    piezometers: &[(String, Point, Option<f64>)],
) -> Result<FlowNet, String> {
    let model = model_at(spec, fit, pool_m, tail_m);
    let mesh = build_mesh(&model, &MeshOptions::uniform(spec.element_size_m))
        .map_err(|e| format!("mesh: {e}"))?;
    let opts = SolveOptions {
        unconfined: spec.unconfined,
        ..SolveOptions::default()
    };
    let solution = solve(&model, &mesh, &opts).map_err(|e| format!("solve: {e}"))?;
    if !solution.converged {
        return Err(format!(
            "the free surface did not converge in {} iterations",
            solution.iterations
        ));
    }
    let psi = stream_function(&model, &mesh, &solution, opts.linear_tol)
        .map_err(|e| format!("stream function: {e}"))?;
    let downstream: Vec<usize> = model
        .boundaries
        .iter()
        .enumerate()
        .filter(|(i, b)| {
            matches!(b.kind, BoundaryKind::SeepageFace)
                || spec.water.get(*i) == Some(&Some(WaterFrom::Tail))
        })
        .map(|(i, _)| i)
        .collect();
    let exit_gradients = exit_gradients(&model, &mesh, &solution, &downstream)
        .into_iter()
        .filter(|g| {
            solution.wet[g.node] || matches!(solution.condition[g.node], NodeCondition::Head { .. })
        })
        .map(|g| (g.at.x, g.magnitude))
        .collect();
    let exit = exit_points(&model, &mesh, &solution)
        .into_iter()
        .max_by(|a, b| a.exit.y.total_cmp(&b.exit.y));
    let phreatic = phreatic(&mesh, &solution, spec.element_size_m, exit.as_ref());
    let piezometers = piezometers
        .iter()
        .map(|(id, tip, measured)| ModelledPiezometer {
            id: id.clone(),
            tip: *tip,
            measured_m: *measured,
            modelled_m: head_at(&mesh, &solution, *tip),
        })
        .collect();
    Ok(FlowNet {
        flow_m2_per_s: total_flow(&solution),
        model,
        mesh,
        solution,
        psi,
        pool_m,
        tail_m,
        exit,
        exit_gradients,
        phreatic,
        piezometers,
    })
}

/// The phreatic surface sampled every half element, ending at the exit point (beyond it the
/// water runs on the face).
fn phreatic(mesh: &Mesh, sol: &Solution, step_m: f64, exit: Option<&ExitPoint>) -> Vec<(f64, f64)> {
    let (lo, hi) = mesh
        .nodes
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), p| {
            (l.min(p.x), h.max(p.x))
        });
    let end = exit.map_or(hi, |e| e.exit.x);
    let step = (step_m / 2.0).max((hi - lo) / 4000.0);
    let n = ((end - lo) / step).ceil().max(1.0) as usize;
    let stations: Vec<f64> = (0..=n).map(|k| (lo + k as f64 * step).min(end)).collect();
    let segments = phreatic_segments(mesh, sol);
    let mut line: Vec<(f64, f64)> = phreatic_line(&segments, &stations)
        .into_iter()
        .filter_map(|(x, y)| Some((x, y?)))
        .collect();
    if let Some(e) = exit {
        line.retain(|p| p.0 < e.exit.x);
        line.push((e.exit.x, e.exit.y));
    }
    line
}
