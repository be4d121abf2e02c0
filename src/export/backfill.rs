//! `seepd export --from --to`: send the stored rows of a time range straight to the server,
//! without the queue or its cursor (history from before export was configured, replays, or a
//! second server).
//!
//! Owns the range walk: per instrument (and per derived object and quantity) in time order, in
//! pages of `batch_size` rows, through the same delivery (bisect on refusal, refused points
//! recorded in `export_rejects`) as the live worker. Failures are retried with backoff a few
//! times, then it gives up and says how far it got; running it again is harmless.

use anyhow::bail;

use super::line::{self, ObjectTags};
use super::{deliver, reject_row, Encoded, Sink};
use crate::command::{ConfigDb, Exit, Period, Run, EXIT_CONFIG};
use crate::config::{Config, Export};
use crate::shutdown::Shutdown;
use crate::store::export::{ExportQueue, ExportRow, Queued, Series};

/// `seepd export`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Args {
    // `--db`: a replay's database, say, sent to the configured server.
    #[command(flatten)]
    on: ConfigDb,
    #[command(flatten)]
    period: Period,
}

impl Run for Args {
    fn run(self, _now: chrono::DateTime<chrono::Utc>) -> anyhow::Result<()> {
        let mut cfg = self.on.load()?;
        cfg.service.database = self.on.path(&cfg).to_path_buf();
        let Period { from, to } = self.period;
        let Some(e) = &cfg.export else {
            eprintln!("seepd: no [export] section in seepd.toml; nothing to export to");
            return Err(Exit(EXIT_CONFIG).into());
        };
        anyhow::ensure!(from < to, "--from must be before --to");
        #[cfg(feature = "influx")]
        {
            let rt = tokio::runtime::Runtime::new()?;
            let sink = super::influx::InfluxSink::new(e)?;
            let started = std::time::Instant::now();
            let (from, to) = (from.timestamp_millis(), to.timestamp_millis());
            let t = rt.block_on(async {
                let stop = Shutdown::new(std::time::Duration::ZERO);
                stop.request_on_signal();
                run(&cfg, e, &sink, from, to, &stop).await
            })?;
            eprintln!(
                "export: {} readings, {} derived values, {} points accepted, {} refused (see \
                 export_rejects) in {:.3} s",
                t.readings,
                t.derived,
                t.points,
                t.rejected,
                started.elapsed().as_secs_f64()
            );
            Ok(())
        }
        #[cfg(not(feature = "influx"))]
        {
            let _ = (e, from, to);
            anyhow::bail!("this build has no InfluxDB client: rebuild with the `influx` feature")
        }
    }
}

/// Consecutive failed attempts after which the backfill gives up.
const MAX_ATTEMPTS: u32 = 8;

/// What a backfill sent.
#[derive(Debug, Default, Clone, Copy, PartialEq, Eq)]
pub struct Totals {
    pub readings: usize,
    pub derived: usize,
    /// Points the server accepted.
    pub points: usize,
    /// Entries the server refused (recorded in `export_rejects`).
    pub rejected: usize,
}

/// Send every selected row with `from_ms <= t_ms < to_ms`, until `stop` is requested.
///
/// # Errors
/// Database errors, or the server failing `MAX_ATTEMPTS` times in a row.
pub async fn run<S: Sink>(
    cfg: &Config,
    e: &Export,
    sink: &S,
    from_ms: i64,
    to_ms: i64,
    stop: &Shutdown,
) -> anyhow::Result<Totals> {
    let mut q = ExportQueue::open(&cfg.service.database)?;
    let objects = ObjectTags::from_config(cfg);
    let mut totals = Totals::default();
    let mut w = Walk {
        sink,
        e,
        objects: &objects,
        stop,
        totals: &mut totals,
    };
    if e.readings {
        for instrument in q.reading_instruments()? {
            let mut after = from_ms.saturating_sub(1);
            loop {
                let rows = q.readings_between(&instrument, after, to_ms, e.batch_size)?;
                let Some(last) = rows.last().map(t_of) else {
                    break;
                };
                w.totals.readings += rows.len();
                w.send(&mut q, rows).await?;
                after = last;
            }
        }
    }
    if e.derived {
        for (object, quantity) in q.derived_series()? {
            let mut after = from_ms.saturating_sub(1);
            loop {
                let rows = q.derived_between(&object, &quantity, after, to_ms, e.batch_size)?;
                let Some(last) = rows.last().map(t_of) else {
                    break;
                };
                w.totals.derived += rows.len();
                w.send(&mut q, rows).await?;
                after = last;
            }
        }
    }
    Ok(totals)
}

fn t_of(r: &ExportRow) -> i64 {
    match r {
        ExportRow::Reading(p) => p.t_ms,
        ExportRow::Derived(d) => d.t_ms,
    }
}

/// State of one backfill run.
struct Walk<'a, S> {
    sink: &'a S,
    e: &'a Export,
    objects: &'a ObjectTags,
    stop: &'a Shutdown,
    totals: &'a mut Totals,
}

impl<S: Sink> Walk<'_, S> {
    /// Deliver one page, retrying failures with backoff.
    async fn send(&mut self, q: &mut ExportQueue, rows: Vec<ExportRow>) -> anyhow::Result<()> {
        let entries: Vec<Queued> = rows.into_iter().map(as_entry).collect();
        let encoded: Vec<Encoded> = entries
            .iter()
            .map(|en| {
                let mut e = Encoded::default();
                if let Some(row) = &en.row {
                    e.points = line::encode(row, self.objects, &mut e.lines);
                }
                e
            })
            .collect();
        let mut backoff = super::backoff(self.e);
        let mut start = 0;
        while start < encoded.len() {
            let out = deliver(self.sink, &encoded[start..], self.e.batch_size, self.stop).await;
            let rejects: Vec<_> = out
                .rejected
                .iter()
                .map(|(i, status, reply)| {
                    reject_row(&entries[start + i], &encoded[start + i], *status, reply)
                })
                .collect();
            if !rejects.is_empty() {
                q.record_rejects(&rejects, chrono::Utc::now().timestamp_millis())?;
            }
            self.totals.points += out.points;
            self.totals.rejected += rejects.len();
            start += out.done;
            if let Some(err) = out.error {
                if backoff.failures + 1 >= MAX_ATTEMPTS {
                    bail!(
                        "export server failing ({err}); gave up after {MAX_ATTEMPTS} attempts \
                         with {} points sent — run the same command again to resume",
                        self.totals.points
                    );
                }
                let wait = backoff.fail();
                tracing::warn!(error = %err, attempt = backoff.failures, "Export write failed; retrying");
                tokio::time::sleep(wait).await;
            }
        }
        Ok(())
    }
}

/// A row as a (sequence-less) queue entry, for delivery and reject records.
fn as_entry(row: ExportRow) -> Queued {
    let (series, key, quantity, t_ms) = match &row {
        ExportRow::Reading(p) => (Series::Reading, p.instrument.clone(), String::new(), p.t_ms),
        ExportRow::Derived(d) => (
            Series::Derived,
            d.object.clone(),
            d.quantity.clone(),
            d.t_ms,
        ),
    };
    Queued {
        seq: 0,
        series,
        key,
        quantity,
        t_ms,
        row: Some(row),
    }
}
