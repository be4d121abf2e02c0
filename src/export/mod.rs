//! InfluxDB v2 export with store-and-forward: the live worker that drains the export queue in
//! commit order, and the delivery step shared with `seepd export` (backfill).
//!
//! Owns the delivery rules: the cursor moves only past what the server answered 2xx (or what
//! was isolated and recorded as refused); failures are retried with capped exponential backoff;
//! a backlog goes out in full batches; a batch refused with 400/413/422 is bisected until the
//! refused points are single queue entries, which are recorded in `export_rejects` with the
//! server's reply, so the queue never blocks. Other answers (401, 403, 404, 429, 5xx) and
//! connection errors are retried: they say nothing about the points. Delivery is at least once;
//! a point sent twice lands on the same series and time and overwrites itself.
//!
//! The line schema is in `line`; the HTTP client in `influx` (cargo feature `influx`). SQL lives
//! in `store::export`. This module never blocks the runtime: SQLite calls run on the blocking
//! pool.

pub mod backfill;
#[cfg(feature = "influx")]
pub mod influx;
pub mod line;

use std::collections::VecDeque;
use std::future::Future;
use std::time::{Duration, Instant};

use anyhow::Context as _;

use crate::backoff::Backoff;
use crate::config::{Config, Export};
use crate::shutdown::Shutdown;
use crate::store::export::{Backlog, ExportQueue, Queued, RejectRow};
use line::ObjectTags;

/// How often the live worker logs its backlog and lag.
const LOG_EVERY: Duration = Duration::from_secs(60);

/// Why a write did not succeed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum WriteError {
    /// The server refused the points themselves (400, 413, 422): bisect to find them.
    Rejected { status: u16, reply: String },
    /// Anything else (connection, timeout, 401/403/404/429/5xx): retry later.
    Failed(String),
}

/// Something that takes a body of line protocol (the InfluxDB client; tests' own servers).
pub trait Sink {
    /// Write one request body.
    fn write(&self, body: String) -> impl Future<Output = Result<(), WriteError>> + Send;
}

/// The encoded lines of one queue entry.
#[derive(Debug, Clone, Default)]
pub struct Encoded {
    pub lines: String,
    pub points: usize,
}

/// What one delivery achieved.
#[derive(Debug, Default, PartialEq, Eq)]
pub struct Outcome {
    /// Entries `..done` are finished (accepted, refused and recorded, or empty).
    pub done: usize,
    /// Points the server accepted.
    pub points: usize,
    /// Refused entries: (index, HTTP status, server reply).
    pub rejected: Vec<(usize, u16, String)>,
    /// Why delivery stopped early, if it did (retry from `done`).
    pub error: Option<String>,
    /// Shutdown was requested.
    pub stopped: bool,
}

/// Split `items` into requests of at most `max_points` points (at least one entry each).
fn chunks(items: &[Encoded], max_points: usize) -> VecDeque<(usize, usize)> {
    let mut out = VecDeque::new();
    let (mut lo, mut points) = (0, 0);
    for (i, e) in items.iter().enumerate() {
        if i > lo && points + e.points > max_points {
            out.push_back((lo, i));
            (lo, points) = (i, 0);
        }
        points += e.points;
    }
    if lo < items.len() {
        out.push_back((lo, items.len()));
    }
    out
}

/// Send `items` in order, in requests of at most `max_points` points; bisect refused requests
/// down to single entries. Stops at the first failure (or shutdown) and says how far it got.
pub async fn deliver<S: Sink>(
    sink: &S,
    items: &[Encoded],
    max_points: usize,
    stop: &Shutdown,
) -> Outcome {
    let mut ranges = chunks(items, max_points);
    let mut out = Outcome::default();
    while let Some((lo, hi)) = ranges.pop_front() {
        let part = &items[lo..hi];
        let points: usize = part.iter().map(|e| e.points).sum();
        if points == 0 {
            out.done = hi;
            continue;
        }
        let body: String = part.iter().map(|e| e.lines.as_str()).collect();
        let answer = tokio::select! {
            a = sink.write(body) => a,
            () = stop.wait() => {
                out.stopped = true;
                return out;
            }
        };
        match answer {
            Ok(()) => {
                out.done = hi;
                out.points += points;
            }
            Err(WriteError::Rejected { status, reply }) if hi - lo == 1 => {
                out.rejected.push((lo, status, reply));
                out.done = hi;
            }
            Err(WriteError::Rejected { .. }) => {
                let mid = lo + (hi - lo) / 2;
                ranges.push_front((mid, hi));
                ranges.push_front((lo, mid));
            }
            Err(WriteError::Failed(e)) => {
                out.error = Some(e);
                return out;
            }
        }
    }
    out
}

/// The export's retry schedule (`retry_min_ms` doubling up to `retry_max_ms`).
pub fn backoff(e: &Export) -> Backoff {
    Backoff::new(
        Duration::from_millis(e.retry_min_ms),
        Duration::from_millis(e.retry_max_ms),
    )
}

/// The live worker's database handle, used on the blocking pool.
struct Db(Option<ExportQueue>);

impl Db {
    async fn run<T: Send + 'static>(
        &mut self,
        f: impl FnOnce(&mut ExportQueue) -> Result<T, crate::store::StoreError> + Send + 'static,
    ) -> anyhow::Result<T> {
        let mut q = self.0.take().context("export database handle lost")?;
        let (q, r) = tokio::task::spawn_blocking(move || {
            let r = f(&mut q);
            (q, r)
        })
        .await?;
        self.0 = Some(q);
        Ok(r?)
    }
}

fn log_backlog(b: &Backlog, now_ms: i64) {
    let lag_s = b.oldest_queued_ms.map_or(0, |t| (now_ms - t).max(0) / 1000);
    tracing::info!(
        backlog = b.entries,
        lag_s,
        exported_points = b.points,
        rejected = b.rejected,
        "Export backlog"
    );
}

/// Drain the export queue into `sink` until `stop` says true. In-flight requests are abandoned
/// at shutdown; their entries stay queued and go out after the next start.
///
/// # Errors
/// The database cannot be opened.
pub async fn run_with<S: Sink>(
    cfg: &Config,
    e: &Export,
    sink: S,
    stop: Shutdown,
) -> anyhow::Result<()> {
    let queue = ExportQueue::open(&cfg.service.database)
        .with_context(|| format!("opening {} for export", cfg.service.database.display()))?;
    let mut db = Db(Some(queue));
    let objects = ObjectTags::from_config(cfg);
    let batch = e.batch_size.max(1);
    let flush = Duration::from_millis(e.flush_interval_ms);
    let mut backoff = backoff(e);
    let mut logged: Option<Instant> = None;
    tracing::info!(url = %e.url, bucket = %e.bucket, "Export started");
    loop {
        if stop.is_requested() {
            break;
        }
        if logged.is_none_or(|t| t.elapsed() >= LOG_EVERY) {
            if let Ok(b) = db.run(|q| q.backlog()).await {
                log_backlog(&b, chrono::Utc::now().timestamp_millis());
            }
            logged = Some(Instant::now());
        }
        let page = match db.run(move |q| q.page(batch)).await {
            Ok(p) => p,
            Err(err) => {
                tracing::error!(error = %format!("{err:#}"), "Cannot read the export queue; retrying");
                if stop.sleep(backoff.fail()).await {
                    break;
                }
                continue;
            }
        };
        if page.is_empty() {
            if stop.sleep(flush).await {
                break;
            }
            continue;
        }
        let full = page.len() == batch;
        let encoded: Vec<Encoded> = page.iter().map(|q| encode(q, &objects)).collect();
        let out = deliver(&sink, &encoded, batch, &stop).await;
        if out.done > 0 {
            record(&mut db, &page, &encoded, &out).await;
        }
        if out.stopped {
            break;
        }
        if let Some(err) = out.error {
            let wait = backoff.fail();
            if backoff.failures.is_power_of_two() {
                tracing::warn!(error = %err, attempts = backoff.failures, retry_ms = wait.as_millis() as u64, "Export write failed; retrying (nothing lost: the queue keeps the points)");
            }
            if stop.sleep(wait).await {
                break;
            }
            continue;
        }
        if backoff.failures > 0 {
            tracing::info!(
                after_attempts = backoff.failures,
                "Export server answering again"
            );
            backoff.failures = 0;
        }
        if !full && stop.sleep(flush).await {
            break;
        }
    }
    tracing::info!("Export stopped");
    Ok(())
}

/// The lines of one queue entry (none if its row has gone).
fn encode(q: &Queued, objects: &ObjectTags) -> Encoded {
    let mut e = Encoded::default();
    if let Some(row) = &q.row {
        e.points = line::encode(row, objects, &mut e.lines);
    }
    e
}

/// Move the cursor past `out.done` entries and record the refused ones (one transaction). If
/// that fails the entries stay queued and are sent again: harmless, the server overwrites.
async fn record(db: &mut Db, page: &[Queued], encoded: &[Encoded], out: &Outcome) {
    let rejects: Vec<RejectRow> = out
        .rejected
        .iter()
        .map(|(i, status, reply)| reject_row(&page[*i], &encoded[*i], *status, reply))
        .collect();
    for r in &rejects {
        tracing::warn!(series = r.series.name(), key = %r.key, t_ms = r.t_ms, status = r.status, reply = %r.reply, "Export server refused a point; recorded in export_rejects");
    }
    let through = page[out.done - 1].seq;
    let points = out.points;
    let now = chrono::Utc::now().timestamp_millis();
    if let Err(err) = db
        .run(move |q| q.commit(through, points, &rejects, now))
        .await
    {
        tracing::error!(error = %format!("{err:#}"), "Cannot record export progress; the points will be sent again");
    }
}

/// A refused entry as stored.
pub fn reject_row(q: &Queued, e: &Encoded, status: u16, reply: &str) -> RejectRow {
    RejectRow {
        series: q.series,
        key: q.key.clone(),
        quantity: q.quantity.clone(),
        t_ms: q.t_ms,
        status,
        reply: reply.chars().take(4096).collect(),
        lines: e.lines.clone(),
    }
}

/// Run the live exporter with the InfluxDB client until `stop` says true.
///
/// # Errors
/// The client cannot be built (CA file) or the database cannot be opened.
#[cfg(feature = "influx")]
pub async fn run(cfg: std::sync::Arc<Config>, stop: Shutdown) -> anyhow::Result<()> {
    let Some(e) = cfg.export.clone().filter(|e| e.enabled) else {
        return Ok(());
    };
    let sink = influx::InfluxSink::new(&e)?;
    run_with(&cfg, &e, sink, stop).await
}

#[cfg(test)]
mod tests;
