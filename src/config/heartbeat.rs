//! The `[heartbeat]` table of `seepd.toml`: how seepd makes its own silence noticed. An MQTT
//! heartbeat (a retained message on `topic` every `every_s`, with a retained last-will message
//! on the same topic registered at connect, so the broker announces seepd's death) and/or a
//! daily "seepd is running" email to `email_to` at `email_at` (UTC).
//!
//! Owns those keys, their defaults and checks, read with serde derive; a problem is located at
//! its line (serde stops at the first one of this table; the checks after it list all theirs).

use chrono::NaiveTime;
use serde::Deserialize;

use super::problem::Cx;

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

/// The document as far as `[heartbeat]` goes (other tables are read elsewhere).
#[derive(Deserialize)]
struct Only {
    #[serde(default)]
    heartbeat: Option<Heartbeat>,
}

/// Read `[heartbeat]` from the service file's text; `None` when absent or wrong (problems
/// recorded at their lines). `smtp` says whether `[smtp]` is configured.
pub(crate) fn read(
    cx: &mut Cx<'_>,
    span: Option<std::ops::Range<usize>>,
    smtp: bool,
) -> Option<Heartbeat> {
    let h = match toml::from_str::<Only>(cx.text) {
        Ok(o) => o.heartbeat?,
        Err(e) => {
            cx.at(e.span().or(span), format!("[heartbeat]: {}", e.message()));
            return None;
        }
    };
    let before = cx.problems.len();
    if let Some(t) = &h.topic {
        if t.is_empty() || t.contains(['+', '#']) || t.starts_with('$') {
            cx.at(
                span.clone(),
                format!(
                    "[heartbeat]: topic {t:?} must be a plain topic name (no wildcards, not $...)"
                ),
            );
        }
    }
    if !(5..=86_400).contains(&h.every_s) {
        cx.at(
            span.clone(),
            format!("[heartbeat]: every_s {} is outside 5..86400", h.every_s),
        );
    }
    for a in &h.email_to {
        if !super::smtp::plain_address(a) {
            cx.at(
                span.clone(),
                format!("[heartbeat]: email_to {a:?} is not a plain local@domain address"),
            );
        }
    }
    if NaiveTime::parse_from_str(&h.email_at, "%H:%M").is_err() {
        cx.at(
            span.clone(),
            format!(
                "[heartbeat]: email_at {:?}: expected a time of day HH:MM (UTC)",
                h.email_at
            ),
        );
    }
    if !h.email_to.is_empty() && !smtp {
        cx.at(
            span.clone(),
            "[heartbeat]: email_to needs a valid [smtp] table to send through",
        );
    }
    if h.topic.is_none() && h.email_to.is_empty() {
        cx.at(
            span,
            "[heartbeat]: neither topic nor email_to is set; the table would do nothing",
        );
    }
    (cx.problems.len() == before).then_some(h)
}
