//! CSV tables of a report, written by the `csv` crate from one `Serialize` row type per table
//! (the field names are the header). Columns are documented in README "Reports"; times are
//! RFC 3339 in UTC, values in SI units with 4 decimals; empty cells mean "none in the period".

use serde::Serialize;

use super::data::{DerivedStats, InstrumentStats, ReportData};

fn time(t: Option<(i64, f64)>) -> String {
    t.map(|(t, _)| crate::present::format::utc(t))
        .unwrap_or_default()
}

fn val(v: Option<f64>) -> String {
    v.map(|v| format!("{v:.4}")).unwrap_or_default()
}

/// The rows as CSV, header first (from the row type's field names; a table without rows is
/// its header alone, taken from a blank row).
fn table<R: Serialize + Default>(rows: impl IntoIterator<Item = R>) -> anyhow::Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let mut any = false;
    for r in rows {
        w.serialize(r)?;
        any = true;
    }
    if !any {
        w.serialize(R::default())?;
    }
    let mut out = w.into_inner().map_err(|e| e.into_error())?;
    if !any {
        let header_end = out.iter().position(|&b| b == b'\n').map_or(0, |i| i + 1);
        out.truncate(header_end);
    }
    Ok(out)
}

/// A row of `instruments.csv`.
#[derive(Serialize, Default)]
struct InstrumentRow<'a> {
    instrument: &'a str,
    kind: &'a str,
    quantity: &'a str,
    unit: &'a str,
    latest_time: String,
    latest: String,
    min_time: String,
    min: String,
    max_time: String,
    max: String,
    change: String,
    readings: i64,
    expected: i64,
    completeness_pct: String,
    flagged: i64,
    status: &'a str,
}

impl<'a> From<&'a InstrumentStats> for InstrumentRow<'a> {
    fn from(i: &'a InstrumentStats) -> Self {
        InstrumentRow {
            instrument: &i.id,
            kind: i.kind,
            quantity: i.quantity,
            unit: i.unit,
            latest_time: time(i.latest),
            latest: val(i.latest.map(|x| x.1)),
            min_time: time(i.min),
            min: val(i.min.map(|x| x.1)),
            max_time: time(i.max),
            max: val(i.max.map(|x| x.1)),
            change: val(i.change()),
            readings: i.readings,
            expected: i.expected,
            completeness_pct: i
                .completeness_pct()
                .map(|c| format!("{c:.1}"))
                .unwrap_or_default(),
            flagged: i.flagged,
            status: i.status(),
        }
    }
}

/// A row of `derived.csv`.
#[derive(Serialize, Default)]
struct DerivedRow<'a> {
    object: &'a str,
    quantity: &'a str,
    unit: &'a str,
    latest_time: String,
    latest: String,
    min_time: String,
    min: String,
    max_time: String,
    max: String,
}

impl<'a> From<&'a DerivedStats> for DerivedRow<'a> {
    fn from(x: &'a DerivedStats) -> Self {
        DerivedRow {
            object: &x.object,
            quantity: &x.quantity,
            unit: &x.unit,
            latest_time: time(x.latest),
            latest: val(x.latest.map(|v| v.1)),
            min_time: time(x.min),
            min: val(x.min.map(|v| v.1)),
            max_time: time(x.max),
            max: val(x.max.map(|v| v.1)),
        }
    }
}

/// A row of `quarantine.csv`.
#[derive(Serialize, Default)]
struct QuarantineRow<'a> {
    reason: &'a str,
    count: i64,
}

/// The report's tables, named: `instruments` (one row per instrument: piezometers, then stage
/// gauges, then others), `derived` (toe checks, sections, nest gradients, blanket-theory
/// reaches) and `quarantine` (quarantined inputs in the period by reason, whole service).
///
/// # Errors
/// Writing fails (not expected in memory).
pub fn tables(d: &ReportData) -> anyhow::Result<[(&'static str, Vec<u8>); 3]> {
    let instruments = d.piezometers.iter().chain(&d.stages).chain(&d.others);
    let derived = d
        .toes
        .iter()
        .chain(&d.sections)
        .chain(&d.gradients)
        .chain(&d.blankets);
    let quarantine = d.quarantine.iter().map(|(reason, count)| QuarantineRow {
        reason,
        count: *count,
    });
    Ok([
        ("instruments", table(instruments.map(InstrumentRow::from))?),
        ("derived", table(derived.map(DerivedRow::from))?),
        ("quarantine", table(quarantine)?),
    ])
}
