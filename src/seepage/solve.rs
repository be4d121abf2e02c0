//! The steady seepage solve: linear triangles with anisotropic permeability per zone, fixed
//! heads from water and prescribed-head stretches, and for unconfined flow a fixed-mesh free
//! surface found by iteration (a fixed mesh with residual flow): each element conducts by its
//! wet fraction (the part of the triangle where the linear pressure head is not negative), the
//! dry part keeping a small relative permeability `kr_min`; the relative permeabilities are
//! under-relaxed in log space when the head change grows. Possible seepage faces and drains are
//! at atmospheric pressure exactly where water leaves the ground (see `face`).
//!
//! Owns: node conditions, assembly, the outer iteration and nodal flows. Must not: mesh, locate
//! points or post-process (see `outputs`).

use thiserror::Error;

use super::face::FaceState;
use super::mesh::Mesh;
use super::model::{BoundaryKind, SectionModel};
use super::sparse::{Cholesky, Csr, SolveError};

/// How to solve.
#[derive(Debug, Clone, PartialEq)]
pub struct SolveOptions {
    /// Unconfined: find the free surface; confined: the whole domain stays saturated.
    pub unconfined: bool,
    /// Relative permeability of dry elements (residual flow), 0 < kr_min < 1.
    pub kr_min: f64,
    /// Pressure-head band below zero over which the relative permeability falls from 1 to
    /// `kr_min`, m; `None`: a sharp surface.
    pub transition_m: Option<f64>,
    /// Outer iterations allowed (free surface and seepage-face switching).
    pub max_iterations: usize,
    /// Convergence: largest head change between outer iterations, as a fraction of the range
    /// of the fixed heads (the total head loss).
    pub head_tol: f64,
    /// Relative residual of each linear solve (the direct solve is refined until it holds).
    pub linear_tol: f64,
}

impl Default for SolveOptions {
    fn default() -> Self {
        Self {
            unconfined: true,
            kr_min: 1e-3,
            transition_m: None,
            max_iterations: 200,
            head_tol: 1e-4,
            linear_tol: 1e-11,
        }
    }
}

/// What holds at a node.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum NodeCondition {
    /// Nothing prescribed (inside, or on an impervious part of the boundary).
    Free,
    /// A fixed total head, m, from the stretch at this index.
    Head {
        /// Total head, m.
        head_m: f64,
        /// The stretch that fixes it.
        stretch: usize,
    },
    /// Atmospheric pressure where water leaves (seepage face or drain of this stretch).
    Outflow {
        /// The stretch.
        stretch: usize,
    },
}

impl NodeCondition {
    /// The stretch governing the node, if any.
    #[must_use]
    pub fn stretch(&self) -> Option<usize> {
        match *self {
            Self::Free => None,
            Self::Head { stretch, .. } | Self::Outflow { stretch } => Some(stretch),
        }
    }
}

/// Why a solve failed.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum SeepageError {
    /// No node has a fixed head, so the heads are undetermined.
    #[error("no boundary fixes a head: give a water level or a fixed head on some stretch")]
    NoFixedHead,
    /// The linear solver failed.
    #[error(transparent)]
    Linear(#[from] SolveError),
    /// The options are out of range.
    #[error("solve options out of range: {0}")]
    Options(String),
}

/// A solved section.
#[derive(Debug, Clone, PartialEq)]
pub struct Solution {
    /// Total head at each node, m.
    pub head_m: Vec<f64>,
    /// Flow leaving the domain at each node, m³/s per metre of section (negative: entering);
    /// zero up to round-off at nodes with nothing prescribed.
    pub outflow_m2_per_s: Vec<f64>,
    /// Relative permeability of each element (1 when saturated).
    pub kr: Vec<f64>,
    /// Condition of each node.
    pub condition: Vec<NodeCondition>,
    /// Whether an outflow node is on (atmospheric, water leaving) at the end.
    pub wet: Vec<bool>,
    /// Outer iterations used.
    pub iterations: usize,
    /// Solves with the sparse factor in all (one per outer iteration, plus any refinement).
    pub linear_iterations: usize,
    /// Whether the outer iteration met the tolerance (false: the last iterate is returned).
    pub converged: bool,
}

/// The condition of every node from the boundary stretches covering its edges. Where several
/// apply, a fixed head wins over an outflow condition, which wins over none.
#[must_use]
pub fn node_conditions(model: &SectionModel, mesh: &Mesh) -> Vec<NodeCondition> {
    let tol = model.tolerance();
    let mut cond = vec![NodeCondition::Free; mesh.nodes.len()];
    for edge in &mesh.boundary {
        for &s in &edge.stretches {
            for n in [edge.a, edge.b] {
                let y = mesh.nodes[n].y;
                let c = match model.boundaries[s].kind {
                    BoundaryKind::Water { level_m } if y <= level_m + tol => NodeCondition::Head {
                        head_m: level_m,
                        stretch: s,
                    },
                    BoundaryKind::FixedHead { head_m } => {
                        NodeCondition::Head { head_m, stretch: s }
                    }
                    BoundaryKind::SeepageFace | BoundaryKind::Drain => {
                        NodeCondition::Outflow { stretch: s }
                    }
                    _ => continue,
                };
                let rank = |c: &NodeCondition| match c {
                    NodeCondition::Free => 0,
                    NodeCondition::Outflow { .. } => 1,
                    NodeCondition::Head { .. } => 2,
                };
                if rank(&c) > rank(&cond[n]) {
                    cond[n] = c;
                }
            }
        }
    }
    cond
}

/// The 3 × 3 conductance matrix of element `e` for permeability tensor `[kxx, kxy, kyy]`.
#[must_use]
pub fn element_matrix(mesh: &Mesh, e: usize, k: [f64; 3]) -> [f64; 9] {
    let [p0, p1, p2] = mesh.triangles[e].map(|i| mesh.nodes[i]);
    let area = mesh.area(e);
    let b = [p1.y - p2.y, p2.y - p0.y, p0.y - p1.y];
    let c = [p2.x - p1.x, p0.x - p2.x, p1.x - p0.x];
    let mut m = [0.0; 9];
    for i in 0..3 {
        for j in 0..3 {
            m[3 * i + j] =
                (k[0] * b[i] * b[j] + k[1] * (b[i] * c[j] + c[i] * b[j]) + k[2] * c[i] * c[j])
                    / (4.0 * area);
        }
    }
    m
}

/// Fraction of a linear triangle where the pressure head (nodal values `psi`) is not negative.
fn wet_fraction(psi: [f64; 3]) -> f64 {
    let wet = psi.iter().filter(|p| **p >= 0.0).count();
    match wet {
        3 => 1.0,
        0 => 0.0,
        _ => {
            // The odd node out (alone on its side) cuts off a similar corner triangle.
            let lone = (0..3).find(|&i| (psi[i] >= 0.0) == (wet == 1)).unwrap_or(0);
            let (a, b) = ((lone + 1) % 3, (lone + 2) % 3);
            let p = psi[lone];
            let corner = p * p / ((p - psi[a]) * (p - psi[b]));
            if wet == 1 {
                corner
            } else {
                1.0 - corner
            }
        }
    }
}

/// Relative permeability of an element: its wet part conducts fully, the dry part at `kr_min`
/// (residual flow), with the wet part widened by the transition band (`band_m`, m of pressure
/// head) so that the iteration does not flip elements on and off.
fn relative_k(psi: [f64; 3], band_m: f64, kr_min: f64) -> f64 {
    let f = if band_m > 0.0 {
        // Average of the sharp fraction over a shift of the contour by 0..band.
        (0..4)
            .map(|j| wet_fraction(psi.map(|p| p + band_m * f64::from(j) / 3.0)))
            .sum::<f64>()
            / 4.0
    } else {
        wet_fraction(psi)
    };
    kr_min + (1.0 - kr_min) * f
}

/// Solve steady seepage on `mesh` for `model` (its materials and boundary stretches).
///
/// # Errors
/// [`SeepageError`] when no head is fixed, the options are out of range or a linear solve
/// fails.
pub fn solve(
    model: &SectionModel,
    mesh: &Mesh,
    opts: &SolveOptions,
) -> Result<Solution, SeepageError> {
    if !(opts.kr_min > 0.0 && opts.kr_min < 1.0) {
        return Err(SeepageError::Options(format!(
            "kr_min {} not in (0, 1)",
            opts.kr_min
        )));
    }
    let band = opts.transition_m.unwrap_or(0.0);
    if !(band >= 0.0 && band.is_finite()) {
        return Err(SeepageError::Options(format!("transition band {band} m")));
    }
    let n = mesh.nodes.len();
    let condition = node_conditions(model, mesh);
    let heads: Vec<f64> = condition
        .iter()
        .filter_map(|c| match c {
            NodeCondition::Head { head_m, .. } => Some(*head_m),
            _ => None,
        })
        .collect();
    if heads.is_empty() {
        return Err(SeepageError::NoFixedHead);
    }
    let (pattern, slots) = Csr::pattern(n, &mesh.triangles);
    // Ordering and symbolic factor once: the outer iterations change values, not the pattern
    // (fixed nodes keep their zeroed entries).
    let anchored: Vec<bool> = condition
        .iter()
        .map(|c| *c != NodeCondition::Free)
        .collect();
    pattern.check_anchored(&anchored)?;
    let mut chol = Cholesky::analyse(&pattern)?;
    let base: Vec<[f64; 9]> = (0..mesh.triangles.len())
        .map(|e| element_matrix(mesh, e, model.material(mesh.zone[e]).tensor()))
        .collect();
    let start = heads.iter().sum::<f64>() / heads.len() as f64;
    let (lo, hi) = heads
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| {
            (l.min(*v), h.max(*v))
        });
    let tol_m = opts.head_tol * (hi - lo).max(1.0);
    let mut head = vec![start; n];
    let mut kr = vec![1.0; mesh.triangles.len()];
    let mut faces = FaceState::new(model, &mesh.nodes, &condition);
    let mut linear_iterations = 0;
    let mut outflow = vec![0.0; n];
    let mut converged = false;
    let mut iterations = 0;
    let mut k = pattern.clone();
    let (mut omega, mut last_change) = (1.0f64, f64::INFINITY);
    while iterations < opts.max_iterations {
        iterations += 1;
        k.val.iter_mut().for_each(|v| *v = 0.0);
        for (e, s) in slots.iter().enumerate() {
            for (slot, v) in s.iter().zip(&base[e]) {
                k.val[*slot] += kr[e] * v;
            }
        }
        let fixed: Vec<Option<f64>> = (0..n)
            .map(|i| match condition[i] {
                NodeCondition::Head { head_m, .. } => Some(head_m),
                NodeCondition::Outflow { .. } if faces.wet[i] => Some(mesh.nodes[i].y),
                _ => None,
            })
            .collect();
        let mut a = k.clone();
        let mut rhs = vec![0.0; n];
        a.fix_values(&fixed, &mut rhs);
        let previous = head.clone();
        chol.factor(&a)?;
        linear_iterations += chol.solve(&a, &rhs, &mut head, opts.linear_tol)?;
        k.mul(&head, &mut outflow);
        outflow.iter_mut().for_each(|q| *q = -*q);
        let switched = faces.update(&mesh.nodes, &head, &outflow);
        // Largest head change at saturated nodes (the heads of dry nodes are a device of the
        // method and may keep wandering where the saturated layer thins out at a drain's end).
        let change = head
            .iter()
            .zip(&previous)
            .zip(&mesh.nodes)
            .filter(|((h, h0), p)| !opts.unconfined || **h >= p.y || **h0 >= p.y)
            .map(|((a, b), _)| (a - b).abs())
            .fold(0.0, f64::max);
        if change > last_change && iterations > 2 {
            omega = (omega / 2.0).max(1.0 / 32.0);
        }
        last_change = change;
        if opts.unconfined {
            for (e, t) in mesh.triangles.iter().enumerate() {
                let psi = t.map(|i| head[i] - mesh.nodes[i].y);
                // Under-relaxed in log space: the plain fixed-point iteration can cycle
                // where the saturated layer is thinner than an element (a drain's end).
                kr[e] = relative_k(psi, band, opts.kr_min).powf(omega) * kr[e].powf(1.0 - omega);
            }
        }
        if !switched && change <= tol_m {
            converged = true;
            break;
        }
    }
    for i in 0..n {
        if condition[i] == NodeCondition::Free {
            outflow[i] = 0.0;
        }
    }
    Ok(Solution {
        head_m: head,
        outflow_m2_per_s: outflow,
        kr,
        condition,
        wet: faces.wet,
        iterations,
        linear_iterations,
        converged,
    })
}
