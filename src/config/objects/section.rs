//! `[[section]]`: a cross-section with its ground line, pool and tail levels, toe and
//! piezometers; its `[section.model]` is `config::section_model`'s.
//!
//! Owns the section keys and the shape of the ground line.

use serde::Deserialize;

use super::values::Reader;
use super::{id_of, Read, Site, Tolerance, Want};
use crate::config::de::{self, Later, Nested, Num, Text};
use crate::config::model::{Object, Section};
use crate::config::problem::Cx;
use crate::config::reader::finite;

/// A `[[section]]` table as written.
#[derive(Deserialize, Default)]
struct Raw {
    id: Option<Text>,
    #[allow(dead_code)] // read element by element (`Tbl::array`)
    ground: Option<Later>,
    pool_gauge: Option<Text>,
    tail_gauge: Option<Text>,
    tail_level: Option<Num>,
    toe_station: Option<Num>,
    #[allow(dead_code)] // read element by element (`Tbl::array`)
    piezometers: Option<Later>,
    tolerance_s: Tolerance,
    model: Option<Nested>,
}

pub(super) fn read(cx: &mut Cx<'_>, r: &mut Reader<'_>, site: &Site<'_>) -> Read {
    let raw: Raw = de::table(cx, &r.t).unwrap_or_default();
    let id = id_of(&raw.id);
    let ground = ground(cx, r);
    let pool_gauge = r.reference(cx, "pool_gauge", raw.pool_gauge, true, Want::StageGauge);
    let tail = r.level(
        cx,
        ("tail_gauge", raw.tail_gauge),
        ("tail_level", raw.tail_level),
        false,
    );
    let toe = r.length(cx, "toe_station", raw.toe_station, true);
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
    let model = if raw.model.is_some() {
        let what = r.t.what.clone();
        crate::config::section_model::read(cx, &id, &what, r.m, tail.is_some())
    } else {
        None
    };
    let object = (|| {
        Some(Object::Section(Section {
            model,
            id,
            site: site.id.to_string(),
            ground: ground?,
            pool_gauge: pool_gauge?,
            tail,
            toe_station_m: toe?,
            piezometers: piezometers?,
            tolerance_s: 0,
        }))
    })();
    Read {
        id: raw.id,
        tolerance_s: raw.tolerance_s,
        object,
    }
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
