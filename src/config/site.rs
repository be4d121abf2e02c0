//! Reading one site file: the `[site]` table and its `[[instrument]]` tables (the object tables
//! are read by `objects`).
//!
//! Owns the site keys, the keys every instrument has, the kind/sub-table agreement and the
//! conversion of lengths to metres. Checks that span files (unique ids, barometer and object
//! references, logger channels) belong to `load`, which gets what it needs in `Entry`.

use std::path::Path;

use chrono::{DateTime, Utc};
use serde::Deserialize;

use crate::domain::units::GAMMA_W_62_4_PCF_KN_M3;

use super::de::{self, DateText, Int, Label, Nested, Num, Pair, Text};
use super::kinds::{self, KindName, M_PER_FT};
use super::limits;
use super::model::{DisplayUnits, Instrument, Location, Site};
use super::objects::{self, ObjEntry};
use super::problem::Cx;
use super::reader::Tbl;
use super::trends::{self, SiteTrendsEntry};

/// A 1-based (line, column) position in a file.
pub(crate) type Pos = (usize, usize);

/// Accepted unit weights of water (kN/m³): common practice, standard gravity, and 62.4 pcf.
const GAMMA_W: [f64; 3] = [9.81, 9.80665, GAMMA_W_62_4_PCF_KN_M3];

/// How close a written unit weight must be to an accepted one (62.4 pcf is 9.802258 kN/m³ to
/// the 6 decimals one would write).
const GAMMA_W_TOLERANCE: f64 = 1e-6;

/// The accepted unit weight `g` stands for, exactly.
fn accepted_gamma_w(g: f64) -> Option<f64> {
    GAMMA_W
        .iter()
        .copied()
        .find(|a| (a - g).abs() < GAMMA_W_TOLERANCE)
}

/// What `load` needs of one instrument for the checks across files.
pub(crate) struct Entry {
    /// The id, if it was readable, and where it is written.
    pub id: Option<(String, Pos)>,
    /// The kind name, if valid.
    pub kind: Option<&'static str>,
    /// A referenced barometer and where the reference is written.
    pub barometer: Option<(String, Pos)>,
    /// Logger and channel, and where the channel is written.
    pub logger_channel: Option<(String, String, Pos)>,
    /// A `tip_elevation` is written (a standpipe counts as a piezometer only with one).
    pub has_tip: bool,
    /// A `station` is written (section piezometers need one).
    pub has_station: bool,
    /// The validated instrument; `None` if it had problems (already reported).
    pub instrument: Option<Instrument>,
}

/// One site file read.
pub(crate) struct SiteFile {
    /// The site id and where it is written.
    pub id: Option<(String, Pos)>,
    pub site: Option<Site>,
    pub entries: Vec<Entry>,
    /// The `[[nest]]`, `[[toe]]`, `[[blanket]]` and `[[section]]` tables, in that order.
    pub objects: Vec<ObjEntry>,
    /// `[alerting]`, `[[contacts]]` and `[[rule]]` (see `config::rules`).
    pub alerting: super::rules::SiteRules,
    /// `[trends]`, `[health]`, `[[stage_response]]` and `[[hst]]`.
    pub trends: SiteTrendsEntry,
    /// `[[report]]` schedules (see `config::reports`).
    pub reports: Vec<super::reports::ReportEntry>,
}

/// Read a site file's root table.
pub(crate) fn read(cx: &mut Cx<'_>, root: &Tbl<'_>, file: &Path) -> SiteFile {
    let mut keys = vec!["site", "instrument"];
    keys.extend(objects::TABLES);
    keys.extend(super::rules::KEYS);
    keys.extend(trends::TABLES);
    keys.extend(super::reports::KEYS);
    root.check_keys(cx, &keys);
    let mut m_per_unit = 1.0;
    let mut gamma_w = 9.81;
    let mut id = None;
    let site = match root.part(cx, "site", "[site]") {
        Some(mut t) => {
            let before = cx.problems.len();
            let r: RawSite = de::named(cx, &mut t, ("site", "id"));
            let sid = t.need(cx, "id", r.id.map(|s| s.0));
            if t.has("id") {
                id = sid.clone().map(|s| (s, cx.pos(t.value_span("id"))));
            }
            if r.length_unit == Some(Length::Ft) {
                m_per_unit = M_PER_FT;
            }
            gamma_w = r.unit_weight_water_kn_m3.map_or(gamma_w, |g| g.0);
            let site = sid.map(|sid| Site {
                name: r.name.map_or_else(|| sid.clone(), |n| n.0),
                id: sid,
                time_zone: r.time_zone.map_or_else(|| "UTC".into(), |z| z.0),
                gamma_w_kn_m3: gamma_w,
                display_units: r.display_units.unwrap_or(DisplayUnits::Si),
                file: file.to_path_buf(),
            });
            site.filter(|_| cx.problems.len() == before)
        }
        None => {
            if !root.has("site") {
                root.problem(cx, "missing [site] table; expected one per site file");
            }
            None
        }
    };
    let site_id = id.as_ref().map_or_else(String::new, |(s, _)| s.clone());
    let entries = root
        .tables(cx, "instrument")
        .into_iter()
        .map(|mut t| instrument(cx, &mut t, &site_id, m_per_unit))
        .collect();
    let objects = objects::read(cx, root, &site_id, m_per_unit, gamma_w);
    let alerting = super::rules::read(cx, root, &site_id);
    let trends = trends::read(cx, root, &site_id, m_per_unit);
    let reports = super::reports::read(cx, root, &site_id);
    SiteFile {
        id,
        site,
        entries,
        objects,
        alerting,
        trends,
        reports,
    }
}

/// `[site]` as written; checks in its value types and `read`.
#[derive(Deserialize, Default)]
struct RawSite {
    id: Option<Text>,
    name: Option<Text>,
    time_zone: Option<Zone>,
    unit_weight_water_kn_m3: Option<GammaW>,
    display_units: Option<DisplayUnits>,
    length_unit: Option<Length>,
}

/// `time_zone`: an IANA time zone name.
struct Zone(String);

impl<'de> Deserialize<'de> for Zone {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let z = String::deserialize(d)?;
        if z.parse::<chrono_tz::Tz>().is_err() {
            return Err(serde::de::Error::custom(format!(
                "is {z:?}, expected an IANA time zone name such as \"UTC\" or \"America/Chicago\""
            )));
        }
        Ok(Zone(z))
    }
}

/// `unit_weight_water_kn_m3`: one of the accepted unit weights of water (kN/m³), exactly.
struct GammaW(f64);

impl<'de> Deserialize<'de> for GammaW {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let Num(g) = Num::deserialize(d)?;
        accepted_gamma_w(g).map(GammaW).ok_or_else(|| {
            serde::de::Error::custom(format!(
                "is {g}, expected one of: 9.81, 9.80665, 9.802258 (62.4 pcf)"
            ))
        })
    }
}

/// `length_unit` as written.
#[derive(Deserialize, PartialEq, Eq)]
#[serde(rename_all = "lowercase")]
enum Length {
    M,
    Ft,
}

/// `[[instrument]]` as written (the kind sub-tables, `Nested`, are read by `kinds`); checks in
/// `instrument`.
#[derive(Deserialize, Default)]
#[allow(dead_code)] // the `Nested` fields: accepted keys, read as tables of their own
struct RawInstrument {
    id: Option<Text>,
    calibrated: Option<DateText>,
    kind: Option<KindName>,
    reach: Option<Text>,
    section: Option<Text>,
    station: Option<Num>,
    offset: Option<Num>,
    tip_elevation: Option<Num>,
    installed: Option<DateText>,
    interval_s: Option<Int<1, { limits::YEAR_S }>>,
    range: Option<Pair>,
    logger: Option<Label>,
    channel: Option<Label>,
    vibrating_wire: Option<Nested>,
    pressure_transducer: Option<Nested>,
    standpipe: Option<Nested>,
    stage_gauge: Option<Nested>,
    barometer: Option<Nested>,
}

/// Parse `installed`: an RFC 3339 date (midnight UTC) or date-time.
pub(crate) fn parse_installed(s: &str) -> Option<DateTime<Utc>> {
    crate::timetext::instant(s).ok()
}

/// A date or date-time key (`parse_installed`), with a problem saying what is `expected`.
fn instant(
    cx: &mut Cx<'_>,
    t: &Tbl<'_>,
    (key, text): (&str, Option<DateText>),
    expected: &str,
) -> Option<DateTime<Utc>> {
    let text = text?.0;
    let parsed = parse_installed(&text);
    if parsed.is_none() {
        let message = format!("key \"{key}\" is {text:?}, expected {expected}");
        t.problem_at(cx, key, message);
    }
    parsed
}

fn instrument(cx: &mut Cx<'_>, t: &mut Tbl<'_>, site: &str, m_per_unit: f64) -> Entry {
    let before = cx.problems.len();
    let r: RawInstrument = de::named(cx, t, ("instrument", "id"));
    let id = t.need(cx, "id", r.id.map(|s| s.0));
    let id_pos = cx.pos(t.value_span("id"));
    let kind_name = t.need(cx, "kind", r.kind);
    let present: Vec<&str> = de::variants::<KindName>()
        .iter()
        .copied()
        .filter(|k| t.has(k))
        .collect();
    let mut kind_read = None;
    if let Some(kind) = kind_name {
        let name = kind.name();
        let others: Vec<&str> = present.into_iter().filter(|k| *k != name).collect();
        if let ([other], false) = (others.as_slice(), t.has(name)) {
            // The usual slip: `kind` and the settings table disagree. One problem, not two.
            cx.at(
                t.key_span(other),
                format!(
                    "{}: kind = \"{name}\" but the settings table is [instrument.{other}]; \
                     expected [instrument.{name}] (or kind = \"{other}\")",
                    t.what
                ),
            );
        } else {
            for other in &others {
                cx.at(
                    t.key_span(other),
                    format!(
                        "{}: [instrument.{other}] does not match kind = \"{name}\"; expected only [instrument.{name}]",
                        t.what
                    ),
                );
            }
            match t.sub(cx, name, &format!("[instrument.{name}]")) {
                Some(sub) => kind_read = Some(kinds::read(cx, kind, &sub, m_per_unit)),
                None if !t.has(name) => t.problem(
                    cx,
                    format!("kind = \"{name}\" but there is no [instrument.{name}] table; expected one with its settings"),
                ),
                None => {}
            }
        }
        if kind.piezometer() && !t.has("tip_elevation") {
            let why = format!(" (required for kind = \"{name}\")");
            t.missing(cx, "tip_elevation", &why);
        }
    }
    let metres = |v: Option<Num>| v.map(|v| v.0 * m_per_unit);
    let location = Location {
        reach: r.reach.map(|s| s.0),
        section: r.section.map(|s| s.0),
        station_m: metres(r.station),
        offset_m: metres(r.offset),
    };
    let installed = t.need(cx, "installed", r.installed);
    let installed = instant(
        cx,
        t,
        ("installed", installed),
        "an RFC 3339 date (2025-03-01) or date-time (2025-03-01T08:00:00Z)",
    );
    // The date of the last calibration (optional; shown in the report's instrument table).
    let calibrated = instant(
        cx,
        t,
        ("calibrated", r.calibrated),
        "the date of the last calibration (2025-03-01)",
    );
    let interval_s = t.need(cx, "interval_s", r.interval_s);
    let raw_range = t.need(cx, "range", r.range);
    if t.has("logger") != t.has("channel") {
        t.problem(
            cx,
            "expected both \"logger\" and \"channel\", or neither (they map logger channels to this instrument)",
        );
    }
    let (logger, channel) = (r.logger.map(|l| l.0), r.channel.map(|c| c.0));
    let barometer = kind_read
        .as_mut()
        .and_then(|k| k.barometer.take())
        .map(|(name, span)| (name, cx.pos(span)));
    let logger_channel = match (&logger, &channel) {
        (Some(l), Some(c)) => Some((l.clone(), c.clone(), cx.pos(t.value_span("channel")))),
        _ => None,
    };
    let kind = kind_read.and_then(|k| k.kind);
    let instrument = match (&id, kind, installed, interval_s, raw_range) {
        (Some(id), Some(kind), Some(installed), Some(interval_s), Some(Pair(lo, hi)))
            if cx.problems.len() == before =>
        {
            Some(Instrument {
                id: id.clone(),
                site: site.to_string(),
                kind,
                location,
                tip_elevation_m: metres(r.tip_elevation),
                installed,
                calibrated,
                interval_s: interval_s.u64(),
                raw_range: (lo, hi),
                logger,
                channel,
            })
        }
        _ => None,
    };
    Entry {
        id: id.map(|s| (s, id_pos)),
        kind: kind_name.map(KindName::name),
        barometer,
        logger_channel,
        has_tip: t.has("tip_elevation"),
        has_station: t.has("station"),
        instrument,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_kind_has_its_sub_table_key() {
        let keys = de::fields::<RawInstrument>();
        for kind in de::variants::<KindName>() {
            assert!(
                keys.contains(kind),
                "RawInstrument lacks `{kind}: Option<Nested>`"
            );
        }
    }
}
