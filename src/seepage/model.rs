//! The seepage model of a section: the outline of the ground, material zones with their
//! permeability, impervious lines (cutoffs, sheet piles) and the boundary conditions along the
//! outline.
//!
//! Owns: the plain data a solve needs. Must not: read configuration files, validate (see
//! `validate`), mesh or solve.

use super::geometry::Point;

/// Permeability of a material, m/s: `kh` along the bedding (horizontal unless `angle_deg` tilts
/// it), `kv` across it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Material {
    /// Permeability along the bedding, m/s.
    pub kh_m_per_s: f64,
    /// Permeability across the bedding, m/s.
    pub kv_m_per_s: f64,
    /// Angle of the bedding (the `kh` direction) from horizontal, degrees, counter-clockwise.
    pub angle_deg: f64,
}

impl Material {
    /// An isotropic material.
    #[must_use]
    pub const fn isotropic(k_m_per_s: f64) -> Self {
        Self {
            kh_m_per_s: k_m_per_s,
            kv_m_per_s: k_m_per_s,
            angle_deg: 0.0,
        }
    }

    /// The permeability tensor `[kxx, kxy, kyy]`, m/s.
    #[must_use]
    pub fn tensor(&self) -> [f64; 3] {
        let (s, c) = self.angle_deg.to_radians().sin_cos();
        let (kh, kv) = (self.kh_m_per_s, self.kv_m_per_s);
        [
            kh * c * c + kv * s * s,
            (kh - kv) * s * c,
            kh * s * s + kv * c * c,
        ]
    }

    /// The same material with both permeabilities multiplied by `factor`.
    #[must_use]
    pub fn scaled(&self, factor: f64) -> Self {
        Self {
            kh_m_per_s: self.kh_m_per_s * factor,
            kv_m_per_s: self.kv_m_per_s * factor,
            angle_deg: self.angle_deg,
        }
    }
}

/// A material zone: a polygon inside the outline. Where zones overlap, the later one wins.
#[derive(Debug, Clone, PartialEq)]
pub struct Zone {
    /// Name for messages and reports (core, shell, foundation, blanket, drain…).
    pub name: String,
    /// Vertices of the polygon; the ring closes itself.
    pub polygon: Vec<Point>,
    /// Permeability inside the zone.
    pub material: Material,
}

/// An impervious line (sheet pile, thin cutoff wall): no flow crosses it. It may start on the
/// outline; a free end inside the domain is a tip that flow passes around.
#[derive(Debug, Clone, PartialEq)]
pub struct ImperviousLine {
    /// Name for messages.
    pub name: String,
    /// Vertices of the polyline, at least two.
    pub points: Vec<Point>,
}

/// What a boundary stretch does to the flow. Where stretches share a node, the stronger one
/// holds: a fixed head (water below its level, `FixedHead`) over an outflow-only condition
/// (`SeepageFace`, `Drain`) over the impervious default.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum BoundaryKind {
    /// Free water (reservoir, river, tail water) at `level_m`: total head = level on the part of
    /// the stretch below the level; above it the stretch is impervious unless another stretch
    /// (typically a possible seepage face) covers it.
    Water {
        /// Water level, m.
        level_m: f64,
    },
    /// A prescribed total head, m, on the whole stretch.
    FixedHead {
        /// Total head, m.
        head_m: f64,
    },
    /// A possible seepage face: where the solver finds water leaving the ground, pressure is
    /// atmospheric (head = elevation); elsewhere no flow.
    SeepageFace,
    /// A drain at atmospheric pressure that only takes water in (same condition as a seepage
    /// face, reported apart).
    Drain,
    /// No flow (the default for any part of the outline no stretch covers).
    Impervious,
}

/// A boundary stretch: a polyline lying on the outline with one condition.
#[derive(Debug, Clone, PartialEq)]
pub struct Boundary {
    /// Name for messages and the flow report (upstream, tail water, toe drain…).
    pub name: String,
    /// The condition.
    pub kind: BoundaryKind,
    /// Vertices of the stretch, each on the outline, consecutive ones joined along it.
    pub path: Vec<Point>,
}

/// Everything geometric and material about a section's seepage model.
#[derive(Debug, Clone, PartialEq)]
pub struct SectionModel {
    /// The outline of the flow domain (ground, embankment and foundation); the ring closes
    /// itself.
    pub outline: Vec<Point>,
    /// Material of any part of the outline no zone covers.
    pub base: Material,
    /// Material zones.
    pub zones: Vec<Zone>,
    /// Impervious lines.
    pub lines: Vec<ImperviousLine>,
    /// Boundary stretches.
    pub boundaries: Vec<Boundary>,
}

impl SectionModel {
    /// A length tolerance for geometric tests: 1e-9 of the outline's extent.
    #[must_use]
    pub fn tolerance(&self) -> f64 {
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for p in &self.outline {
            lo = lo.min(p.x).min(p.y);
            hi = hi.max(p.x).max(p.y);
        }
        ((hi - lo).abs() * 1e-9).max(1e-12)
    }

    /// The material at zone index `zone` (`None` is the base material).
    #[must_use]
    pub fn material(&self, zone: Option<usize>) -> Material {
        zone.map_or(self.base, |z| self.zones[z].material)
    }
}
