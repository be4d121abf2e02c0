//! `seepd status`: what the database says — readings stored and the latest reading time,
//! quarantine counts by reason, and the export backlog, lag and refused points.
//!
//! Owns the report's wording. Reads the database only (through the store); safe to run beside
//! a running service (WAL).

use std::fmt::Write as _;
use std::path::Path;

use chrono::{DateTime, Utc};

use crate::config::Config;
use crate::ingest::link::LinkState;
use crate::store::{export, Store, StoreError};

fn time(ms: i64) -> String {
    DateTime::<Utc>::from_timestamp_millis(ms).map_or_else(
        || ms.to_string(),
        |t| t.format("%Y-%m-%dT%H:%M:%S%.3fZ").to_string(),
    )
}

/// The status report of the database `cfg` names, as of `now`.
///
/// # Errors
/// SQLite errors (including a database from a newer seepd).
pub fn report(cfg: &Config, now: DateTime<Utc>) -> Result<String, StoreError> {
    report_db(&cfg.service.database, Some(cfg), now)
}

/// The status report of the database `db`; `cfg` (when it loads) describes the export target.
///
/// # Errors
/// SQLite errors (including a database from a newer seepd).
pub fn report_db(
    db: &Path,
    cfg: Option<&Config>,
    now: DateTime<Utc>,
) -> Result<String, StoreError> {
    let store = Store::open(db)?;
    let conn = store.conn();
    let mut s = String::new();
    let _ = writeln!(s, "Database: {}", db.display());
    let readings = store.count_readings()?;
    let latest = store.latest_reading_overall()?;
    match latest {
        Some((instrument, t)) => {
            let _ = writeln!(
                s,
                "Readings: {readings} (latest {} from {instrument})",
                time(t)
            );
        }
        None => {
            let _ = writeln!(s, "Readings: 0");
        }
    }
    let quarantine = store.quarantine_counts()?;
    let total: i64 = quarantine.iter().map(|(_, n)| n).sum();
    let _ = writeln!(s, "Quarantined: {total}");
    for (reason, n) in quarantine {
        let _ = writeln!(s, "  {reason}: {n}");
    }
    let _ = writeln!(s, "{}", broker_line(&store, now)?);
    let b = export::backlog(conn)?;
    let state = match cfg.map(|c| &c.export) {
        None => "(configuration not loaded)".to_string(),
        Some(None) => "not configured".to_string(),
        Some(Some(e)) if !e.enabled => format!("disabled ({})", e.url),
        Some(Some(e)) => format!("to {} bucket {:?}", e.url, e.bucket),
    };
    let _ = writeln!(s, "Export: {state}");
    let lag_s = b
        .oldest_queued_ms
        .map_or(0, |t| (now.timestamp_millis() - t).max(0) / 1000);
    let _ = writeln!(s, "  backlog: {} entries, lag {lag_s} s", b.entries);
    let _ = writeln!(
        s,
        "  exported: {} points{}",
        b.points,
        b.last_ok_ms
            .map_or_else(String::new, |t| format!(", last at {}", time(t)))
    );
    let _ = writeln!(
        s,
        "  refused by the server: {} (table export_rejects)",
        b.rejected
    );
    Ok(s)
}

/// The broker link as the running service last recorded it.
fn broker_line(store: &Store, now: DateTime<Utc>) -> Result<String, StoreError> {
    let Some((l, recorded_ms)) = store.service_state::<LinkState>("broker_link")? else {
        return Ok("Broker: no state recorded (the service has not run with this database)".into());
    };
    let for_s = (now.timestamp_millis() - l.since_ms).max(0) / 1000;
    let mut line = if l.connected {
        format!(
            "Broker: connected to {} since {} ({})",
            l.broker,
            time(l.since_ms),
            span(for_s)
        )
    } else {
        format!(
            "Broker: NOT CONNECTED to {} since {} ({}; {} failed attempts)",
            l.broker,
            time(l.since_ms),
            span(for_s),
            l.attempts
        )
    };
    if let (false, Some(e)) = (l.connected, &l.last_error) {
        let _ = write!(line, "\n  last error: {e}");
    }
    let _ = write!(
        line,
        "\n  reconnections since start: {}; recorded at {}",
        l.reconnects,
        time(recorded_ms)
    );
    Ok(line)
}

/// A duration in words: seconds, minutes, hours or days.
fn span(s: i64) -> String {
    match s {
        s if s < 120 => format!("{s} s"),
        s if s < 7_200 => format!("{} min", s / 60),
        s if s < 172_800 => format!("{:.1} h", s as f64 / 3600.0),
        s => format!("{:.1} days", s as f64 / 86_400.0),
    }
}
