//! Reading a site file's derived-quantity objects — one table per `ObjectKind` (`[[nest]]`,
//! `[[toe]]`, `[[blanket]]`, `[[section]]`) — into the `model` objects, lengths converted to
//! metres.
//!
//! Owns the registry dispatch (`read`: every kind of `ObjectKind::ALL`, one `match` naming each
//! kind's reader) and what every object has (`id`, `tolerance_s`, its references). Each kind's
//! keys, declared once in a `#[derive(Deserialize)]` raw struct read with `de::table`, and their
//! checks live in that kind's file (`nest`, `toe`, `blanket`, `section`); `values` holds the
//! checks they share. It must not decide what a reference names: whether the instrument
//! exists, belongs to the same site and is of the right kind, and the default tolerance (from
//! the inputs' intervals) need every site file, so `read` records each reference and
//! `refs::resolve` settles them for `load`.

mod blanket;
mod nest;
mod refs;
mod section;
mod toe;
mod values;

use super::de::{Int, Text};
use super::limits;
use super::model::Object;
use super::problem::Cx;
use super::reader::Tbl;
use super::site::Pos;
use crate::objkind::ObjectKind;

pub(crate) use refs::{resolve, Known, Settle};
pub(crate) use values::Reader;

/// The object tables of a site file, as written (`[[nest]]` ...), from the registry.
pub(crate) const TABLES: [&str; ObjectKind::ALL.len()] = {
    let mut tables = [""; ObjectKind::ALL.len()];
    let mut i = 0;
    while i < tables.len() {
        tables[i] = ObjectKind::ALL[i].table();
        i += 1;
    }
    tables
};

/// `tolerance_s` as every object table declares it.
pub(crate) type Tolerance = Option<Int<1, { limits::YEAR_S }>>;

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

/// What `load` needs of one object table (`T`: `Object`) or model table (`trends::Model`).
pub(crate) struct Entry<T> {
    /// The table name, as written (`nest`, `hst`...).
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
    pub object: Option<T>,
}

/// One object table.
pub(crate) type ObjEntry = Entry<Object>;

/// What a kind's reader gives back: the keys every object has, and the object (`None` after a
/// problem).
pub(crate) struct Read<T = Object> {
    pub id: Option<Text>,
    pub tolerance_s: Tolerance,
    pub object: Option<T>,
}

/// What every kind's reader gets: the site's id, length unit (`Reader::m`) and unit weight of
/// water (kN/m³).
pub(super) struct Site<'a> {
    pub id: &'a str,
    pub gamma_w: f64,
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
    let site = Site {
        id: site,
        gamma_w: gamma_w_kn_m3,
    };
    let mut out = Vec::new();
    for kind in ObjectKind::ALL {
        for t in root.tables(cx, kind.table()) {
            out.push(entry(cx, t, kind.table(), m_per_unit, |cx, r| match kind {
                ObjectKind::Nest => nest::read(cx, r, &site),
                ObjectKind::Toe => toe::read(cx, r, &site),
                ObjectKind::Blanket => blanket::read(cx, r, &site),
                ObjectKind::Section => section::read(cx, r, &site),
            }));
        }
    }
    out
}

/// Read one object or model table `t` of `table` with `read` (`m`: metres per site length
/// unit): named `table "id"` in messages once its id is known, references recorded, the
/// value kept only when the table had no problem.
pub(crate) fn entry<T>(
    cx: &mut Cx<'_>,
    mut t: Tbl<'_>,
    table: &'static str,
    m: f64,
    read: impl FnOnce(&mut Cx<'_>, &mut Reader<'_>) -> Read<T>,
) -> Entry<T> {
    let before = cx.problems.len();
    if let Some(id) = t.peek_str("id").filter(|id| !id.trim().is_empty()) {
        t.what = format!("{table} {id:?}");
    }
    let mut r = Reader {
        t,
        m,
        refs: Vec::new(),
    };
    let read = read(cx, &mut r);
    let id = r.t.need(cx, "id", read.id).map(|Text(id)| id);
    let id_pos = cx.pos(r.t.value_span("id"));
    let ok = id.is_some() && cx.problems.len() == before;
    Entry {
        table,
        what: r.t.what,
        id: id.map(|s| (s, id_pos)),
        refs: r.refs,
        tolerance_s: read.tolerance_s.map(|Int(t)| t),
        object: read.object.filter(|_| ok),
    }
}

/// The id as the model objects hold it ("" when missing: such an object is dropped).
fn id_of(id: &Option<Text>) -> String {
    id.as_ref().map(|t| t.0.clone()).unwrap_or_default()
}
