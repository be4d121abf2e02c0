//! The stream function, whose contours are flow lines: on the boundary it is the running sum
//! of the nodal outflows around the outline (constant along impervious parts), inside it solves
//! the conjugate problem `∇·(K/det K · ∇ψ) = 0` with each element's effective permeability
//! (relative permeability included), so that flow lines are orthogonal to equipotentials in
//! the transformed sense. The difference of ψ between two flow lines is the flow between them,
//! m³/s per metre.
//!
//! Owns: ψ at the nodes. Must not: draw. Limit: a boundary loop other than the outer one (an
//! impervious line with both ends inside the domain) is left to the interior solve.

use std::collections::HashMap;

use super::mesh::Mesh;
use super::model::SectionModel;
use super::solve::{element_matrix, SeepageError, Solution};
use super::sparse::{solve_spd, Csr};

/// Nodes of the longest boundary loop, in order with the domain on the left.
fn outer_loop(mesh: &Mesh) -> Vec<usize> {
    let next: HashMap<usize, usize> = mesh.boundary.iter().map(|b| (b.a, b.b)).collect();
    let mut seen = vec![false; mesh.nodes.len()];
    let mut best = Vec::new();
    for b in &mesh.boundary {
        if seen[b.a] {
            continue;
        }
        let mut cycle = vec![b.a];
        seen[b.a] = true;
        let mut at = b.b;
        while at != b.a && !seen[at] {
            seen[at] = true;
            cycle.push(at);
            match next.get(&at) {
                Some(&n) => at = n,
                None => break,
            }
        }
        if cycle.len() > best.len() {
            best = cycle;
        }
    }
    best
}

/// The stream function at every node, m³/s per metre (zero at the first node of the outer
/// boundary loop).
///
/// # Errors
/// [`SeepageError::Linear`] when the interior solve fails.
pub fn stream_function(
    model: &SectionModel,
    mesh: &Mesh,
    sol: &Solution,
    linear_tol: f64,
) -> Result<Vec<f64>, SeepageError> {
    let n = mesh.nodes.len();
    let mut fixed = vec![None; n];
    let ring = outer_loop(mesh);
    let mut psi = 0.0;
    let mut last_q = 0.0;
    for (k, &i) in ring.iter().enumerate() {
        let q = sol.outflow_m2_per_s[i];
        if k > 0 {
            psi += (last_q + q) / 2.0;
        }
        fixed[i] = Some(psi);
        last_q = q;
    }
    let (mut a, slots) = Csr::pattern(n, &mesh.triangles);
    for (e, s) in slots.iter().enumerate() {
        let [kxx, kxy, kyy] = model.material(mesh.zone[e]).tensor();
        let det = (kxx * kyy - kxy * kxy) * sol.kr[e];
        let m = element_matrix(mesh, e, [kxx / det, kxy / det, kyy / det]);
        for (slot, v) in s.iter().zip(&m) {
            a.val[*slot] += v;
        }
    }
    a.check_anchored(&fixed.iter().map(Option::is_some).collect::<Vec<_>>())?;
    let mut rhs = vec![0.0; n];
    a.fix_values(&fixed, &mut rhs);
    let mut x = vec![0.0; n];
    solve_spd(&a, &rhs, &mut x, linear_tol)?;
    Ok(x)
}
