//! The alert page: what is watched, the level and value, the response text, the history of
//! events, the watched quantity plotted over the last days with the rule's bounds (the
//! report's SVG chart), and the acknowledge and silence forms (signed-in users, CSRF-checked).
//!
//! Owns that page and its two POSTs, which write through `alerts::commands` exactly as
//! `seepd ack` and `seepd silence` do.

use std::fmt::Write as _;

use axum::extract::{Form, Path, State};
use axum::http::{HeaderMap, StatusCode};
use axum::response::{IntoResponse, Redirect, Response};
use chrono::Utc;
use serde::Deserialize;

use super::html::{self, escape};
use super::{chart, words, Shared};

/// The plot on the alert page covers this many days before now.
const PLOT_DAYS: i64 = 3;

/// GET /alerts/:id
pub async fn page(State(web): State<Shared>, Path(id): Path<i64>, headers: HeaderMap) -> Response {
    let viewer = match web.viewer(&headers, &format!("/alerts/{id}")) {
        Ok(v) => v,
        Err(r) => return r,
    };
    let now_ms = Utc::now().timestamp_millis();
    let span_ms = PLOT_DAYS * 86_400_000;
    let stage_web = std::sync::Arc::clone(&web);
    let data = web
        .read(move |s| {
            let Some(a) = s.alert(id)? else {
                return Ok(None);
            };
            let events = s.alert_events(id)?;
            let stage = chart::stage_for(&stage_web, &a.object);
            // The plot ends now; when nothing was stored in its period, at the alert's last
            // event (so that the values behind it are shown).
            let end_ms = now_ms + 1;
            let mut plot = chart::read(
                s,
                &a.object,
                &a.quantity,
                stage.as_deref(),
                (end_ms - span_ms, end_ms),
            )?;
            if let (true, Some(e)) = (plot.is_empty(), events.last()) {
                let end_ms = e.t_ms + 3_600_000;
                plot = chart::read(
                    s,
                    &a.object,
                    &a.quantity,
                    stage.as_deref(),
                    (end_ms - span_ms, end_ms),
                )?;
            }
            // A derived value: the heads it was computed from, beside the stage.
            let inputs: Vec<String> = s
                .derived_inputs(&a.object, &a.quantity)?
                .into_iter()
                .filter(|i| stage.as_deref() != Some(i.as_str()))
                .collect();
            let heads = if inputs.is_empty() {
                None
            } else {
                let period = (plot.from_ms, plot.to_ms);
                Some(chart::read_many(
                    s,
                    &inputs,
                    "total_head",
                    stage.as_deref(),
                    period,
                )?)
            };
            Ok(Some((a, events, plot, heads)))
        })
        .await;
    let (a, events, plot, heads) = match data {
        Ok(Some(x)) => x,
        Ok(None) => {
            return html::message(
                StatusCode::NOT_FOUND,
                "No such alert",
                &format!("There is no alert {id}."),
                &viewer.frame(),
            )
        }
        Err(e) => return super::failed(&e, &viewer.frame()),
    };
    let tz = web.tz(&a.site);
    let units = web.units(&a.site);
    let rule = web.cfg.alerting.rules.iter().find(|r| r.id == a.rule);
    let level_spec = rule.and_then(|r| r.spec.levels.iter().find(|l| l.name == a.level));
    let mut b = format!(
        "<h1>Alert {} {}</h1>",
        a.id,
        html::level(&a.level, web.top_level(&a.rule, &a.level))
    );
    let state = match (a.resolved_ms, &a.acked_by, a.acked_ms) {
        (Some(t), _, _) => format!("resolved {}", escape(&html::time(t, tz))),
        (None, Some(by), Some(t)) => format!(
            "open, acknowledged by {} at {}{}",
            escape(by),
            escape(&html::time(t, tz)),
            a.ack_note
                .as_ref()
                .map_or_else(String::new, |n| format!(" — “{}”", escape(n)))
        ),
        _ => "<strong>open, not acknowledged</strong>".into(),
    };
    let site_name = web
        .cfg
        .sites
        .iter()
        .find(|s| s.id == a.site)
        .map_or(a.site.as_str(), |s| s.name.as_str());
    let mut rows = vec![
        vec!["Site".into(), escape(site_name)],
        vec![
            "Watching".into(),
            format!(
                "{} — {} <span class=\"note\">(rule {})</span>",
                object_link(&web, &a.object),
                escape(&web.quantity_name(&a.object, &a.quantity)),
                escape(&a.rule)
            ),
        ],
        vec![
            "Value when raised".into(),
            escape(&words::value(a.value, &a.quantity, &a.unit, units)),
        ],
        vec![
            "Since".into(),
            format!(
                "{} <span class=\"note\">({})</span>",
                escape(&html::time(a.raised_ms, tz)),
                escape(&words::age(now_ms - a.raised_ms))
            ),
        ],
        vec!["State".into(), state],
    ];
    if let Some(e) = events.iter().rev().find(|e| e.value.is_some()) {
        rows.insert(
            3,
            vec![
                "Latest value in its history".into(),
                format!(
                    "{} <span class=\"note\">({}, {})</span>",
                    escape(&words::value(e.value, &a.quantity, &e.unit, units)),
                    escape(&words::event(&e.kind)),
                    escape(&html::time(e.t_ms, tz))
                ),
            ],
        );
    }
    if let Some(l) = level_spec {
        rows.push(vec![
            "Bound".into(),
            escape(&format!(
                "{} {}",
                l.direction.name(),
                words::value(Some(l.bound), &a.quantity, &a.unit, units)
            )),
        ]);
        rows.push(vec![
            "Response".into(),
            format!("<strong>{}</strong>", escape(&l.response)),
        ]);
    }
    let _ = write!(
        b,
        "<div class=\"card {}\">{}</div>",
        if a.resolved_ms.is_some() {
            "ok"
        } else {
            "warn"
        },
        html::kv(&rows)
    );

    if a.resolved_ms.is_none() {
        let may = web.may_change(&viewer).await;
        forms(&mut b, &viewer, may, &a);
    }

    let end_ms = plot.to_ms;
    let title = format!(
        "{} — {}, {PLOT_DAYS} days",
        a.object,
        web.quantity_name(&a.object, &a.quantity)
    );
    let svg = chart::render(&web, plot, title);
    let heading = if end_ms > now_ms {
        format!("Last {PLOT_DAYS} days")
    } else {
        format!("The {PLOT_DAYS} days to its last event")
    };
    let _ = write!(b, "<h2>{heading}</h2>{svg}");
    if let Some(h) = heads {
        let title = format!("{} — heads it is computed from", a.object);
        let _ = write!(b, "<h2>Related heads</h2>{}", chart::render(&web, h, title));
    }

    let rows: Vec<Vec<String>> = events
        .iter()
        .map(|e| {
            let detail = if e.detail.is_empty() {
                String::new()
            } else {
                format!("<br><span class=\"note\">{}</span>", escape(&e.detail))
            };
            vec![
                escape(&html::time(e.t_ms, tz)),
                format!(
                    "<span class=\"word\">{}</span>{detail}",
                    escape(&words::event(&e.kind))
                ),
                html::level(&e.level, web.top_level(&a.rule, &e.level)),
                format!(
                    "<span class=\"num\">{}</span>",
                    escape(&words::value(e.value, &a.quantity, &e.unit, units))
                ),
            ]
        })
        .collect();
    let _ = write!(
        b,
        "<h2>History</h2><p class=\"note\">Times are those of the values that caused each step.</p>{}",
        html::table(&["When", "What", "Level", "Value"], &rows)
    );
    html::respond(
        StatusCode::OK,
        html::page(&format!("Alert {}", a.id), &viewer.frame(), &b),
    )
}

fn object_link(web: &super::Web, object: &str) -> String {
    if web.cfg.instruments.contains_key(object) {
        format!("<a href=\"/instruments/{0}\">{0}</a>", escape(object))
    } else {
        escape(object)
    }
}

fn forms(
    b: &mut String,
    viewer: &super::auth::Viewer,
    may_change: bool,
    a: &crate::store::pages::AlertRecord,
) {
    let Some(s) = &viewer.session else {
        b.push_str("<p class=\"noprint\"><a href=\"/login\">Sign in</a> to acknowledge or silence, or use the link in the alert email.</p>");
        return;
    };
    if !may_change {
        b.push_str("<p class=\"noprint note\">You may read this page; acknowledging and silencing need the responder role (or the link in the alert email).</p>");
        return;
    }
    let csrf = html::csrf_field(&s.csrf);
    if a.acked_ms.is_none() {
        let _ = write!(
            b,
            "<h2>Acknowledge</h2><form method=\"post\" action=\"/alerts/{0}/ack\">{csrf}\
             <label for=\"note\">Note (what you are doing about it)</label>\
             <input id=\"note\" name=\"note\" maxlength=\"500\">\
             <button type=\"submit\">Acknowledge as {1}</button></form>",
            a.id,
            escape(&s.user)
        );
    }
    let _ = write!(
        b,
        "<h2>Silence this rule</h2><form method=\"post\" action=\"/alerts/{0}/silence\">{csrf}\
         <label for=\"until\">For</label><select id=\"until\" name=\"until\">\
         <option value=\"+1h\">1 hour</option><option value=\"+4h\" selected>4 hours</option>\
         <option value=\"+12h\">12 hours</option><option value=\"+1d\">1 day</option>\
         <option value=\"+3d\">3 days</option></select>\
         <label for=\"reason\">Reason (required)</label><input id=\"reason\" name=\"reason\" required maxlength=\"500\">\
         <p class=\"note\">Messages about the rule's most severe level are still sent.</p>\
         <button type=\"submit\">Silence</button></form>",
        a.id
    );
}

#[derive(Deserialize)]
pub struct AckForm {
    csrf: String,
    #[serde(default)]
    note: String,
}

/// POST /alerts/:id/ack
pub async fn ack(
    State(web): State<Shared>,
    Path(id): Path<i64>,
    headers: HeaderMap,
    Form(f): Form<AckForm>,
) -> Response {
    let session = match web.check_change(&headers, &f.csrf).await {
        Ok(s) => s,
        Err(r) => return r,
    };
    let note = f.note.trim().to_string();
    let user = session.user.clone();
    let db = web.cfg.service.database.clone();
    let done = tokio::task::spawn_blocking(move || {
        crate::alerts::commands::ack(
            &db,
            id,
            &user,
            (!note.is_empty()).then_some(note.as_str()),
            Utc::now(),
        )
    })
    .await;
    after_change(&session, id, done, "acknowledge")
}

#[derive(Deserialize)]
pub struct SilenceForm {
    csrf: String,
    until: String,
    reason: String,
}

/// POST /alerts/:id/silence (the alert's rule)
pub async fn silence(
    State(web): State<Shared>,
    Path(id): Path<i64>,
    headers: HeaderMap,
    Form(f): Form<SilenceForm>,
) -> Response {
    let session = match web.check_change(&headers, &f.csrf).await {
        Ok(s) => s,
        Err(r) => return r,
    };
    let cfg = std::sync::Arc::clone(&web.cfg);
    let user = session.user.clone();
    let done = tokio::task::spawn_blocking(move || -> anyhow::Result<String> {
        let store = crate::store::Store::open(&cfg.service.database)?;
        let a = store
            .alert(id)?
            .ok_or_else(|| anyhow::anyhow!("there is no alert {id}"))?;
        drop(store);
        let args = crate::alerts::commands::SilenceArgs {
            rule: Some(&a.rule),
            object: None,
            until: &f.until,
            reason: &f.reason,
            by: &user,
            all_levels: false,
        };
        crate::alerts::commands::silence(&cfg.service.database, Some(&cfg), &args, Utc::now())
    })
    .await;
    after_change(&session, id, done, "silence")
}

fn after_change(
    session: &super::auth::Session,
    id: i64,
    done: Result<anyhow::Result<String>, tokio::task::JoinError>,
    what: &str,
) -> Response {
    let frame = html::Frame {
        user: Some(&session.user),
        sign_in: true,
        csrf: Some(&session.csrf),
    };
    match done {
        Ok(Ok(msg)) => {
            tracing::info!(alert = id, user = %session.user, action = what, result = %msg.trim(), "Web change");
            Redirect::to(&format!("/alerts/{id}")).into_response()
        }
        Ok(Err(e)) => html::message(
            StatusCode::CONFLICT,
            &format!("Could not {what}"),
            &format!("{e:#}"),
            &frame,
        ),
        Err(e) => super::failed(&anyhow::anyhow!("{e}"), &frame),
    }
}
