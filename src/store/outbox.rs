//! SQL of the mail outbox (the worker's side: due messages, sent / retry / dead-letter, each
//! recipient's fate) and of the operator commands (`seepd alerts`, `ack`, `silence`), which run
//! against the database of a running service: every statement is a short transaction under
//! the busy timeout.

use rusqlite::{params, OptionalExtension};

use super::pages::{alert_record, AlertRecord, ALERT_RECORD_COLUMNS};
use super::{SilenceRow, Store, StoreError};

/// An outbox message as the worker sends it.
#[derive(Debug, Clone, PartialEq)]
pub struct Queued {
    pub id: i64,
    pub created_ms: i64,
    pub recipients: Vec<String>,
    pub subject: String,
    pub text: String,
    pub html: String,
    pub message_id: String,
    /// Message-IDs this message refers to (its alerts' thread ids); empty for reports.
    pub references: Vec<String>,
    pub attempts: i64,
    pub next_attempt_ms: i64,
    pub last_error: Option<String>,
    /// Files to attach (scheduled reports; none for alert messages).
    pub attachments: Vec<super::Attachment>,
}

/// What an attempt came to for one recipient.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum RcptOutcome {
    /// The relay accepted the message for this recipient.
    Accepted,
    /// Refused for good (5xx), with the server's reply: this recipient is dead-lettered.
    Refused(String),
    /// Not delivered for now (4xx, or the transaction failed after RCPT): try again.
    Deferred(String),
}

/// A message some recipient of which will never get it, for `seepd alerts`.
#[derive(Debug, Clone, PartialEq)]
pub struct Undeliverable {
    pub message: Queued,
    /// (address, server reply) of each refused recipient.
    pub refused: Vec<(String, String)>,
    /// Recipients who did get it.
    pub delivered: Vec<String>,
}

/// What `seepd ack` did.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum AckOutcome {
    Recorded,
    /// Already acknowledged (by, at): nothing changed.
    Already(String, i64),
    Resolved,
    NotFound,
}

const QUEUED_COLUMNS: &str = "id, created_ms, recipients, subject, body_text, body_html,
    message_id, attempts, next_attempt_ms, last_error, thread_refs";

fn queued(r: &rusqlite::Row<'_>) -> rusqlite::Result<Queued> {
    let recipients: String = r.get(2)?;
    Ok(Queued {
        id: r.get(0)?,
        created_ms: r.get(1)?,
        recipients: recipients
            .split(',')
            .filter(|s| !s.is_empty())
            .map(str::to_string)
            .collect(),
        subject: r.get(3)?,
        text: r.get(4)?,
        html: r.get(5)?,
        message_id: r.get(6)?,
        attempts: r.get(7)?,
        next_attempt_ms: r.get(8)?,
        last_error: r.get(9)?,
        references: r
            .get::<_, String>(10)?
            .split_whitespace()
            .map(str::to_string)
            .collect(),
        attachments: Vec::new(),
    })
}

impl Store {
    /// Pending messages due at `now_ms`, oldest first.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn due_messages(&self, now_ms: i64, limit: usize) -> Result<Vec<Queued>, StoreError> {
        let mut st = self.conn.prepare_cached(&format!(
            "SELECT {QUEUED_COLUMNS} FROM outbox
             WHERE status = 'pending' AND next_attempt_ms <= ?1 ORDER BY id LIMIT ?2"
        ))?;
        let rows = st.query_map(params![now_ms, limit as i64], queued)?;
        let mut out: Vec<Queued> = rows.collect::<Result<_, _>>()?;
        for m in &mut out {
            m.attachments = self.attachments(m.id)?;
        }
        Ok(out)
    }

    /// When the next pending message is due, if any.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn next_due_ms(&self) -> Result<Option<i64>, StoreError> {
        Ok(self.conn.query_row(
            "SELECT min(next_attempt_ms) FROM outbox WHERE status = 'pending'",
            [],
            |r| r.get(0),
        )?)
    }

    /// A transient failure: try again at `next_ms`.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn mark_retry(&self, id: i64, next_ms: i64, error: &str) -> Result<(), StoreError> {
        self.conn.execute(
            "UPDATE outbox SET attempts = attempts + 1, next_attempt_ms = ?2, last_error = ?3
             WHERE id = ?1",
            params![id, next_ms, error],
        )?;
        Ok(())
    }

    /// The recipients of `m` still to be served (no delivery and no refusal recorded).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn pending_recipients(&self, m: &Queued) -> Result<Vec<String>, StoreError> {
        let done = self.recipient_rows(m.id)?;
        Ok(m.recipients
            .iter()
            .filter(|r| !done.iter().any(|(a, ..)| a == *r))
            .cloned()
            .collect())
    }

    /// (address, status, reply) of each recipient of message `id` served so far.
    fn recipient_rows(&self, id: i64) -> Result<Vec<(String, String, Option<String>)>, StoreError> {
        let mut st = self.conn.prepare_cached(
            "SELECT address, status, reply FROM outbox_recipients WHERE outbox = ?1
             ORDER BY address",
        )?;
        let rows = st.query_map([id], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Record one attempt at message `m`, recipient by recipient, in one transaction: accepted
    /// and refused recipients are settled; while any recipient is left (deferred, or never
    /// tried), the message stays pending until `retry_ms`; otherwise it is `sent` when anyone
    /// got it, else `dead`. Returns the message's status afterwards.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn record_delivery(
        &self,
        m: &Queued,
        delivery: &[(String, RcptOutcome)],
        now_ms: i64,
        retry_ms: i64,
    ) -> Result<&'static str, StoreError> {
        let tx = self.conn.unchecked_transaction()?;
        for (address, outcome) in delivery {
            let (status, reply) = match outcome {
                RcptOutcome::Accepted => ("sent", None),
                RcptOutcome::Refused(r) => ("dead", Some(r.as_str())),
                RcptOutcome::Deferred(_) => continue,
            };
            tx.execute(
                "INSERT OR REPLACE INTO outbox_recipients (outbox, address, status, reply, t_ms)
                 VALUES (?1, ?2, ?3, ?4, ?5)",
                params![m.id, address, status, reply, now_ms],
            )?;
        }
        let (served, sent): (i64, i64) = tx.query_row(
            "SELECT count(*), coalesce(sum(status = 'sent'), 0) FROM outbox_recipients
             WHERE outbox = ?1",
            [m.id],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )?;
        let replies = |pick: fn(&RcptOutcome) -> Option<&String>| {
            let v: Vec<String> = delivery
                .iter()
                .filter_map(|(a, o)| pick(o).map(|r| format!("{a}: {r}")))
                .collect();
            (!v.is_empty()).then(|| v.join("; "))
        };
        let refused = replies(|o| match o {
            RcptOutcome::Refused(r) => Some(r),
            _ => None,
        });
        let status = if (served as usize) < m.recipients.len() {
            let deferred = replies(|o| match o {
                RcptOutcome::Deferred(r) => Some(r),
                _ => None,
            });
            tx.execute(
                "UPDATE outbox SET attempts = attempts + 1, next_attempt_ms = ?2,
                    last_error = coalesce(?3, ?4, last_error) WHERE id = ?1",
                params![m.id, retry_ms, deferred, refused],
            )?;
            "pending"
        } else {
            let status = if sent > 0 { "sent" } else { "dead" };
            tx.execute(
                "UPDATE outbox SET status = ?2, attempts = attempts + 1,
                    sent_ms = CASE WHEN ?2 = 'sent' THEN coalesce(sent_ms, ?3) END,
                    last_error = coalesce(?4, CASE WHEN ?2 = 'dead' THEN last_error END)
                 WHERE id = ?1",
                params![m.id, status, now_ms, refused],
            )?;
            status
        };
        tx.commit()?;
        Ok(status)
    }

    /// Messages that some recipient will never get (dead, or refused for some recipients),
    /// oldest first, with each refused recipient's reply.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn undeliverable(&self) -> Result<Vec<Undeliverable>, StoreError> {
        let mut st = self.conn.prepare(&format!(
            "SELECT {QUEUED_COLUMNS} FROM outbox WHERE status = 'dead' OR id IN
                (SELECT outbox FROM outbox_recipients WHERE status = 'dead') ORDER BY id"
        ))?;
        let messages: Vec<Queued> = st.query_map([], queued)?.collect::<Result<_, _>>()?;
        let mut out = Vec::with_capacity(messages.len());
        for message in messages {
            let rows = self.recipient_rows(message.id)?;
            let mut refused: Vec<(String, String)> = rows
                .iter()
                .filter(|(_, s, _)| s == "dead")
                .map(|(a, _, r)| (a.clone(), r.clone().unwrap_or_default()))
                .collect();
            if refused.is_empty() {
                // Dead-lettered whole before recipients were recorded one by one.
                let reply = message.last_error.clone().unwrap_or_default();
                refused = message
                    .recipients
                    .iter()
                    .map(|a| (a.clone(), reply.clone()))
                    .collect();
            }
            let delivered = rows
                .into_iter()
                .filter(|(_, s, _)| s == "sent")
                .map(|(a, ..)| a)
                .collect();
            out.push(Undeliverable {
                message,
                refused,
                delivered,
            });
        }
        Ok(out)
    }

    /// Messages with `status` (`pending`, `sent`, `dead`), oldest first.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn messages(&self, status: &str) -> Result<Vec<Queued>, StoreError> {
        let mut st = self.conn.prepare(&format!(
            "SELECT {QUEUED_COLUMNS} FROM outbox WHERE status = ?1 ORDER BY id"
        ))?;
        let rows = st.query_map([status], queued)?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Alerts not resolved, oldest first.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn open_alerts(&self) -> Result<Vec<AlertRecord>, StoreError> {
        let mut st = self.conn.prepare(&format!(
            "SELECT {ALERT_RECORD_COLUMNS} FROM alerts WHERE resolved_ms IS NULL ORDER BY id"
        ))?;
        let rows = st.query_map([], alert_record)?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Acknowledge alert `id` (one short transaction); the service applies it to the rule
    /// state within a second, which stops reminders and escalation.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn acknowledge(
        &mut self,
        id: i64,
        who: &str,
        note: Option<&str>,
        now_ms: i64,
    ) -> Result<AckOutcome, StoreError> {
        let tx = self
            .conn
            .transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)?;
        let row: Option<(Option<i64>, Option<String>, Option<i64>)> = tx
            .query_row(
                "SELECT resolved_ms, acked_by, acked_ms FROM alerts WHERE id = ?1",
                [id],
                |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
            )
            .optional()?;
        let outcome = match row {
            None => AckOutcome::NotFound,
            Some((Some(_), ..)) => AckOutcome::Resolved,
            Some((None, Some(by), Some(at))) => AckOutcome::Already(by, at),
            Some(_) => {
                tx.execute(
                    "INSERT INTO acks (alert, who, note, t_ms) VALUES (?1, ?2, ?3, ?4)",
                    params![id, who, note, now_ms],
                )?;
                tx.execute(
                    "UPDATE alerts SET acked_ms = ?2, acked_by = ?3, ack_note = ?4 WHERE id = ?1",
                    params![id, now_ms, who, note],
                )?;
                AckOutcome::Recorded
            }
        };
        tx.commit()?;
        Ok(outcome)
    }

    /// Whether the database knows rule `id` (it has a state or an alert): the check of
    /// `seepd silence --rule` when the configuration does not load.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn rule_known(&self, id: &str) -> Result<bool, StoreError> {
        self.exists(
            "SELECT EXISTS (SELECT 1 FROM rule_states WHERE rule = ?1)
                OR EXISTS (SELECT 1 FROM alerts WHERE rule = ?1)",
            id,
        )
    }

    /// Whether the database knows instrument or object `id` (a configured instrument, or the
    /// object of an alert): the check of `seepd silence --instrument` without a configuration.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn object_known(&self, id: &str) -> Result<bool, StoreError> {
        self.exists(
            "SELECT EXISTS (SELECT 1 FROM instruments WHERE id = ?1)
                OR EXISTS (SELECT 1 FROM alerts WHERE object = ?1)",
            id,
        )
    }

    fn exists(&self, sql: &str, id: &str) -> Result<bool, StoreError> {
        Ok(self.conn.query_row(sql, [id], |r| r.get(0))?)
    }

    /// Record a silence of a rule or of an instrument/object until `until_ms`; returns its id.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn add_silence(&self, s: &SilenceRow, now_ms: i64) -> Result<i64, StoreError> {
        self.conn.execute(
            "INSERT INTO silences (rule, object, until_ms, reason, who, created_ms, all_levels)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
            params![
                s.rule,
                s.object,
                s.until_ms,
                s.reason,
                s.who,
                now_ms,
                s.all_levels
            ],
        )?;
        Ok(self.conn.last_insert_rowid())
    }
}
