//! `seepd replay`: push a file of historical readings through the same engine and store as the
//! live service, and write one NDJSON record per computed value and per alert transition (the
//! rules evaluated in the readings' time; email only with `--send-email`).
//!
//! Input formats: `ndjson` (one JSON reading object per line, the same shape the JSON payload
//! decoder takes, with the instrument id in the `instrument` field), `csv`
//! (`time,instrument,value[,temperature]` per line) and `senml` (one SenML pack per line).

use crate::present::format::clean;
use std::fs::File;
use std::io::{BufRead, BufReader, BufWriter, Write};
use std::path::PathBuf;
use std::sync::Arc;

use anyhow::Context as _;

use chrono::{DateTime, SecondsFormat, TimeZone, Utc};
use serde::Serialize;

use crate::alerts::{Evaluator, Transition};
use crate::command::{is_broken_pipe, ConfigDir, Run};
use crate::config::{Config, EpochUnit, JsonFields, PayloadFormat, Subscription};
use crate::engine::{Engine, Message, Outcome};
use crate::store::{AlertWrites, DerivedRow, FlagUpdate, QuarantineRow, ReadingRow, Store};

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
        time: &'a str,
        value: f64,
        unit: &'static str,
        #[serde(skip_serializing_if = "<[_]>::is_empty")]
        flags: &'a [&'static str],
    },
    /// A derived quantity of an object (nest, toe check, blanket reach, section).
    Derived {
        id: &'a str,
        quantity: &'a str,
        time: &'a str,
        value: Option<f64>,
        unit: &'static str,
        #[serde(skip_serializing_if = "Option::is_none")]
        reason: Option<&'a str>,
        inputs: &'a [String],
    },
    /// An alert transition (see README "Replay output").
    Alert {
        alert: i64,
        rule: &'a str,
        action: &'static str,
        level: &'a str,
        #[serde(skip_serializing_if = "Option::is_none")]
        previous_level: Option<&'a str>,
        id: &'a str,
        quantity: &'a str,
        time: &'a str,
        value: Option<f64>,
        unit: &'a str,
        bound: f64,
        direction: &'static str,
    },
    /// Flags found for a reading after its own record (a spike confirmed by the next reading).
    Flag {
        id: &'a str,
        time: &'a str,
        flags: &'a [&'static str],
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
        json: JsonFields::default(),
    }
}

/// `seepd replay`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Args {
    #[command(flatten)]
    config: ConfigDir,
    /// The readings, one per line.
    #[arg(long, value_name = "FILE")]
    input: PathBuf,
    /// How each line is written: a JSON reading, `time,instrument,value[,temperature]`, or a
    /// SenML pack.
    #[arg(long, value_enum, default_value = "ndjson")]
    format: Format,
    /// Store into this SQLite database (default: in memory only).
    #[arg(long, value_name = "FILE")]
    db: Option<PathBuf>,
    /// Write records here (default: standard output).
    #[arg(long, value_name = "FILE")]
    output: Option<PathBuf>,
    /// Also send the alert messages through [smtp] (default: alert records only).
    #[arg(long)]
    send_email: bool,
}

/// Replay input formats.
#[derive(Debug, Clone, Copy, clap::ValueEnum)]
pub enum Format {
    Ndjson,
    Csv,
    Senml,
}

impl From<Format> for PayloadFormat {
    fn from(f: Format) -> Self {
        match f {
            Format::Ndjson => PayloadFormat::Json,
            Format::Csv => PayloadFormat::Csv,
            Format::Senml => PayloadFormat::Senml,
        }
    }
}

impl Run for Args {
    fn run(self, now: DateTime<Utc>) -> anyhow::Result<()> {
        let cfg = self.config.load()?;
        let mut store = match &self.db {
            Some(p) => Store::open(p)?,
            None => Store::open_in_memory()?,
        };
        store.sync_instruments(&cfg, now)?;
        let input = &self.input;
        let reader = BufReader::new(
            File::open(input).with_context(|| format!("opening {}", input.display()))?,
        );
        let mut out: Box<dyn Write> = match &self.output {
            Some(p) => Box::new(BufWriter::new(
                File::create(p).with_context(|| format!("creating {}", p.display()))?,
            )),
            None => Box::new(BufWriter::new(std::io::stdout().lock())),
        };
        let started = std::time::Instant::now();
        let format = self.format.into();
        let t = run_with(
            &cfg,
            format,
            reader,
            &mut store,
            &mut out,
            now,
            self.send_email,
        );
        let t = match t {
            Err(e) if is_broken_pipe(&e) => return Ok(()),
            other => other?,
        };
        eprintln!(
            "replay: {} lines, {} readings stored, {} duplicates, {} quarantined, {} records in \
             {:.3} s",
            t.lines,
            t.readings,
            t.duplicates,
            t.quarantined,
            t.records,
            started.elapsed().as_secs_f64()
        );
        Ok(())
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

/// Replay `input` into `store`, writing NDJSON records to `out` (alert transitions included;
/// no email).
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
    run_with(cfg, format, input, store, out, now, false)
}

/// `run`, and with `send_email` also the alerting rows written to `store` and the messages
/// sent through `[smtp]` at the end. Rules are evaluated in the readings' time.
///
/// # Errors
/// As `run`; a missing `[smtp]` when `send_email`.
pub fn run_with(
    cfg: &Config,
    format: PayloadFormat,
    input: impl BufRead,
    store: &mut Store,
    out: &mut impl Write,
    now: DateTime<Utc>,
    send_email: bool,
) -> anyhow::Result<Totals> {
    let smtp = match (&cfg.alerting.smtp, send_email) {
        (None, true) => anyhow::bail!("--send-email needs [smtp] in seepd.toml"),
        (s, _) => s.clone(),
    };
    let replay_cfg = Arc::new(replay_config(cfg, format));
    let mut engine = Engine::new(Arc::clone(&replay_cfg));
    // Rates once per instrument per batch of `BATCH` lines, at its newest reading.
    engine.set_batched(true);
    // Continue the trends, health state and models already in the database (if any).
    crate::watch::seed::from_store(
        engine.watch_mut(),
        &replay_cfg,
        store,
        now.timestamp_millis(),
    )?;
    // Alert transitions are always recorded in the database (the report and `seepd alerts`
    // show them); messages are composed and sent only with `--send-email`.
    let mut evaluator = Evaluator::load(Arc::new(cfg.clone()), store)?;
    evaluator.set_delivery(send_email);
    let mut alerts = Alerts {
        evaluator,
        writes: AlertWrites::default(),
        transitions: Vec::new(),
        clock_ms: i64::MIN,
    };
    let mut totals = Totals::default();
    let mut rows = Rows {
        readings: Vec::with_capacity(BATCH),
        ..Rows::default()
    };
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
        alerts.observe(&o);
        rows.readings.extend(o.readings);
        rows.derived.extend(o.derived);
        rows.flagged.extend(o.flag_updates);
        rows.quarantined
            .extend(o.quarantined.into_iter().map(|q| (totals.lines, q)));
        pending += 1;
        if pending >= BATCH {
            end_batch(&mut engine, &mut rows, &mut alerts);
            flush(store, &mut rows, &mut alerts, out, &mut totals)?;
            pending = 0;
        }
    }
    end_batch(&mut engine, &mut rows, &mut alerts);
    let w = alerts.evaluator.flush(alerts.clock_ms.max(0));
    alerts.writes.extend(w);
    flush(store, &mut rows, &mut alerts, out, &mut totals)?;
    out.flush()?;
    if let Some(smtp) = smtp.filter(|_| send_email) {
        send_all(store, &smtp)?;
    }
    Ok(totals)
}

/// The rates of the batch (computed once per instrument, at its newest reading), observed by the
/// rules and added to the rows.
fn end_batch(engine: &mut Engine, rows: &mut Rows, alerts: &mut Alerts) {
    let o = engine.end_batch();
    alerts.observe(&o);
    rows.derived.extend(o.derived);
}

/// Replay's alerting: the evaluator run in the readings' time, its transitions (records) and,
/// with `--send-email`, its rows for the store.
struct Alerts {
    evaluator: Evaluator,
    writes: AlertWrites,
    transitions: Vec<Transition>,
    /// The newest reading time seen: replay's clock.
    clock_ms: i64,
}

impl Alerts {
    fn observe(&mut self, o: &Outcome) {
        let obs = self.evaluator.observations(o);
        let times = o
            .readings
            .iter()
            .map(|r| r.t_ms)
            .chain(o.derived.iter().map(|d| d.t_ms));
        let Some(t) = times.max() else {
            return;
        };
        self.clock_ms = self.clock_ms.max(t);
        let w = self.evaluator.evaluate(&obs, self.clock_ms);
        self.transitions.extend(self.evaluator.take_transitions());
        self.writes.extend(w);
    }
}

/// Deliver the outbox through the relay: retry transient failures a few times, then report
/// what is left (`seepd alerts --config` lists it).
fn send_all(store: &Store, smtp: &crate::config::Smtp) -> anyhow::Result<()> {
    let mailer = crate::notify::Mailer::new(smtp)?;
    for attempt in 0..5 {
        let pass = crate::notify::deliver_due(store, &mailer, smtp)?;
        let left = store.messages("pending")?.len();
        eprintln!(
            "replay: email pass {}: {} sent, {} dead-lettered, {} waiting",
            attempt + 1,
            pass.sent,
            pass.dead,
            left
        );
        if left == 0 {
            break;
        }
        std::thread::sleep(std::time::Duration::from_secs(smtp.retry_min_s.min(10)));
        store.make_pending_due()?;
    }
    Ok(())
}

/// Rows of a replay batch not yet written.
#[derive(Default)]
struct Rows {
    readings: Vec<ReadingRow>,
    derived: Vec<DerivedRow>,
    flagged: Vec<FlagUpdate>,
    /// With the input line each came from.
    quarantined: Vec<(u64, QuarantineRow)>,
}

fn flush(
    store: &mut Store,
    rows: &mut Rows,
    alerts: &mut Alerts,
    out: &mut impl Write,
    totals: &mut Totals,
) -> anyhow::Result<()> {
    let Rows {
        readings,
        derived,
        flagged,
        quarantined,
    } = rows;
    let q: Vec<QuarantineRow> = quarantined.iter().map(|(_, q)| q.clone()).collect();
    let aw = std::mem::take(&mut alerts.writes);
    let stats = store.write_batch_flagged(readings, derived, &q, flagged, &aw)?;
    totals.readings += stats.inserted as u64;
    totals.duplicates += stats.duplicates as u64;
    totals.quarantined += q.len() as u64;
    // Records are serialised into one buffer and written once: far fewer calls through `out`.
    let mut buf: Vec<u8> = Vec::with_capacity(256 * (readings.len() * 4 + derived.len()));
    let mut emit = |rec: &Record<'_>| -> anyhow::Result<()> {
        serde_json::to_writer(&mut buf, rec)?;
        buf.push(b'\n');
        totals.records += 1;
        Ok(())
    };
    for r in readings.iter() {
        let time = rfc3339(r.t_ms);
        let flags = r.flags.names();
        for (quantity, value, unit) in r.quantities() {
            emit(&Record::Value {
                id: &r.instrument,
                quantity,
                time: &time,
                value: clean(value),
                unit,
                flags: &flags,
            })?;
        }
    }
    // Derived rows come in runs with the same time: format it once per run.
    let mut time_of: (i64, String) = (i64::MIN, String::new());
    for d in derived.iter() {
        if time_of.0 != d.t_ms {
            time_of = (d.t_ms, rfc3339(d.t_ms));
        }
        emit(&Record::Derived {
            id: &d.object,
            quantity: &d.quantity,
            time: &time_of.1,
            value: d.value.map(clean),
            unit: d.unit,
            reason: d.reason.as_deref(),
            inputs: &d.inputs,
        })?;
    }
    for f in flagged.iter() {
        emit(&Record::Flag {
            id: &f.instrument,
            time: &rfc3339(f.t_ms),
            flags: &f.flags.names(),
        })?;
    }
    for (line, q) in quarantined.iter() {
        emit(&Record::Quarantine {
            line: *line,
            reason: q.reason.code(),
            detail: &q.detail,
        })?;
    }
    for t in alerts.transitions.drain(..) {
        let time = rfc3339(t.t_ms);
        emit(&Record::Alert {
            alert: t.alert,
            rule: &t.rule,
            action: t.action.name(),
            level: &t.level,
            previous_level: t.previous.as_deref(),
            id: &t.object,
            quantity: &t.quantity,
            time: &time,
            value: t.value.map(clean),
            unit: &t.unit,
            bound: clean(t.bound),
            direction: t.direction,
        })?;
    }
    out.write_all(&buf)?;
    readings.clear();
    derived.clear();
    flagged.clear();
    quarantined.clear();
    Ok(())
}
