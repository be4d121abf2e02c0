//! `[[nest]]`: nested piezometers at one place, for vertical gradients.
//!
//! Owns the nest keys and the deadband default.

use serde::Deserialize;

use super::values::Reader;
use super::{id_of, Read, Site, Tolerance, Want};
use crate::config::de::{self, AtLeast, Later, Text};
use crate::config::model::{Nest, Object};
use crate::config::problem::Cx;

/// |i| below which a nest reports no vertical flow, when `deadband` is not written.
const DEFAULT_DEADBAND: f64 = 0.02;

/// A `[[nest]]` table as written.
#[derive(Deserialize, Default)]
struct Raw {
    id: Option<Text>,
    #[allow(dead_code)] // read element by element (`Tbl::array`)
    piezometers: Option<Later>,
    deadband: Option<AtLeast<0>>,
    tolerance_s: Tolerance,
}

pub(super) fn read(cx: &mut Cx<'_>, r: &mut Reader<'_>, site: &Site<'_>) -> Read {
    let raw: Raw = de::table(cx, &r.t).unwrap_or_default();
    let piezometers = r.references(cx, "piezometers", 2, "piezometer", Want::Piezometer);
    let deadband = r.number(cx, "deadband", raw.deadband, false);
    let object = piezometers.map(|piezometers| {
        Object::Nest(Nest {
            id: id_of(&raw.id),
            site: site.id.to_string(),
            piezometers,
            deadband: deadband.unwrap_or(DEFAULT_DEADBAND),
            tolerance_s: 0,
        })
    });
    Read {
        id: raw.id,
        tolerance_s: raw.tolerance_s,
        object,
    }
}
