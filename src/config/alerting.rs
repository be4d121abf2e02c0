//! The validated alerting configuration: rules, per-site notification policy and contact
//! lists, and the SMTP relay. Read by `config::rules` and `config::smtp`; nothing here parses
//! or does I/O.

use std::collections::BTreeMap;
use std::path::PathBuf;

use crate::domain::rules::Spec;

use super::de::{self, Int, Strings, Text};
use super::limits;
use super::model::Secret;

/// Everything about alerts and email.
#[derive(Debug, Clone, Default)]
pub struct Alerting {
    /// The mail relay (`[smtp]` in seepd.toml); `None`: messages stay in the outbox.
    pub smtp: Option<Smtp>,
    /// Every rule of every site (ids unique across sites).
    pub rules: Vec<Rule>,
    /// Per site id: policy and contact lists.
    pub sites: BTreeMap<String, SiteAlerting>,
}

impl Alerting {
    /// The policy and contacts of a site (defaults when the site configures none).
    /// Every site's warnings, in site order.
    pub fn warnings(&self) -> Vec<String> {
        self.sites
            .values()
            .flat_map(|s| s.warnings.clone())
            .collect()
    }

    pub fn site(&self, site: &str) -> SiteAlerting {
        self.sites.get(site).cloned().unwrap_or_default()
    }
}

/// One rule: a quantity of an instrument or derived object, watched with a state machine.
#[derive(Debug, Clone)]
pub struct Rule {
    /// Unique across sites; named in messages, `seepd silence --rule` and the database.
    pub id: String,
    pub site: String,
    /// Instrument id or derived-object id.
    pub object: String,
    /// Quantity name (`total_head`, `factor_of_safety`...); `no_data` for a no-data rule.
    pub quantity: String,
    pub spec: Spec,
}

/// How a site's alerts are sent (`[alerting]`, read straight into this; written in seconds).
#[derive(Debug, Clone, serde::Deserialize)]
#[serde(default)]
pub struct Policy {
    /// Notices waiting this long are sent together in one message (ms; 0: at once).
    #[serde(rename = "bundle_window_s", deserialize_with = "de::ms::<3600, _>")]
    pub bundle_window_ms: i64,
    /// Reminder interval while active and unacknowledged (ms); `None`: no reminders.
    #[serde(rename = "remind_every_s", deserialize_with = "de::ms_or_never")]
    pub remind_every_ms: Option<i64>,
    /// The escalation lists are told when an alert is not acknowledged within this (ms).
    #[serde(rename = "escalate_after_s", deserialize_with = "de::ms_or_never")]
    pub escalate_after_ms: Option<i64>,
    /// Link printed in every message (a placeholder until a status page exists).
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub status_url: String,
    /// A rule's derived value without a value (its inputs missing, stale or rejected) this
    /// long is itself an alert, "safety value unavailable" (ms; `None`: never).
    #[serde(rename = "unavailable_after_s", deserialize_with = "de::ms_or_never")]
    pub unavailable_after_ms: Option<i64>,
}

impl Default for Policy {
    fn default() -> Self {
        Policy {
            bundle_window_ms: 30_000,
            remind_every_ms: Some(4 * 3_600_000),
            escalate_after_ms: Some(3_600_000),
            unavailable_after_ms: Some(3 * 3_600_000),
            status_url: "https://status.example.invalid/seepd".into(),
        }
    }
}

/// A named list of addresses that receives some levels (`[[contacts]]`, read straight into
/// this).
#[derive(Debug, Clone, Default, serde::Deserialize)]
#[serde(default)]
pub struct Contacts {
    pub name: String,
    #[serde(deserialize_with = "de::via::<Strings<true>, _, _>")]
    pub emails: Vec<String>,
    /// Level names this list receives; empty: every level.
    #[serde(deserialize_with = "de::via::<Strings<false>, _, _>")]
    pub levels: Vec<String>,
    /// An escalation list: told only when an alert is not acknowledged in time.
    pub escalation: bool,
}

impl Contacts {
    /// Whether this list receives `level`.
    pub fn receives(&self, level: &str) -> bool {
        self.levels.is_empty() || self.levels.iter().any(|l| l == level)
    }
}

/// A site's notification settings.
#[derive(Debug, Clone, Default)]
pub struct SiteAlerting {
    pub policy: Policy,
    pub contacts: Vec<Contacts>,
    /// Things that work but are probably not meant, as `file:line:column: message` (rule
    /// levels no contact list receives); `seepd check` prints them, `seepd run` logs them.
    pub warnings: Vec<String>,
}

impl SiteAlerting {
    /// Addresses for a notice at `level`: the first-line lists, plus the escalation lists when
    /// `escalation` (sorted, without duplicates).
    pub fn recipients(&self, level: &str, first_line: bool, escalation: bool) -> Vec<String> {
        let mut out: Vec<String> = self
            .contacts
            .iter()
            .filter(|c| {
                c.receives(level) && ((c.escalation && escalation) || (!c.escalation && first_line))
            })
            .flat_map(|c| c.emails.iter().cloned())
            .collect();
        out.sort();
        out.dedup();
        out
    }
}

/// Transport security to the mail relay.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SmtpSecurity {
    /// Plain connection upgraded with STARTTLS (required).
    Starttls,
    /// TLS from the first byte (port 465).
    Tls,
    /// No encryption: only for a relay on loopback.
    Plain,
}

/// The mail relay (`[smtp]`, read straight into this; the password is read after).
#[derive(Debug, Clone, serde::Deserialize)]
#[serde(default)]
pub struct Smtp {
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub host: String,
    /// By `security` when not written: 587, 465 or 25.
    #[serde(deserialize_with = "de::via::<Int<1, 65535>, _, _>")]
    pub port: u16,
    pub security: SmtpSecurity,
    #[serde(deserialize_with = "de::via_opt::<Text, _, _>")]
    pub username: Option<String>,
    #[serde(skip)]
    pub password: Option<Secret>,
    /// Extra trusted CA (PEM) for the relay's certificate; the built-in roots otherwise.
    #[serde(deserialize_with = "de::via_opt::<Text, _, _>")]
    pub ca_file: Option<PathBuf>,
    /// Sender address (`From`, envelope sender, Message-ID domain).
    #[serde(deserialize_with = "super::smtp::address")]
    pub from: String,
    /// Connection and command timeout (s).
    #[serde(deserialize_with = "de::via::<Int<1, 3600>, _, _>")]
    pub timeout_s: u64,
    /// Retry backoff after a connection failure or a 4xx reply: first delay and cap (s).
    #[serde(deserialize_with = "de::via::<Int<1, { limits::MAIL_RETRY_S }>, _, _>")]
    pub retry_min_s: u64,
    #[serde(deserialize_with = "de::via::<Int<1, { limits::MAIL_RETRY_S }>, _, _>")]
    pub retry_max_s: u64,
}

impl Default for Smtp {
    /// The defaults; `host` and `from` are required.
    fn default() -> Self {
        Smtp {
            host: String::new(),
            port: 587,
            security: SmtpSecurity::Starttls,
            username: None,
            password: None,
            ca_file: None,
            from: String::new(),
            timeout_s: 30,
            retry_min_s: 5,
            retry_max_s: 600,
        }
    }
}
