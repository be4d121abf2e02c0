//! Reading a `[[blanket]]` table: a levee reach for blanket theory, with its riverside and
//! landside cases and the lengths each case needs.
//!
//! Owns the blanket keys and case spellings. References are recorded for `refs`, as for every
//! object.

use super::values::{name, Reader, Rule};
use super::Want;
use crate::config::model::{BlanketReach, LandsideCase, LandwardDistance, RiversideCase};
use crate::config::problem::Cx;
use crate::config::reader::finite;

const BLANKET_KEYS: [&str; 16] = [
    "id",
    "river_gauge",
    "landside_level",
    "landside_gauge",
    "toe_piezometer",
    "base_width",
    "foundation_thickness",
    "k_foundation_m_s",
    "k_blanket_m_s",
    "blanket_thickness",
    "riverside",
    "l1",
    "landside",
    "l3",
    "distances",
    "tolerance_s",
];

#[derive(Clone, Copy, PartialEq)]
enum River {
    Open,
    NoBlanket,
    Impervious,
}

#[derive(Clone, Copy, PartialEq)]
enum Land {
    Endless,
    SeepageBlock,
    OpenExit,
    Impervious,
}

const RIVERSIDE: [(&str, River); 3] = [
    ("open_entrance", River::Open),
    ("no_blanket", River::NoBlanket),
    ("impervious", River::Impervious),
];

const LANDSIDE: [(&str, Land); 4] = [
    ("endless", Land::Endless),
    ("seepage_block", Land::SeepageBlock),
    ("open_exit", Land::OpenExit),
    ("impervious", Land::Impervious),
];

pub(super) fn blanket(
    cx: &mut Cx<'_>,
    r: &mut Reader<'_>,
    id: String,
    site: String,
) -> Option<BlanketReach> {
    r.t.check_keys(cx, &BLANKET_KEYS);
    let river_gauge = r.reference(cx, "river_gauge", true, Want::StageGauge);
    let landside_level = r.level(cx, "landside_gauge", "landside_level", true);
    let toe_piezometer = r.reference(cx, "toe_piezometer", false, Want::Piezometer);
    let base_width = r.length(cx, "base_width", true, Rule::Positive);
    let d = r.length(cx, "foundation_thickness", true, Rule::Positive);
    let k_f = r.number(cx, "k_foundation_m_s", true, Rule::Positive);
    let k_b = r.number(cx, "k_blanket_m_s", true, Rule::NonNegative);
    let z_bl = r.length(cx, "blanket_thickness", true, Rule::Positive);
    let river = r.t.choice(cx, "riverside", true, &RIVERSIDE);
    let land = r.t.choice(cx, "landside", true, &LANDSIDE);
    let riverside = river.and_then(|c| {
        let l1 = r.case_length(
            cx,
            "l1",
            "riverside",
            name(&RIVERSIDE, &c),
            c != River::NoBlanket,
        );
        match c {
            River::Open => l1.map(|l1_m| RiversideCase::OpenEntranceAt { l1_m }),
            River::NoBlanket => Some(RiversideCase::NoBlanket),
            River::Impervious => l1.map(|l1_m| RiversideCase::Impervious { l1_m }),
        }
    });
    let landside = land.and_then(|c| {
        let l3 = r.case_length(
            cx,
            "l3",
            "landside",
            name(&LANDSIDE, &c),
            c != Land::Endless,
        );
        match c {
            Land::Endless => Some(LandsideCase::Endless),
            Land::SeepageBlock => l3.map(|l3_m| LandsideCase::SeepageBlockAt { l3_m }),
            Land::OpenExit => l3.map(|l3_m| LandsideCase::OpenExitAt { l3_m }),
            Land::Impervious => l3.map(|l3_m| LandsideCase::Impervious { l3_m }),
        }
    });
    let both_impervious = river == Some(River::Impervious) && land == Some(Land::Impervious);
    if k_b == Some(0.0) && !both_impervious {
        r.t.problem_at(
            cx,
            "k_blanket_m_s",
            "key \"k_blanket_m_s\" is 0, expected a number > 0 unless riverside and landside are both \"impervious\" (the other cases need a leaky blanket)",
        );
    }
    let distances = r.t.array(
        cx,
        "distances",
        false,
        (
            "an array of distances",
            "a distance >= 0 landward of the toe",
        ),
        |v| finite(v).filter(|d| *d >= 0.0),
    );
    Some(BlanketReach {
        id,
        site,
        river_gauge: river_gauge?,
        landside_level: landside_level?,
        toe_piezometer,
        base_width_m: base_width?,
        foundation_thickness_m: d?,
        k_foundation_m_s: k_f?,
        k_blanket_m_s: k_b?,
        blanket_thickness_m: z_bl?,
        riverside: riverside?,
        landside: landside?,
        distances: distances
            .unwrap_or_default()
            .into_iter()
            .map(|(d, _)| LandwardDistance {
                m: d * r.m,
                label: format!("{d}{}", if r.m == 1.0 { "m" } else { "ft" }),
            })
            .collect(),
        tolerance_s: 0,
    })
}
