//! `[section.model]` of a `[[section]]`: the seepage model of an instrumented cross-section —
//! outline, material zones, impervious lines (cutoffs, sheet piles) and boundary stretches, the
//! upstream and downstream water bound to the section's pool and tail gauges — read with serde
//! (`deny_unknown_fields`) from the span-keeping document, lengths converted from the site's
//! `length_unit` to metres, then checked by `seepage::validate`; every geometry problem is
//! reported at the line of the part it is about.
//!
//! Owns the model's keys and their checks. Must not solve anything (that is `seepage`), nor
//! decide what the section's gauges are (the section table does).

use std::ops::Range;
use std::path::PathBuf;

use serde::Deserialize;
use toml::Spanned;

use super::limits::YEAR_S;
use super::problem::{Cx, Problem};
use crate::seepage::{
    validate, Boundary, BoundaryKind, ImperviousLine, Material, Point, SectionModel, Subject, Zone,
};

/// Element size when `element_size` is not written: a fortieth of the outline's width.
const DEFAULT_ELEMENTS_ACROSS: f64 = 40.0;
/// Re-solve at least this often while readings arrive, when `resolve_every_s` is not written.
const DEFAULT_RESOLVE_EVERY_S: i64 = 6 * 3600;
/// Fewest elements across the outline an `element_size` may give (coarser is not a flow net).
const MIN_ELEMENTS_ACROSS: f64 = 4.0;
/// Most elements across the outline (a bound on the work of one solve).
const MAX_ELEMENTS_ACROSS: f64 = 2000.0;

/// A permeability, m/s, with optional anisotropy and bedding angle.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct MaterialRaw {
    /// Permeability along the bedding, m/s (`k` for an isotropic material).
    k_m_per_s: Option<f64>,
    kh_m_per_s: Option<f64>,
    kv_m_per_s: Option<f64>,
    #[serde(default)]
    angle_deg: f64,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ZoneRaw {
    name: String,
    polygon: Vec<[f64; 2]>,
    k_m_per_s: Option<f64>,
    kh_m_per_s: Option<f64>,
    kv_m_per_s: Option<f64>,
    #[serde(default)]
    angle_deg: f64,
}

impl ZoneRaw {
    fn material(&self) -> MaterialRaw {
        MaterialRaw {
            k_m_per_s: self.k_m_per_s,
            kh_m_per_s: self.kh_m_per_s,
            kv_m_per_s: self.kv_m_per_s,
            angle_deg: self.angle_deg,
        }
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct CutoffRaw {
    name: String,
    points: Vec<[f64; 2]>,
}

/// What a boundary stretch is, as written.
#[derive(Debug, Clone, Copy, Deserialize, PartialEq, Eq)]
#[serde(rename_all = "snake_case")]
enum KindRaw {
    /// Free water at `water` (pool, tail or a fixed elevation).
    Water,
    /// A possible seepage face.
    SeepageFace,
    /// A drain at atmospheric pressure.
    Drain,
    /// No flow.
    Impervious,
}

/// Where a water boundary's level comes from, as written: `"pool"`, `"tail"` or an elevation.
#[derive(Debug, Deserialize)]
#[serde(untagged)]
enum WaterRaw {
    Gauge(String),
    Elevation(f64),
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct BoundaryRaw {
    name: String,
    kind: KindRaw,
    path: Vec<[f64; 2]>,
    water: Option<Spanned<WaterRaw>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ModelRaw {
    outline: Spanned<Vec<[f64; 2]>>,
    base: Spanned<MaterialRaw>,
    #[serde(default)]
    zone: Vec<Spanned<ZoneRaw>>,
    #[serde(default)]
    cutoff: Vec<Spanned<CutoffRaw>>,
    #[serde(default)]
    boundary: Vec<Spanned<BoundaryRaw>>,
    element_size: Option<Spanned<f64>>,
    #[serde(default = "yes")]
    unconfined: bool,
    resolve_change: Option<Spanned<f64>>,
    resolve_every_s: Option<Spanned<i64>>,
}

fn yes() -> bool {
    true
}

/// Where a water boundary's level comes from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum WaterFrom {
    /// The section's pool gauge.
    Pool,
    /// The section's tail water (gauge or fixed level).
    Tail,
    /// A fixed elevation, m.
    Elevation(f64),
}

/// A validated section model: the geometry in metres, with the water boundaries bound to the
/// section's gauges (their levels in `model` are placeholders until [`SeepageSpec::at`]).
#[derive(Debug, Clone, PartialEq)]
pub struct SeepageSpec {
    /// Geometry, materials and boundary stretches, metres and m/s.
    pub model: SectionModel,
    /// For each boundary stretch of `model`, where its water level comes from (water ones only).
    pub water: Vec<Option<WaterFrom>>,
    /// Target element edge length, m.
    pub element_size_m: f64,
    /// Whether a free surface is sought (false: everything saturated, confined flow).
    pub unconfined: bool,
    /// Re-solve live when the pool or tail level has moved this much since the last solve, m.
    pub resolve_change_m: f64,
    /// Re-solve live at least this often while readings arrive, s.
    pub resolve_every_s: i64,
    /// The site file, for problems found once the instruments are known (piezometer tips).
    pub file: PathBuf,
    /// Line and column of the `model` table in `file`.
    pub pos: (usize, usize),
}

impl SeepageSpec {
    /// The model with its water boundaries at the pool and tail levels, m (`tail_m` is ignored
    /// when no boundary uses it).
    #[must_use]
    pub fn at(&self, pool_m: f64, tail_m: Option<f64>) -> SectionModel {
        let mut m = self.model.clone();
        for (b, w) in m.boundaries.iter_mut().zip(&self.water) {
            let level = match w {
                Some(WaterFrom::Pool) => pool_m,
                Some(WaterFrom::Tail) => tail_m.unwrap_or(f64::NEG_INFINITY),
                Some(WaterFrom::Elevation(z)) => *z,
                None => continue,
            };
            b.kind = BoundaryKind::Water { level_m: level };
        }
        m
    }

    /// Whether any water boundary follows the tail water.
    #[must_use]
    pub fn uses_tail(&self) -> bool {
        self.water.contains(&Some(WaterFrom::Tail))
    }
}

/// A value that failed to deserialize keeps the message, so one bad model does not hide the
/// others.
#[derive(Debug)]
enum Checked<T> {
    Ok(T),
    Bad(String),
}

impl<'de, T: Deserialize<'de>> Deserialize<'de> for Checked<T> {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        Ok(T::deserialize(d).map_or_else(|e| Checked::Bad(e.to_string()), Checked::Ok))
    }
}

/// The sections of a site file, only as far as their models (other keys are the section
/// reader's).
#[derive(Debug, Deserialize)]
struct SiteDoc {
    #[serde(default)]
    section: Vec<SectionDoc>,
}

#[derive(Debug, Deserialize)]
struct SectionDoc {
    id: Option<String>,
    model: Option<Spanned<Checked<ModelRaw>>>,
}

/// Read the `model` of section `id` of the file `cx` checks, as a seepage model. `m` converts
/// the site's length unit to metres; `has_tail` says whether the section has tail water a
/// boundary may use. Problems go to `cx`; `None` when there was any.
pub(crate) fn read(
    cx: &mut Cx<'_>,
    id: &str,
    what: &str,
    m: f64,
    has_tail: bool,
) -> Option<SeepageSpec> {
    // The file's syntax and the shape of `[[section]]` are the section reader's to report.
    let doc: SiteDoc = toml_edit::de::from_str(cx.text).ok()?;
    let model = doc
        .section
        .into_iter()
        .find(|s| s.id.as_deref() == Some(id))?
        .model?;
    let span = Some(model.span());
    let raw = match model.into_inner() {
        Checked::Ok(raw) => raw,
        Checked::Bad(message) => {
            let message = message.trim().replace('\n', " ");
            cx.at(span, format!("{what}: [section.model]: {message}"));
            return None;
        }
    };
    let before = cx.problems.len();
    let pt = |p: &[f64; 2]| Point::new(p[0] * m, p[1] * m);
    let outline: Vec<Point> = raw.outline.get_ref().iter().map(pt).collect();
    let mut spans: Vec<(Subject, Range<usize>)> = vec![
        (Subject::Outline, raw.outline.span()),
        (Subject::Base, raw.base.span()),
    ];
    let base = material(cx, raw.base.get_ref(), raw.base.span(), what);
    let mut zones = Vec::new();
    for (i, z) in raw.zone.iter().enumerate() {
        spans.push((Subject::Zone(i), z.span()));
        let zr = z.get_ref();
        zones.push(Zone {
            name: zr.name.clone(),
            polygon: zr.polygon.iter().map(pt).collect(),
            material: material(cx, &zr.material(), z.span(), what)
                .unwrap_or(Material::isotropic(1.0)),
        });
    }
    let mut lines = Vec::new();
    for (i, c) in raw.cutoff.iter().enumerate() {
        spans.push((Subject::Line(i), c.span()));
        lines.push(ImperviousLine {
            name: c.get_ref().name.clone(),
            points: c.get_ref().points.iter().map(pt).collect(),
        });
    }
    let mut boundaries = Vec::new();
    let mut water = Vec::new();
    for (i, b) in raw.boundary.iter().enumerate() {
        spans.push((Subject::Boundary(i), b.span()));
        let br = b.get_ref();
        let from = boundary_water(cx, br, b.span(), what, m, has_tail);
        let kind = match br.kind {
            KindRaw::Water => BoundaryKind::Water { level_m: 0.0 },
            KindRaw::SeepageFace => BoundaryKind::SeepageFace,
            KindRaw::Drain => BoundaryKind::Drain,
            KindRaw::Impervious => BoundaryKind::Impervious,
        };
        water.push(from);
        boundaries.push(Boundary {
            name: br.name.clone(),
            kind,
            path: br.path.iter().map(pt).collect(),
        });
    }
    if !raw
        .boundary
        .iter()
        .any(|b| b.get_ref().kind == KindRaw::Water)
    {
        cx.at(
            span.clone(),
            format!(
                "{what}: [section.model] has no boundary of kind \"water\"; expected at least \
                 the upstream water (water = \"pool\")"
            ),
        );
    }
    let model = SectionModel {
        outline,
        base: base.unwrap_or(Material::isotropic(1.0)),
        zones,
        lines,
        boundaries,
    };
    for p in validate(&model) {
        let at = spans
            .iter()
            .find(|(s, _)| *s == p.subject)
            .map(|(_, r)| r.clone())
            .or(span.clone());
        cx.at(at, format!("{what}: [section.model]: {p}"));
    }
    let width = width(&model.outline);
    let (lo, hi) = (width / MAX_ELEMENTS_ACROSS, width / MIN_ELEMENTS_ACROSS);
    let sizes = format!(
        "between {} and {} (from {MAX_ELEMENTS_ACROSS} to {MIN_ELEMENTS_ACROSS} elements across \
         the outline)",
        lo / m,
        hi / m
    );
    let element_size_m = match &raw.element_size {
        None => width / DEFAULT_ELEMENTS_ACROSS,
        Some(s) => {
            let v = *s.get_ref() * m;
            let ok = v.is_finite() && v >= lo && v <= hi;
            check(cx, (what, "element_size"), s, ok, &sizes) * m
        }
    };
    let resolve_change_m = raw.resolve_change.as_ref().map_or(0.1, |s| {
        let ok = (*s.get_ref() * m).is_finite() && *s.get_ref() > 0.0;
        check(cx, (what, "resolve_change"), s, ok, "a level change > 0") * m
    });
    let every = (what, "resolve_every_s");
    let resolve_every_s = raw
        .resolve_every_s
        .as_ref()
        .map_or(DEFAULT_RESOLVE_EVERY_S, |s| {
            let ok = (60..=YEAR_S).contains(s.get_ref());
            check(cx, every, s, ok, &format!("60 to {YEAR_S}"))
        });
    (cx.problems.len() == before).then(|| SeepageSpec {
        model,
        water,
        element_size_m,
        unconfined: raw.unconfined,
        resolve_change_m,
        resolve_every_s,
        file: cx.file.to_path_buf(),
        pos: cx.pos(span),
    })
}

/// A written value, with a problem at it saying what is `expected` unless `ok`.
fn check<T: Copy + std::fmt::Display>(
    cx: &mut Cx<'_>,
    (what, key): (&str, &str),
    s: &Spanned<T>,
    ok: bool,
    expected: &str,
) -> T {
    if !ok {
        let v = s.get_ref();
        cx.at(
            Some(s.span()),
            format!("{what}: key \"{key}\" is {v}, expected {expected}"),
        );
    }
    *s.get_ref()
}

/// The horizontal extent of a ring, m.
fn width(ring: &[Point]) -> f64 {
    let (lo, hi) = ring
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), p| {
            (l.min(p.x), h.max(p.x))
        });
    if hi > lo {
        hi - lo
    } else {
        1.0
    }
}

fn material(
    cx: &mut Cx<'_>,
    raw: &MaterialRaw,
    span: Range<usize>,
    what: &str,
) -> Option<Material> {
    let m = match (raw.k_m_per_s, raw.kh_m_per_s, raw.kv_m_per_s) {
        (Some(k), None, None) => Material {
            kh_m_per_s: k,
            kv_m_per_s: k,
            angle_deg: raw.angle_deg,
        },
        (None, Some(kh), Some(kv)) => Material {
            kh_m_per_s: kh,
            kv_m_per_s: kv,
            angle_deg: raw.angle_deg,
        },
        _ => {
            cx.at(
                Some(span),
                format!(
                    "{what}: [section.model]: a material needs either \"k_m_per_s\" (isotropic) \
                     or both \"kh_m_per_s\" and \"kv_m_per_s\""
                ),
            );
            return None;
        }
    };
    Some(m)
}

fn boundary_water(
    cx: &mut Cx<'_>,
    b: &BoundaryRaw,
    span: Range<usize>,
    what: &str,
    m: f64,
    has_tail: bool,
) -> Option<WaterFrom> {
    let mut bad = |at: Range<usize>, msg: String| {
        cx.at(
            Some(at),
            format!("{what}: [section.model] boundary {:?}: {msg}", b.name),
        );
    };
    match (b.kind, &b.water) {
        (KindRaw::Water, None) => {
            bad(
                span,
                "missing key \"water\"; expected \"pool\", \"tail\" or an elevation".into(),
            );
            None
        }
        (KindRaw::Water, Some(w)) => match w.get_ref() {
            WaterRaw::Gauge(g) if g == "pool" => Some(WaterFrom::Pool),
            WaterRaw::Gauge(g) if g == "tail" => {
                if !has_tail {
                    bad(
                        w.span(),
                        "water = \"tail\" but the section has neither \"tail_gauge\" nor \
                         \"tail_level\""
                            .into(),
                    );
                }
                Some(WaterFrom::Tail)
            }
            WaterRaw::Gauge(g) => {
                bad(
                    w.span(),
                    format!("key \"water\" is {g:?}, expected \"pool\", \"tail\" or an elevation"),
                );
                None
            }
            WaterRaw::Elevation(z) => Some(WaterFrom::Elevation(z * m)),
        },
        (_, Some(w)) => {
            bad(
                w.span(),
                "key \"water\" is only for kind = \"water\"".into(),
            );
            None
        }
        (_, None) => None,
    }
}

/// Piezometer tips of the sections with a model that lie outside the model's domain, as
/// problems at the model table. `tip(id)` gives a piezometer's (station, tip elevation), m.
pub(crate) fn check_tips(
    sections: &[super::model::Section],
    tip: impl Fn(&str) -> Option<(f64, f64)>,
    problems: &mut Vec<Problem>,
) {
    for s in sections {
        let Some(spec) = &s.model else { continue };
        let points: Vec<(String, Point)> = s
            .piezometers
            .iter()
            .filter_map(|id| tip(id).map(|(x, y)| (id.clone(), Point::new(x, y))))
            .collect();
        for p in crate::seepage::check_points(&spec.model, &points) {
            let message = format!(
                "section {:?}: [section.model]: {p}; expected every piezometer tip inside the \
                 model's outline",
                s.id
            );
            problems.push(Problem::at(&spec.file, spec.pos, message));
        }
    }
}
