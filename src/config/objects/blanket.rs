//! `[[blanket]]`: a levee reach for blanket theory, with its riverside and landside cases and
//! the lengths each case needs.
//!
//! Owns the blanket keys and case spellings. References are recorded for `refs`, as for every
//! object.

use serde::Deserialize;

use super::values::Reader;
use super::{id_of, Read, Site, Tolerance, Want};
use crate::config::de::{self, Above, AtLeast, Later, Num, Text};
use crate::config::model::{BlanketReach, LandsideCase, LandwardDistance, Object, RiversideCase};
use crate::config::problem::Cx;
use crate::config::reader::finite;

/// A `[[blanket]]` table as written.
#[derive(Deserialize, Default)]
struct Raw {
    id: Option<Text>,
    river_gauge: Option<Text>,
    landside_level: Option<Num>,
    landside_gauge: Option<Text>,
    toe_piezometer: Option<Text>,
    base_width: Option<Above<0>>,
    foundation_thickness: Option<Above<0>>,
    k_foundation_m_s: Option<Above<0>>,
    k_blanket_m_s: Option<AtLeast<0>>,
    blanket_thickness: Option<Above<0>>,
    riverside: Option<River>,
    l1: Option<Above<0>>,
    landside: Option<Land>,
    l3: Option<Above<0>>,
    #[allow(dead_code)] // read element by element (`Tbl::array`)
    distances: Option<Later>,
    tolerance_s: Tolerance,
}

#[derive(Clone, Copy, PartialEq, Deserialize)]
#[serde(rename_all = "snake_case")]
enum River {
    #[serde(rename = "open_entrance")]
    Open,
    NoBlanket,
    Impervious,
}

#[derive(Clone, Copy, PartialEq, Deserialize)]
#[serde(rename_all = "snake_case")]
enum Land {
    Endless,
    SeepageBlock,
    OpenExit,
    Impervious,
}

pub(super) fn read(cx: &mut Cx<'_>, r: &mut Reader<'_>, site: &Site<'_>) -> Read {
    let raw: Raw = de::table(cx, &r.t).unwrap_or_default();
    let river_gauge = r.reference(cx, "river_gauge", raw.river_gauge, true, Want::StageGauge);
    let landside_level = r.level(
        cx,
        ("landside_gauge", raw.landside_gauge),
        ("landside_level", raw.landside_level),
        true,
    );
    let toe_piezometer = r.reference(
        cx,
        "toe_piezometer",
        raw.toe_piezometer,
        false,
        Want::Piezometer,
    );
    let base_width = r.length(cx, "base_width", raw.base_width, true);
    let d = r.length(cx, "foundation_thickness", raw.foundation_thickness, true);
    let k_f = r.number(cx, "k_foundation_m_s", raw.k_foundation_m_s, true);
    let k_b = r.number(cx, "k_blanket_m_s", raw.k_blanket_m_s, true);
    let z_bl = r.length(cx, "blanket_thickness", raw.blanket_thickness, true);
    let river = r.t.need(cx, "riverside", raw.riverside);
    let land = r.t.need(cx, "landside", raw.landside);
    let riverside = river.and_then(|c| {
        let l1 = r.case_length(
            cx,
            ("l1", raw.l1),
            ("riverside", r.t.peek_str("riverside").unwrap_or_default()),
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
            ("l3", raw.l3),
            ("landside", r.t.peek_str("landside").unwrap_or_default()),
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
    let m = r.m;
    let object = (|| {
        Some(Object::Blanket(BlanketReach {
            id: id_of(&raw.id),
            site: site.id.to_string(),
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
                    m: d * m,
                    label: format!("{d}{}", if m == 1.0 { "m" } else { "ft" }),
                })
                .collect(),
            tolerance_s: 0,
        }))
    })();
    Read {
        id: raw.id,
        tolerance_s: raw.tolerance_s,
        object,
    }
}
