//! SQL of the alerting tables, service side: write what the rule evaluator decided (in the
//! transaction of the batch or tick that caused it), and read back what it needs at start and
//! on each tick (rule states, waiting notices, next ids, acknowledgements, silences, recent
//! values for messages).
//!
//! Knows rows, not rules: deciding is `alerts`' job.

use rusqlite::{params, OptionalExtension, Transaction};

use super::{Store, StoreError};

/// A new alert (a raise).
#[derive(Debug, Clone, PartialEq)]
pub struct AlertRow {
    pub id: i64,
    pub rule: String,
    pub site: String,
    pub object: String,
    pub quantity: String,
    pub level: String,
    pub raised_ms: i64,
    pub value: Option<f64>,
    pub unit: String,
}

/// One rule action to be told (or recorded as silenced / without recipients).
#[derive(Debug, Clone, PartialEq)]
pub struct NoticeRow {
    pub id: i64,
    pub alert: i64,
    pub rule: String,
    pub site: String,
    /// `raise`, `escalate`, `de_escalate`, `resolve`, `remind`, `notify_escalation`.
    pub kind: String,
    pub level: String,
    pub value: Option<f64>,
    pub unit: String,
    /// Time of the value (or of the tick) that caused it.
    pub t_ms: i64,
    pub created_ms: i64,
    pub recipients: Vec<String>,
    /// `waiting` (bundle window), `queued` (in an outbox message), `silenced`, `no_recipients`.
    pub status: String,
    pub outbox: Option<i64>,
}

/// One email, rendered, waiting for the mail worker.
#[derive(Debug, Clone, PartialEq)]
pub struct OutboxRow {
    pub id: i64,
    pub created_ms: i64,
    pub site: String,
    pub recipients: Vec<String>,
    pub subject: String,
    pub text: String,
    pub html: String,
    /// Stable Message-ID (derived from the row), so a resend after a crash is recognisable.
    pub message_id: String,
    /// Thread ids of the alerts the message is about (References / In-Reply-To), see
    /// [`crate::alerts::thread_id`].
    pub references: Vec<String>,
}

/// An acknowledgement written by `seepd ack`, not yet applied to the rule state.
#[derive(Debug, Clone, PartialEq)]
pub struct AckRow {
    pub id: i64,
    pub alert: i64,
    pub who: String,
    pub t_ms: i64,
}

/// A silence written by `seepd silence`.
#[derive(Debug, Clone, PartialEq)]
pub struct SilenceRow {
    pub id: i64,
    pub rule: Option<String>,
    pub object: Option<String>,
    pub until_ms: i64,
    pub reason: String,
    pub who: String,
    /// Also silences the most severe level of a rule (`--all-levels`).
    pub all_levels: bool,
}

/// An open alert whose rule is no longer configured.
#[derive(Debug, Clone, PartialEq)]
pub struct OrphanAlert {
    pub id: i64,
    pub rule: String,
    pub site: String,
    pub level: String,
    pub unit: String,
}

/// One step in an alert's history.
#[derive(Debug, Clone, PartialEq)]
pub struct EventRow {
    pub alert: i64,
    pub rule: String,
    pub site: String,
    /// `raised`, `escalated`, `de_escalated`, `reminded`, `escalation_notified`,
    /// `acknowledged`, `silenced`, `resolved`, `closed`.
    pub kind: String,
    /// The level after the event (the level cleared, for `resolved` and `closed`).
    pub level: String,
    pub value: Option<f64>,
    pub unit: String,
    /// Time of the value that caused it (or of the evaluation).
    pub t_ms: i64,
    /// Evaluation time it was recorded at.
    pub recorded_ms: i64,
    /// Who, why, what was silenced or closed.
    pub detail: String,
}

/// Everything one evaluation decided, written in one transaction.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct AlertWrites {
    /// (rule id, state JSON) of every rule whose state changed.
    pub states: Vec<(String, String)>,
    pub new_alerts: Vec<AlertRow>,
    /// (alert id, new level) after an escalate / de-escalate.
    pub level_changes: Vec<(i64, String)>,
    /// (alert id, time) of resolves.
    pub resolved: Vec<(i64, i64)>,
    pub notices: Vec<NoticeRow>,
    /// (notice id, outbox id): waiting notices now sent in a message.
    pub composed: Vec<(i64, i64)>,
    pub messages: Vec<OutboxRow>,
    /// Acknowledgements now applied to their rule state.
    pub acks_applied: Vec<i64>,
    /// The alerts' history.
    pub events: Vec<EventRow>,
    /// Rules gone from the configuration: their stored state is deleted.
    pub removed_rules: Vec<String>,
    /// Time of the evaluation (rule state `updated_ms`, ack `applied_ms`).
    pub now_ms: i64,
}

impl AlertWrites {
    /// Nothing to write.
    pub fn is_empty(&self) -> bool {
        self.states.is_empty()
            && self.new_alerts.is_empty()
            && self.level_changes.is_empty()
            && self.resolved.is_empty()
            && self.notices.is_empty()
            && self.composed.is_empty()
            && self.messages.is_empty()
            && self.acks_applied.is_empty()
            && self.events.is_empty()
            && self.removed_rules.is_empty()
    }

    /// Append another evaluation's writes (replay batches several).
    pub fn extend(&mut self, o: AlertWrites) {
        self.states.extend(o.states);
        self.new_alerts.extend(o.new_alerts);
        self.level_changes.extend(o.level_changes);
        self.resolved.extend(o.resolved);
        self.notices.extend(o.notices);
        self.composed.extend(o.composed);
        self.messages.extend(o.messages);
        self.acks_applied.extend(o.acks_applied);
        self.events.extend(o.events);
        self.removed_rules.extend(o.removed_rules);
        self.now_ms = self.now_ms.max(o.now_ms);
    }
}

/// Write `w` inside `tx` (the caller commits).
pub(super) fn write(tx: &Transaction<'_>, w: &AlertWrites) -> Result<(), StoreError> {
    if w.is_empty() {
        return Ok(());
    }
    let mut st = tx.prepare_cached(
        "INSERT INTO rule_states (rule, state, updated_ms) VALUES (?1, ?2, ?3)
         ON CONFLICT(rule) DO UPDATE SET state = excluded.state, updated_ms = excluded.updated_ms",
    )?;
    for (rule, state) in &w.states {
        st.execute(params![rule, state, w.now_ms])?;
    }
    let mut st = tx.prepare_cached(
        "INSERT OR IGNORE INTO alerts (id, rule, site, object, quantity, level, raised_ms, value, unit)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
    )?;
    for a in &w.new_alerts {
        st.execute(params![
            a.id,
            a.rule,
            a.site,
            a.object,
            a.quantity,
            a.level,
            a.raised_ms,
            a.value,
            a.unit
        ])?;
    }
    let mut st = tx.prepare_cached("UPDATE alerts SET level = ?2 WHERE id = ?1")?;
    for (id, level) in &w.level_changes {
        st.execute(params![id, level])?;
    }
    let mut st = tx.prepare_cached("UPDATE alerts SET resolved_ms = ?2 WHERE id = ?1")?;
    for (id, t) in &w.resolved {
        st.execute(params![id, t])?;
    }
    let mut st = tx.prepare_cached(
        "INSERT OR REPLACE INTO outbox (id, created_ms, site, recipients, subject, body_text,
            body_html, message_id, status, next_attempt_ms, thread_refs)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, 'pending', ?2, ?9)",
    )?;
    for m in &w.messages {
        st.execute(params![
            m.id,
            m.created_ms,
            m.site,
            m.recipients.join(","),
            m.subject,
            m.text,
            m.html,
            m.message_id,
            m.references.join(" ")
        ])?;
    }
    let mut st = tx.prepare_cached(
        "INSERT OR REPLACE INTO notices (id, alert, rule, site, kind, level, value, unit, t_ms,
            created_ms, recipients, status, outbox)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13)",
    )?;
    for n in &w.notices {
        st.execute(params![
            n.id,
            n.alert,
            n.rule,
            n.site,
            n.kind,
            n.level,
            n.value,
            n.unit,
            n.t_ms,
            n.created_ms,
            n.recipients.join(","),
            n.status,
            n.outbox
        ])?;
    }
    let mut st =
        tx.prepare_cached("UPDATE notices SET status = 'queued', outbox = ?2 WHERE id = ?1")?;
    for (notice, outbox) in &w.composed {
        st.execute(params![notice, outbox])?;
    }
    let mut st = tx.prepare_cached("UPDATE acks SET applied_ms = ?2 WHERE id = ?1")?;
    for id in &w.acks_applied {
        st.execute(params![id, w.now_ms])?;
    }
    let mut st = tx.prepare_cached(
        "INSERT INTO alert_events (alert, rule, site, kind, level, value, unit, t_ms,
            recorded_ms, detail)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)",
    )?;
    for e in &w.events {
        st.execute(params![
            e.alert,
            e.rule,
            e.site,
            e.kind,
            e.level,
            e.value,
            e.unit,
            e.t_ms,
            e.recorded_ms,
            e.detail
        ])?;
    }
    let mut st = tx.prepare_cached("DELETE FROM rule_states WHERE rule = ?1")?;
    for r in &w.removed_rules {
        st.execute([r])?;
    }
    Ok(())
}

fn split(s: String) -> Vec<String> {
    s.split(',')
        .filter(|x| !x.is_empty())
        .map(str::to_string)
        .collect()
}

impl Store {
    /// Write alerting rows on their own (a tick with no readings), in one transaction.
    ///
    /// # Errors
    /// SQLite errors; nothing is written then.
    pub fn write_alerts(&mut self, w: &AlertWrites) -> Result<(), StoreError> {
        let tx = self.conn.transaction()?;
        write(&tx, w)?;
        tx.commit()?;
        Ok(())
    }

    /// Every stored rule state: (rule id, JSON).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn rule_states(&self) -> Result<Vec<(String, String)>, StoreError> {
        let mut st = self.conn.prepare("SELECT rule, state FROM rule_states")?;
        let rows = st.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Notices still waiting out their bundle window, oldest first.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn waiting_notices(&self) -> Result<Vec<NoticeRow>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT id, alert, rule, site, kind, level, value, unit, t_ms, created_ms, recipients,
                status, outbox
             FROM notices WHERE status = 'waiting' ORDER BY id",
        )?;
        let rows = st.query_map([], |r| {
            Ok(NoticeRow {
                id: r.get(0)?,
                alert: r.get(1)?,
                rule: r.get(2)?,
                site: r.get(3)?,
                kind: r.get(4)?,
                level: r.get(5)?,
                value: r.get(6)?,
                unit: r.get(7)?,
                t_ms: r.get(8)?,
                created_ms: r.get(9)?,
                recipients: split(r.get(10)?),
                status: r.get(11)?,
                outbox: r.get(12)?,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// The largest ids used so far: (alerts, notices, outbox).
    ///
    /// # Errors
    /// SQLite errors.
    pub fn alert_max_ids(&self) -> Result<(i64, i64, i64), StoreError> {
        Ok(self.conn.query_row(
            "SELECT (SELECT coalesce(max(id), 0) FROM alerts),
                    (SELECT coalesce(max(id), 0) FROM notices),
                    (SELECT coalesce(max(id), 0) FROM outbox)",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )?)
    }

    /// Acknowledgements not yet applied to a rule state, oldest first.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn unapplied_acks(&self) -> Result<Vec<AckRow>, StoreError> {
        let mut st = self.conn.prepare_cached(
            "SELECT id, alert, who, t_ms FROM acks WHERE applied_ms IS NULL ORDER BY id",
        )?;
        let rows = st.query_map([], |r| {
            Ok(AckRow {
                id: r.get(0)?,
                alert: r.get(1)?,
                who: r.get(2)?,
                t_ms: r.get(3)?,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Silences in force at `now_ms`.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn active_silences(&self, now_ms: i64) -> Result<Vec<SilenceRow>, StoreError> {
        let mut st = self.conn.prepare_cached(
            "SELECT id, rule, object, until_ms, reason, who, all_levels FROM silences
             WHERE until_ms > ?1 ORDER BY id",
        )?;
        let rows = st.query_map([now_ms], |r| {
            Ok(SilenceRow {
                id: r.get(0)?,
                rule: r.get(1)?,
                object: r.get(2)?,
                until_ms: r.get(3)?,
                reason: r.get(4)?,
                who: r.get(5)?,
                all_levels: r.get(6)?,
            })
        })?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// The history of `alert`, oldest first.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn alert_events(&self, alert: i64) -> Result<Vec<EventRow>, StoreError> {
        let mut st = self.conn.prepare_cached(
            "SELECT alert, rule, site, kind, level, value, unit, t_ms, recorded_ms, detail
             FROM alert_events WHERE alert = ?1 ORDER BY id",
        )?;
        let rows = st.query_map([alert], event_row)?;
        Ok(rows.collect::<Result<_, _>>()?)
    }

    /// Open alerts whose rule is not among `rules`.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn orphaned_alerts(&self, rules: &[&str]) -> Result<Vec<OrphanAlert>, StoreError> {
        let mut st = self.conn.prepare(
            "SELECT id, rule, site, level, unit FROM alerts WHERE resolved_ms IS NULL ORDER BY id",
        )?;
        let rows = st.query_map([], |r| {
            Ok(OrphanAlert {
                id: r.get(0)?,
                rule: r.get(1)?,
                site: r.get(2)?,
                level: r.get(3)?,
                unit: r.get(4)?,
            })
        })?;
        let all: Vec<OrphanAlert> = rows.collect::<Result<_, _>>()?;
        Ok(all
            .into_iter()
            .filter(|a| !rules.contains(&a.rule.as_str()))
            .collect())
    }

    /// The last `n` values (time, value) of a quantity, newest last: a reading quantity of an
    /// instrument, else a derived quantity of an object.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn recent_values(
        &self,
        object: &str,
        quantity: &str,
        n: usize,
    ) -> Result<Vec<(i64, f64)>, StoreError> {
        let column = crate::model::ReadingQuantity::from_name(quantity).map(super::column_of);
        let is_instrument: bool = self
            .conn
            .query_row("SELECT 1 FROM instruments WHERE id = ?1", [object], |_| {
                Ok(true)
            })
            .optional()?
            .unwrap_or(false);
        let sql = match column {
            Some(c) if is_instrument => format!(
                "SELECT t_ms, {c} FROM readings WHERE instrument = ?1 AND ?2 = ?2
                 AND {c} IS NOT NULL ORDER BY t_ms DESC LIMIT ?3"
            ),
            _ => "SELECT t_ms, value FROM derived WHERE object = ?1 AND quantity = ?2
                  AND value IS NOT NULL ORDER BY t_ms DESC LIMIT ?3"
                .to_string(),
        };
        let mut st = self.conn.prepare(&sql)?;
        let rows = st.query_map(params![object, quantity, n as i64], |r| {
            Ok((r.get(0)?, r.get(1)?))
        })?;
        let mut v: Vec<(i64, f64)> = rows.collect::<Result<_, _>>()?;
        v.reverse();
        Ok(v)
    }
}

/// An `alert_events` row (columns in `EventRow` order).
pub(crate) fn event_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<EventRow> {
    Ok(EventRow {
        alert: r.get(0)?,
        rule: r.get(1)?,
        site: r.get(2)?,
        kind: r.get(3)?,
        level: r.get(4)?,
        value: r.get(5)?,
        unit: r.get(6)?,
        t_ms: r.get(7)?,
        recorded_ms: r.get(8)?,
        detail: r.get(9)?,
    })
}
