//! Alerts whose rule is gone from the configuration (found at load or reload): closed at the
//! next evaluation with an event saying why and a message to the contact lists of their level.

use super::render;
use super::Evaluator;
use crate::store::{EventRow, NoticeRow, OutboxRow};

impl Evaluator {
    /// Close the open alerts whose rule is gone from the configuration: resolved now, a
    /// `closed` event saying why, and a message to the contact lists of the level.
    pub(super) fn close_orphans(&mut self, now_ms: i64) {
        for o in std::mem::take(&mut self.orphans) {
            let crate::store::alerts::OrphanAlert {
                id,
                rule,
                site,
                level,
                unit,
            } = o;
            let why = format!(
                "rule {rule} is no longer in the configuration; alert #{id} closed without an all-clear"
            );
            tracing::warn!(alert = id, rule = %rule, "Alert closed: its rule was removed");
            self.out.resolved.push((id, now_ms));
            self.out.events.push(EventRow {
                alert: id,
                rule: rule.clone(),
                site: site.clone(),
                kind: "closed".into(),
                level: level.clone(),
                value: None,
                unit: unit.clone(),
                t_ms: now_ms,
                recorded_ms: now_ms,
                detail: why.clone(),
            });
            let recipients = self.cfg.alerting.site(&site).recipients(&level, true, true);
            let status = if recipients.is_empty() {
                "no_recipients"
            } else if !self.deliver {
                "not_sent"
            } else {
                "queued"
            };
            let outbox = (status == "queued").then(|| {
                let m = self.next_message;
                self.next_message += 1;
                m
            });
            self.out.notices.push(NoticeRow {
                id: self.next_notice,
                alert: id,
                rule: rule.clone(),
                site: site.clone(),
                kind: "closed".into(),
                level: level.clone(),
                value: None,
                unit,
                t_ms: now_ms,
                created_ms: now_ms,
                recipients: recipients.clone(),
                status: status.into(),
                outbox,
            });
            self.next_notice += 1;
            if let Some(m) = outbox {
                let domain = self.mail_domain();
                let text = format!(
                    "Alert #{id} ({level}) of site {site} was closed: {why}.\n\
                     It was still active. Check the structure and the configuration change.\n\n{}\n",
                    crate::CAUTION
                );
                self.out.messages.push(OutboxRow {
                    id: m,
                    created_ms: now_ms,
                    site,
                    recipients,
                    subject: format!("[seepd] Closed: alert #{id} ({level}), rule {rule} removed"),
                    html: format!("<pre>{}</pre>", render::escape(&text)),
                    text,
                    message_id: format!("<seepd.alert-{m}.{now_ms}@{domain}>"),
                    references: vec![super::thread_id(id, &domain)],
                });
            }
        }
    }
}
