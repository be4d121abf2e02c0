//! Checks a section model before meshing and lists every problem at once: polygons with too
//! few points, zero area or crossing edges, zones or impervious lines outside the outline,
//! boundary stretches off the outline, bad permeabilities, and named points (piezometer tips)
//! outside the domain.
//!
//! Owns: the geometric rules. Must not: know file names or lines (the config layer maps a
//! [`Subject`] to where it was written).

use std::fmt;

use super::geometry::{covers, on_ring, segments_cross, self_intersection, signed_area, Point};
use super::model::{BoundaryKind, Material, SectionModel};

/// Which part of the model a problem is about (indices into the model's lists).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Subject {
    /// The outline.
    Outline,
    /// The base material.
    Base,
    /// Zone at this index.
    Zone(usize),
    /// Impervious line at this index.
    Line(usize),
    /// Boundary stretch at this index.
    Boundary(usize),
    /// A named point (piezometer tip).
    Point(String),
}

impl fmt::Display for Subject {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Outline => write!(f, "outline"),
            Self::Base => write!(f, "base material"),
            Self::Zone(i) => write!(f, "zone #{}", i + 1),
            Self::Line(i) => write!(f, "impervious line #{}", i + 1),
            Self::Boundary(i) => write!(f, "boundary #{}", i + 1),
            Self::Point(name) => write!(f, "point '{name}'"),
        }
    }
}

/// One problem found in a model.
#[derive(Debug, Clone, PartialEq)]
pub struct Problem {
    /// What it is about.
    pub subject: Subject,
    /// What is wrong, in words, with the vertex or edge numbers (1-based) involved.
    pub message: String,
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.subject, self.message)
    }
}

fn finite(points: &[Point]) -> Option<usize> {
    points
        .iter()
        .position(|p| !p.x.is_finite() || !p.y.is_finite())
}

/// Problems of one polygon: fewer than three points, non-finite coordinates, zero area,
/// repeated points or crossing edges.
fn ring_problems(subject: &Subject, ring: &[Point], tol: f64, out: &mut Vec<Problem>) -> bool {
    let mut bad = |message: String| {
        out.push(Problem {
            subject: subject.clone(),
            message,
        });
    };
    if ring.len() < 3 {
        bad(format!(
            "a polygon needs at least 3 vertices, got {}",
            ring.len()
        ));
        return false;
    }
    if let Some(i) = finite(ring) {
        bad(format!("vertex {} is not a finite number", i + 1));
        return false;
    }
    let n = ring.len();
    if let Some(i) = (0..n).find(|&i| ring[i].dist(ring[(i + 1) % n]) <= tol) {
        bad(format!(
            "vertices {} and {} coincide (the ring closes itself; do not repeat the first vertex)",
            i + 1,
            (i + 1) % n + 1
        ));
        return false;
    }
    if signed_area(ring).abs() <= tol * tol {
        bad("the polygon has no area".into());
        return false;
    }
    if let Some((i, j)) = self_intersection(ring, tol) {
        bad(format!(
            "edges {} and {} cross or touch: the polygon is not simple",
            i + 1,
            j + 1
        ));
        return false;
    }
    true
}

/// Whether the polyline `points` lies inside `ring` (vertices covered, no edge crossing it).
fn polyline_inside(points: &[Point], ring: &[Point], tol: f64) -> Result<(), String> {
    if let Some(i) = points.iter().position(|&p| !covers(ring, p, tol)) {
        return Err(format!("vertex {} lies outside the outline", i + 1));
    }
    let n = ring.len();
    for (i, w) in points.windows(2).enumerate() {
        for j in 0..n {
            if segments_cross(w[0], w[1], ring[j], ring[(j + 1) % n], 1e-12) {
                return Err(format!("edge {} crosses outline edge {}", i + 1, j + 1));
            }
        }
    }
    Ok(())
}

fn material_problem(m: &Material) -> Option<String> {
    let ok = |k: f64| k.is_finite() && k > 0.0;
    if !ok(m.kh_m_per_s) || !ok(m.kv_m_per_s) {
        return Some(format!(
            "permeabilities must be positive and finite, got kh {} and kv {} m/s",
            m.kh_m_per_s, m.kv_m_per_s
        ));
    }
    if !m.angle_deg.is_finite() {
        return Some("the bedding angle is not a finite number".into());
    }
    None
}

/// Every problem of `model`; empty when it can be meshed and solved.
#[must_use]
pub fn validate(model: &SectionModel) -> Vec<Problem> {
    let tol = model.tolerance();
    let mut out = Vec::new();
    let outline_ok = ring_problems(&Subject::Outline, &model.outline, tol, &mut out);
    if let Some(message) = material_problem(&model.base) {
        out.push(Problem {
            subject: Subject::Base,
            message,
        });
    }
    for (i, zone) in model.zones.iter().enumerate() {
        let subject = Subject::Zone(i);
        if let Some(message) = material_problem(&zone.material) {
            out.push(Problem {
                subject: subject.clone(),
                message,
            });
        }
        if ring_problems(&subject, &zone.polygon, tol, &mut out) && outline_ok {
            if let Err(message) = polyline_inside(&closed(&zone.polygon), &model.outline, tol) {
                out.push(Problem { subject, message });
            }
        }
    }
    for (i, line) in model.lines.iter().enumerate() {
        let subject = Subject::Line(i);
        let message = if line.points.len() < 2 {
            Some("an impervious line needs at least 2 points".to_string())
        } else if let Some(j) = finite(&line.points) {
            Some(format!("point {} is not a finite number", j + 1))
        } else if line.points.windows(2).any(|w| w[0].dist(w[1]) <= tol) {
            Some("two consecutive points coincide".into())
        } else if outline_ok {
            polyline_inside(&line.points, &model.outline, tol).err()
        } else {
            None
        };
        if let Some(message) = message {
            out.push(Problem { subject, message });
        }
    }
    for (i, b) in model.boundaries.iter().enumerate() {
        let subject = Subject::Boundary(i);
        let mut bad = |message: String| {
            out.push(Problem {
                subject: subject.clone(),
                message,
            });
        };
        match b.kind {
            BoundaryKind::Water { level_m: v } | BoundaryKind::FixedHead { head_m: v }
                if !v.is_finite() =>
            {
                bad("the water level or head is not a finite number".into());
            }
            _ => {}
        }
        if b.path.len() < 2 {
            bad("a boundary stretch needs at least 2 points".into());
        } else if let Some(j) = finite(&b.path) {
            bad(format!("point {} is not a finite number", j + 1));
        } else if outline_ok {
            if let Some(j) = b
                .path
                .iter()
                .position(|&p| !on_ring(p, &model.outline, tol))
            {
                bad(format!("point {} is not on the outline", j + 1));
            } else if let Some(j) = (0..b.path.len() - 1)
                .find(|&j| outline_path(&model.outline, b.path[j], b.path[j + 1], tol).is_none())
            {
                bad(format!(
                    "points {} and {} are not joined by one straight piece of the outline",
                    j + 1,
                    j + 2
                ));
            }
        }
    }
    out
}

/// Problems for named points (piezometer tips) outside the outline.
#[must_use]
pub fn check_points(model: &SectionModel, points: &[(String, Point)]) -> Vec<Problem> {
    let tol = model.tolerance();
    points
        .iter()
        .filter(|(_, p)| !p.x.is_finite() || !p.y.is_finite() || !covers(&model.outline, *p, tol))
        .map(|(name, p)| Problem {
            subject: Subject::Point(name.clone()),
            message: format!("({}, {}) lies outside the flow domain", p.x, p.y),
        })
        .collect()
}

fn closed(ring: &[Point]) -> Vec<Point> {
    let mut v = ring.to_vec();
    v.extend(ring.first().copied());
    v
}

/// The outline edge index holding the straight piece from `a` to `b` (both on that edge), if
/// there is one.
#[must_use]
pub fn outline_path(outline: &[Point], a: Point, b: Point, tol: f64) -> Option<usize> {
    use super::geometry::dist_to_segment;
    let n = outline.len();
    (0..n).find(|&j| {
        let (p, q) = (outline[j], outline[(j + 1) % n]);
        dist_to_segment(a, p, q) <= tol && dist_to_segment(b, p, q) <= tol && a.dist(b) > tol
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::seepage::model::{Boundary, ImperviousLine, Zone};

    fn model() -> SectionModel {
        SectionModel {
            outline: vec![
                Point::new(0.0, 0.0),
                Point::new(10.0, 0.0),
                Point::new(10.0, 5.0),
                Point::new(0.0, 5.0),
            ],
            base: Material::isotropic(1e-6),
            zones: vec![],
            lines: vec![],
            boundaries: vec![],
        }
    }

    #[test]
    fn a_good_model_has_no_problems() {
        let mut m = model();
        m.zones.push(Zone {
            name: "core".into(),
            polygon: vec![
                Point::new(4.0, 0.0),
                Point::new(6.0, 0.0),
                Point::new(6.0, 5.0),
                Point::new(4.0, 5.0),
            ],
            material: Material::isotropic(1e-8),
        });
        m.boundaries.push(Boundary {
            name: "up".into(),
            kind: BoundaryKind::Water { level_m: 4.0 },
            path: vec![Point::new(0.0, 5.0), Point::new(0.0, 0.0)],
        });
        assert_eq!(validate(&m), vec![]);
    }

    #[test]
    fn every_problem_is_listed_with_its_subject() {
        let mut m = model();
        m.outline.push(Point::new(5.0, -2.0)); // its last edge crosses the first
        m.base.kh_m_per_s = -1.0;
        let p = validate(&m);
        assert!(p
            .iter()
            .any(|p| p.subject == Subject::Outline && p.message.contains("not simple")));
        assert!(p.iter().any(|p| p.subject == Subject::Base));

        let mut m = model();
        m.zones.push(Zone {
            name: "out".into(),
            polygon: vec![
                Point::new(8.0, 1.0),
                Point::new(12.0, 1.0),
                Point::new(12.0, 2.0),
            ],
            material: Material::isotropic(1e-6),
        });
        m.lines.push(ImperviousLine {
            name: "pile".into(),
            points: vec![Point::new(5.0, 5.0), Point::new(5.0, -1.0)],
        });
        m.boundaries.push(Boundary {
            name: "off".into(),
            kind: BoundaryKind::Drain,
            path: vec![Point::new(1.0, 1.0), Point::new(2.0, 0.0)],
        });
        m.boundaries.push(Boundary {
            name: "corner".into(),
            kind: BoundaryKind::SeepageFace,
            path: vec![Point::new(5.0, 0.0), Point::new(10.0, 5.0)],
        });
        let p = validate(&m);
        let subjects: Vec<_> = p.iter().map(|p| p.subject.clone()).collect();
        assert_eq!(
            subjects,
            vec![
                Subject::Zone(0),
                Subject::Line(0),
                Subject::Boundary(0),
                Subject::Boundary(1)
            ],
            "{p:?}"
        );
        let pts = vec![
            ("P1".to_string(), Point::new(5.0, 2.0)),
            ("P2".to_string(), Point::new(5.0, 7.0)),
        ];
        let p = check_points(&m, &pts);
        assert_eq!(p.len(), 1);
        assert_eq!(p[0].subject, Subject::Point("P2".into()));
    }
}
