//! The report's instrument table, "where the instruments are": one set of columns (kind,
//! reach, section, station, offset, tip elevation, installed, last calibration, reading
//! interval) that the HTML shows whole and the PDF, on a narrower page, in part.

use chrono::{TimeZone, Utc};
use chrono_tz::Tz;

use super::data::ReportData;
use super::html::local;
use crate::present::format::{duration, shown_bare};
use crate::present::units::unit_label;
use crate::present::{kind_name, Measure};

/// One column: its header, its cells (one per instrument, in the report's order), whether it
/// is left-aligned (words) and its share of the PDF table's width (0: not in the PDF).
pub(crate) struct Column {
    pub header: String,
    pub left: bool,
    #[cfg_attr(not(feature = "pdf"), allow(dead_code))]
    pub pdf_width: f32,
    pub cells: Vec<String>,
}

/// A date as written in the site file (the UTC date: `calibrated = 2025-03-01` reads
/// 2025-03-01 whatever the site's time zone).
fn date(t_ms: Option<i64>) -> String {
    t_ms.and_then(|t| Utc.timestamp_millis_opt(t).single())
        .map_or_else(|| "—".into(), |t| t.format("%Y-%m-%d").to_string())
}

/// The instrument table's columns (piezometers, then stage gauges, then others).
pub(crate) fn columns(d: &ReportData, tz: Tz) -> Vec<Column> {
    let u = d.units;
    let l = unit_label(Measure::Length, u, "m");
    let all: Vec<_> = d
        .piezometers
        .iter()
        .chain(&d.stages)
        .chain(&d.others)
        .collect();
    let text = |v: Option<&String>| v.map_or_else(|| "—".into(), |s| s.clone());
    let num = |v: Option<f64>, m: Measure| v.map_or_else(|| "—".into(), |v| shown_bare(v, m, u));
    let column =
        |header: String, left: bool, pdf_width: f32, cell: &dyn Fn(usize) -> String| Column {
            header,
            left,
            pdf_width,
            cells: (0..all.len()).map(cell).collect(),
        };
    vec![
        column("Instrument".into(), true, 1.2, &|k| all[k].id.clone()),
        column("Kind".into(), true, 2.4, &|k| kind_name(all[k].kind)),
        column("Reach".into(), true, 0.7, &|k| {
            text(all[k].location.reach.as_ref())
        }),
        column("Section".into(), true, 0.0, &|k| {
            text(all[k].location.section.as_ref())
        }),
        column(format!("Station ({l})"), false, 1.0, &|k| {
            num(all[k].location.station_m, Measure::Position)
        }),
        column(format!("Offset ({l})"), false, 1.0, &|k| {
            num(all[k].location.offset_m, Measure::Position)
        }),
        column(format!("Tip elevation ({l})"), false, 1.3, &|k| {
            num(all[k].tip_elevation_m, Measure::Length)
        }),
        column("Installed".into(), false, 1.5, &|k| {
            // Written as a date (midnight UTC): shown as that date, never as the evening before
            // in a time zone west of UTC; written with a time: in the site's time.
            let t = all[k].installed_ms;
            if t.rem_euclid(86_400_000) == 0 {
                date(Some(t))
            } else {
                local(t, tz)
            }
        }),
        column("Last calibration".into(), false, 1.3, &|k| {
            date(all[k].calibrated_ms)
        }),
        column("Reading every".into(), false, 0.0, &|k| {
            duration(all[k].interval_s as i64)
        }),
    ]
}
