//! SQL of the short summaries the operator commands and the demo print: the newest reading of
//! all, and the alerts raised and still active.

use rusqlite::OptionalExtension;

use super::{Store, StoreError};

/// An alert that has not resolved: (rule, level, object).
pub type ActiveAlert = (String, String, String);

impl Store {
    /// The newest reading of all, as (instrument, time in ms). The latest time per instrument
    /// uses the primary key; the overall latest is their maximum.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn latest_reading_overall(&self) -> Result<Option<(String, i64)>, StoreError> {
        Ok(self
            .conn
            .query_row(
                "SELECT instrument, t FROM
                    (SELECT instrument, max(t_ms) AS t FROM readings GROUP BY instrument)
                 ORDER BY t DESC LIMIT 1",
                [],
                |r| Ok((r.get(0)?, r.get(1)?)),
            )
            .optional()?)
    }

    /// How many alerts were ever raised, and those not resolved (oldest first).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn alert_summary(&self) -> Result<(i64, Vec<ActiveAlert>), StoreError> {
        let raised = self
            .conn
            .query_row("SELECT count(*) FROM alerts", [], |r| r.get(0))?;
        let mut st = self.conn.prepare(
            "SELECT rule, level, object FROM alerts WHERE resolved_ms IS NULL ORDER BY id",
        )?;
        let active = st
            .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))?
            .collect::<Result<Vec<_>, _>>()?;
        Ok((raised, active))
    }

    /// Make every pending message due now (replay's email passes do not wait for backoff).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn make_pending_due(&self) -> Result<(), StoreError> {
        self.conn.execute(
            "UPDATE outbox SET next_attempt_ms = 0 WHERE status = 'pending'",
            [],
        )?;
        Ok(())
    }
}
