//! SQL of the short summaries the operator commands and the demo print: the newest reading of
//! all, the alerts raised and still active, and one quantity's series for `seepd plot`.

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

    /// The stored values of `quantity` of `object` (an instrument's reading quantity, or a
    /// derived quantity) with `from_ms <= t < to_ms`, oldest first, and their stored (SI) unit.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn series(
        &self,
        object: &str,
        quantity: &str,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<(Vec<(i64, f64)>, String), StoreError> {
        let sql = match crate::model::ReadingQuantity::from_name(quantity) {
            Some(q) => format!(
                "SELECT t_ms, {}, eng_unit FROM readings WHERE instrument = ?1 AND t_ms >= ?2 \
                 AND t_ms < ?3 AND {0} IS NOT NULL ORDER BY t_ms",
                super::column_of(q)
            ),
            None => "SELECT t_ms, value, unit FROM derived WHERE object = ?1 AND quantity = ?4 \
                     AND t_ms >= ?2 AND t_ms < ?3 AND value IS NOT NULL ORDER BY t_ms"
                .into(),
        };
        let mut st = self.conn.prepare(&sql)?;
        let mut unit = String::new();
        let mut points = Vec::new();
        let mut rows = if sql.contains("?4") {
            st.query(rusqlite::params![object, from_ms, to_ms, quantity])?
        } else {
            st.query(rusqlite::params![object, from_ms, to_ms])?
        };
        while let Some(r) = rows.next()? {
            points.push((r.get(0)?, r.get(1)?));
            if unit.is_empty() {
                unit = r.get(2)?;
            }
        }
        let unit = match crate::model::ReadingQuantity::from_name(quantity) {
            Some(crate::model::ReadingQuantity::Pressure) => "kPa".into(),
            Some(
                crate::model::ReadingQuantity::PressureHead
                | crate::model::ReadingQuantity::TotalHead,
            ) => "m".into(),
            _ => unit,
        };
        Ok((points, unit))
    }
}
