//! Settling an object's instrument references once every site file is read: each named
//! instrument must exist, belong to the object's site and be of the right kind; and the default
//! tolerance is 1.5 × the largest interval of the inputs.
//!
//! Owns the reference messages and the tolerance rule. Must not read TOML (that is `objects`)
//! nor check that ids are unique (that is `load`).

use std::collections::BTreeMap;

use super::{Entry, Object, Ref, Want};
use crate::config::site::Pos;

/// What the reference checks need of an id already written in some site file.
pub(crate) struct Known<'a> {
    /// `file:line` where the id is written, for messages.
    pub at: String,
    /// Site id of that file ("" when it could not be read).
    pub site: &'a str,
    /// The instrument's kind name, or an object's table name; `None` for an invalid kind.
    pub kind: Option<&'a str>,
    /// An object, not an instrument.
    pub object: bool,
    /// The instrument has a `tip_elevation` (standpipes are piezometers only with one).
    pub has_tip: bool,
    /// The instrument has a `station` (section piezometers need one).
    pub has_station: bool,
    /// The instrument's `interval_s`, when it validated (for the default tolerance).
    pub interval_s: Option<u64>,
}

/// Default tolerance = this × the largest `interval_s` of the inputs, in whole seconds (rounded
/// up), so that one late reading of the slowest input still pairs.
const TOLERANCE_PER_INTERVAL: (u64, u64) = (3, 2);

/// What an entry holds once its references are settled: an object takes its tolerance (`None`
/// without one), a model has none.
pub(crate) trait Settle: Clone {
    fn settle(self, tolerance_s: Option<i64>) -> Option<Self>;
}

impl Settle for Object {
    fn settle(mut self, t: Option<i64>) -> Option<Self> {
        self.set_tolerance(t?);
        Some(self)
    }
}

/// Check `e`'s references against every known id (`site`: the object's site id) and settle its
/// tolerance. Returns the problems (position, message), and the finished object when there
/// were none and its own table was valid.
pub(crate) fn resolve<T: Settle>(
    e: &Entry<T>,
    site: &str,
    ids: &BTreeMap<&str, Known<'_>>,
) -> (Vec<(Pos, String)>, Option<T>) {
    let mut problems = Vec::new();
    let mut largest = None::<u64>;
    for r in &e.refs {
        let known = ids.get(r.id.as_str());
        match problem(&e.what, site, r, known) {
            Some(message) => problems.push((r.pos, message)),
            None => largest = largest.max(known.and_then(|k| k.interval_s)),
        }
    }
    let tolerance = e.tolerance_s.or_else(|| {
        let (num, den) = TOLERANCE_PER_INTERVAL;
        let t = largest?.saturating_mul(num).div_ceil(den);
        Some(i64::try_from(t).unwrap_or(i64::MAX))
    });
    let object = e.object.clone().filter(|_| problems.is_empty());
    (problems, object.and_then(|o| o.settle(tolerance)))
}

/// How a reference's expected target is named.
fn expected(want: Want) -> &'static str {
    match want {
        Want::Piezometer => {
            "a piezometer (vibrating_wire, pressure_transducer, or standpipe with tip_elevation)"
        }
        Want::StationedPiezometer => {
            "a piezometer (vibrating_wire, pressure_transducer, or standpipe with tip_elevation) \
             with a station"
        }
        Want::StageGauge => "a stage_gauge",
    }
}

/// The problem with one reference, if any.
pub(crate) fn problem(
    what: &str,
    site: &str,
    r: &Ref,
    known: Option<&Known<'_>>,
) -> Option<String> {
    let head = format!("{what}: key \"{}\" names {:?}", r.key, r.id);
    let want = expected(r.want);
    let Some(k) = known else {
        return Some(format!(
            "{head}, which is not an instrument in any site file; expected the id of {want} \
             of site {site:?}"
        ));
    };
    let at = &k.at;
    if k.object {
        let table = k.kind.unwrap_or_default();
        return Some(format!(
            "{head}, which is a [[{table}]] object (at {at}), not an instrument; expected the id \
             of {want}"
        ));
    }
    if !site.is_empty() && !k.site.is_empty() && k.site != site {
        return Some(format!(
            "{head}, an instrument of site {:?} (at {at}); expected {want} of this site {site:?}",
            k.site
        ));
    }
    // An invalid kind is reported at the instrument already.
    let kind = k.kind?;
    let fits = match r.want {
        Want::StageGauge => kind == "stage_gauge",
        Want::Piezometer | Want::StationedPiezometer => {
            matches!(kind, "vibrating_wire" | "pressure_transducer")
                || (kind == "standpipe" && k.has_tip)
        }
    };
    if !fits {
        let found = if kind == "standpipe" {
            "a standpipe without tip_elevation".to_string()
        } else {
            format!("a {kind}")
        };
        return Some(format!("{head}, {found} (at {at}); expected {want}"));
    }
    if r.want == Want::StationedPiezometer && !k.has_station {
        return Some(format!(
            "{head}, which has no station (at {at}); expected {want}, the station placing it on \
             the section"
        ));
    }
    None
}
