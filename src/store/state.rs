//! SQL of `service_state` (schema v7): small JSON documents the running service keeps for the
//! operator commands (`seepd status`), such as the broker link state.

use chrono::Utc;
use rusqlite::{params, OptionalExtension};
use serde::{de::DeserializeOwned, Serialize};

use super::{Store, StoreError};

impl Store {
    /// Record `value` under `key`, stamped with the current time.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn put_service_state(&self, key: &str, value: &impl Serialize) -> Result<(), StoreError> {
        let json = serde_json::to_string(value).unwrap_or_else(|_| "null".into());
        self.conn().execute(
            "INSERT INTO service_state (key, value, updated_ms) VALUES (?1, ?2, ?3)
             ON CONFLICT (key) DO UPDATE SET value = excluded.value, updated_ms = excluded.updated_ms",
            params![key, json, Utc::now().timestamp_millis()],
        )?;
        Ok(())
    }

    /// The document under `key` and when it was recorded (ms), if any and readable.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn service_state<T: DeserializeOwned>(
        &self,
        key: &str,
    ) -> Result<Option<(T, i64)>, StoreError> {
        let row: Option<(String, i64)> = self
            .conn()
            .query_row(
                "SELECT value, updated_ms FROM service_state WHERE key = ?1",
                [key],
                |r| Ok((r.get(0)?, r.get(1)?)),
            )
            .optional()?;
        Ok(row.and_then(|(v, t)| serde_json::from_str(&v).ok().map(|v| (v, t))))
    }
}
