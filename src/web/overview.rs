//! The overview page: for every site, open alerts first (level, since when, acknowledged by
//! whom), then the latest safety quantities with their age, then silent or suspect
//! instruments; below, the service: broker link, last commit, quarantine in the last 24 h,
//! export backlog and the outbox.
//!
//! Owns the overview's content and order.

use std::fmt::Write as _;

use axum::extract::State;
use axum::http::{HeaderMap, StatusCode};
use axum::response::Response;
use chrono::Utc;

use super::html::{self, escape};
use super::{words, Shared};
use crate::store::pages::AlertRecord;
use crate::store::{Latest, LatestDerived};

/// What the overview reads.
struct Data {
    alerts: Vec<AlertRecord>,
    derived: Vec<LatestDerived>,
    latest: Vec<Latest>,
    quarantined_24h: i64,
    backlog: crate::store::export::Backlog,
    outbox: Vec<(String, i64)>,
}

/// An instrument counts as silent after this many of its reading intervals without a reading.
const SILENT_AFTER_INTERVALS: i64 = 2;

/// GET /
pub async fn page(State(web): State<Shared>, headers: HeaderMap) -> Response {
    let viewer = match web.viewer(&headers, "/") {
        Ok(v) => v,
        Err(r) => return r,
    };
    let now_ms = Utc::now().timestamp_millis();
    let data = web
        .read(move |s| {
            Ok(Data {
                alerts: s.open_alerts()?,
                derived: s.latest_derived()?,
                latest: s.latest_all()?,
                quarantined_24h: s.quarantined_since(now_ms - 86_400_000)?,
                backlog: crate::store::export::backlog(s.conn())?,
                outbox: s.outbox_counts()?,
            })
        })
        .await;
    let d = match data {
        Ok(d) => d,
        Err(e) => return super::failed(&e, &viewer.frame()),
    };
    let mut b = String::from("<h1>Overview</h1>");
    for site in &web.cfg.sites {
        site_block(&mut b, &web, site, &d, now_ms);
    }
    service_block(&mut b, &web, &d, now_ms);
    html::respond(StatusCode::OK, html::page("Overview", &viewer.frame(), &b))
}

fn site_block(b: &mut String, web: &super::Web, site: &crate::config::Site, d: &Data, now_ms: i64) {
    let tz = web.tz(&site.id);
    let units = site.display_units;
    let _ = write!(
        b,
        "<h2>{} <span class=\"note\">({})</span></h2>",
        escape(&site.name),
        escape(&site.id)
    );
    let mut alerts: Vec<&AlertRecord> = d.alerts.iter().filter(|a| a.site == site.id).collect();
    alerts.sort_by_key(|a| (a.acked_ms.is_some(), a.raised_ms));
    if alerts.is_empty() {
        b.push_str("<div class=\"card ok\"><p>No open alerts.</p></div>");
    } else {
        let items: String = alerts
            .iter()
            .map(|a| {
                let acked = match (&a.acked_by, a.acked_ms) {
                    (Some(by), Some(t)) => format!(
                        "acknowledged by {} {}",
                        escape(by),
                        escape(&words::age(now_ms - t))
                    ),
                    _ => "<strong>not acknowledged</strong>".into(),
                };
                format!(
                    "<li><a href=\"/alerts/{id}\">{} {} — {}</a><br>raised at {}, {} \
                     <span class=\"note\">({})</span><br>{acked}</li>",
                    html::level(&a.level, web.top_level(&a.rule, &a.level)),
                    escape(&a.object),
                    escape(&web.quantity_name(&a.object, &a.quantity)),
                    escape(&words::value(a.value, &a.quantity, &a.unit, units)),
                    escape(&words::age(now_ms - a.raised_ms)),
                    escape(&html::time(a.raised_ms, tz)),
                    id = a.id,
                )
            })
            .collect();
        let _ = write!(
            b,
            "<div class=\"card warn\"><strong>{} open alert{}</strong><ul class=\"alerts\">{items}</ul></div>",
            alerts.len(),
            if alerts.len() == 1 { "" } else { "s" },
        );
    }
    let sections: Vec<String> = web
        .cfg
        .objects
        .sections
        .iter()
        .filter(|s| s.site == site.id)
        .map(|s| format!("<a href=\"/section/{0}\">Section {0}</a>", escape(&s.id)))
        .collect();
    if !sections.is_empty() {
        let _ = write!(b, "<p>Drawings: {}</p>", sections.join(" · "));
    }
    // Safety quantities of the site's objects, most important quantity first.
    let mut safety: Vec<&LatestDerived> = d
        .derived
        .iter()
        .filter(|x| words::SAFETY.contains(&x.quantity.as_str()))
        .filter(|x| web.site_of(&x.object).as_deref() == Some(site.id.as_str()))
        .collect();
    safety.sort_by_key(|x| {
        (
            words::SAFETY.iter().position(|q| *q == x.quantity),
            x.object.clone(),
        )
    });
    if !safety.is_empty() {
        let rows: Vec<Vec<String>> = safety
            .iter()
            .map(|x| {
                let value = match (&x.value, &x.reason) {
                    (Some(_), _) => escape(&words::value(x.value, &x.quantity, &x.unit, units)),
                    (None, Some(r)) => format!(
                        "<strong>no value</strong><br><span class=\"note\">{}</span>",
                        escape(r)
                    ),
                    (None, None) => "<strong>no value</strong>".into(),
                };
                vec![
                    escape(&words::quantity(&x.quantity)),
                    escape(&x.object),
                    value,
                    escape(&words::age(now_ms - x.t_ms)),
                ]
            })
            .collect();
        let _ = write!(
            b,
            "<h3>Safety quantities</h3>{}",
            html::table(&["Quantity", "Where", "Latest", "Age"], &rows)
        );
    }
    // Instruments that are silent or whose latest reading is flagged.
    let mut odd: Vec<Vec<String>> = Vec::new();
    for (id, inst) in web
        .cfg
        .instruments
        .iter()
        .filter(|(_, i)| i.site == site.id)
    {
        let latest = d.latest.iter().find(|l| &l.instrument == id);
        let interval_ms = inst.interval_s as i64 * 1000;
        let link = format!("<a href=\"/instruments/{0}\">{0}</a>", escape(id));
        match latest {
            None => odd.push(vec![link, "no reading stored yet".into()]),
            Some(l) if now_ms - l.t_ms > SILENT_AFTER_INTERVALS * interval_ms => odd.push(vec![
                link,
                format!(
                    "silent: last reading {} (expected every {})",
                    escape(&words::age(now_ms - l.t_ms)),
                    escape(&words::age(interval_ms).replace(" ago", ""))
                ),
            ]),
            Some(l) if !l.flags.names().is_empty() => odd.push(vec![
                link,
                format!(
                    "latest reading flagged: {}",
                    escape(
                        &l.flags
                            .names()
                            .iter()
                            .map(|f| words::flag(f))
                            .collect::<Vec<_>>()
                            .join(", ")
                    )
                ),
            ]),
            Some(_) => {}
        }
    }
    let count = web
        .cfg
        .instruments
        .values()
        .filter(|i| i.site == site.id)
        .count();
    if odd.is_empty() {
        let _ = write!(
            b,
            "<p>All {count} instruments reporting, latest readings unflagged.</p>"
        );
    } else {
        let _ = write!(
            b,
            "<h3>Silent or suspect instruments ({} of {count})</h3>{}",
            odd.len(),
            html::table(&["Instrument", "Why"], &odd)
        );
    }
    let all: Vec<String> = web
        .cfg
        .instruments
        .iter()
        .filter(|(_, i)| i.site == site.id)
        .map(|(id, _)| format!("<a href=\"/instruments/{0}\">{0}</a>", escape(id)))
        .collect();
    let _ = write!(b, "<p class=\"note\">Instruments: {}</p>", all.join(" · "));
}

fn service_block(b: &mut String, web: &super::Web, d: &Data, now_ms: i64) {
    let link = web.link_state();
    let broker = if link.connected {
        format!(
            "connected to {} ({})",
            escape(&link.broker),
            escape(&words::age(now_ms - link.since_ms).replace(" ago", ""))
        )
    } else {
        format!(
            "<strong>NOT CONNECTED</strong> to {} for {}{}",
            escape(&link.broker),
            escape(&words::age(now_ms - link.since_ms).replace(" ago", "")),
            link.last_error
                .as_ref()
                .map_or_else(String::new, |e| format!(
                    "<br><span class=\"note\">{}</span>",
                    escape(e)
                ))
        )
    };
    let commit = web.commit_age_s(now_ms).map_or_else(
        || "none since the service started".into(),
        |a| words::age((a * 1000.0) as i64),
    );
    let lag = d.backlog.oldest_queued_ms.map_or(0, |t| now_ms - t);
    let export = match &web.cfg.export {
        None => "not configured".to_string(),
        Some(e) if !e.enabled => "configured, disabled".to_string(),
        Some(_) if d.backlog.entries == 0 => "up to date".to_string(),
        Some(_) => format!(
            "{} entries waiting (oldest {})",
            d.backlog.entries,
            words::age(lag)
        ),
    };
    let status = |s: &str| d.outbox.iter().find(|(k, _)| k == s).map_or(0, |(_, n)| *n);
    let rows = vec![
        vec!["Broker".into(), broker],
        vec!["Last commit".into(), escape(&commit)],
        vec![
            "Quarantine, last 24 h".into(),
            format!("<a href=\"/quarantine\">{} inputs</a>", d.quarantined_24h),
        ],
        vec!["Export backlog".into(), escape(&export)],
        vec![
            "Email outbox".into(),
            format!(
                "{} waiting, {} undeliverable",
                status("pending"),
                status("dead")
            ),
        ],
    ];
    let warn = !link.connected || status("dead") > 0;
    let _ = write!(
        b,
        "<h2>The service</h2><div class=\"card {}\">{}</div>",
        if warn { "warn" } else { "ok" },
        html::kv(&rows)
    );
}
