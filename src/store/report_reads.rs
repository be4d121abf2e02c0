//! SQL of the report's reads (read-only): one reading quantity of an instrument over a period,
//! a derived quantity's values and extremes, quarantine counts, the time of an instrument's
//! highest value, and the alert events, acknowledgements and silences of a period. What the
//! report makes of them is `report`'s job.

use rusqlite::{params, OptionalExtension};

use super::alerts::{event_row, EventRow};
use super::{column_of, Store, StoreError};
use crate::model::ReadingQuantity;

/// A value at a time: (time ms, value).
pub type Point = (i64, f64);

/// A derived quantity's latest, lowest and highest value in a period (the earliest of equal
/// extremes), and the unit stored with the latest.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Extremes {
    pub latest: Option<Point>,
    pub min: Option<Point>,
    pub max: Option<Point>,
    pub unit: String,
}

/// An alert's step in a period, with the alert's object and quantity ('' for a step whose
/// alert row is gone).
#[derive(Debug, Clone)]
pub struct PeriodEvent {
    pub event: EventRow,
    pub object: String,
    pub quantity: String,
}

/// An acknowledgement in a period, with the level the alert had when it was given.
#[derive(Debug, Clone)]
pub struct PeriodAck {
    pub t_ms: i64,
    pub who: String,
    pub note: Option<String>,
    pub alert: i64,
    pub rule: String,
    pub object: String,
    pub level: String,
}

/// A silence created or in force in a period (on a rule or an object).
#[derive(Debug, Clone)]
pub struct PeriodSilence {
    pub rule: Option<String>,
    pub object: Option<String>,
    pub until_ms: i64,
    pub reason: String,
    pub who: String,
    pub created_ms: i64,
}

impl Store {
    /// The stored values of `q` of `instrument` with `from_ms <= t < to_ms`, oldest first, each
    /// with its quality flags.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn reading_points(
        &self,
        instrument: &str,
        q: ReadingQuantity,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<Vec<(i64, f64, u32)>, StoreError> {
        let column = column_of(q);
        let mut st = self.conn.prepare_cached(&format!(
            "SELECT t_ms, {column}, flags FROM readings WHERE instrument = ?1 AND t_ms >= ?2
             AND t_ms < ?3 AND {column} IS NOT NULL ORDER BY t_ms"
        ))?;
        let rows = st.query_map(params![instrument, from_ms, to_ms], |r| {
            Ok((r.get(0)?, r.get(1)?, r.get(2)?))
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// The stored values of a derived quantity with `from_ms <= t < to_ms`, oldest first.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn derived_points(
        &self,
        object: &str,
        quantity: &str,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<Vec<Point>, StoreError> {
        let mut st = self.conn.prepare_cached(
            "SELECT t_ms, value FROM derived WHERE object = ?1 AND quantity = ?2 AND t_ms >= ?3
             AND t_ms < ?4 AND value IS NOT NULL ORDER BY t_ms",
        )?;
        let rows = st.query_map(params![object, quantity, from_ms, to_ms], |r| {
            Ok((r.get(0)?, r.get(1)?))
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// A derived quantity's latest, lowest and highest value with `from_ms <= t < to_ms`.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn derived_extremes(
        &self,
        object: &str,
        quantity: &str,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<Extremes, StoreError> {
        let one = |order: &str| -> Result<Option<(i64, f64, String)>, StoreError> {
            Ok(self
                .conn
                .prepare_cached(&format!(
                    "SELECT t_ms, value, unit FROM derived WHERE object = ?1 AND quantity = ?2
                     AND t_ms >= ?3 AND t_ms < ?4 AND value IS NOT NULL ORDER BY {order} LIMIT 1"
                ))?
                .query_row(params![object, quantity, from_ms, to_ms], |r| {
                    Ok((r.get(0)?, r.get(1)?, r.get(2)?))
                })
                .optional()?)
        };
        let latest = one("t_ms DESC")?;
        let point = |o: Option<(i64, f64, String)>| o.map(|(t, v, _)| (t, v));
        Ok(Extremes {
            unit: latest.as_ref().map(|l| l.2.clone()).unwrap_or_default(),
            latest: point(latest),
            min: point(one("value ASC, t_ms ASC")?),
            max: point(one("value DESC, t_ms ASC")?),
        })
    }

    /// Quarantined inputs received with `from_ms <= t < to_ms` (whole service), by reason.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn quarantine_by_reason(
        &self,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<Vec<(String, i64)>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT reason, count(*) FROM quarantine WHERE received_ms >= ?1 AND received_ms < ?2
             GROUP BY reason ORDER BY reason",
        )?;
        let rows = st.query_map(params![from_ms, to_ms], |r| Ok((r.get(0)?, r.get(1)?)))?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// The time of `instrument`'s highest total head with `from_ms <= t < to_ms` (the earliest
    /// of equal ones), if it has any.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn highest_head_time(
        &self,
        instrument: &str,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<Option<i64>, StoreError> {
        Ok(self
            .conn
            .query_row(
                "SELECT t_ms FROM readings WHERE instrument = ?1 AND t_ms >= ?2 AND t_ms < ?3
                 AND total_head_m IS NOT NULL ORDER BY total_head_m DESC, t_ms ASC LIMIT 1",
                params![instrument, from_ms, to_ms],
                |r| r.get(0),
            )
            .optional()?)
    }

    /// Every step of every alert of `site` with `from_ms <= t < to_ms` except
    /// acknowledgements, in the order it happened, with the level and value of that step.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn period_events(
        &self,
        site: &str,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<Vec<PeriodEvent>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT e.alert, e.rule, e.site, e.kind, e.level, e.value, e.unit, e.t_ms,
                    e.recorded_ms, e.detail, coalesce(a.object, ''), coalesce(a.quantity, '')
             FROM alert_events e LEFT JOIN alerts a ON a.id = e.alert
             WHERE e.site = ?1 AND e.t_ms >= ?2 AND e.t_ms < ?3 AND e.kind != 'acknowledged'
             ORDER BY e.t_ms, e.id",
        )?;
        let rows = st.query_map(params![site, from_ms, to_ms], |r| {
            Ok(PeriodEvent {
                event: event_row(r)?,
                object: r.get(10)?,
                quantity: r.get(11)?,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Acknowledgements of `site`'s alerts with `from_ms <= t < to_ms`, from the operators' own
    /// record (also those the service has not applied yet), each at the level the alert had
    /// when it was given.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn period_acks(
        &self,
        site: &str,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<Vec<PeriodAck>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT k.t_ms, k.who, k.note, a.id, a.rule, a.object,
                    coalesce((SELECT e.level FROM alert_events e
                              WHERE e.alert = a.id AND e.t_ms <= k.t_ms AND e.kind != 'acknowledged'
                              ORDER BY e.t_ms DESC, e.id DESC LIMIT 1), a.level)
             FROM acks k JOIN alerts a ON a.id = k.alert
             WHERE a.site = ?1 AND k.t_ms >= ?2 AND k.t_ms < ?3",
        )?;
        let rows = st.query_map(params![site, from_ms, to_ms], |r| {
            Ok(PeriodAck {
                t_ms: r.get(0)?,
                who: r.get(1)?,
                note: r.get(2)?,
                alert: r.get(3)?,
                rule: r.get(4)?,
                object: r.get(5)?,
                level: r.get(6)?,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Silences (every site: they have none) created before `to_ms` and ending after
    /// `from_ms`.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn period_silences(
        &self,
        from_ms: i64,
        to_ms: i64,
    ) -> Result<Vec<PeriodSilence>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT rule, object, until_ms, reason, who, created_ms FROM silences
             WHERE created_ms < ?2 AND until_ms > ?1",
        )?;
        let rows = st.query_map(params![from_ms, to_ms], |r| {
            Ok(PeriodSilence {
                rule: r.get(0)?,
                object: r.get(1)?,
                until_ms: r.get(2)?,
                reason: r.get(3)?,
                who: r.get(4)?,
                created_ms: r.get(5)?,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }
}
