//! SQLite storage: schema migrations, instruments, readings, derived values and quarantine;
//! alerting tables in `alerts` (service side) and `outbox` (mail worker and CLI side).
//!
//! Owns the database connection and every SQL statement. WAL mode with `synchronous=FULL`: a
//! committed batch survives a process crash and, on storage that honours fsync, a power loss.
//! Reading inserts are idempotent on (instrument, time) because QoS 1 redelivers. When export is
//! on, each new row is also queued for export in the same transaction (`export` reads the queue).

pub mod alerts;
mod duplicates;
pub mod export;
mod models;
pub mod outbox;
pub mod pages;
pub mod report_reads;
pub mod reports;
mod schema;
mod state;
pub mod summary;

use std::path::Path;

use chrono::{DateTime, Utc};
use rusqlite::{params, Connection, OptionalExtension};

use crate::config::Config;
use crate::quality::Flags;

pub use alerts::{AckRow, AlertRow, AlertWrites, EventRow, NoticeRow, OutboxRow, SilenceRow};
pub use models::{InstrumentSpan, ModelRow, SeedReading};
pub use reports::{Attachment, ReportMessage};
pub use schema::SCHEMA_VERSION;
// The row types are the data model's (`crate::model`); re-exported for the store's callers.
pub use crate::model::{DerivedRow, FlagUpdate, QuarantineRow, ReadingRow};

/// Errors from the store.
#[derive(Debug, thiserror::Error)]
pub enum StoreError {
    #[error("database: {0}")]
    Sqlite(#[from] rusqlite::Error),
    #[error("database {path} has schema version {found}, newer than this seepd ({supported})")]
    TooNew {
        path: String,
        found: i64,
        supported: i64,
    },
}

/// The `readings` column that holds `q`.
pub(crate) fn column_of(q: crate::model::ReadingQuantity) -> &'static str {
    use crate::model::ReadingQuantity as Q;
    match q {
        Q::EngineeringValue => "eng_value",
        Q::Pressure => "pressure_kpa",
        Q::PressureHead => "pressure_head_m",
        Q::TotalHead => "total_head_m",
    }
}

/// What a committed batch did.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct BatchStats {
    pub inserted: usize,
    /// Derived values written (new or recomputed).
    pub derived: usize,
    /// Readings already stored for (instrument, time): not inserted again.
    pub duplicates: usize,
    /// Of the duplicates, those with another value than the stored one: the first stored value
    /// is kept and each is recorded in quarantine as `conflicting_duplicate`.
    pub conflicts: usize,
    pub quarantined: usize,
}

/// A latest stored value, for summaries.
#[derive(Debug, Clone, PartialEq)]
pub struct Latest {
    pub instrument: String,
    pub t_ms: i64,
    pub total_head_m: Option<f64>,
    pub pressure_kpa: Option<f64>,
    pub flags: Flags,
}

/// The latest value of a derived quantity.
#[derive(Debug, Clone, PartialEq)]
pub struct LatestDerived {
    pub object: String,
    pub quantity: String,
    pub t_ms: i64,
    pub value: Option<f64>,
    pub unit: String,
    pub reason: Option<String>,
}

/// The database.
pub struct Store {
    /// The one connection; the store is used from one thread at a time.
    conn: Connection,
    /// Which new rows `write_batch` queues for export (none unless export is configured).
    queue: export::QueueMode,
    /// Instruments whose conflicting duplicate has been logged (one warning each per run).
    conflicts_logged: std::collections::HashSet<String>,
}

/// Upper bound of each connection's SQLite page cache, KiB.
const CACHE_KIB: i64 = 16 * 1024;

/// The rows of `derived` that no later row of the same (object, quantity, time) replaces, in
/// their order.
fn last_of_each_key(derived: &[DerivedRow]) -> impl Iterator<Item = &DerivedRow> {
    let mut seen = std::collections::HashSet::with_capacity(derived.len());
    let mut keep = vec![false; derived.len()];
    for (k, r) in derived.iter().enumerate().rev() {
        keep[k] = seen.insert((r.object.as_str(), r.quantity.as_str(), r.t_ms));
    }
    derived.iter().zip(keep).filter_map(|(r, k)| k.then_some(r))
}

impl Store {
    /// Open (creating if needed) and migrate the database at `path`.
    ///
    /// # Errors
    /// SQLite errors, or a database written by a newer seepd.
    pub fn open(path: &Path) -> Result<Store, StoreError> {
        let conn = Connection::open(path)?;
        Self::init(conn, &path.display().to_string())
    }

    /// An in-memory database (replay without `--db`, tests).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn open_in_memory() -> Result<Store, StoreError> {
        Self::init(Connection::open_in_memory()?, ":memory:")
    }

    fn init(conn: Connection, name: &str) -> Result<Store, StoreError> {
        conn.busy_timeout(std::time::Duration::from_secs(10))?;
        wal_mode(&conn)?;
        conn.pragma_update(None, "synchronous", "FULL")?;
        conn.pragma_update(None, "foreign_keys", "ON")?;
        // A page cache big enough that one group commit's dirty pages (readings, derived rows,
        // their indexes) stay in memory until the commit instead of spilling to the file
        // mid-transaction; negative = KiB. Pages are only taken as they are used.
        conn.pragma_update(None, "cache_size", -CACHE_KIB)?;
        schema::migrate(&conn, name)?;
        Ok(Store {
            conn,
            queue: export::QueueMode::default(),
            conflicts_logged: Default::default(),
        })
    }

    /// Queue newly written readings and/or derived values for export from now on.
    pub fn set_export_queue(&mut self, mode: export::QueueMode) {
        self.queue = mode;
    }

    /// The connection, for modules that own further tables (later issues) and tests.
    pub fn conn(&self) -> &Connection {
        &self.conn
    }

    /// Record the configured instruments (upsert), so the database describes itself.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn sync_instruments(&mut self, cfg: &Config, now: DateTime<Utc>) -> Result<(), StoreError> {
        let tx = self.conn.transaction()?;
        {
            let mut st = tx.prepare(
                "INSERT INTO instruments (id, site, kind, reach, section, station_m, offset_m,
                    tip_elevation_m, installed_ms, interval_s, updated_ms)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11)
                 ON CONFLICT(id) DO UPDATE SET site=excluded.site, kind=excluded.kind,
                    reach=excluded.reach, section=excluded.section, station_m=excluded.station_m,
                    offset_m=excluded.offset_m, tip_elevation_m=excluded.tip_elevation_m,
                    installed_ms=excluded.installed_ms, interval_s=excluded.interval_s,
                    updated_ms=excluded.updated_ms",
            )?;
            for i in cfg.instruments.values() {
                st.execute(params![
                    i.id,
                    i.site,
                    i.kind.name(),
                    i.location.reach,
                    i.location.section,
                    i.location.station_m,
                    i.location.offset_m,
                    i.tip_elevation_m,
                    i.installed.timestamp_millis(),
                    i.interval_s as i64,
                    now.timestamp_millis(),
                ])?;
            }
        }
        tx.commit()?;
        Ok(())
    }

    /// Write readings, derived values and quarantine rows in one transaction and commit it.
    /// Derived values replace an earlier value of the same (object, quantity, time): a
    /// recomputation with newer inputs wins.
    ///
    /// # Errors
    /// SQLite errors; nothing of the batch is stored then.
    pub fn write_batch(
        &mut self,
        readings: &[ReadingRow],
        derived: &[DerivedRow],
        quarantined: &[QuarantineRow],
    ) -> Result<BatchStats, StoreError> {
        self.write_batch_flagged(readings, derived, quarantined, &[], &AlertWrites::default())
    }

    /// `write_batch` plus the alerting rows the batch caused (rule states, alerts, notices,
    /// outbox messages), all in the same transaction: a transition is committed together with
    /// its message, and with the readings that caused it.
    ///
    /// # Errors
    /// SQLite errors; nothing of the batch is stored then.
    pub fn write_batch_with(
        &mut self,
        readings: &[ReadingRow],
        derived: &[DerivedRow],
        quarantined: &[QuarantineRow],
        alerts: &AlertWrites,
    ) -> Result<BatchStats, StoreError> {
        self.write_batch_flagged(readings, derived, quarantined, &[], alerts)
    }

    /// `write_batch_with`, and flags added to readings stored earlier (or in this batch): a
    /// reading whose flags change is queued for export again.
    ///
    /// # Errors
    /// SQLite errors; nothing of the batch is stored then.
    pub fn write_batch_flagged(
        &mut self,
        readings: &[ReadingRow],
        derived: &[DerivedRow],
        quarantined: &[QuarantineRow],
        flag_updates: &[FlagUpdate],
        alerts: &AlertWrites,
    ) -> Result<BatchStats, StoreError> {
        self.write_all(readings, derived, quarantined, flag_updates, alerts, None)
    }

    /// `write_batch_flagged` for one manual reading taken from the inbox: entry `inbox` is
    /// marked taken at `now_ms` in the same transaction (so it is stored once), with its result:
    /// `rejected` (the engine's quarantine reason) when set, else what the insert found.
    ///
    /// # Errors
    /// SQLite errors; nothing of the batch is stored then, and the entries stay waiting.
    #[allow(clippy::too_many_arguments)]
    pub fn write_manual(
        &mut self,
        readings: &[ReadingRow],
        derived: &[DerivedRow],
        quarantined: &[QuarantineRow],
        flag_updates: &[FlagUpdate],
        alerts: &AlertWrites,
        inbox: i64,
        rejected: Option<&str>,
        now_ms: i64,
    ) -> Result<BatchStats, StoreError> {
        let done = pages::ManualDone {
            id: inbox,
            rejected,
            now_ms,
        };
        self.write_all(
            readings,
            derived,
            quarantined,
            flag_updates,
            alerts,
            Some(done),
        )
    }

    fn write_all(
        &mut self,
        readings: &[ReadingRow],
        derived: &[DerivedRow],
        quarantined: &[QuarantineRow],
        flag_updates: &[FlagUpdate],
        alerts: &AlertWrites,
        manual: Option<pages::ManualDone<'_>>,
    ) -> Result<BatchStats, StoreError> {
        let tx = self.conn.transaction()?;
        let mut stats = BatchStats::default();
        let mut conflicts = Vec::new();
        {
            let mut ins = tx.prepare_cached(
                "INSERT OR IGNORE INTO readings (instrument, t_ms, arrival_ms, raw,
                    temperature_c, baro_kpa, eng_value, eng_unit, pressure_kpa, pressure_head_m,
                    total_head_m, flags)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12)",
            )?;
            for r in readings {
                let n = ins.execute(params![
                    r.instrument,
                    r.t_ms,
                    r.arrival_ms,
                    r.raw,
                    r.temperature_c,
                    r.baro_kpa,
                    r.eng_value,
                    r.eng_unit,
                    r.pressure_kpa,
                    r.pressure_head_m,
                    r.total_head_m,
                    r.flags.0,
                ])?;
                if n == 1 {
                    stats.inserted += 1;
                    if self.queue.readings {
                        export::enqueue(&tx, export::Series::Reading, &r.instrument, "", r.t_ms)?;
                    }
                } else {
                    stats.duplicates += 1;
                    if let Some(c) = duplicates::conflict(&tx, r)? {
                        conflicts.push((r.instrument.as_str(), c));
                    }
                }
            }
            let mut up = tx.prepare_cached(
                "UPDATE readings SET flags = flags | ?3
                 WHERE instrument = ?1 AND t_ms = ?2 AND (flags | ?3) != flags",
            )?;
            for f in flag_updates {
                let n = up.execute(params![f.instrument, f.t_ms, f.flags.0])?;
                if n == 1 && self.queue.readings {
                    export::enqueue(&tx, export::Series::Reading, &f.instrument, "", f.t_ms)?;
                }
            }
            let mut d = tx.prepare_cached(
                "INSERT OR REPLACE INTO derived (object, quantity, t_ms, value, unit, reason, inputs)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
            )?;
            // A value recomputed later in the same batch (a nest recomputed when its second
            // input arrives, stamped with the same time) would be replaced at once: only the
            // last row of each key is written, which leaves the table exactly as before.
            for r in last_of_each_key(derived) {
                stats.derived += d.execute(params![
                    r.object,
                    r.quantity,
                    r.t_ms,
                    r.value,
                    r.unit,
                    r.reason,
                    r.inputs.join(","),
                ])?;
                if self.queue.derived {
                    export::enqueue(&tx, export::Series::Derived, &r.object, &r.quantity, r.t_ms)?;
                }
            }
            let mut q = tx.prepare_cached(
                "INSERT INTO quarantine (received_ms, topic, reason, detail, payload)
                 SELECT ?1, ?2, ?3, ?4, ?5
                 WHERE NOT ?6 OR NOT EXISTS
                    (SELECT 1 FROM quarantine WHERE topic = ?2 AND payload = ?5 AND reason = ?3
                        AND detail = ?4)",
            )?;
            // A conflict met again (a redelivery) is recorded once: same row, same detail.
            for (_, r) in &conflicts {
                let n = q.execute(params![
                    r.received_ms,
                    r.topic,
                    r.reason.code(),
                    r.detail,
                    r.payload,
                    true,
                ])?;
                stats.conflicts += 1;
                stats.quarantined += n;
            }
            for r in quarantined {
                stats.quarantined += q.execute(params![
                    r.received_ms,
                    r.topic,
                    r.reason.code(),
                    r.detail,
                    r.payload,
                    r.redelivered,
                ])?;
            }
        }
        alerts::write(&tx, alerts)?;
        if let Some(m) = manual {
            pages::mark_manual(&tx, &m, &stats)?;
        }
        tx.commit()?;
        for (instrument, c) in &conflicts {
            if self.conflicts_logged.insert(instrument.to_string()) {
                tracing::warn!(detail = %c.detail, "Conflicting duplicate reading: the first stored value is kept (quarantine conflicting_duplicate; logged once per instrument)");
            }
        }
        Ok(stats)
    }

    /// Number of stored readings (all instruments).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn count_readings(&self) -> Result<i64, StoreError> {
        Ok(self
            .conn
            .query_row("SELECT count(*) FROM readings", [], |r| r.get(0))?)
    }

    /// Quarantine counts by reason code.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn quarantine_counts(&self) -> Result<Vec<(String, i64)>, StoreError> {
        let mut st = self
            .conn
            .prepare("SELECT reason, count(*) FROM quarantine GROUP BY reason ORDER BY reason")?;
        let rows = st.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// The latest reading of each instrument, leaving out readings stamped ahead of the clock
    /// (`time_ahead`: they seed nothing).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn latest_all(&self) -> Result<Vec<Latest>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT r.instrument, r.t_ms, r.total_head_m, r.pressure_kpa, r.flags
             FROM readings r
             JOIN (SELECT instrument, max(t_ms) AS t FROM readings WHERE (flags & ?1) = 0
                   GROUP BY instrument) m
               ON m.instrument = r.instrument AND m.t = r.t_ms
             ORDER BY r.instrument",
        )?;
        let rows = st.query_map([Flags::TIME_AHEAD.0], |r| {
            Ok(Latest {
                instrument: r.get(0)?,
                t_ms: r.get(1)?,
                total_head_m: r.get(2)?,
                pressure_kpa: r.get(3)?,
                flags: Flags(r.get(4)?),
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Barometric pressures (time ms, kPa) of `barometer` since `since_ms`, oldest first — to seed
    /// the engine's barometer memory at start.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn barometer_since(
        &self,
        barometer: &str,
        since_ms: i64,
    ) -> Result<Vec<(i64, f64)>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT t_ms, pressure_kpa FROM readings
             WHERE instrument = ?1 AND t_ms >= ?2 AND pressure_kpa IS NOT NULL ORDER BY t_ms",
        )?;
        let rows = st.query_map(params![barometer, since_ms], |r| Ok((r.get(0)?, r.get(1)?)))?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// The latest total head of `instrument` at or before `t_ms`: (time ms, head m, flags).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn head_at(
        &self,
        instrument: &str,
        t_ms: i64,
    ) -> Result<Option<(i64, f64, Flags)>, StoreError> {
        Ok(self
            .conn
            .query_row(
                "SELECT t_ms, total_head_m, flags FROM readings
                 WHERE instrument = ?1 AND t_ms <= ?2 AND total_head_m IS NOT NULL
                 ORDER BY t_ms DESC LIMIT 1",
                params![instrument, t_ms],
                |r| Ok((r.get(0)?, r.get(1)?, Flags(r.get(2)?))),
            )
            .optional()?)
    }

    /// The latest value of every derived (object, quantity): (object, quantity, t_ms, value,
    /// unit, reason).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn latest_derived(&self) -> Result<Vec<LatestDerived>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT d.object, d.quantity, d.t_ms, d.value, d.unit, d.reason FROM derived d
             JOIN (SELECT object, quantity, max(t_ms) AS t FROM derived GROUP BY object, quantity) m
               ON m.object = d.object AND m.quantity = d.quantity AND m.t = d.t_ms
             ORDER BY d.object, d.quantity",
        )?;
        let rows = st.query_map([], |r| {
            Ok(LatestDerived {
                object: r.get(0)?,
                quantity: r.get(1)?,
                t_ms: r.get(2)?,
                value: r.get(3)?,
                unit: r.get(4)?,
                reason: r.get(5)?,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// One stored reading (tests, tools).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn reading(
        &self,
        instrument: &str,
        t_ms: i64,
    ) -> Result<Option<(f64, Option<f64>, Flags)>, StoreError> {
        Ok(self
            .conn
            .query_row(
                "SELECT raw, total_head_m, flags FROM readings WHERE instrument = ?1 AND t_ms = ?2",
                params![instrument, t_ms],
                |r| Ok((r.get(0)?, r.get(1)?, Flags(r.get(2)?))),
            )
            .optional()?)
    }
}

#[cfg(test)]
mod tests;

/// Switch to WAL. On a fresh file another process opening it at the same moment can make the
/// switch answer "database is locked" at once (SQLite does not wait on the busy timeout for
/// it), so it is tried again for up to 10 s like every other lock.
fn wal_mode(conn: &Connection) -> Result<(), rusqlite::Error> {
    let mut tries = 0;
    loop {
        match conn.pragma_update(None, "journal_mode", "WAL") {
            Err(rusqlite::Error::SqliteFailure(e, _))
                if e.code == rusqlite::ErrorCode::DatabaseBusy && tries < 200 =>
            {
                tries += 1;
                std::thread::sleep(std::time::Duration::from_millis(50));
            }
            other => return other,
        }
    }
}
