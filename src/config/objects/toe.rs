//! `[[toe]]`: a toe check — exit gradient through the blanket at the landside toe and the
//! factor of safety against heave.
//!
//! Owns the toe keys, the critical gradient's two ways of being written, the target default.

use serde::Deserialize;

use super::values::Reader;
use super::{id_of, Read, Site, Tolerance, Want};
use crate::config::de::{self, Above, AtLeast, Num, Text};
use crate::config::model::{CriticalGradientFrom, Object, ToeCheck};
use crate::config::problem::Cx;

/// Target factor of safety of a toe check, when `fs_target` is not written.
const DEFAULT_FS_TARGET: f64 = 1.6;

/// A `[[toe]]` table as written.
#[derive(Deserialize, Default)]
struct Raw {
    id: Option<Text>,
    piezometer: Option<Text>,
    ground_elevation: Option<Num>,
    water_gauge: Option<Text>,
    water_level: Option<Num>,
    blanket_thickness: Option<Above<0>>,
    gamma_sat_kn_m3: Option<Num>,
    specific_gravity: Option<Above<1>>,
    void_ratio: Option<AtLeast<0>>,
    fs_target: Option<Above<1>>,
    tolerance_s: Tolerance,
}

pub(super) fn read(cx: &mut Cx<'_>, r: &mut Reader<'_>, site: &Site<'_>) -> Read {
    let raw: Raw = de::table(cx, &r.t).unwrap_or_default();
    let piezometer = r.reference(cx, "piezometer", raw.piezometer, true, Want::Piezometer);
    let ground = r.length(cx, "ground_elevation", raw.ground_elevation, true);
    let water = r.level(
        cx,
        ("water_gauge", raw.water_gauge),
        ("water_level", raw.water_level),
        false,
    );
    let thickness = r.length(cx, "blanket_thickness", raw.blanket_thickness, true);
    let weights = (raw.gamma_sat_kn_m3, raw.specific_gravity, raw.void_ratio);
    let critical = critical(cx, r, weights, site.gamma_w);
    let fs_target = r.number(cx, "fs_target", raw.fs_target, false);
    let object = (|| {
        Some(Object::Toe(ToeCheck {
            id: id_of(&raw.id),
            site: site.id.to_string(),
            piezometer: piezometer?,
            ground_elevation_m: ground?,
            water,
            blanket_thickness_m: thickness?,
            critical: critical?,
            fs_target: fs_target.unwrap_or(DEFAULT_FS_TARGET),
            tolerance_s: 0,
        }))
    })();
    Read {
        id: raw.id,
        tolerance_s: raw.tolerance_s,
        object,
    }
}

/// The critical gradient's inputs: `gamma_sat_kn_m3`, or `specific_gravity` with `void_ratio`.
fn critical(
    cx: &mut Cx<'_>,
    r: &Reader<'_>,
    (gamma_sat, gs, e): (Option<Num>, Option<Above<1>>, Option<AtLeast<0>>),
    gamma_w: f64,
) -> Option<CriticalGradientFrom> {
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
        let g = r.number(cx, "gamma_sat_kn_m3", gamma_sat, true)?;
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
    let gs = r.number(cx, "specific_gravity", gs, true);
    let e = r.number(cx, "void_ratio", e, true);
    Some(CriticalGradientFrom::GsE {
        specific_gravity: gs?,
        void_ratio: e?,
    })
}
