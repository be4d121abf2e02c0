//! The `[heartbeat]` table of `seepd.toml`: how seepd makes its own silence noticed. An MQTT
//! heartbeat (a retained message on `topic` every `every_s`, with a retained last-will message
//! on the same topic registered at connect, so the broker announces seepd's death) and/or a
//! daily "seepd is running" email to `email_to` at `email_at` (UTC).
//!
//! Owns those keys, their defaults and checks, read with serde derive (`config::de`); every
//! problem is located at its key.

use chrono::NaiveTime;
use serde::Deserialize;

use super::problem::Cx;
use super::reader::Tbl;

/// The `[heartbeat]` table as written.
#[derive(Debug, Clone, PartialEq, Eq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Heartbeat {
    /// MQTT topic of the heartbeat and of the last will; no MQTT heartbeat when absent.
    #[serde(default)]
    pub topic: Option<String>,
    /// Seconds between heartbeat messages.
    #[serde(default = "default_every_s")]
    pub every_s: u64,
    /// Addresses of the daily "seepd is running" email (needs `[smtp]`); none: no email.
    #[serde(default)]
    pub email_to: Vec<String>,
    /// Time of day (UTC, "HH:MM") the daily email is queued; after a start past that time, the
    /// day's email goes at once.
    #[serde(default = "default_email_at")]
    pub email_at: String,
}

fn default_every_s() -> u64 {
    60
}

fn default_email_at() -> String {
    "07:00".into()
}

impl Heartbeat {
    /// `email_at` as a time of day (checked when read).
    pub fn email_time(&self) -> NaiveTime {
        NaiveTime::parse_from_str(&self.email_at, "%H:%M").unwrap_or_default()
    }
}

/// Read `[heartbeat]`; `None` when wrong (every problem recorded at its key). `smtp` says
/// whether `[smtp]` is configured.
pub(crate) fn read(cx: &mut Cx<'_>, t: &Tbl<'_>, smtp: bool) -> Option<Heartbeat> {
    let before = cx.problems.len();
    let h: Heartbeat = super::de::table(cx, t)?;
    if let Some(topic) = &h.topic {
        if topic.is_empty() || topic.contains(['+', '#']) || topic.starts_with('$') {
            t.problem_at(
                cx,
                "topic",
                format!("topic {topic:?} must be a plain topic name (no wildcards, not $...)"),
            );
        }
    }
    if !(5..=86_400).contains(&h.every_s) {
        t.problem_at(
            cx,
            "every_s",
            format!("every_s {} is outside 5..86400", h.every_s),
        );
    }
    for a in &h.email_to {
        if !super::smtp::plain_address(a) {
            t.problem_at(
                cx,
                "email_to",
                format!("email_to {a:?} is not a plain local@domain address"),
            );
        }
    }
    if NaiveTime::parse_from_str(&h.email_at, "%H:%M").is_err() {
        t.problem_at(
            cx,
            "email_at",
            format!(
                "email_at {:?}: expected a time of day HH:MM (UTC)",
                h.email_at
            ),
        );
    }
    if !h.email_to.is_empty() && !smtp {
        t.problem_at(
            cx,
            "email_to",
            "email_to needs a valid [smtp] table to send through",
        );
    }
    if h.topic.is_none() && h.email_to.is_empty() {
        t.problem(
            cx,
            "neither topic nor email_to is set; the table would do nothing",
        );
    }
    (cx.problems.len() == before).then_some(h)
}
