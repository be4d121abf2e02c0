//! CSV tables of a report. Columns are documented in README "Reports"; times are RFC 3339 in
//! UTC, values in SI units; empty cells mean "none in the period".

use std::fmt::Write as _;

use chrono::{SecondsFormat, TimeZone, Utc};

use super::data::{DerivedStats, InstrumentStats, ReportData};

fn time(t: Option<(i64, f64)>) -> String {
    t.and_then(|(t, _)| Utc.timestamp_millis_opt(t).single())
        .map(|t| t.to_rfc3339_opts(SecondsFormat::Secs, true))
        .unwrap_or_default()
}

fn val(v: Option<f64>) -> String {
    v.map(|v| format!("{v:.4}")).unwrap_or_default()
}

/// Quote a field if it needs it (RFC 4180).
fn field(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// Header of `instruments.csv`.
pub const INSTRUMENTS_HEADER: &str = "instrument,kind,quantity,unit,latest_time,latest,min_time,min,max_time,max,change,readings,expected,completeness_pct,flagged,status";

/// `instruments.csv`: one row per instrument (piezometers, then stage gauges, then others).
pub fn instruments(d: &ReportData) -> String {
    let mut s = String::from(INSTRUMENTS_HEADER);
    s.push('\n');
    for i in d.piezometers.iter().chain(&d.stages).chain(&d.others) {
        row(&mut s, i);
    }
    s
}

fn row(s: &mut String, i: &InstrumentStats) {
    let _ = writeln!(
        s,
        "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
        field(&i.id),
        i.kind,
        i.quantity,
        i.unit,
        time(i.latest),
        val(i.latest.map(|x| x.1)),
        time(i.min),
        val(i.min.map(|x| x.1)),
        time(i.max),
        val(i.max.map(|x| x.1)),
        val(i.change()),
        i.readings,
        i.expected,
        i.completeness_pct()
            .map(|c| format!("{c:.1}"))
            .unwrap_or_default(),
        i.flagged,
        i.status()
    );
}

/// Header of `derived.csv`.
pub const DERIVED_HEADER: &str =
    "object,quantity,unit,latest_time,latest,min_time,min,max_time,max";

/// `derived.csv`: toe checks, sections, nest gradients and blanket-theory reaches.
pub fn derived(d: &ReportData) -> String {
    let mut s = String::from(DERIVED_HEADER);
    s.push('\n');
    let all: Vec<&DerivedStats> = d
        .toes
        .iter()
        .chain(&d.sections)
        .chain(&d.gradients)
        .chain(&d.blankets)
        .collect();
    for x in all {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{}",
            field(&x.object),
            field(&x.quantity),
            field(&x.unit),
            time(x.latest),
            val(x.latest.map(|v| v.1)),
            time(x.min),
            val(x.min.map(|v| v.1)),
            time(x.max),
            val(x.max.map(|v| v.1)),
        );
    }
    s
}

/// Header of `quarantine.csv`.
pub const QUARANTINE_HEADER: &str = "reason,count";

/// `quarantine.csv`: quarantined inputs in the period by reason (whole service).
pub fn quarantine(d: &ReportData) -> String {
    let mut s = String::from(QUARANTINE_HEADER);
    s.push('\n');
    for (r, n) in &d.quarantine {
        let _ = writeln!(s, "{},{n}", field(r));
    }
    s
}
