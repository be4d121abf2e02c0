//! `seepd replay`: push a file of historical readings through the same engine and store as the
//! live service, and write one NDJSON record per computed value.
//!
//! Input formats: `ndjson` (one JSON reading object per line, the same shape the JSON payload
//! decoder takes, with the instrument id in the `instrument` field), `csv`
//! (`time,instrument,value[,temperature]` per line) and `senml` (one SenML pack per line).

use std::io::{BufRead, Write};
use std::sync::Arc;

use chrono::{DateTime, SecondsFormat, TimeZone, Utc};
use serde::Serialize;

use crate::config::{Config, EpochUnit, JsonFields, PayloadFormat, Subscription};
use crate::engine::{Engine, Message};
use crate::store::{DerivedRow, QuarantineRow, ReadingRow, Store};

/// The pseudo-topic replayed messages carry.
pub const REPLAY_TOPIC: &str = "replay";
/// Messages per committed batch.
const BATCH: usize = 5000;

/// Totals of a replay run.
#[derive(Debug, Default, Clone, Copy, PartialEq, Eq)]
pub struct Totals {
    pub lines: u64,
    pub readings: u64,
    pub duplicates: u64,
    pub quarantined: u64,
    pub records: u64,
}

/// One output record (see README "Replay output").
#[derive(Debug, Serialize)]
#[serde(tag = "type", rename_all = "snake_case")]
pub enum Record<'a> {
    /// A computed value of an instrument.
    Value {
        id: &'a str,
        quantity: &'static str,
        time: String,
        value: f64,
        unit: &'static str,
        #[serde(skip_serializing_if = "Vec::is_empty")]
        flags: Vec<&'static str>,
    },
    /// A derived quantity of an object (cluster, toe check, blanket reach, section).
    Derived {
        id: &'a str,
        quantity: &'a str,
        time: String,
        value: Option<f64>,
        unit: &'static str,
        #[serde(skip_serializing_if = "Option::is_none")]
        reason: Option<&'a str>,
        inputs: &'a [String],
    },
    /// An input that went to quarantine.
    Quarantine {
        line: u64,
        reason: &'static str,
        detail: &'a str,
    },
}

/// The subscription replay decodes with: instrument ids in the payload.
pub fn replay_subscription(format: PayloadFormat) -> Subscription {
    Subscription {
        pattern: REPLAY_TOPIC.into(),
        filter: REPLAY_TOPIC.into(),
        qos: 1,
        format,
        epoch_unit: EpochUnit::Auto,
        json: JsonFields {
            time: "time".into(),
            instrument: "instrument".into(),
            channel: "channel".into(),
            value: "value".into(),
            temperature: "temperature".into(),
            readings: "readings".into(),
        },
    }
}

/// The configuration replay runs on: `cfg` with the replay subscription only.
pub fn replay_config(cfg: &Config, format: PayloadFormat) -> Config {
    let mut c = cfg.clone();
    c.subscriptions = vec![replay_subscription(format)];
    c
}

fn rfc3339(t_ms: i64) -> String {
    Utc.timestamp_millis_opt(t_ms).single().map_or_else(
        || t_ms.to_string(),
        |t| t.to_rfc3339_opts(SecondsFormat::Millis, true),
    )
}

/// The computed values of one reading, as (quantity, value, unit).
pub fn quantities(r: &ReadingRow) -> Vec<(&'static str, f64, &'static str)> {
    let mut v = vec![("engineering_value", r.eng_value, r.eng_unit)];
    if let Some(p) = r.pressure_kpa {
        v.push(("pressure", p, "kPa"));
    }
    if let Some(h) = r.pressure_head_m {
        v.push(("pressure_head", h, "m"));
    }
    if let Some(h) = r.total_head_m {
        v.push(("total_head", h, "m"));
    }
    v
}

/// Replay `input` into `store`, writing NDJSON records to `out`.
///
/// # Errors
/// Read/write errors and database errors. Bad lines are not errors: they are quarantined.
pub fn run(
    cfg: &Config,
    format: PayloadFormat,
    input: impl BufRead,
    store: &mut Store,
    out: &mut impl Write,
    now: DateTime<Utc>,
) -> anyhow::Result<Totals> {
    let replay_cfg = Arc::new(replay_config(cfg, format));
    let mut engine = Engine::new(Arc::clone(&replay_cfg));
    // Continue the trends, health state and models already in the database (if any).
    crate::watch::seed::from_store(
        engine.watch_mut(),
        &replay_cfg,
        store,
        now.timestamp_millis(),
    )?;
    let mut totals = Totals::default();
    let mut readings: Vec<ReadingRow> = Vec::with_capacity(BATCH);
    let mut derived: Vec<DerivedRow> = Vec::new();
    let mut quarantined: Vec<(u64, QuarantineRow)> = Vec::new();
    let mut pending = 0usize;
    for line in input.lines() {
        let line = line?;
        totals.lines += 1;
        if line.trim().is_empty() || (format == PayloadFormat::Csv && line.starts_with('#')) {
            continue;
        }
        let msg = Message {
            topic: REPLAY_TOPIC.into(),
            payload: line.into_bytes(),
            arrival: now,
            redelivered: false,
        };
        let o = engine.process(&msg);
        readings.extend(o.readings);
        derived.extend(o.derived);
        quarantined.extend(o.quarantined.into_iter().map(|q| (totals.lines, q)));
        pending += 1;
        if pending >= BATCH {
            flush(
                store,
                &mut readings,
                &mut derived,
                &mut quarantined,
                out,
                &mut totals,
            )?;
            pending = 0;
        }
    }
    flush(
        store,
        &mut readings,
        &mut derived,
        &mut quarantined,
        out,
        &mut totals,
    )?;
    out.flush()?;
    Ok(totals)
}

fn flush(
    store: &mut Store,
    readings: &mut Vec<ReadingRow>,
    derived: &mut Vec<DerivedRow>,
    quarantined: &mut Vec<(u64, QuarantineRow)>,
    out: &mut impl Write,
    totals: &mut Totals,
) -> anyhow::Result<()> {
    let q: Vec<QuarantineRow> = quarantined.iter().map(|(_, q)| q.clone()).collect();
    let stats = store.write_batch(readings, derived, &q)?;
    totals.readings += stats.inserted as u64;
    totals.duplicates += stats.duplicates as u64;
    totals.quarantined += q.len() as u64;
    for r in readings.iter() {
        let time = rfc3339(r.t_ms);
        for (quantity, value, unit) in quantities(r) {
            let rec = Record::Value {
                id: &r.instrument,
                quantity,
                time: time.clone(),
                value,
                unit,
                flags: r.flags.names(),
            };
            serde_json::to_writer(&mut *out, &rec)?;
            out.write_all(b"\n")?;
            totals.records += 1;
        }
    }
    for d in derived.iter() {
        let rec = Record::Derived {
            id: &d.object,
            quantity: &d.quantity,
            time: rfc3339(d.t_ms),
            value: d.value,
            unit: d.unit,
            reason: d.reason.as_deref(),
            inputs: &d.inputs,
        };
        serde_json::to_writer(&mut *out, &rec)?;
        out.write_all(b"\n")?;
        totals.records += 1;
    }
    for (line, q) in quarantined.iter() {
        let rec = Record::Quarantine {
            line: *line,
            reason: q.reason.code(),
            detail: &q.detail,
        };
        serde_json::to_writer(&mut *out, &rec)?;
        out.write_all(b"\n")?;
        totals.records += 1;
    }
    readings.clear();
    derived.clear();
    quarantined.clear();
    Ok(())
}
