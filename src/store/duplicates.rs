//! Conflicting duplicates: a reading for an (instrument, time) already stored with another raw
//! value or temperature. A plain redelivery (the same values) is nothing to record; a conflict
//! keeps the first stored value and becomes a `conflicting_duplicate` quarantine row in the
//! same transaction. Owns that comparison and the row's wording; the insert is `write_batch`'s.

use chrono::{DateTime, Utc};
use rusqlite::{params, OptionalExtension};

use super::{QuarantineRow, ReadingRow, StoreError};
use crate::quality::Reason;

/// The quarantine row of reading `r` if its (instrument, time) is stored with another raw value
/// or temperature (not a plain redelivery). Its payload is the reading as an NDJSON replay
/// line, so that it can be looked at or replayed; it came from no single topic.
pub(super) fn conflict(
    tx: &rusqlite::Transaction<'_>,
    r: &ReadingRow,
) -> Result<Option<QuarantineRow>, StoreError> {
    let mut st = tx.prepare_cached(
        "SELECT raw, temperature_c FROM readings WHERE instrument = ?1 AND t_ms = ?2",
    )?;
    let stored: Option<(f64, Option<f64>)> = st
        .query_row(params![r.instrument, r.t_ms], |row| {
            Ok((row.get(0)?, row.get(1)?))
        })
        .optional()?;
    let Some((raw, temperature_c)) = stored else {
        return Ok(None);
    };
    if raw == r.raw && temperature_c == r.temperature_c {
        return Ok(None);
    }
    let time = DateTime::<Utc>::from_timestamp_millis(r.t_ms)
        .map_or_else(|| r.t_ms.to_string(), |t| t.to_rfc3339());
    let shown = |v: f64, t: Option<f64>| match t {
        Some(t) => format!("{v} (temperature {t})"),
        None => v.to_string(),
    };
    let payload = serde_json::json!({
        "time": time,
        "instrument": r.instrument,
        "value": r.raw,
        "temperature": r.temperature_c,
    });
    Ok(Some(QuarantineRow {
        received_ms: r.arrival_ms,
        topic: String::new(),
        reason: Reason::ConflictingDuplicate,
        detail: format!(
            "instrument {} at {time}: value {} differs from the stored {}; the stored value is kept",
            r.instrument,
            shown(r.raw, r.temperature_c),
            shown(raw, temperature_c)
        ),
        payload: payload.to_string().into_bytes(),
        redelivered: true,
    }))
}
