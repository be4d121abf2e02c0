//! SQLite side of the InfluxDB export: the export queue (filled by `Store::write_batch` in the
//! same transaction as the rows), the cursor of what the server has acknowledged, the refused
//! points, and the range reads of `seepd export`.
//!
//! Owns every SQL statement on `export_queue`, `export_cursor` and `export_rejects`. It knows
//! nothing of line protocol or HTTP; `crate::export` does.
//!
//! Why a queue table: `readings` is keyed (instrument, time) without a rowid, so it has no commit
//! order to page by. `export_queue.seq` is an AUTOINCREMENT key, so it only ever grows (never
//! reused even after the exported rows are deleted), and a row's queue entry commits or rolls
//! back with the row itself. The exporter reads pages in `seq` order joined to the rows, and in
//! one transaction moves the cursor past what the server accepted, records refused points and
//! deletes the acknowledged entries, so the queue holds only the backlog.

use std::path::Path;

use rusqlite::{params, Connection, OptionalExtension, Transaction};

use super::{Store, StoreError};

/// Name of the live exporter's cursor row.
const LIVE: &str = "live";

/// Which newly written rows are queued for export.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct QueueMode {
    pub readings: bool,
    pub derived: bool,
}

/// The table a queue entry points into.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Series {
    Reading = 0,
    Derived = 1,
}

impl Series {
    /// Stable name (stored in `export_rejects`).
    pub fn name(self) -> &'static str {
        match self {
            Series::Reading => "reading",
            Series::Derived => "derived",
        }
    }
}

/// Queue one committed row; called inside the writing transaction.
pub(super) fn enqueue(
    tx: &Transaction<'_>,
    series: Series,
    key: &str,
    quantity: &str,
    t_ms: i64,
) -> Result<(), StoreError> {
    let mut st = tx.prepare_cached(
        "INSERT INTO export_queue (series, key, quantity, t_ms, queued_ms)
         VALUES (?1, ?2, ?3, ?4, CAST(unixepoch('subsec') * 1000 AS INTEGER))",
    )?;
    st.execute(params![series as i64, key, quantity, t_ms])?;
    Ok(())
}

/// A stored reading with the instrument's tags, ready to encode.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadingPoint {
    pub instrument: String,
    /// From the `instruments` table (absent only for an instrument never configured).
    pub site: Option<String>,
    pub kind: Option<String>,
    pub reach: Option<String>,
    pub section: Option<String>,
    pub t_ms: i64,
    pub raw: f64,
    pub temperature_c: Option<f64>,
    pub baro_kpa: Option<f64>,
    pub eng_value: f64,
    pub eng_unit: String,
    pub pressure_kpa: Option<f64>,
    pub pressure_head_m: Option<f64>,
    pub total_head_m: Option<f64>,
    pub flags: u32,
}

/// A stored derived value, ready to encode.
#[derive(Debug, Clone, PartialEq)]
pub struct DerivedPoint {
    pub object: String,
    pub quantity: String,
    pub t_ms: i64,
    /// `None` when it could not be computed (nothing is exported then).
    pub value: Option<f64>,
    pub unit: String,
}

/// A row to export.
#[derive(Debug, Clone, PartialEq)]
pub enum ExportRow {
    Reading(ReadingPoint),
    Derived(DerivedPoint),
}

/// One queue entry with the row it points to (`None` if the row has gone).
#[derive(Debug, Clone, PartialEq)]
pub struct Queued {
    pub seq: i64,
    pub series: Series,
    pub key: String,
    pub quantity: String,
    pub t_ms: i64,
    pub row: Option<ExportRow>,
}

/// A point the server refused, with its reply.
#[derive(Debug, Clone, PartialEq)]
pub struct RejectRow {
    pub series: Series,
    pub key: String,
    pub quantity: String,
    pub t_ms: i64,
    pub status: u16,
    pub reply: String,
    /// The line protocol that was refused.
    pub lines: String,
}

/// What is waiting and what has gone, for logs and `seepd status`.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Backlog {
    /// Queue entries not yet acknowledged by the server.
    pub entries: i64,
    /// When the oldest of them was committed.
    pub oldest_queued_ms: Option<i64>,
    /// Points the live exporter has had acknowledged, all time.
    pub points: i64,
    /// Points refused by the server and recorded in `export_rejects` (live and backfill).
    pub rejected: i64,
    /// Last time the live cursor moved.
    pub last_ok_ms: Option<i64>,
}

/// The backlog as seen through any connection.
///
/// # Errors
/// SQLite errors.
pub fn backlog(conn: &Connection) -> Result<Backlog, StoreError> {
    let (entries, oldest_queued_ms) = conn.query_row(
        "SELECT count(*), min(queued_ms) FROM export_queue
         WHERE seq > coalesce((SELECT seq FROM export_cursor WHERE name = ?1), 0)",
        [LIVE],
        |r| Ok((r.get(0)?, r.get(1)?)),
    )?;
    let (points, last_ok_ms) = conn
        .query_row(
            "SELECT points, updated_ms FROM export_cursor WHERE name = ?1",
            [LIVE],
            |r| Ok((r.get(0)?, Some(r.get(1)?))),
        )
        .optional()?
        .unwrap_or((0, None));
    let rejected = conn.query_row("SELECT count(*) FROM export_rejects", [], |r| r.get(0))?;
    Ok(Backlog {
        entries,
        oldest_queued_ms,
        points,
        rejected,
        last_ok_ms,
    })
}

/// Column list shared by the page and range reads of readings (with `r` and `i` aliases).
const READING_COLS: &str = "r.instrument, i.site, i.kind, i.reach, i.section, r.t_ms, r.raw,
    r.temperature_c, r.baro_kpa, r.eng_value, r.eng_unit, r.pressure_kpa, r.pressure_head_m,
    r.total_head_m, r.flags";

/// A `ReadingPoint` from `READING_COLS` starting at column `at`.
fn reading_at(r: &rusqlite::Row<'_>, at: usize) -> rusqlite::Result<ReadingPoint> {
    Ok(ReadingPoint {
        instrument: r.get(at)?,
        site: r.get(at + 1)?,
        kind: r.get(at + 2)?,
        reach: r.get(at + 3)?,
        section: r.get(at + 4)?,
        t_ms: r.get(at + 5)?,
        raw: r.get(at + 6)?,
        temperature_c: r.get(at + 7)?,
        baro_kpa: r.get(at + 8)?,
        eng_value: r.get(at + 9)?,
        eng_unit: r.get(at + 10)?,
        pressure_kpa: r.get(at + 11)?,
        pressure_head_m: r.get(at + 12)?,
        total_head_m: r.get(at + 13)?,
        flags: r.get(at + 14)?,
    })
}

/// The exporter's own connection (WAL lets it read beside the writer).
pub struct ExportQueue {
    conn: Connection,
}

impl ExportQueue {
    /// Open (and migrate, if needed) the database at `path`.
    ///
    /// # Errors
    /// SQLite errors, or a database written by a newer seepd.
    pub fn open(path: &Path) -> Result<ExportQueue, StoreError> {
        Ok(ExportQueue {
            conn: Store::open(path)?.conn,
        })
    }

    /// The connection (tests, tools).
    pub fn conn(&self) -> &Connection {
        &self.conn
    }

    /// The backlog and totals.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn backlog(&self) -> Result<Backlog, StoreError> {
        backlog(&self.conn)
    }

    /// The next `limit` entries after the cursor, in commit order, with their rows.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn page(&self, limit: usize) -> Result<Vec<Queued>, StoreError> {
        let sql = format!(
            "SELECT q.seq, q.series, q.key, q.quantity, q.t_ms, {READING_COLS},
                d.value, d.unit, d.object
             FROM export_queue q
             LEFT JOIN readings r ON q.series = 0 AND r.instrument = q.key AND r.t_ms = q.t_ms
             LEFT JOIN instruments i ON q.series = 0 AND i.id = q.key
             LEFT JOIN derived d ON q.series = 1 AND d.object = q.key
                AND d.quantity = q.quantity AND d.t_ms = q.t_ms
             WHERE q.seq > coalesce((SELECT seq FROM export_cursor WHERE name = ?1), 0)
             ORDER BY q.seq LIMIT ?2"
        );
        let mut st = self.conn.prepare_cached(&sql)?;
        let rows = st.query_map(params![LIVE, limit as i64], |r| {
            let series = if r.get::<_, i64>(1)? == 0 {
                Series::Reading
            } else {
                Series::Derived
            };
            let key: String = r.get(2)?;
            let quantity: String = r.get(3)?;
            let t_ms: i64 = r.get(4)?;
            let row = match series {
                Series::Reading if r.get::<_, Option<String>>(5)?.is_some() => {
                    Some(ExportRow::Reading(reading_at(r, 5)?))
                }
                Series::Derived if r.get::<_, Option<String>>(22)?.is_some() => {
                    Some(ExportRow::Derived(DerivedPoint {
                        object: key.clone(),
                        quantity: quantity.clone(),
                        t_ms,
                        value: r.get(20)?,
                        unit: r.get(21)?,
                    }))
                }
                _ => None,
            };
            Ok(Queued {
                seq: r.get(0)?,
                series,
                key,
                quantity,
                t_ms,
                row,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// After the server's answer: move the cursor to `through_seq`, add `points` to the total,
    /// record the refused points, and drop the acknowledged entries — one transaction.
    ///
    /// # Errors
    /// SQLite errors; nothing is changed then.
    pub fn commit(
        &mut self,
        through_seq: i64,
        points: usize,
        rejects: &[RejectRow],
        now_ms: i64,
    ) -> Result<(), StoreError> {
        let tx = self.conn.transaction()?;
        tx.execute(
            "INSERT INTO export_cursor (name, seq, points, rejected, updated_ms)
             VALUES (?1, ?2, ?3, ?4, ?5)
             ON CONFLICT(name) DO UPDATE SET seq = max(seq, excluded.seq),
                points = points + excluded.points, rejected = rejected + excluded.rejected,
                updated_ms = excluded.updated_ms",
            params![
                LIVE,
                through_seq,
                points as i64,
                rejects.len() as i64,
                now_ms
            ],
        )?;
        insert_rejects(&tx, rejects, now_ms)?;
        tx.execute("DELETE FROM export_queue WHERE seq <= ?1", [through_seq])?;
        tx.commit()?;
        Ok(())
    }

    /// Record refused points without touching the cursor (`seepd export`).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn record_rejects(&mut self, rejects: &[RejectRow], now_ms: i64) -> Result<(), StoreError> {
        let tx = self.conn.transaction()?;
        insert_rejects(&tx, rejects, now_ms)?;
        tx.commit()?;
        Ok(())
    }

    /// Instruments that have readings.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn reading_instruments(&self) -> Result<Vec<String>, StoreError> {
        let mut st = self
            .conn
            .prepare("SELECT DISTINCT instrument FROM readings ORDER BY instrument")?;
        let rows = st.query_map([], |r| r.get(0))?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// (object, quantity) pairs that have derived values.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn derived_series(&self) -> Result<Vec<(String, String)>, StoreError> {
        let mut st = self
            .conn
            .prepare("SELECT DISTINCT object, quantity FROM derived ORDER BY object, quantity")?;
        let rows = st.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Up to `limit` readings of `instrument` with `after_ms < t_ms < to_ms`, oldest first.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn readings_between(
        &self,
        instrument: &str,
        after_ms: i64,
        to_ms: i64,
        limit: usize,
    ) -> Result<Vec<ExportRow>, StoreError> {
        let sql = format!(
            "SELECT {READING_COLS} FROM readings r LEFT JOIN instruments i ON i.id = r.instrument
             WHERE r.instrument = ?1 AND r.t_ms > ?2 AND r.t_ms < ?3 ORDER BY r.t_ms LIMIT ?4"
        );
        let mut st = self.conn.prepare_cached(&sql)?;
        let rows = st.query_map(params![instrument, after_ms, to_ms, limit as i64], |r| {
            Ok(ExportRow::Reading(reading_at(r, 0)?))
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Up to `limit` derived values of (`object`, `quantity`) with `after_ms < t_ms < to_ms`.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn derived_between(
        &self,
        object: &str,
        quantity: &str,
        after_ms: i64,
        to_ms: i64,
        limit: usize,
    ) -> Result<Vec<ExportRow>, StoreError> {
        let mut st = self.conn.prepare_cached(
            "SELECT t_ms, value, unit FROM derived
             WHERE object = ?1 AND quantity = ?2 AND t_ms > ?3 AND t_ms < ?4
             ORDER BY t_ms LIMIT ?5",
        )?;
        let rows = st.query_map(
            params![object, quantity, after_ms, to_ms, limit as i64],
            |r| {
                Ok(ExportRow::Derived(DerivedPoint {
                    object: object.to_string(),
                    quantity: quantity.to_string(),
                    t_ms: r.get(0)?,
                    value: r.get(1)?,
                    unit: r.get(2)?,
                }))
            },
        )?;
        Ok(rows.collect::<Result<_, _>>()?)
    }
}

fn insert_rejects(
    tx: &Transaction<'_>,
    rejects: &[RejectRow],
    now_ms: i64,
) -> Result<(), StoreError> {
    let mut st = tx.prepare_cached(
        "INSERT INTO export_rejects (rejected_ms, series, key, quantity, t_ms, status, reply, lines)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
    )?;
    for r in rejects {
        st.execute(params![
            now_ms,
            r.series.name(),
            r.key,
            r.quantity,
            r.t_ms,
            r.status,
            r.reply,
            r.lines
        ])?;
    }
    Ok(())
}

#[cfg(test)]
mod tests;
