//! The report scheduler of `seepd run`: a thread with its own database connection that, when a
//! `[[report]]` falls due, renders the report for the period just ended and queues one outbox
//! message with the report's documents attached (its `formats`: by default HTML, PDF and CSV) (and keeps the files in
//! `out_dir` if set).
//!
//! Delivery guarantee: each period of each schedule is queued exactly once. The period is
//! recorded in `report_runs` in the transaction that queues the message, so a restart neither
//! skips nor repeats it. At start only the most recent due period is caught up; older missed
//! periods are not generated (`seepd report` makes them on demand). Sending is the mail
//! worker's job.

use std::collections::BTreeSet;
use std::sync::Arc;
use std::time::Duration;

use chrono::{DateTime, Utc};
use chrono_tz::Tz;

use super::html::local;
use super::schedule::{last_due, next_due, period};
use crate::background::{Background, Signals, Waker};
use crate::config::{Config, ReportSchedule};
use crate::section_svg::xml_escape as esc;
use crate::shutdown::Shutdown;
use crate::store::{Attachment, ReportMessage, Store};

/// The scheduler looks again at least this often (clock changes, failed attempts).
const POLL: Duration = Duration::from_secs(60);

/// The site's time zone (UTC if unreadable; the loader has checked it).
fn tz_of(cfg: &Config, site: &str) -> Tz {
    cfg.sites
        .iter()
        .find(|s| s.id == site)
        .and_then(|s| s.time_zone.parse().ok())
        .unwrap_or(chrono_tz::UTC)
}

/// Who receives a schedule's report: its addresses and those of its contact lists, sorted.
pub fn recipients(cfg: &Config, s: &ReportSchedule) -> Vec<String> {
    let site = cfg.alerting.site(&s.site);
    let mut all: BTreeSet<String> = s.recipients.iter().cloned().collect();
    for c in site
        .contacts
        .iter()
        .filter(|c| s.contacts.contains(&c.name))
    {
        all.extend(c.emails.iter().cloned());
    }
    all.into_iter().collect()
}

/// A Message-ID stable per (schedule, period).
fn message_id(cfg: &Config, schedule: &str, period_start_ms: i64) -> String {
    let domain = cfg
        .alerting
        .smtp
        .as_ref()
        .and_then(|s| s.from.split('@').nth(1).map(str::to_string))
        .unwrap_or_else(|| "seepd.invalid".into());
    let safe: String = schedule
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' || c == '.' {
                c
            } else {
                '-'
            }
        })
        .collect();
    format!("<seepd.report-{safe}.{period_start_ms}@{domain}>")
}

/// Render and queue the report of `s` for [from, to); `None` if that period was already queued.
///
/// # Errors
/// Rendering or database errors (nothing is queued then).
pub fn queue_one(
    cfg: &Config,
    store: &mut Store,
    s: &ReportSchedule,
    (from, to): (DateTime<Utc>, DateTime<Utc>),
    now: DateTime<Utc>,
) -> anyhow::Result<Option<i64>> {
    let (f, t) = (from.timestamp_millis(), to.timestamp_millis());
    if store.report_done(&s.id, f)? {
        return Ok(None);
    }
    let (docs, summary) = super::render_report(cfg, store, &s.site, (from, to), now, s.formats)?;
    if let Some(dir) = &s.out_dir {
        if let Err(e) = super::write_files(&docs, dir) {
            tracing::error!(report = %s.id, error = %format!("{e:#}"), "Cannot keep the report files in out_dir; emailing them anyway");
        }
    }
    let tz = tz_of(cfg, &s.site);
    let site_name = cfg
        .sites
        .iter()
        .find(|x| x.id == s.site)
        .map_or(s.site.as_str(), |x| x.name.as_str());
    let names: Vec<&str> = docs.iter().map(|d| d.name.as_str()).collect();
    let (lf, lt) = (local(f, tz), local(t, tz));
    let text = format!(
        "Scheduled instrumentation report \"{}\" for {site_name} ({}).\nPeriod: {lf} to {lt} ({}).\n\nSummary:\n{}\nAttached: {}.\n\nCaution: {}\n",
        s.id,
        s.site,
        tz.name(),
        summary
            .iter()
            .map(|l| format!("- {l}\n"))
            .collect::<String>(),
        names.join(", "),
        crate::CAUTION
    );
    let html = format!(
        "<html><body><p>Scheduled instrumentation report <b>{}</b> for {} ({}).</p><p>Period: {lf} to {lt} ({}).</p><p><b>Summary</b></p><ul>{}</ul><p>Attached: {}.</p><p><b>Caution.</b> {}</p></body></html>",
        esc(&s.id),
        esc(site_name),
        esc(&s.site),
        esc(tz.name()),
        summary
            .iter()
            .map(|l| format!("<li>{}</li>", esc(l)))
            .collect::<String>(),
        esc(&names.join(", ")),
        esc(crate::CAUTION)
    );
    let m = ReportMessage {
        schedule: s.id.clone(),
        period_start_ms: f,
        period_end_ms: t,
        created_ms: now.timestamp_millis(),
        site: s.site.clone(),
        recipients: recipients(cfg, s),
        subject: format!("Instrumentation report {site_name}: {lf} to {lt}"),
        text,
        html,
        message_id: message_id(cfg, &s.id, f),
        attachments: docs
            .into_iter()
            .map(|d| Attachment {
                name: d.name,
                content_type: d.content_type.to_string(),
                data: d.data,
            })
            .collect(),
    };
    Ok(store.queue_report(&m)?)
}

/// Queue every schedule's most recent due period not yet queued; returns the outbox ids.
/// A schedule that fails is logged and tried again at the next pass.
pub fn pass(cfg: &Config, store: &mut Store, now: DateTime<Utc>) -> Vec<i64> {
    let mut queued = Vec::new();
    for s in &cfg.reports {
        let tz = tz_of(cfg, &s.site);
        let Some(p) = last_due(s.every, s.at, tz, now).and_then(|due| period(s.every, tz, due))
        else {
            continue;
        };
        match queue_one(cfg, store, s, p, now) {
            Ok(Some(id)) => {
                tracing::info!(report = %s.id, from = %p.0, to = %p.1, outbox = id, "Scheduled report queued");
                queued.push(id);
            }
            Ok(None) => {}
            Err(e) => {
                tracing::error!(report = %s.id, error = %format!("{e:#}"), "Cannot generate the scheduled report; will retry")
            }
        }
    }
    queued
}

/// The next time any schedule falls due after `now`.
pub fn next_wake(cfg: &Config, now: DateTime<Utc>) -> Option<DateTime<Utc>> {
    cfg.reports
        .iter()
        .filter_map(|s| next_due(s.every, s.at, tz_of(cfg, &s.site), now))
        .min()
}

fn run(cfg: &Config, mail: Option<&Waker>, signals: &Signals) {
    let mut store = loop {
        match Store::open(&cfg.service.database) {
            Ok(s) => break s,
            Err(e) => {
                tracing::error!(error = %e, "Report scheduler cannot open the database; retrying");
                if signals.wait(Duration::from_secs(5)) {
                    return;
                }
            }
        }
    };
    let mut first = true;
    while !signals.stopping() {
        let now = Utc::now();
        if !pass(cfg, &mut store, now).is_empty() {
            if let Some(w) = mail {
                w.wake();
            }
        }
        if std::mem::take(&mut first) {
            let next = next_wake(cfg, now).map(|t| t.to_rfc3339());
            tracing::info!(schedules = cfg.reports.len(), next_due = ?next, "Report scheduler caught up");
        }
        let d = next_wake(cfg, now)
            .and_then(|t| (t - Utc::now()).to_std().ok())
            .map_or(POLL, |d| d.min(POLL));
        if signals.wait(d) {
            return;
        }
    }
}

/// The running scheduler thread.
pub struct Scheduler(Background);

impl Scheduler {
    /// Start the scheduler; `mail` wakes the mail worker after a report is queued.
    ///
    /// # Errors
    /// The thread cannot be spawned.
    pub fn spawn(
        cfg: Arc<Config>,
        mail: Option<Waker>,
        shutdown: &Shutdown,
    ) -> std::io::Result<Scheduler> {
        Background::spawn("seepd-reports", shutdown, move |signals| {
            run(&cfg, mail.as_ref(), signals)
        })
        .map(Scheduler)
    }

    /// Wait for the scheduler to stop, until the shutdown's end (a report being rendered is not
    /// queued if it is abandoned; it is generated again at the next start).
    /// True when it stopped in time.
    pub fn join(self) -> bool {
        self.0.join()
    }
}
