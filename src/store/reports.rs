//! SQL of scheduled reports: queue a report's message with its attached files and record the
//! period as done, in one transaction; read attachments back for the mail worker.
//!
//! Knows rows, not schedules: deciding what is due is `report::scheduler`'s job.

use rusqlite::{params, OptionalExtension};

use super::{Store, StoreError};

/// A file attached to an outbox message.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Attachment {
    pub name: String,
    /// MIME type, e.g. `text/html; charset=utf-8`.
    pub content_type: String,
    pub data: Vec<u8>,
}

/// A generated report to queue: the period it covers and its message.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportMessage {
    /// The `[[report]]` id.
    pub schedule: String,
    pub period_start_ms: i64,
    pub period_end_ms: i64,
    pub created_ms: i64,
    pub site: String,
    pub recipients: Vec<String>,
    pub subject: String,
    pub text: String,
    pub html: String,
    /// Stable per (schedule, period), so a resend after a crash is recognisable.
    pub message_id: String,
    pub attachments: Vec<Attachment>,
}

impl Store {
    /// Whether the period starting at `period_start_ms` of `schedule` was already generated.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn report_done(&self, schedule: &str, period_start_ms: i64) -> Result<bool, StoreError> {
        Ok(self
            .conn
            .query_row(
                "SELECT 1 FROM report_runs WHERE schedule = ?1 AND period_start_ms = ?2",
                params![schedule, period_start_ms],
                |_| Ok(()),
            )
            .optional()?
            .is_some())
    }

    /// Queue the message with its attachments and record the period, in one transaction.
    /// Returns the outbox id, or `None` when the period was already recorded (nothing written).
    ///
    /// # Errors
    /// SQLite errors; nothing is written then.
    pub fn queue_report(&mut self, m: &ReportMessage) -> Result<Option<i64>, StoreError> {
        let tx = self
            .conn
            .transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)?;
        let done: Option<i64> = tx
            .query_row(
                "SELECT 1 FROM report_runs WHERE schedule = ?1 AND period_start_ms = ?2",
                params![m.schedule, m.period_start_ms],
                |r| r.get(0),
            )
            .optional()?;
        if done.is_some() {
            return Ok(None);
        }
        let id: i64 = tx.query_row(
            "SELECT min(coalesce(min(id), 0), 0) - 1 FROM outbox",
            [],
            |r| r.get(0),
        )?;
        tx.execute(
            "INSERT INTO outbox (id, created_ms, site, recipients, subject, body_text, body_html,
                message_id, status, next_attempt_ms)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, 'pending', ?2)",
            params![
                id,
                m.created_ms,
                m.site,
                m.recipients.join(","),
                m.subject,
                m.text,
                m.html,
                m.message_id
            ],
        )?;
        for (seq, a) in m.attachments.iter().enumerate() {
            tx.execute(
                "INSERT INTO outbox_attachments (outbox, seq, name, content_type, data)
                 VALUES (?1, ?2, ?3, ?4, ?5)",
                params![id, seq as i64, a.name, a.content_type, a.data],
            )?;
        }
        tx.execute(
            "INSERT INTO report_runs (schedule, period_start_ms, period_end_ms, outbox_id,
                created_ms) VALUES (?1, ?2, ?3, ?4, ?5)",
            params![
                m.schedule,
                m.period_start_ms,
                m.period_end_ms,
                id,
                m.created_ms
            ],
        )?;
        tx.commit()?;
        Ok(Some(id))
    }

    /// The files attached to outbox message `outbox`, in order (none for alert messages).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn attachments(&self, outbox: i64) -> Result<Vec<Attachment>, StoreError> {
        let mut st = self.conn.prepare_cached(
            "SELECT name, content_type, data FROM outbox_attachments WHERE outbox = ?1
             ORDER BY seq",
        )?;
        let rows = st.query_map([outbox], |r| {
            Ok(Attachment {
                name: r.get(0)?,
                content_type: r.get(1)?,
                data: r.get(2)?,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }
}
