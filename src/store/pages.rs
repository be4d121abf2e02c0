//! SQL of what the web pages and `/metrics` read and of what they (and `seepd user`, `seepd
//! record`) write besides acknowledgements and silences: an alert with its state, an
//! instrument's stored readings, the newest quarantined inputs, outbox counts, the web users
//! with their roles, and the inbox of manual readings that the service's writer takes through
//! the engine.
//!
//! Knows rows, not pages: wording and roles' meaning are `web`'s.

use rusqlite::{params, Connection, OptionalExtension};

use super::{AlertRow, QuarantineRow, Store, StoreError};
use crate::quality::{Flags, Reason};

/// An alert with its state (resolution and acknowledgement); derefs to the raise.
#[derive(Debug, Clone, PartialEq)]
pub struct AlertRecord {
    pub raised: AlertRow,
    pub resolved_ms: Option<i64>,
    pub acked_ms: Option<i64>,
    pub acked_by: Option<String>,
    pub ack_note: Option<String>,
}

impl std::ops::Deref for AlertRecord {
    type Target = AlertRow;
    fn deref(&self) -> &AlertRow {
        &self.raised
    }
}

/// The columns of `alerts` that `alert_record` maps, in its order.
pub(super) const ALERT_RECORD_COLUMNS: &str = "id, rule, site, object, quantity, level, \
     raised_ms, value, unit, resolved_ms, acked_ms, acked_by, ack_note";

/// An alert row selected with `ALERT_RECORD_COLUMNS` (the one mapping of an alert with its
/// state: the web pages' alert and `open_alerts`).
pub(super) fn alert_record(r: &rusqlite::Row<'_>) -> rusqlite::Result<AlertRecord> {
    Ok(AlertRecord {
        raised: AlertRow {
            id: r.get(0)?,
            rule: r.get(1)?,
            site: r.get(2)?,
            object: r.get(3)?,
            quantity: r.get(4)?,
            level: r.get(5)?,
            raised_ms: r.get(6)?,
            value: r.get(7)?,
            unit: r.get(8)?,
        },
        resolved_ms: r.get(9)?,
        acked_ms: r.get(10)?,
        acked_by: r.get(11)?,
        ack_note: r.get(12)?,
    })
}

/// One stored reading, every column a person may want to see.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredReading {
    pub t_ms: i64,
    pub arrival_ms: i64,
    pub raw: f64,
    pub temperature_c: Option<f64>,
    pub baro_kpa: Option<f64>,
    pub eng_value: f64,
    pub eng_unit: String,
    pub pressure_kpa: Option<f64>,
    pub total_head_m: Option<f64>,
    pub flags: Flags,
}

const READING_COLUMNS: &str = "t_ms, arrival_ms, raw, temperature_c, baro_kpa, eng_value, \
     eng_unit, pressure_kpa, total_head_m, flags";

fn reading_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<StoredReading> {
    Ok(StoredReading {
        t_ms: r.get(0)?,
        arrival_ms: r.get(1)?,
        raw: r.get(2)?,
        temperature_c: r.get(3)?,
        baro_kpa: r.get(4)?,
        eng_value: r.get(5)?,
        eng_unit: r.get(6)?,
        pressure_kpa: r.get(7)?,
        total_head_m: r.get(8)?,
        flags: Flags(r.get(9)?),
    })
}

/// A web user's role: what they may do besides reading.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Role {
    /// Reads every page; changes nothing.
    Viewer,
    /// Also acknowledges, silences and records manual readings.
    Responder,
}

impl Role {
    pub const fn name(self) -> &'static str {
        match self {
            Role::Viewer => "viewer",
            Role::Responder => "responder",
        }
    }

    /// The role called `name`.
    pub fn from_name(name: &str) -> Option<Role> {
        [Role::Viewer, Role::Responder]
            .into_iter()
            .find(|r| r.name() == name)
    }
}

/// A manual reading waiting in (or taken from) the inbox.
#[derive(Debug, Clone, PartialEq)]
pub struct ManualReading {
    pub id: i64,
    pub instrument: String,
    /// In the instrument's raw unit (what its logger would send).
    pub value: f64,
    /// Thermistor temperature read with it, °C.
    pub temperature_c: Option<f64>,
    pub t_ms: i64,
    /// Who read it.
    pub by: String,
    /// When it was entered.
    pub entered_ms: i64,
}

/// What became of a manual reading: `None` while it waits.
#[derive(Debug, Clone, PartialEq)]
pub struct ManualFate {
    pub done_ms: i64,
    /// `stored`, `already stored (...)` or `quarantined: <reason>: <detail>`.
    pub result: String,
}

impl Store {
    /// Alert number `id` with its state.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn alert(&self, id: i64) -> Result<Option<AlertRecord>, StoreError> {
        Ok(self
            .conn
            .query_row(
                &format!("SELECT {ALERT_RECORD_COLUMNS} FROM alerts WHERE id = ?1"),
                [id],
                alert_record,
            )
            .optional()?)
    }

    /// The latest reading of `instrument`.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn latest_reading(&self, instrument: &str) -> Result<Option<StoredReading>, StoreError> {
        Ok(self
            .conn
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
        &self,
        instrument: &str,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<Vec<StoredReading>, StoreError> {
        let mut st = self.conn.prepare(&format!(
            "SELECT {READING_COLUMNS} FROM readings
             WHERE instrument = ?1 AND t_ms >= ?2 AND t_ms < ?3 ORDER BY t_ms"
        ))?;
        let rows = st.query_map(params![instrument, from_ms, to_ms], reading_row)?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// The instruments the newest value of a derived quantity was computed from (none for an
    /// instrument's own quantity).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn derived_inputs(&self, object: &str, quantity: &str) -> Result<Vec<String>, StoreError> {
        let inputs: Option<String> = self
            .conn
            .query_row(
                "SELECT inputs FROM derived WHERE object = ?1 AND quantity = ?2
                 ORDER BY t_ms DESC LIMIT 1",
                params![object, quantity],
                |r| r.get(0),
            )
            .optional()?;
        Ok(inputs
            .unwrap_or_default()
            .split(',')
            .filter(|s| !s.is_empty())
            .map(str::to_string)
            .collect())
    }

    /// Inputs quarantined at or after `since_ms`.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn quarantined_since(&self, since_ms: i64) -> Result<i64, StoreError> {
        Ok(self.conn.query_row(
            "SELECT count(*) FROM quarantine WHERE received_ms >= ?1",
            [since_ms],
            |r| r.get(0),
        )?)
    }

    /// The newest `limit` quarantined inputs, newest first (a reason code this build does not
    /// know is shown as `malformed`).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn quarantine_recent(&self, limit: usize) -> Result<Vec<QuarantineRow>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT received_ms, topic, reason, detail, payload FROM quarantine
             ORDER BY received_ms DESC, id DESC LIMIT ?1",
        )?;
        let rows = st.query_map([limit as i64], |r| {
            let code: String = r.get(2)?;
            Ok(QuarantineRow {
                received_ms: r.get(0)?,
                topic: r.get(1)?,
                reason: Reason::ALL
                    .into_iter()
                    .find(|x| x.code() == code)
                    .unwrap_or(Reason::Malformed),
                detail: r.get(3)?,
                payload: r.get(4)?,
                redelivered: false,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Outbox messages by status (`pending`, `sent`, `dead`).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn outbox_counts(&self) -> Result<Vec<(String, i64)>, StoreError> {
        let mut st = self
            .conn
            .prepare("SELECT status, count(*) FROM outbox GROUP BY status")?;
        let rows = st.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Whether the database takes a write lock now (a write transaction begun and rolled back).
    ///
    /// # Errors
    /// SQLite errors (locked past the busy timeout, read-only file...).
    pub fn writable(&self) -> Result<(), StoreError> {
        self.conn.execute_batch("BEGIN IMMEDIATE; ROLLBACK;")?;
        Ok(())
    }

    /// Add or replace web user `name` (hash and role); true when the user existed.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn put_user(
        &self,
        name: &str,
        hash: &str,
        role: Role,
        now_ms: i64,
    ) -> Result<bool, StoreError> {
        let existed = self.user(name)?.is_some();
        self.conn.execute(
            "INSERT INTO web_users (name, hash, created_ms, role) VALUES (?1, ?2, ?3, ?4)
             ON CONFLICT (name) DO UPDATE SET hash = excluded.hash, role = excluded.role",
            params![name, hash, now_ms, role.name()],
        )?;
        Ok(existed)
    }

    /// Remove web user `name`; true when there was one.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn remove_user(&self, name: &str) -> Result<bool, StoreError> {
        Ok(self
            .conn
            .execute("DELETE FROM web_users WHERE name = ?1", [name])?
            > 0)
    }

    /// The stored password hash and role of web user `name`.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn user(&self, name: &str) -> Result<Option<(String, Role)>, StoreError> {
        let row: Option<(String, String)> = self
            .conn
            .query_row(
                "SELECT hash, role FROM web_users WHERE name = ?1",
                [name],
                |r| Ok((r.get(0)?, r.get(1)?)),
            )
            .optional()?;
        // An unknown role (a newer seepd's) gives no more than reading.
        Ok(row.map(|(h, r)| (h, Role::from_name(&r).unwrap_or(Role::Viewer))))
    }

    /// Web users and their roles, sorted by name.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn users(&self) -> Result<Vec<(String, String)>, StoreError> {
        let mut st = self
            .conn
            .prepare("SELECT name, role FROM web_users ORDER BY name")?;
        let rows = st.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Put a manual reading in the inbox (its `id` is ignored); its id.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn queue_manual(&self, m: &ManualReading) -> Result<i64, StoreError> {
        self.conn.execute(
            "INSERT INTO manual_inbox (instrument, value, temperature_c, t_ms, by, entered_ms)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
            params![
                m.instrument,
                m.value,
                m.temperature_c,
                m.t_ms,
                m.by,
                m.entered_ms
            ],
        )?;
        Ok(self.conn.last_insert_rowid())
    }

    /// Manual readings not yet taken, oldest entry first.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn waiting_manual(&self) -> Result<Vec<ManualReading>, StoreError> {
        let mut st = self.conn.prepare_cached(
            "SELECT id, instrument, value, temperature_c, t_ms, by, entered_ms FROM manual_inbox
             WHERE done_ms IS NULL ORDER BY id",
        )?;
        let rows = st.query_map([], |r| {
            Ok(ManualReading {
                id: r.get(0)?,
                instrument: r.get(1)?,
                value: r.get(2)?,
                temperature_c: r.get(3)?,
                t_ms: r.get(4)?,
                by: r.get(5)?,
                entered_ms: r.get(6)?,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// What became of manual reading `id` (`None`: still waiting or no such entry).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn manual_fate(&self, id: i64) -> Result<Option<ManualFate>, StoreError> {
        Ok(self
            .conn
            .query_row(
                "SELECT done_ms, result FROM manual_inbox WHERE id = ?1 AND done_ms IS NOT NULL",
                [id],
                |r| {
                    Ok(ManualFate {
                        done_ms: r.get(0)?,
                        result: r.get(1)?,
                    })
                },
            )
            .optional()?)
    }
}

/// A manual reading taken: its inbox id, the engine's reject if any, when.
pub(super) struct ManualDone<'a> {
    pub id: i64,
    pub rejected: Option<&'a str>,
    pub now_ms: i64,
}

/// Mark a manual reading taken, with its result in words (in the transaction that stores
/// what it produced).
pub(super) fn mark_manual(
    conn: &Connection,
    m: &ManualDone<'_>,
    stats: &super::BatchStats,
) -> rusqlite::Result<()> {
    let result = match m.rejected {
        Some(r) => format!("quarantined: {r}"),
        None if stats.conflicts > 0 => {
            "quarantined: conflicting_duplicate: another value is stored for that time".into()
        }
        None if stats.duplicates > 0 => "already stored (the same value at that time)".into(),
        None => "stored".to_string(),
    };
    conn.execute(
        "UPDATE manual_inbox SET done_ms = ?2, result = ?3 WHERE id = ?1 AND done_ms IS NULL",
        params![m.id, m.now_ms, result],
    )?;
    Ok(())
}
