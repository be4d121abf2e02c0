//! SQL for trends, stage-response and HST models and the sections' seepage calibrations: the
//! model history table, the head series a
//! fit is trained on, and the recent readings the engine's trend and health state is seeded
//! from at start.
//!
//! Owns these statements only; what a model means belongs to `domain` and `watch`.

use rusqlite::{params, OptionalExtension};

use super::{Store, StoreError};
use crate::quality::Flags;

/// One fitted model as stored (one row per fit: the table is the model history).
#[derive(Debug, Clone, PartialEq)]
pub struct ModelRow {
    /// Model id from the configuration.
    pub id: String,
    /// `response`, `hst`, or `seepage` (a section's calibration; id = the section id).
    pub kind: String,
    /// When the fit ran (wall clock), ms.
    pub fitted_ms: i64,
    /// Training readings were taken from `[train_start_ms, train_end_ms)`.
    pub train_start_ms: i64,
    pub train_end_ms: i64,
    /// Response models: intercept a (m), ratio b (m/m) and lag; `None` for HST.
    pub a: Option<f64>,
    pub b: Option<f64>,
    pub lag_ms: Option<i64>,
    pub r_squared: f64,
    /// Residual standard deviation of the fit, m.
    pub sigma: f64,
    /// Readings the fit used.
    pub n: i64,
    /// The whole model as JSON (what `watch` needs to predict), so it can be reloaded.
    pub params: String,
}

/// One stored reading, as the trend and health state needs it at start.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SeedReading {
    pub t_ms: i64,
    pub total_head_m: Option<f64>,
    pub temperature_c: Option<f64>,
    pub flags: Flags,
    /// The raw value as the logger sent it (the flatline check).
    pub raw: f64,
}

/// The time span of an instrument's stored readings.
#[derive(Debug, Clone, PartialEq)]
pub struct InstrumentSpan {
    pub instrument: String,
    pub first_ms: i64,
    pub last_ms: i64,
}

fn model_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<ModelRow> {
    Ok(ModelRow {
        id: r.get(0)?,
        kind: r.get(1)?,
        fitted_ms: r.get(2)?,
        train_start_ms: r.get(3)?,
        train_end_ms: r.get(4)?,
        a: r.get(5)?,
        b: r.get(6)?,
        lag_ms: r.get(7)?,
        r_squared: r.get(8)?,
        sigma: r.get(9)?,
        n: r.get(10)?,
        params: r.get(11)?,
    })
}

impl Store {
    /// Append a fitted model to the history.
    ///
    /// # Errors
    /// SQLite errors (a fit of the same model in the same millisecond replaces the first).
    pub fn insert_model(&self, m: &ModelRow) -> Result<(), StoreError> {
        self.conn.execute(
            "INSERT OR REPLACE INTO models (id, kind, fitted_ms, train_start_ms, train_end_ms,
                a, b, lag_ms, r_squared, sigma, n, params)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12)",
            params![
                m.id,
                m.kind,
                m.fitted_ms,
                m.train_start_ms,
                m.train_end_ms,
                m.a,
                m.b,
                m.lag_ms,
                m.r_squared,
                m.sigma,
                m.n,
                m.params
            ],
        )?;
        Ok(())
    }

    /// The newest fit of every stage-response and HST model id (section calibrations are
    /// `models_of_kind`'s).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn latest_models(&self) -> Result<Vec<ModelRow>, StoreError> {
        self.models_where(
            "JOIN (SELECT id AS mid, max(fitted_ms) AS mt FROM models
                   WHERE kind IN ('response', 'hst') GROUP BY id) l
               ON l.mid = m.id AND l.mt = m.fitted_ms
             WHERE m.kind IN ('response', 'hst')",
        )
    }

    /// Every fit of `kind`, oldest first per id.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn models_of_kind(&self, kind: &str) -> Result<Vec<ModelRow>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT id, kind, fitted_ms, train_start_ms, train_end_ms, a, b, lag_ms, r_squared,
                sigma, n, params FROM models WHERE kind = ?1 ORDER BY id, fitted_ms",
        )?;
        let rows = st.query_map(params![kind], model_row)?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Every fit of every model, oldest first (the model history).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn model_history(&self) -> Result<Vec<ModelRow>, StoreError> {
        self.models_where("")
    }

    fn models_where(&self, join: &str) -> Result<Vec<ModelRow>, StoreError> {
        let mut st = self.conn.prepare(&format!(
            "SELECT m.id, m.kind, m.fitted_ms, m.train_start_ms, m.train_end_ms, m.a, m.b,
                m.lag_ms, m.r_squared, m.sigma, m.n, m.params FROM models m {join}
             ORDER BY m.id, m.fitted_ms"
        ))?;
        let rows = st.query_map([], model_row)?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Total heads of `instrument` in `[start_ms, end_ms)` whose flags share no bit with
    /// `exclude`, oldest first: the series a model is trained on.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn heads_between(
        &self,
        instrument: &str,
        start_ms: i64,
        end_ms: i64,
        exclude: Flags,
    ) -> Result<Vec<(i64, f64)>, StoreError> {
        let mut st = self.conn.prepare_cached(
            "SELECT t_ms, total_head_m FROM readings
             WHERE instrument = ?1 AND t_ms >= ?2 AND t_ms < ?3 AND total_head_m IS NOT NULL
               AND (flags & ?4) = 0
             ORDER BY t_ms",
        )?;
        let rows = st.query_map(params![instrument, start_ms, end_ms, exclude.0], |r| {
            Ok((r.get(0)?, r.get(1)?))
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Readings of `instrument` at or after `since_ms`, oldest first (seeding at start);
    /// readings stamped ahead of the clock (`time_ahead`) are left out.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn readings_since(
        &self,
        instrument: &str,
        since_ms: i64,
    ) -> Result<Vec<SeedReading>, StoreError> {
        let mut st = self.conn.prepare_cached(
            "SELECT t_ms, total_head_m, temperature_c, flags, raw FROM readings
             WHERE instrument = ?1 AND t_ms >= ?2 AND (flags & ?3) = 0 ORDER BY t_ms",
        )?;
        let ahead = Flags::TIME_AHEAD.0;
        let rows = st.query_map(params![instrument, since_ms, ahead], |r| {
            Ok(SeedReading {
                t_ms: r.get(0)?,
                total_head_m: r.get(1)?,
                temperature_c: r.get(2)?,
                flags: Flags(r.get(3)?),
                raw: r.get(4)?,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// First and last reading time of every instrument that has readings.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn instrument_spans(&self) -> Result<Vec<InstrumentSpan>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT instrument, min(t_ms), max(t_ms) FROM readings GROUP BY instrument
             ORDER BY instrument",
        )?;
        let rows = st.query_map([], |r| {
            Ok(InstrumentSpan {
                instrument: r.get(0)?,
                first_ms: r.get(1)?,
                last_ms: r.get(2)?,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Time of `instrument`'s latest reading with a total head.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn last_head_ms(&self, instrument: &str) -> Result<Option<i64>, StoreError> {
        Ok(self
            .conn
            .query_row(
                "SELECT max(t_ms) FROM readings WHERE instrument = ?1 AND total_head_m IS NOT NULL",
                params![instrument],
                |r| r.get::<_, Option<i64>>(0),
            )
            .optional()?
            .flatten())
    }
}
