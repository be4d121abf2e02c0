//! The operator commands `seepd alerts`, `seepd ack` and `seepd silence`: they open the
//! database of a (possibly running) service, do one short transaction each and print a plain
//! report. The service applies acknowledgements and silences on its next tick (≤ 1 s). They
//! need only the database: the configuration, when it loads, adds names and checks, so that
//! an operator can always see and acknowledge alerts (even with a broken configuration).
//!
//! Owns these commands' arguments (`Alerts`, `Ack`, `Silence`) and wording.

use std::fmt::Write as _;
use std::path::Path;

use anyhow::{bail, Context as _};
use chrono::{DateTime, Utc};

use crate::command::{emit, who, Operator, Run};
use crate::config::Config;
use crate::domain::rules::{Phase, State};
use crate::store::outbox::AckOutcome;
use crate::store::{SilenceRow, Store};

use crate::config::DisplayUnits;
use crate::present::{quantity_name, shown};

/// `seepd alerts`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Alerts {
    #[command(flatten)]
    on: Operator,
}

impl Run for Alerts {
    fn run(self, now: DateTime<Utc>) -> anyhow::Result<()> {
        let (db, cfg) = self.on.open()?;
        emit(&report_db(&db, cfg.as_ref(), now)?)
    }
}

/// `seepd ack`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Ack {
    /// The alert number (see `seepd alerts`).
    alert: i64,
    #[command(flatten)]
    on: Operator,
    /// Who acknowledges (default: $USER).
    #[arg(long, value_name = "NAME")]
    by: Option<String>,
    #[arg(long, value_name = "TEXT")]
    note: Option<String>,
}

impl Run for Ack {
    fn run(self, now: DateTime<Utc>) -> anyhow::Result<()> {
        let (db, _) = self.on.open()?;
        let by = who(self.by);
        emit(&ack(&db, self.alert, &by, self.note.as_deref(), now)?)
    }
}

/// `seepd silence`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Silence {
    #[command(flatten)]
    on: Operator,
    #[arg(
        long,
        value_name = "ID",
        conflicts_with = "instrument",
        required_unless_present = "instrument"
    )]
    rule: Option<String>,
    /// An instrument or derived-object id (silences every rule on it).
    #[arg(long, value_name = "ID")]
    instrument: Option<String>,
    /// RFC 3339 time, a date, or +30m / +4h / +2d.
    #[arg(long, value_name = "TIME")]
    until: String,
    #[arg(long, value_name = "TEXT")]
    reason: String,
    /// Who silences (default: $USER).
    #[arg(long, value_name = "NAME")]
    by: Option<String>,
    /// Also silence the most severe level of the rules (never silenced otherwise).
    #[arg(long)]
    all_levels: bool,
}

impl Run for Silence {
    fn run(self, now: DateTime<Utc>) -> anyhow::Result<()> {
        let (db, cfg) = self.on.open()?;
        let by = who(self.by);
        let args = SilenceArgs {
            rule: self.rule.as_deref(),
            object: self.instrument.as_deref(),
            until: &self.until,
            reason: &self.reason,
            by: &by,
            all_levels: self.all_levels,
        };
        emit(&silence(&db, cfg.as_ref(), &args, now)?)
    }
}

/// Operator listings show UTC (they span sites).
fn time(t_ms: i64) -> String {
    super::render::time(t_ms, chrono_tz::UTC)
}

fn open(db: &Path) -> anyhow::Result<Store> {
    Store::open(db).with_context(|| format!("opening database {}", db.display()))
}

/// The `seepd alerts` report of the database `cfg` names: active, pending, silenced,
/// undeliverable, queued.
///
/// # Errors
/// Database errors.
pub fn report(cfg: &Config, now: DateTime<Utc>) -> anyhow::Result<String> {
    report_db(&cfg.service.database, Some(cfg), now)
}

/// The `seepd alerts` report of the database `db`; `cfg` (when it loads) names the levels of
/// pending rules.
///
/// # Errors
/// Database errors.
pub fn report_db(db: &Path, cfg: Option<&Config>, now: DateTime<Utc>) -> anyhow::Result<String> {
    let store = open(db)?;
    let now_ms = now.timestamp_millis();
    let mut s = String::new();
    let open = store.open_alerts()?;
    let _ = writeln!(s, "Active alerts ({}):", open.len());
    for a in &open {
        let units = cfg
            .and_then(|c| c.sites.iter().find(|x| x.id == a.site))
            .map_or(DisplayUnits::Si, |x| x.display_units);
        let kind = cfg
            .and_then(|c| c.instruments.get(&a.object))
            .map(|i| i.kind.name());
        // The current level; the value and level of each step are in the history below.
        let _ = write!(
            s,
            "  #{}  now {}  {}  {} {}  raised {}  rule {}",
            a.id,
            a.level,
            a.site,
            a.object,
            quantity_name(&a.quantity, kind).to_lowercase(),
            time(a.raised_ms),
            a.rule
        );
        match (&a.acked_by, a.acked_ms) {
            (Some(by), Some(t)) => {
                let _ = writeln!(s, "  acknowledged by {by} at {}", time(t));
            }
            _ => s.push_str("  NOT acknowledged\n"),
        }
        // Its history, in order: each step with its own level and value.
        for e in store.alert_events(a.id)? {
            let value = e.value.map_or_else(
                || "no value".into(),
                |v| shown(v, &a.quantity, &e.unit, units),
            );
            let detail = if e.detail.is_empty() {
                String::new()
            } else {
                format!("  ({})", e.detail)
            };
            let _ = writeln!(
                s,
                "      {}  {:<20} {:<10} {}{detail}",
                time(e.t_ms),
                crate::present::labels::event(&e.kind),
                e.level,
                value
            );
        }
    }
    let mut pending = Vec::new();
    for (rule_id, json) in store.rule_states()? {
        let Ok(state) = serde_json::from_str::<State>(&json) else {
            continue;
        };
        let Phase::Pending { level, since_ms } = state.phase else {
            continue;
        };
        let rule = cfg.and_then(|c| c.alerting.rules.iter().find(|r| r.id == rule_id));
        let what = match rule {
            Some(rule) => {
                let name = rule.spec.levels.get(level).map_or("?", |l| l.name.as_str());
                format!("{} {} beyond the {name} bound", rule.object, rule.quantity)
            }
            // Without the configuration: the level by its number, least severe first.
            None if cfg.is_none() => format!("beyond the bound of level #{}", level + 1),
            None => continue,
        };
        pending.push(format!(
            "  rule {rule_id}: {what} since {} (persistence not met yet)",
            time(since_ms)
        ));
    }
    let _ = writeln!(s, "Pending ({}):", pending.len());
    for p in pending {
        let _ = writeln!(s, "{p}");
    }
    let silences = store.active_silences(now_ms)?;
    let _ = writeln!(s, "Silenced ({}):", silences.len());
    for x in &silences {
        let what = match (&x.rule, &x.object) {
            (Some(r), _) => format!("rule {r}"),
            (None, Some(o)) => format!("instrument {o}"),
            _ => "?".into(),
        };
        let _ = writeln!(
            s,
            "  {what} until {} by {}: {}",
            time(x.until_ms),
            x.who,
            x.reason
        );
    }
    undeliverable(&mut s, &store)?;
    let queued = store.messages("pending")?;
    let _ = writeln!(s, "Queued for sending ({}):", queued.len());
    for m in &queued {
        let _ = writeln!(
            s,
            "  message {} of {}: {:?}, {} attempt(s){}",
            m.message_id,
            time(m.created_ms),
            m.subject,
            m.attempts,
            m.last_error
                .as_deref()
                .map(|e| format!(", last error: {e}"))
                .unwrap_or_default()
        );
    }
    Ok(s)
}

/// The "Undeliverable" section: each message some recipient will never get, with every
/// refused recipient and the server's reply, and who did get it.
fn undeliverable(s: &mut String, store: &Store) -> anyhow::Result<()> {
    let dead = store.undeliverable()?;
    let _ = writeln!(s, "Undeliverable ({}):", dead.len());
    for u in &dead {
        let m = &u.message;
        let _ = writeln!(
            s,
            "  message {} of {}: {:?}",
            m.message_id,
            time(m.created_ms),
            m.subject
        );
        for (to, reply) in &u.refused {
            let _ = writeln!(s, "    not delivered to {to}; server reply: {reply}");
        }
        if !u.delivered.is_empty() {
            let _ = writeln!(s, "    delivered to {}", u.delivered.join(", "));
        }
    }
    Ok(())
}

/// `seepd ack ALERT` on the database `db`.
///
/// # Errors
/// Database errors; an unknown or resolved alert.
pub fn ack(
    db: &Path,
    alert: i64,
    by: &str,
    note: Option<&str>,
    now: DateTime<Utc>,
) -> anyhow::Result<String> {
    let mut store = open(db)?;
    match store.acknowledge(alert, by, note, now.timestamp_millis())? {
        AckOutcome::Recorded => Ok(format!(
            "Alert {alert} acknowledged by {by}: no more reminders or escalation for it.\n"
        )),
        AckOutcome::Already(who, t) => Ok(format!(
            "Alert {alert} was already acknowledged by {who} at {}.\n",
            time(t)
        )),
        AckOutcome::Resolved => bail!("alert {alert} is already resolved"),
        AckOutcome::NotFound => bail!("there is no alert {alert} (see `seepd alerts`)"),
    }
}

/// Parse `--until`: RFC 3339 date-time, a date (midnight UTC), or `+N` with `m`, `h` or `d`.
///
/// # Errors
/// Unreadable text.
pub fn parse_until(s: &str, now: DateTime<Utc>) -> anyhow::Result<DateTime<Utc>> {
    crate::timetext::instant_or_span(s, now).map_err(|e| anyhow::anyhow!("--until {e}"))
}

/// What `seepd silence` asks for.
#[derive(Debug, Clone, Default)]
pub struct SilenceArgs<'a> {
    pub rule: Option<&'a str>,
    pub object: Option<&'a str>,
    pub until: &'a str,
    pub reason: &'a str,
    pub by: &'a str,
    /// Also silence the most severe level (otherwise its notices are always sent).
    pub all_levels: bool,
}

/// `seepd silence --rule ID | --instrument ID --until TIME --reason TEXT [--all-levels]` on the
/// database `db`. The rule or instrument is checked against `cfg` when it loads, else against
/// what the database knows (configured instruments, rules with a state or an alert).
///
/// # Errors
/// Database errors; an unknown rule or instrument; an expiry in the past.
pub fn silence(
    db: &Path,
    cfg: Option<&Config>,
    a: &SilenceArgs<'_>,
    now: DateTime<Utc>,
) -> anyhow::Result<String> {
    let (rule, object) = (a.rule, a.object);
    let until = parse_until(a.until, now)?;
    if until <= now {
        bail!("--until {} is not in the future", until.to_rfc3339());
    }
    if a.reason.trim().is_empty() {
        bail!("--reason must say why");
    }
    let store = open(db)?;
    if let Some(r) = rule {
        let known = match cfg {
            Some(cfg) => cfg.alerting.rules.iter().any(|x| x.id == r),
            None => store.rule_known(r)?,
        };
        if !known {
            bail!("there is no rule {r:?} in the configuration");
        }
    }
    if let Some(o) = object {
        let known = match cfg {
            Some(cfg) => {
                cfg.instruments.contains_key(o) || cfg.alerting.rules.iter().any(|x| x.object == o)
            }
            None => store.object_known(o)?,
        };
        if !known {
            bail!("{o:?} is not an instrument or the object of any rule");
        }
    }
    let row = SilenceRow {
        id: 0,
        rule: rule.map(str::to_string),
        object: object.map(str::to_string),
        until_ms: until.timestamp_millis(),
        reason: a.reason.to_string(),
        who: a.by.to_string(),
        all_levels: a.all_levels,
    };
    let id = store.add_silence(&row, now.timestamp_millis())?;
    let what = rule.map_or_else(
        || format!("instrument {}", object.unwrap_or("?")),
        |r| format!("rule {r}"),
    );
    let top = if a.all_levels {
        "every level, the most severe included"
    } else {
        "every level but the most severe (its messages are still sent; --all-levels to include it)"
    };
    Ok(format!(
        "Silence {id}: {what} until {}, {top}; alerts still change state and are listed, and every suppressed message is recorded.\n",
        time(until.timestamp_millis())
    ))
}
