//! Plane geometry for the seepage model: points, polygon area and containment, segment
//! intersection and distance tests.
//!
//! Owns: exact-enough predicates on f64 coordinates with one length tolerance chosen by the
//! caller. Must not: know about materials, boundary kinds or meshes.

/// A point in the section plane: `x` along the section (m, increasing downstream), `y` elevation
/// (m).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Point {
    /// Horizontal coordinate (station), m.
    pub x: f64,
    /// Elevation, m.
    pub y: f64,
}

impl Point {
    /// A point from its station and elevation.
    #[must_use]
    pub const fn new(x: f64, y: f64) -> Self {
        Self { x, y }
    }

    /// Euclidean distance to `other`.
    #[must_use]
    pub fn dist(self, other: Self) -> f64 {
        (self.x - other.x).hypot(self.y - other.y)
    }
}

/// Twice the signed area of triangle (a, b, c): positive when counter-clockwise.
#[must_use]
pub fn orient(a: Point, b: Point, c: Point) -> f64 {
    (b.x - a.x) * (c.y - a.y) - (b.y - a.y) * (c.x - a.x)
}

/// Signed area of a polygon (positive when counter-clockwise); the ring closes itself.
#[must_use]
pub fn signed_area(ring: &[Point]) -> f64 {
    let n = ring.len();
    (0..n)
        .map(|i| {
            let (p, q) = (ring[i], ring[(i + 1) % n]);
            p.x * q.y - q.x * p.y
        })
        .sum::<f64>()
        / 2.0
}

/// Distance from `p` to the segment `a`–`b`.
#[must_use]
pub fn dist_to_segment(p: Point, a: Point, b: Point) -> f64 {
    let (dx, dy) = (b.x - a.x, b.y - a.y);
    let len2 = dx * dx + dy * dy;
    if len2 == 0.0 {
        return p.dist(a);
    }
    let t = (((p.x - a.x) * dx + (p.y - a.y) * dy) / len2).clamp(0.0, 1.0);
    p.dist(Point::new(a.x + t * dx, a.y + t * dy))
}

/// Whether `p` lies on the boundary of `ring` within `tol`.
#[must_use]
pub fn on_ring(p: Point, ring: &[Point], tol: f64) -> bool {
    let n = ring.len();
    (0..n).any(|i| dist_to_segment(p, ring[i], ring[(i + 1) % n]) <= tol)
}

/// Whether `p` is strictly inside `ring` (even–odd rule); points on the boundary may go either
/// way, so test [`on_ring`] first when that matters.
#[must_use]
pub fn inside_ring(p: Point, ring: &[Point]) -> bool {
    let n = ring.len();
    let mut inside = false;
    let mut j = n.wrapping_sub(1);
    for i in 0..n {
        let (a, b) = (ring[i], ring[j]);
        if (a.y > p.y) != (b.y > p.y) && p.x < (b.x - a.x) * (p.y - a.y) / (b.y - a.y) + a.x {
            inside = !inside;
        }
        j = i;
    }
    inside
}

/// Whether `p` is inside `ring` or on its boundary within `tol`.
#[must_use]
pub fn covers(ring: &[Point], p: Point, tol: f64) -> bool {
    on_ring(p, ring, tol) || inside_ring(p, ring)
}

/// Whether the segments `a`–`b` and `c`–`d` cross at a point interior to both (a proper
/// crossing). Touching at an end point, or overlapping collinearly, is not a crossing.
#[must_use]
pub fn segments_cross(a: Point, b: Point, c: Point, d: Point, tol: f64) -> bool {
    let scale = a.dist(b).max(c.dist(d)).max(f64::MIN_POSITIVE);
    let eps = tol * scale;
    let (d1, d2) = (orient(a, b, c), orient(a, b, d));
    let (d3, d4) = (orient(c, d, a), orient(c, d, b));
    ((d1 > eps && d2 < -eps) || (d1 < -eps && d2 > eps))
        && ((d3 > eps && d4 < -eps) || (d3 < -eps && d4 > eps))
}

/// The first pair of non-adjacent edges of `ring` that cross or touch, if any.
#[must_use]
pub fn self_intersection(ring: &[Point], tol: f64) -> Option<(usize, usize)> {
    let n = ring.len();
    for i in 0..n {
        let (a, b) = (ring[i], ring[(i + 1) % n]);
        for j in i + 1..n {
            let adjacent = j == i + 1 || (i == 0 && j == n - 1);
            let (c, d) = (ring[j], ring[(j + 1) % n]);
            if segments_cross(a, b, c, d, 1e-12) {
                return Some((i, j));
            }
            if !adjacent
                && (dist_to_segment(c, a, b) <= tol
                    || dist_to_segment(d, a, b) <= tol
                    || dist_to_segment(a, c, d) <= tol
                    || dist_to_segment(b, c, d) <= tol)
            {
                return Some((i, j));
            }
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    fn square() -> Vec<Point> {
        vec![
            Point::new(0.0, 0.0),
            Point::new(2.0, 0.0),
            Point::new(2.0, 2.0),
            Point::new(0.0, 2.0),
        ]
    }

    #[test]
    fn area_containment_and_crossings() {
        let sq = square();
        assert!((signed_area(&sq) - 4.0).abs() < 1e-12);
        assert!(inside_ring(Point::new(1.0, 1.0), &sq));
        assert!(!inside_ring(Point::new(3.0, 1.0), &sq));
        assert!(on_ring(Point::new(2.0, 1.0), &sq, 1e-9));
        assert!(self_intersection(&sq, 1e-9).is_none());
        let bow = vec![sq[0], sq[2], sq[1], sq[3]];
        assert!(self_intersection(&bow, 1e-9).is_some());
        assert!(!segments_cross(sq[0], sq[1], sq[1], sq[2], 1e-12));
    }
}
