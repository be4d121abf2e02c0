//! The database as the web pages read it: the small reads the pages and `/metrics` need that
//! the store has no function for (an alert by number, an instrument's readings over a period,
//! the quarantine list, counts by status), and the `web_users` table of `seepd user`.
//!
//! Owns these SQL statements and the `web_users` table (created here if missing, so the
//! store's schema is untouched). Writes nothing else: acknowledgements and silences go through
//! `alerts::commands`, like the CLI's.

use std::path::Path;

use rusqlite::{params, Connection, OptionalExtension};

use crate::store::{Store, StoreError};

/// Open the database for one request (WAL: safe beside the writer).
///
/// # Errors
/// SQLite errors.
pub fn open(db: &Path) -> Result<Store, StoreError> {
    let store = Store::open(db)?;
    ensure_users(store.conn())?;
    Ok(store)
}

fn ensure_users(conn: &Connection) -> Result<(), StoreError> {
    conn.execute_batch(
        "CREATE TABLE IF NOT EXISTS web_users (
            name TEXT PRIMARY KEY,
            hash TEXT NOT NULL,
            created_ms INTEGER NOT NULL
        );",
    )?;
    Ok(())
}

/// Add or replace user `name` with the argon2 hash `hash`; true when the user existed.
///
/// # Errors
/// SQLite errors.
pub fn put_user(
    conn: &Connection,
    name: &str,
    hash: &str,
    now_ms: i64,
) -> Result<bool, StoreError> {
    let existed = user_hash(conn, name)?.is_some();
    conn.execute(
        "INSERT INTO web_users (name, hash, created_ms) VALUES (?1, ?2, ?3)
         ON CONFLICT (name) DO UPDATE SET hash = excluded.hash",
        params![name, hash, now_ms],
    )?;
    Ok(existed)
}

/// Remove user `name`; true when there was one.
///
/// # Errors
/// SQLite errors.
pub fn remove_user(conn: &Connection, name: &str) -> Result<bool, StoreError> {
    Ok(conn.execute("DELETE FROM web_users WHERE name = ?1", [name])? > 0)
}

/// The stored hash of user `name`.
///
/// # Errors
/// SQLite errors.
pub fn user_hash(conn: &Connection, name: &str) -> Result<Option<String>, StoreError> {
    Ok(conn
        .query_row("SELECT hash FROM web_users WHERE name = ?1", [name], |r| {
            r.get(0)
        })
        .optional()?)
}

/// User names, sorted.
///
/// # Errors
/// SQLite errors.
pub fn users(conn: &Connection) -> Result<Vec<String>, StoreError> {
    let mut st = conn.prepare("SELECT name FROM web_users ORDER BY name")?;
    let rows = st.query_map([], |r| r.get(0))?;
    Ok(rows.collect::<Result<_, _>>()?)
}

/// One alert as the alert page shows it.
#[derive(Debug, Clone)]
pub struct Alert {
    pub id: i64,
    pub rule: String,
    pub site: String,
    pub object: String,
    pub quantity: String,
    pub level: String,
    pub raised_ms: i64,
    pub value: Option<f64>,
    pub unit: String,
    pub resolved_ms: Option<i64>,
    pub acked_ms: Option<i64>,
    pub acked_by: Option<String>,
    pub ack_note: Option<String>,
}

/// Alert number `id`.
///
/// # Errors
/// SQLite errors.
pub fn alert(conn: &Connection, id: i64) -> Result<Option<Alert>, StoreError> {
    Ok(conn
        .query_row(
            "SELECT id, rule, site, object, quantity, level, raised_ms, value, unit, resolved_ms,
                    acked_ms, acked_by, ack_note
             FROM alerts WHERE id = ?1",
            [id],
            |r| {
                Ok(Alert {
                    id: r.get(0)?,
                    rule: r.get(1)?,
                    site: r.get(2)?,
                    object: r.get(3)?,
                    quantity: r.get(4)?,
                    level: r.get(5)?,
                    raised_ms: r.get(6)?,
                    value: r.get(7)?,
                    unit: r.get(8)?,
                    resolved_ms: r.get(9)?,
                    acked_ms: r.get(10)?,
                    acked_by: r.get(11)?,
                    ack_note: r.get(12)?,
                })
            },
        )
        .optional()?)
}

/// One stored reading, every column a person may want to see.
#[derive(Debug, Clone)]
pub struct Reading {
    pub t_ms: i64,
    pub arrival_ms: i64,
    pub raw: f64,
    pub temperature_c: Option<f64>,
    pub baro_kpa: Option<f64>,
    pub eng_value: f64,
    pub eng_unit: String,
    pub pressure_kpa: Option<f64>,
    pub total_head_m: Option<f64>,
    pub flags: crate::quality::Flags,
}

const READING_COLUMNS: &str = "t_ms, arrival_ms, raw, temperature_c, baro_kpa, eng_value, \
     eng_unit, pressure_kpa, total_head_m, flags";

fn reading_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<Reading> {
    Ok(Reading {
        t_ms: r.get(0)?,
        arrival_ms: r.get(1)?,
        raw: r.get(2)?,
        temperature_c: r.get(3)?,
        baro_kpa: r.get(4)?,
        eng_value: r.get(5)?,
        eng_unit: r.get(6)?,
        pressure_kpa: r.get(7)?,
        total_head_m: r.get(8)?,
        flags: crate::quality::Flags(r.get(9)?),
    })
}

/// The latest reading of `instrument`.
///
/// # Errors
/// SQLite errors.
pub fn latest_reading(conn: &Connection, instrument: &str) -> Result<Option<Reading>, StoreError> {
    Ok(conn
        .query_row(
            &format!(
                "SELECT {READING_COLUMNS} FROM readings WHERE instrument = ?1
                 ORDER BY t_ms DESC LIMIT 1"
            ),
            [instrument],
            reading_row,
        )
        .optional()?)
}

/// Readings of `instrument` with `from_ms <= t < to_ms`, oldest first.
///
/// # Errors
/// SQLite errors.
pub fn readings_between(
    conn: &Connection,
    instrument: &str,
    from_ms: i64,
    to_ms: i64,
) -> Result<Vec<Reading>, StoreError> {
    let mut st = conn.prepare(&format!(
        "SELECT {READING_COLUMNS} FROM readings
         WHERE instrument = ?1 AND t_ms >= ?2 AND t_ms < ?3 ORDER BY t_ms"
    ))?;
    let rows = st.query_map(params![instrument, from_ms, to_ms], reading_row)?;
    Ok(rows.collect::<Result<_, _>>()?)
}

/// A derived series with `from_ms <= t < to_ms` (values only), oldest first.
///
/// # Errors
/// SQLite errors.
pub fn derived_between(
    conn: &Connection,
    object: &str,
    quantity: &str,
    from_ms: i64,
    to_ms: i64,
) -> Result<Vec<(i64, f64)>, StoreError> {
    let mut st = conn.prepare(
        "SELECT t_ms, value FROM derived
         WHERE object = ?1 AND quantity = ?2 AND t_ms >= ?3 AND t_ms < ?4 AND value IS NOT NULL
         ORDER BY t_ms",
    )?;
    let rows = st.query_map(params![object, quantity, from_ms, to_ms], |r| {
        Ok((r.get(0)?, r.get(1)?))
    })?;
    Ok(rows.collect::<Result<_, _>>()?)
}

/// Inputs quarantined at or after `since_ms`.
///
/// # Errors
/// SQLite errors.
pub fn quarantined_since(conn: &Connection, since_ms: i64) -> Result<i64, StoreError> {
    Ok(conn.query_row(
        "SELECT count(*) FROM quarantine WHERE received_ms >= ?1",
        [since_ms],
        |r| r.get(0),
    )?)
}

/// One quarantined input.
#[derive(Debug, Clone)]
pub struct Quarantined {
    pub received_ms: i64,
    pub topic: String,
    pub reason: String,
    pub detail: String,
    pub payload: Vec<u8>,
}

/// The newest `limit` quarantined inputs, newest first.
///
/// # Errors
/// SQLite errors.
pub fn quarantine_recent(conn: &Connection, limit: usize) -> Result<Vec<Quarantined>, StoreError> {
    let mut st = conn.prepare(
        "SELECT received_ms, topic, reason, detail, payload FROM quarantine
         ORDER BY received_ms DESC, id DESC LIMIT ?1",
    )?;
    let rows = st.query_map([limit as i64], |r| {
        Ok(Quarantined {
            received_ms: r.get(0)?,
            topic: r.get(1)?,
            reason: r.get(2)?,
            detail: r.get(3)?,
            payload: r.get(4)?,
        })
    })?;
    Ok(rows.collect::<Result<_, _>>()?)
}

/// Outbox messages by status (`pending`, `sent`, `dead`).
///
/// # Errors
/// SQLite errors.
pub fn outbox_counts(conn: &Connection) -> Result<Vec<(String, i64)>, StoreError> {
    let mut st = conn.prepare("SELECT status, count(*) FROM outbox GROUP BY status")?;
    let rows = st.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?;
    Ok(rows.collect::<Result<_, _>>()?)
}

/// Whether the database takes a write lock now (a write transaction begun and rolled back).
pub fn writable(conn: &Connection) -> Result<(), StoreError> {
    conn.execute_batch("BEGIN IMMEDIATE; ROLLBACK;")?;
    Ok(())
}
