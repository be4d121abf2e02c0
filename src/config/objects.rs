//! Reading a site file's derived-quantity objects — `[[nest]]`, `[[toe]]`, `[[blanket]]` and
//! `[[section]]` — into the `model` objects, lengths converted to metres.
//!
//! Owns each object's keys, the keys that exclude or need each other, the ranges of numbers and
//! the shape of a section's ground line (`values` holds the typed reads they share, `blanket` the
//! blanket table). It must not decide what a reference names: whether the instrument exists,
//! belongs to the same site and is of the right kind, and the default tolerance (from the
//! inputs' intervals) need every site file, so `read` records each reference and
//! `refs::resolve` settles them for `load`.

mod blanket;
mod refs;
mod values;

use super::limits;
use super::model::{BlanketReach, CriticalGradientFrom, Nest, Section, ToeCheck};
use super::problem::Cx;
use super::reader::{finite, Tbl};
use super::site::Pos;
use values::{Reader, Rule};

pub(crate) use refs::{problem as reference_problem, resolve, Known};

/// The object tables of a site file, as written (`[[nest]]` ...).
pub(crate) const TABLES: [&str; 4] = ["nest", "toe", "blanket", "section"];

/// |i| below which a nest reports no vertical flow, when `deadband` is not written.
const DEFAULT_DEADBAND: f64 = 0.02;

/// Target factor of safety of a toe check, when `fs_target` is not written.
const DEFAULT_FS_TARGET: f64 = 1.6;

/// What an instrument reference must name.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Want {
    /// vibrating_wire, pressure_transducer, or standpipe with tip_elevation.
    Piezometer,
    /// A piezometer with a station (it is placed on a section by its station).
    StationedPiezometer,
    /// A stage gauge.
    StageGauge,
}

/// A reference from an object to an instrument, as written.
pub(crate) struct Ref {
    /// The key holding the reference, for messages.
    pub key: &'static str,
    /// The instrument id written.
    pub id: String,
    /// Where the id is written.
    pub pos: Pos,
    pub want: Want,
}

/// One validated object (its `tolerance_s` is settled by `resolve`).
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Object {
    Nest(Nest),
    Toe(ToeCheck),
    Blanket(BlanketReach),
    Section(Section),
}

/// What `load` needs of one object table.
pub(crate) struct ObjEntry {
    /// The table name as written, e.g. `nest`.
    pub table: &'static str,
    /// How messages name the object, e.g. `nest "AB-N1"`.
    pub what: String,
    /// The id, if readable, and where it is written.
    pub id: Option<(String, Pos)>,
    /// Every instrument reference, in the order written.
    pub refs: Vec<Ref>,
    /// `tolerance_s` as written; `None` means "1.5 × the largest input interval".
    pub tolerance_s: Option<i64>,
    /// The object, if its own table had no problems (already reported).
    pub object: Option<Object>,
}

/// Read every object table of a site file's root. `m_per_unit` converts the site's length unit
/// to metres; `gamma_w_kn_m3` is the site's unit weight of water.
pub(crate) fn read(
    cx: &mut Cx<'_>,
    root: &Tbl<'_>,
    site: &str,
    m_per_unit: f64,
    gamma_w_kn_m3: f64,
) -> Vec<ObjEntry> {
    let mut out = Vec::new();
    for table in TABLES {
        for t in root.tables(cx, table) {
            let mut r = Reader {
                t,
                m: m_per_unit,
                refs: Vec::new(),
            };
            out.push(entry(cx, &mut r, table, site, gamma_w_kn_m3));
        }
    }
    out
}

fn entry(
    cx: &mut Cx<'_>,
    r: &mut Reader<'_>,
    table: &'static str,
    site: &str,
    gamma_w: f64,
) -> ObjEntry {
    let before = cx.problems.len();
    let id = r.t.nonempty(cx, "id");
    if let Some(id) = &id {
        r.t.what = format!("{table} {id:?}");
    } else if !r.t.has("id") {
        r.t.missing(cx, "id", "");
    }
    let id_pos = cx.pos(r.t.value_span("id"));
    let tolerance_s = r.t.opt_int_in(cx, "tolerance_s", 1, limits::YEAR_S, false);
    let (name, site) = (id.clone().unwrap_or_default(), site.to_string());
    let object = match table {
        "nest" => nest(cx, r, name, site).map(Object::Nest),
        "toe" => toe(cx, r, name, site, gamma_w).map(Object::Toe),
        "blanket" => blanket::blanket(cx, r, name, site).map(Object::Blanket),
        _ => section(cx, r, name, site).map(Object::Section),
    };
    let ok = id.is_some() && cx.problems.len() == before;
    ObjEntry {
        table,
        what: r.t.what.clone(),
        id: id.map(|s| (s, id_pos)),
        refs: std::mem::take(&mut r.refs),
        tolerance_s,
        object: object.filter(|_| ok),
    }
}

const NEST_KEYS: [&str; 4] = ["id", "piezometers", "deadband", "tolerance_s"];

fn nest(cx: &mut Cx<'_>, r: &mut Reader<'_>, id: String, site: String) -> Option<Nest> {
    r.t.check_keys(cx, &NEST_KEYS);
    let piezometers = r.references(cx, "piezometers", 2, "piezometer", Want::Piezometer);
    let deadband = r.number(cx, "deadband", false, Rule::NonNegative);
    Some(Nest {
        id,
        site,
        piezometers: piezometers?,
        deadband: deadband.unwrap_or(DEFAULT_DEADBAND),
        tolerance_s: 0,
    })
}

const TOE_KEYS: [&str; 11] = [
    "id",
    "piezometer",
    "ground_elevation",
    "water_gauge",
    "water_level",
    "blanket_thickness",
    "gamma_sat_kn_m3",
    "specific_gravity",
    "void_ratio",
    "fs_target",
    "tolerance_s",
];

fn toe(
    cx: &mut Cx<'_>,
    r: &mut Reader<'_>,
    id: String,
    site: String,
    gamma_w: f64,
) -> Option<ToeCheck> {
    r.t.check_keys(cx, &TOE_KEYS);
    let piezometer = r.reference(cx, "piezometer", true, Want::Piezometer);
    let ground = r.length(cx, "ground_elevation", true, Rule::Any);
    let water = r.level(cx, "water_gauge", "water_level", false);
    let thickness = r.length(cx, "blanket_thickness", true, Rule::Positive);
    let critical = critical(cx, r, gamma_w);
    let fs_target = r.number(cx, "fs_target", false, Rule::Above(1.0));
    Some(ToeCheck {
        id,
        site,
        piezometer: piezometer?,
        ground_elevation_m: ground?,
        water,
        blanket_thickness_m: thickness?,
        critical: critical?,
        fs_target: fs_target.unwrap_or(DEFAULT_FS_TARGET),
        tolerance_s: 0,
    })
}

/// The critical gradient's inputs: `gamma_sat_kn_m3`, or `specific_gravity` with `void_ratio`.
fn critical(cx: &mut Cx<'_>, r: &Reader<'_>, gamma_w: f64) -> Option<CriticalGradientFrom> {
    let unit_weight = r.t.has("gamma_sat_kn_m3");
    let gs_e = ["specific_gravity", "void_ratio"].map(|k| r.t.has(k));
    if unit_weight && gs_e.contains(&true) {
        let key = if gs_e[0] {
            "specific_gravity"
        } else {
            "void_ratio"
        };
        r.t.problem_at(
            cx,
            key,
            format!("both \"gamma_sat_kn_m3\" and \"{key}\" are set; expected either gamma_sat_kn_m3, or specific_gravity with void_ratio"),
        );
    }
    if unit_weight {
        let g = r.number(cx, "gamma_sat_kn_m3", true, Rule::Any)?;
        if g <= gamma_w {
            r.t.problem_at(
                cx,
                "gamma_sat_kn_m3",
                format!("key \"gamma_sat_kn_m3\" is {g}, expected more than the site's unit weight of water ({gamma_w} kN/m³)"),
            );
            return None;
        }
        return Some(CriticalGradientFrom::UnitWeight { gamma_sat_kn_m3: g });
    }
    if !gs_e.contains(&true) {
        r.t.problem(
            cx,
            format!(
                "missing key \"gamma_sat_kn_m3\" (or \"specific_gravity\" and \"void_ratio\") in {}; expected the blanket soil's weight for its critical gradient",
                r.t.header
            ),
        );
        return None;
    }
    let gs = r.number(cx, "specific_gravity", true, Rule::Above(1.0));
    let e = r.number(cx, "void_ratio", true, Rule::NonNegative);
    Some(CriticalGradientFrom::GsE {
        specific_gravity: gs?,
        void_ratio: e?,
    })
}

const SECTION_KEYS: [&str; 9] = [
    "id",
    "ground",
    "pool_gauge",
    "tail_gauge",
    "tail_level",
    "toe_station",
    "piezometers",
    "tolerance_s",
    "model",
];

fn section(cx: &mut Cx<'_>, r: &mut Reader<'_>, id: String, site: String) -> Option<Section> {
    r.t.check_keys(cx, &SECTION_KEYS);
    let ground = ground(cx, r);
    let pool_gauge = r.reference(cx, "pool_gauge", true, Want::StageGauge);
    let tail = r.level(cx, "tail_gauge", "tail_level", false);
    let toe = r.length(cx, "toe_station", true, Rule::Any);
    if let (Some(g), Some(toe)) = (&ground, toe) {
        let (first, last) = (g[0].0, g[g.len() - 1].0);
        if toe < first || toe > last {
            r.t.problem_at(
                cx,
                "toe_station",
                format!(
                    "key \"toe_station\" is {}, expected a station within the ground line ({} to {})",
                    toe / r.m,
                    first / r.m,
                    last / r.m
                ),
            );
        }
    }
    let piezometers = r.references(
        cx,
        "piezometers",
        1,
        "piezometer",
        Want::StationedPiezometer,
    );
    let model = if r.t.has("model") {
        let what = r.t.what.clone();
        super::section_model::read(cx, &id, &what, r.m, tail.is_some())
    } else {
        None
    };
    Some(Section {
        model,
        id,
        site,
        ground: ground?,
        pool_gauge: pool_gauge?,
        tail,
        toe_station_m: toe?,
        piezometers: piezometers?,
        tolerance_s: 0,
    })
}

/// `ground`: at least three `[station, elevation]` points, stations strictly increasing; metres.
fn ground(cx: &mut Cx<'_>, r: &Reader<'_>) -> Option<Vec<(f64, f64)>> {
    let points = r.t.array(
        cx,
        "ground",
        true,
        (
            "an array of [station, elevation] points",
            "[station, elevation] (two finite numbers)",
        ),
        |v| {
            let a = v.as_array()?;
            match (
                a.len(),
                a.get(0).and_then(finite),
                a.get(1).and_then(finite),
            ) {
                (2, Some(s), Some(z)) => Some((s, z)),
                _ => None,
            }
        },
    )?;
    if points.len() < 3 {
        r.t.problem_at(
            cx,
            "ground",
            format!(
                "key \"ground\" has {} point(s), expected at least 3 [station, elevation] points",
                points.len()
            ),
        );
        return None;
    }
    let mut ok = true;
    for i in 1..points.len() {
        let ((s0, _), _) = points[i - 1];
        let ((s1, _), span) = &points[i];
        let s1 = *s1;
        if s1 <= s0 {
            cx.at(
                span.clone().or_else(|| r.t.value_span("ground")),
                format!(
                    "{}: key \"ground\" point {} has station {s1} after {s0}; expected stations strictly increasing (upstream to downstream)",
                    r.t.what,
                    i + 1
                ),
            );
            ok = false;
        }
    }
    let m = r.m;
    ok.then(|| {
        points
            .into_iter()
            .map(|((s, z), _)| (s * m, z * m))
            .collect()
    })
}
