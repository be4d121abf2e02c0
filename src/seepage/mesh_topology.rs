//! Mesh topology after triangulation: impervious lines are cut open (each node on a line gets
//! one copy per side, so no flow crosses it), and the boundary edges are found, oriented and
//! matched to the model's boundary stretches.
//!
//! Owns: node duplication and boundary classification. Must not: triangulate or solve.

use std::collections::HashMap;

use super::geometry::{dist_to_segment, Point};
use super::mesh::Mesh;
use super::model::SectionModel;

/// An edge on the boundary of the domain, oriented so that the domain lies on its left
/// (outward normal to the right of `a → b`).
#[derive(Debug, Clone, PartialEq)]
pub struct BoundaryEdge {
    /// First node.
    pub a: usize,
    /// Second node.
    pub b: usize,
    /// The element the edge belongs to.
    pub element: usize,
    /// Whether the edge is a face of an impervious line (always no-flow).
    pub on_line: bool,
    /// Indices of the boundary stretches covering this edge.
    pub stretches: Vec<usize>,
}

fn on_polyline(p: Point, q: Point, path: &[Point], tol: f64) -> bool {
    path.windows(2)
        .any(|w| dist_to_segment(p, w[0], w[1]) <= tol && dist_to_segment(q, w[0], w[1]) <= tol)
}

fn edge_key(a: usize, b: usize) -> (usize, usize) {
    (a.min(b), a.max(b))
}

/// Elements touching each undirected edge.
fn edge_elements(mesh: &Mesh) -> HashMap<(usize, usize), Vec<usize>> {
    let mut map: HashMap<(usize, usize), Vec<usize>> = HashMap::new();
    for (e, t) in mesh.triangles.iter().enumerate() {
        for k in 0..3 {
            map.entry(edge_key(t[k], t[(k + 1) % 3]))
                .or_default()
                .push(e);
        }
    }
    map
}

/// Cut the mesh open along every impervious line: around each node on a line, the elements
/// fall into groups that meet only across line edges; every group after the first gets its
/// own copy of the node.
pub fn split_lines(mesh: &mut Mesh, model: &SectionModel, tol: f64) {
    if model.lines.is_empty() {
        return;
    }
    let edges = edge_elements(mesh);
    let is_line = |a: usize, b: usize, nodes: &[Point]| {
        model
            .lines
            .iter()
            .any(|l| on_polyline(nodes[a], nodes[b], &l.points, tol))
    };
    let mut line_nodes: Vec<usize> = edges
        .keys()
        .filter(|(a, b)| is_line(*a, *b, &mesh.nodes))
        .flat_map(|&(a, b)| [a, b])
        .collect();
    line_nodes.sort_unstable();
    line_nodes.dedup();
    let mut around: HashMap<usize, Vec<usize>> = HashMap::new();
    for (e, t) in mesh.triangles.iter().enumerate() {
        for &v in t {
            if line_nodes.binary_search(&v).is_ok() {
                around.entry(v).or_default().push(e);
            }
        }
    }
    let orig = mesh.triangles.clone();
    for v in line_nodes {
        let elems = &around[&v];
        // Union–find over the elements around v, joined across non-line edges through v.
        let mut parent: Vec<usize> = (0..elems.len()).collect();
        fn find(p: &mut [usize], i: usize) -> usize {
            let mut r = i;
            while p[r] != r {
                r = p[r];
            }
            p[i] = r;
            r
        }
        for (i, &e) in elems.iter().enumerate() {
            for &w in &orig[e] {
                if w == v || is_line(v, w, &mesh.nodes) {
                    continue;
                }
                for &f in &edges[&edge_key(v, w)] {
                    if let Some(j) = elems.iter().position(|&x| x == f) {
                        let (ri, rj) = (find(&mut parent, i), find(&mut parent, j));
                        parent[ri] = rj;
                    }
                }
            }
        }
        let mut copy_of_root: HashMap<usize, usize> = HashMap::new();
        let first_root = find(&mut parent, 0);
        for (i, &e) in elems.iter().enumerate() {
            let r = find(&mut parent, i);
            if r == first_root {
                continue;
            }
            let node = *copy_of_root.entry(r).or_insert_with(|| {
                mesh.nodes.push(mesh.nodes[v]);
                mesh.nodes.len() - 1
            });
            for slot in &mut mesh.triangles[e] {
                if *slot == v {
                    *slot = node;
                }
            }
        }
    }
}

/// The boundary edges of `mesh` (edges of one element), oriented with the domain on the left,
/// each with the boundary stretches of `model` that cover it.
#[must_use]
pub fn classify_boundary(mesh: &Mesh, model: &SectionModel, tol: f64) -> Vec<BoundaryEdge> {
    let edges = edge_elements(mesh);
    let mut out = Vec::new();
    for (e, t) in mesh.triangles.iter().enumerate() {
        for k in 0..3 {
            let (a, b) = (t[k], t[(k + 1) % 3]);
            if edges[&edge_key(a, b)].len() != 1 {
                continue;
            }
            let (p, q) = (mesh.nodes[a], mesh.nodes[b]);
            let on_line = model
                .lines
                .iter()
                .any(|l| on_polyline(p, q, &l.points, tol));
            let stretches = if on_line {
                Vec::new()
            } else {
                (0..model.boundaries.len())
                    .filter(|&s| on_polyline(p, q, &model.boundaries[s].path, tol))
                    .collect()
            };
            out.push(BoundaryEdge {
                a,
                b,
                element: e,
                on_line,
                stretches,
            });
        }
    }
    out
}
