//! What an engineer reads from a solved section: head and pressure at any point, flow through
//! each boundary stretch, the phreatic surface (the zero-pressure contour), the exit point and
//! seepage-face height, and exit gradients where water leaves the ground.
//!
//! Owns: post-processing of a [`Solution`]. Must not: solve, draw or format.

use super::geometry::{orient, Point};
use super::mesh::Mesh;
use super::model::{BoundaryKind, SectionModel};
use super::solve::{NodeCondition, Solution};

/// Barycentric coordinates of `p` in element `e`, if it lies inside (within round-off).
fn barycentric(mesh: &Mesh, e: usize, p: Point) -> Option<[f64; 3]> {
    let [a, b, c] = mesh.triangles[e].map(|i| mesh.nodes[i]);
    let area = orient(a, b, c);
    let l = [
        orient(p, b, c) / area,
        orient(a, p, c) / area,
        orient(a, b, p) / area,
    ];
    let eps = -1e-9;
    (l.iter().all(|&v| v >= eps)).then_some(l)
}

/// The element holding `p` and its barycentric coordinates (`None` outside the mesh).
#[must_use]
pub fn locate(mesh: &Mesh, p: Point) -> Option<(usize, [f64; 3])> {
    (0..mesh.triangles.len()).find_map(|e| barycentric(mesh, e, p).map(|l| (e, l)))
}

/// Total head at `p`, m (`None` outside the mesh).
#[must_use]
pub fn head_at(mesh: &Mesh, sol: &Solution, p: Point) -> Option<f64> {
    locate(mesh, p).map(|(e, l)| {
        let t = mesh.triangles[e];
        (0..3).map(|k| l[k] * sol.head_m[t[k]]).sum()
    })
}

/// Pressure head at `p` (total head − elevation), m; times the unit weight of water gives the
/// pore pressure. Negative above the phreatic surface (a numerical device of the fixed-mesh
/// method there, not a measured suction).
#[must_use]
pub fn pressure_head_at(mesh: &Mesh, sol: &Solution, p: Point) -> Option<f64> {
    head_at(mesh, sol, p).map(|h| h - p.y)
}

/// Flow through one boundary stretch.
#[derive(Debug, Clone, PartialEq)]
pub struct StretchFlow {
    /// Index of the stretch in the model.
    pub stretch: usize,
    /// Water entering the domain there, m³/s per metre (≥ 0).
    pub inflow_m2_per_s: f64,
    /// Water leaving the domain there, m³/s per metre (≥ 0).
    pub outflow_m2_per_s: f64,
}

/// Flow through each stretch (nodes are counted with the stretch that governs them).
#[must_use]
pub fn stretch_flows(model: &SectionModel, sol: &Solution) -> Vec<StretchFlow> {
    let mut out: Vec<StretchFlow> = (0..model.boundaries.len())
        .map(|stretch| StretchFlow {
            stretch,
            inflow_m2_per_s: 0.0,
            outflow_m2_per_s: 0.0,
        })
        .collect();
    for (c, q) in sol.condition.iter().zip(&sol.outflow_m2_per_s) {
        if let Some(s) = c.stretch() {
            if *q >= 0.0 {
                out[s].outflow_m2_per_s += q;
            } else {
                out[s].inflow_m2_per_s -= q;
            }
        }
    }
    out
}

/// Flow through the section per metre, m³/s per metre: the total water entering (equal to the
/// total leaving up to the solver tolerance).
#[must_use]
pub fn total_flow(sol: &Solution) -> f64 {
    sol.outflow_m2_per_s
        .iter()
        .filter(|q| **q < 0.0)
        .map(|q| -q)
        .sum()
}

/// The zero-pressure contour as straight pieces, one per element it crosses.
#[must_use]
pub fn phreatic_segments(mesh: &Mesh, sol: &Solution) -> Vec<(Point, Point)> {
    let mut out = Vec::new();
    for t in &mesh.triangles {
        let psi = t.map(|i| sol.head_m[i] - mesh.nodes[i].y);
        let mut pts = Vec::with_capacity(2);
        for k in 0..3 {
            let (i, j) = (k, (k + 1) % 3);
            let (a, b) = (psi[i], psi[j]);
            if (a >= 0.0) != (b >= 0.0) {
                let s = a / (a - b);
                let (p, q) = (mesh.nodes[t[i]], mesh.nodes[t[j]]);
                pts.push(Point::new(p.x + s * (q.x - p.x), p.y + s * (q.y - p.y)));
            }
        }
        if let [p, q] = pts[..] {
            out.push((p, q));
        }
    }
    out
}

/// The phreatic line sampled at `stations`: at each, the highest elevation where the
/// zero-pressure contour crosses that vertical (`None` where it does not: dry, or fully
/// saturated up to the ground).
#[must_use]
pub fn phreatic_line(segments: &[(Point, Point)], stations: &[f64]) -> Vec<(f64, Option<f64>)> {
    stations
        .iter()
        .map(|&x| {
            let top = segments
                .iter()
                .filter(|(p, q)| (p.x.min(q.x)..=p.x.max(q.x)).contains(&x) && p.x != q.x)
                .map(|(p, q)| p.y + (x - p.x) / (q.x - p.x) * (q.y - p.y))
                .fold(None, |m: Option<f64>, y| Some(m.map_or(y, |m| m.max(y))));
            (x, top)
        })
        .collect()
}

/// Where the phreatic surface leaves the ground on a possible seepage face.
#[derive(Debug, Clone, PartialEq)]
pub struct ExitPoint {
    /// The seepage-face stretch.
    pub stretch: usize,
    /// The highest wet node of the face: the exit point (to within one element edge).
    pub exit: Point,
    /// The lowest wet node of the face.
    pub foot: Point,
    /// Height of the seepage face, m: exit elevation − foot elevation.
    pub face_height_m: f64,
    /// Water leaving through the face, m³/s per metre.
    pub flow_m2_per_s: f64,
}

/// The exit point of each seepage-face stretch where water leaves it (drains are not
/// included).
#[must_use]
pub fn exit_points(model: &SectionModel, mesh: &Mesh, sol: &Solution) -> Vec<ExitPoint> {
    let mut out = Vec::new();
    for (s, b) in model.boundaries.iter().enumerate() {
        if b.kind != BoundaryKind::SeepageFace {
            continue;
        }
        let wet: Vec<usize> = (0..mesh.nodes.len())
            .filter(|&i| sol.condition[i] == NodeCondition::Outflow { stretch: s } && sol.wet[i])
            .collect();
        let by_y = |a: &&usize, b: &&usize| mesh.nodes[**a].y.total_cmp(&mesh.nodes[**b].y);
        if let (Some(&top), Some(&low)) = (wet.iter().max_by(by_y), wet.iter().min_by(by_y)) {
            let (exit, foot) = (mesh.nodes[top], mesh.nodes[low]);
            out.push(ExitPoint {
                stretch: s,
                exit,
                foot,
                face_height_m: exit.y - foot.y,
                flow_m2_per_s: wet.iter().map(|&i| sol.outflow_m2_per_s[i]).sum(),
            });
        }
    }
    out
}

/// The hydraulic gradient where water leaves the ground at one boundary node.
#[derive(Debug, Clone, PartialEq)]
pub struct ExitGradient {
    /// The node.
    pub node: usize,
    /// Its position.
    pub at: Point,
    /// The stretch governing it.
    pub stretch: usize,
    /// Outflow per metre of boundary, m/s (specific discharge across the surface).
    pub flux_m_per_s: f64,
    /// Gradient component along the outward normal (positive: leaving the ground).
    pub normal: f64,
    /// Gradient component along the surface (in the boundary's direction of travel, domain on
    /// the left).
    pub along: f64,
    /// Vertical component, positive for upward flow.
    pub vertical: f64,
    /// Magnitude.
    pub magnitude: f64,
}

/// Exit gradients at every node of the listed stretches where water leaves the domain, by
/// station. The normal component comes from the nodal outflow over the node's share of the
/// boundary (consistent with the flow balance), the component along the surface from the heads
/// of the neighbouring boundary nodes.
#[must_use]
pub fn exit_gradients(
    model: &SectionModel,
    mesh: &Mesh,
    sol: &Solution,
    stretches: &[usize],
) -> Vec<ExitGradient> {
    let mut out = Vec::new();
    for (i, c) in sol.condition.iter().enumerate() {
        let Some(s) = c.stretch() else { continue };
        let q = sol.outflow_m2_per_s[i];
        if !stretches.contains(&s) || q <= 0.0 {
            continue;
        }
        // Boundary edges at node i on outflow-capable stretches (not impervious line faces).
        let edges: Vec<_> = mesh
            .boundary
            .iter()
            .filter(|b| (b.a == i || b.b == i) && !b.on_line && !b.stretches.is_empty())
            .filter(|b| {
                sol.condition[b.a] != NodeCondition::Free
                    && sol.condition[b.b] != NodeCondition::Free
            })
            .collect();
        if edges.is_empty() {
            continue;
        }
        let (mut len, mut nx, mut ny, mut kt) = (0.0, 0.0, 0.0, [0.0; 3]);
        let (mut prev, mut next) = (i, i);
        for b in &edges {
            let (p, r) = (mesh.nodes[b.a], mesh.nodes[b.b]);
            let l = p.dist(r);
            len += l / 2.0;
            nx += r.y - p.y;
            ny -= r.x - p.x;
            let k = model.material(mesh.zone[b.element]).tensor();
            let w = sol.kr[b.element] * l;
            kt.iter_mut().zip(k).for_each(|(a, k)| *a += w * k);
            if b.b == i {
                prev = b.a;
            } else {
                next = b.b;
            }
        }
        let total_w: f64 = edges
            .iter()
            .map(|b| mesh.nodes[b.a].dist(mesh.nodes[b.b]))
            .sum();
        kt.iter_mut().for_each(|k| *k /= total_w);
        let nl = nx.hypot(ny);
        let (nx, ny) = (nx / nl, ny / nl);
        let (tx, ty) = (-ny, nx);
        let (pp, pn) = (mesh.nodes[prev], mesh.nodes[next]);
        let ds = (pn.x - pp.x) * tx + (pn.y - pp.y) * ty;
        let along = if ds.abs() > 0.0 {
            -(sol.head_m[next] - sol.head_m[prev]) / ds
        } else {
            0.0
        };
        let flux = q / len;
        let k_nn = nx * nx * kt[0] + 2.0 * nx * ny * kt[1] + ny * ny * kt[2];
        let k_nt = nx * tx * kt[0] + (nx * ty + ny * tx) * kt[1] + ny * ty * kt[2];
        let normal = (flux - k_nt * along) / k_nn;
        let (gx, gy) = (normal * nx + along * tx, normal * ny + along * ty);
        out.push(ExitGradient {
            node: i,
            at: mesh.nodes[i],
            stretch: s,
            flux_m_per_s: flux,
            normal,
            along,
            vertical: gy,
            magnitude: gx.hypot(gy),
        });
    }
    out.sort_by(|a, b| a.at.x.total_cmp(&b.at.x));
    out
}
