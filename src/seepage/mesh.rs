//! Triangular mesh of a section model: a constrained Delaunay triangulation (spade) of the
//! outline, zone edges, impervious lines and boundary stretch ends, refined to a target element
//! size (smaller near chosen spots), with each element's zone.
//!
//! Owns: element sizes, which triangles lie inside the outline, and their zones. Must not: apply
//! boundary conditions or solve. Impervious lines are cut open and boundary edges classified in
//! `mesh_topology`.

use spade::{
    AngleLimit, ConstrainedDelaunayTriangulation, Point2, RefinementParameters, Triangulation,
};
use thiserror::Error;

use super::geometry::{dist_to_segment, inside_ring, orient, Point};
use super::mesh_topology::{classify_boundary, split_lines, BoundaryEdge};
use super::model::SectionModel;

/// A place where elements are made smaller than the global size (a pile tip, a toe).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LocalSize {
    /// Centre of the refined spot.
    pub at: Point,
    /// Radius within which `size_m` holds, m (the mesh then coarsens gradually away from it).
    pub radius_m: f64,
    /// Element size inside the radius, m.
    pub size_m: f64,
}

/// How fine to mesh.
#[derive(Debug, Clone, PartialEq)]
pub struct MeshOptions {
    /// Target element edge length, m (the refinement parameter).
    pub element_size_m: f64,
    /// Spots meshed finer.
    pub local: Vec<LocalSize>,
}

impl MeshOptions {
    /// A uniform target size.
    #[must_use]
    pub fn uniform(element_size_m: f64) -> Self {
        Self {
            element_size_m,
            local: Vec::new(),
        }
    }
}

/// Why a mesh could not be made.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum MeshError {
    /// The element size is not a positive finite number.
    #[error("element size must be positive and finite, got {0}")]
    Size(f64),
    /// The triangulation refused a vertex (non-finite or too large coordinates).
    #[error("triangulation failed: {0}")]
    Triangulation(String),
    /// The refinement stopped before reaching the target (too many vertices).
    #[error("mesh refinement did not finish; use a larger element size")]
    Incomplete,
    /// No triangle lies inside the outline.
    #[error("the mesh has no element inside the outline")]
    Empty,
}

/// A triangular mesh of linear elements.
#[derive(Debug, Clone, PartialEq)]
pub struct Mesh {
    /// Node coordinates. Nodes on an impervious line appear twice (one per side).
    pub nodes: Vec<Point>,
    /// Elements as node indices, counter-clockwise.
    pub triangles: Vec<[usize; 3]>,
    /// Zone of each element (`None`: the base material).
    pub zone: Vec<Option<usize>>,
    /// Edges on the boundary of the domain (outline and both faces of impervious lines).
    pub boundary: Vec<BoundaryEdge>,
}

/// The straight pieces to keep as constraints: outline edges, zone edges and impervious line
/// edges, each cut at every special vertex lying on it so shared pieces coincide exactly.
fn constraint_pieces(model: &SectionModel, tol: f64) -> (Vec<Point>, Vec<(Point, Point)>) {
    let mut segments = Vec::new();
    let ring = |r: &[Point], out: &mut Vec<(Point, Point)>| {
        for i in 0..r.len() {
            out.push((r[i], r[(i + 1) % r.len()]));
        }
    };
    ring(&model.outline, &mut segments);
    for z in &model.zones {
        ring(&z.polygon, &mut segments);
    }
    for l in &model.lines {
        segments.extend(l.points.windows(2).map(|w| (w[0], w[1])));
    }
    let mut special: Vec<Point> = segments.iter().map(|s| s.0).collect();
    special.extend(segments.iter().map(|s| s.1));
    special.extend(model.boundaries.iter().flat_map(|b| b.path.iter().copied()));
    let mut pieces = Vec::new();
    for (a, b) in segments {
        let len = a.dist(b);
        let mut ts: Vec<f64> = special
            .iter()
            .filter(|&&p| dist_to_segment(p, a, b) <= tol)
            .map(|&p| ((p.x - a.x) * (b.x - a.x) + (p.y - a.y) * (b.y - a.y)) / (len * len))
            .filter(|t| *t > 1e-12 && *t < 1.0 - 1e-12)
            .collect();
        ts.sort_by(f64::total_cmp);
        let mut prev = a;
        for t in ts {
            let p = Point::new(a.x + t * (b.x - a.x), a.y + t * (b.y - a.y));
            // Use the special vertex itself, so every piece meeting there shares it exactly.
            let p = special
                .iter()
                .copied()
                .find(|q| q.dist(p) <= tol)
                .unwrap_or(p);
            if p.dist(prev) > tol {
                pieces.push(canonical(prev, p));
                prev = p;
            }
        }
        if b.dist(prev) > tol {
            pieces.push(canonical(prev, b));
        }
    }
    pieces.sort_by(|p, q| {
        key(p)
            .partial_cmp(&key(q))
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    pieces.dedup_by(|p, q| p.0.dist(q.0) <= tol && p.1.dist(q.1) <= tol);
    (special, pieces)
}

fn canonical(a: Point, b: Point) -> (Point, Point) {
    if (a.x, a.y) <= (b.x, b.y) {
        (a, b)
    } else {
        (b, a)
    }
}

fn key(p: &(Point, Point)) -> [f64; 4] {
    [p.0.x, p.0.y, p.1.x, p.1.y]
}

/// Free points on a square grid of spacing `size_m` within each local spot, keeping clear of
/// the constraint pieces (a point almost on one would make a sliver).
fn spot_points(opts: &MeshOptions, pieces: &[(Point, Point)], outline: &[Point]) -> Vec<Point> {
    let mut out = Vec::new();
    for l in &opts.local {
        let n = (l.radius_m / l.size_m).ceil() as i64;
        for i in -n..=n {
            for j in -n..=n {
                let p = Point::new(l.at.x + i as f64 * l.size_m, l.at.y + j as f64 * l.size_m);
                if p.dist(l.at) <= l.radius_m
                    && inside_ring(p, outline)
                    && pieces
                        .iter()
                        .all(|(a, b)| dist_to_segment(p, *a, *b) > 0.4 * l.size_m)
                {
                    out.push(p);
                }
            }
        }
    }
    out
}

/// Mesh `model` (assumed valid, see `validate`).
///
/// # Errors
/// [`MeshError`] when the size is bad, the triangulation fails, or no element is inside.
pub fn build_mesh(model: &SectionModel, opts: &MeshOptions) -> Result<Mesh, MeshError> {
    let size = opts.element_size_m;
    if !(size.is_finite() && size > 0.0)
        || opts
            .local
            .iter()
            .any(|l| l.size_m.is_nan() || l.size_m <= 0.0)
    {
        return Err(MeshError::Size(size));
    }
    let tol = model.tolerance();
    let (_, pieces) = constraint_pieces(model, tol);
    let mut cdt: ConstrainedDelaunayTriangulation<Point2<f64>> =
        ConstrainedDelaunayTriangulation::new();
    let err = |e: spade::InsertionError| MeshError::Triangulation(format!("{e:?}"));
    // Each straight piece is one constraint; the refinement splits it where needed (points
    // placed on it by hand would be off it by round-off and leave slivers).
    for (a, b) in &pieces {
        let from = cdt.insert(Point2::new(a.x, a.y)).map_err(err)?;
        let to = cdt.insert(Point2::new(b.x, b.y)).map_err(err)?;
        cdt.add_constraint_and_split(from, to, |q| q);
    }
    for p in spot_points(opts, &pieces, &model.outline) {
        cdt.insert(Point2::new(p.x, p.y)).map_err(err)?;
    }
    let min_size = opts.local.iter().fold(size, |s, l| s.min(l.size_m));
    let equilateral = 3f64.sqrt() / 4.0;
    let params = RefinementParameters::<f64>::new()
        .with_angle_limit(AngleLimit::from_deg(25.0))
        .with_max_allowed_area(equilateral * size * size)
        .with_min_required_area(0.05 * equilateral * min_size * min_size)
        .with_max_additional_vertices(4_000_000);
    if !cdt.refine(params).refinement_complete {
        return Err(MeshError::Incomplete);
    }
    let mut index = vec![usize::MAX; cdt.num_vertices()];
    let mut nodes = Vec::new();
    let mut triangles = Vec::new();
    let mut zone = Vec::new();
    for face in cdt.inner_faces() {
        let v = face.vertices();
        let p = v.map(|h| Point::new(h.position().x, h.position().y));
        let c = Point::new(
            (p[0].x + p[1].x + p[2].x) / 3.0,
            (p[0].y + p[1].y + p[2].y) / 3.0,
        );
        if !inside_ring(c, &model.outline) || orient(p[0], p[1], p[2]) <= 0.0 {
            continue;
        }
        let tri = v.map(|h| {
            let i = h.fix().index();
            if index[i] == usize::MAX {
                index[i] = nodes.len();
                nodes.push(Point::new(h.position().x, h.position().y));
            }
            index[i]
        });
        triangles.push(tri);
        zone.push(model.zones.iter().rposition(|z| inside_ring(c, &z.polygon)));
    }
    if triangles.is_empty() {
        return Err(MeshError::Empty);
    }
    let mut mesh = Mesh {
        nodes,
        triangles,
        zone,
        boundary: Vec::new(),
    };
    split_lines(&mut mesh, model, tol);
    mesh.boundary = classify_boundary(&mesh, model, tol);
    Ok(mesh)
}

impl Mesh {
    /// Area of element `e`, m².
    #[must_use]
    pub fn area(&self, e: usize) -> f64 {
        let [a, b, c] = self.triangles[e].map(|i| self.nodes[i]);
        orient(a, b, c) / 2.0
    }

    /// Mean edge length, m.
    #[must_use]
    pub fn mean_edge(&self) -> f64 {
        let total: f64 = self
            .triangles
            .iter()
            .map(|t| {
                let [a, b, c] = t.map(|i| self.nodes[i]);
                a.dist(b) + b.dist(c) + c.dist(a)
            })
            .sum();
        total / (3.0 * self.triangles.len() as f64)
    }
}
