//! Acknowledgement from the link in an alert email. A GET only shows the alert and a
//! confirmation form — mail scanners fetch links, so a GET never changes anything; the POST
//! from that form acknowledges (through `alerts::commands::ack`, like `seepd ack`), recording
//! the name entered and a note. The token in the link is the authority: signed, for this alert
//! at this level, until its expiry. An expired, forged, or other-level token gets a page saying
//! so and what to do instead.
//!
//! Owns that flow; the token format is `token`'s.

use std::fmt::Write as _;

use axum::extract::{Form, Path, State};
use axum::http::{HeaderMap, StatusCode};
use axum::response::Response;
use chrono::Utc;
use serde::Deserialize;

use super::html::{self, escape, Frame};
use super::{words, Shared, Web};
use crate::ack_token::{AckClaim, Refused};

/// The longest name and note taken.
const MAX_TEXT: usize = 500;

fn frame_of(s: Option<&super::auth::Session>) -> Frame<'_> {
    Frame {
        user: s.map(|s| s.user.as_str()),
        sign_in: true,
        csrf: s.map(|s| s.csrf.as_str()),
    }
}

/// Check the token and that the alert is still open at the token's level: the alert, or the
/// refusal page.
async fn checked(
    web: &Shared,
    token: &str,
    frame: &Frame<'_>,
) -> Result<(AckClaim, crate::store::pages::AlertRecord), Response> {
    let now_s = Utc::now().timestamp();
    let claim = match web.key.verify(token, now_s) {
        Ok(c) => c,
        Err(Refused::Expired(c)) => {
            return Err(html::message(
                StatusCode::GONE,
                "This link has expired",
                &format!(
                    "The acknowledgement link for alert {} ended at {}. Acknowledge from the alert \
                     page after signing in, or on the server with `seepd ack {}`.",
                    c.alert,
                    html::time(c.expires_s * 1000, chrono_tz::UTC),
                    c.alert
                ),
                frame,
            ))
        }
        Err(Refused::Forged | Refused::Malformed) => {
            tracing::warn!("Web: an acknowledgement link with a bad signature was refused");
            return Err(html::message(
                StatusCode::FORBIDDEN,
                "This link is not valid",
                "The link was not made by this seepd, or it was changed or cut short. Open it \
                 again from the email, whole; or sign in and acknowledge from the alert page.",
                frame,
            ));
        }
    };
    let id = claim.alert;
    let alert = match web.read(move |s| Ok(s.alert(id)?)).await {
        Ok(Some(a)) => a,
        Ok(None) => {
            return Err(html::message(
                StatusCode::NOT_FOUND,
                "No such alert",
                &format!("There is no alert {id}."),
                frame,
            ))
        }
        Err(e) => return Err(super::failed(&e, frame)),
    };
    if alert.level != claim.level {
        return Err(html::message(
            StatusCode::CONFLICT,
            "The alert has changed level",
            &format!(
                "This link acknowledges alert {id} at level {}, but the alert is now at level {}. \
                 Read the newer email (or the alert page) before acknowledging.",
                claim.level.to_uppercase(),
                alert.level.to_uppercase()
            ),
            frame,
        ));
    }
    Ok((claim, alert))
}

fn summary(web: &Web, a: &crate::store::pages::AlertRecord) -> String {
    let tz = web.tz(&a.site);
    let units = web.units(&a.site);
    let now_ms = Utc::now().timestamp_millis();
    let rows = vec![
        vec![
            "Level".into(),
            html::level(&a.level, web.top_level(&a.rule, &a.level)),
        ],
        vec![
            "Watching".into(),
            format!(
                "{} — {}",
                escape(&a.object),
                escape(&web.quantity_name(&a.object, &a.quantity))
            ),
        ],
        vec![
            "Value".into(),
            escape(&words::value(a.value, &a.quantity, &a.unit, units)),
        ],
        vec![
            "Since".into(),
            format!(
                "{} ({})",
                escape(&html::time(a.raised_ms, tz)),
                escape(&words::age(now_ms - a.raised_ms))
            ),
        ],
    ];
    format!("<div class=\"card warn\">{}</div>", html::kv(&rows))
}

/// GET /ack/:token — the confirmation page; changes nothing.
pub async fn confirm(
    State(web): State<Shared>,
    Path(token): Path<String>,
    headers: HeaderMap,
) -> Response {
    let session = web.session(&headers);
    let frame = frame_of(session.as_ref());
    let (_, a) = match checked(&web, &token, &frame).await {
        Ok(x) => x,
        Err(r) => return r,
    };
    let mut b = format!("<h1>Acknowledge alert {}</h1>{}", a.id, summary(&web, &a));
    if a.resolved_ms.is_some() {
        b.push_str("<p>This alert is already resolved; there is nothing to acknowledge.</p>");
    } else if let (Some(by), Some(t)) = (&a.acked_by, a.acked_ms) {
        let _ = write!(
            b,
            "<p>Already acknowledged by <strong>{}</strong> at {}.</p>",
            escape(by),
            escape(&html::time(t, web.tz(&a.site)))
        );
    } else {
        let who = session.as_ref().map_or("", |s| s.user.as_str());
        let _ = write!(
            b,
            "<p>Acknowledging stops the reminders and the escalation to the second list for \
             this alert. It does not silence it: a change of level sends a new message.</p>\
             <form method=\"post\" action=\"/ack/{}\">\
             <label for=\"who\">Your name or email address</label>\
             <input id=\"who\" name=\"who\" required maxlength=\"{MAX_TEXT}\" value=\"{}\" autocomplete=\"email\">\
             <label for=\"note\">Note (what you are doing about it)</label>\
             <input id=\"note\" name=\"note\" maxlength=\"{MAX_TEXT}\">\
             <button type=\"submit\">Acknowledge alert {}</button></form>",
            escape(&token),
            escape(who),
            a.id
        );
    }
    let _ = write!(b, "<p><a href=\"/alerts/{}\">The alert page</a></p>", a.id);
    html::respond(
        StatusCode::OK,
        html::page(&format!("Acknowledge alert {}", a.id), &frame, &b),
    )
}

#[derive(Deserialize)]
pub struct AckForm {
    #[serde(default)]
    who: String,
    #[serde(default)]
    note: String,
}

/// POST /ack/:token — acknowledge.
pub async fn acknowledge(
    State(web): State<Shared>,
    Path(token): Path<String>,
    headers: HeaderMap,
    Form(f): Form<AckForm>,
) -> Response {
    if let Err(r) = web.same_origin(&headers) {
        return r;
    }
    let session = web.session(&headers);
    let frame = frame_of(session.as_ref());
    let (_, a) = match checked(&web, &token, &frame).await {
        Ok(x) => x,
        Err(r) => return r,
    };
    let who: String = f.who.trim().chars().take(MAX_TEXT).collect();
    if who.is_empty() {
        return html::message(
            StatusCode::BAD_REQUEST,
            "Who is acknowledging?",
            "Enter your name or email address, then send again.",
            &frame,
        );
    }
    let note: String = f.note.trim().chars().take(MAX_TEXT).collect();
    let db = web.cfg.service.database.clone();
    let id = a.id;
    let who2 = who.clone();
    let done = tokio::task::spawn_blocking(move || {
        crate::alerts::commands::ack(
            &db,
            id,
            &who2,
            (!note.is_empty()).then_some(note.as_str()),
            Utc::now(),
        )
    })
    .await;
    match done {
        Ok(Ok(msg)) => {
            tracing::info!(alert = id, who = %who, "Web: alert acknowledged from an email link");
            let b = format!(
                "<h1>Alert {id} acknowledged</h1><div class=\"card ok\"><p>{}</p></div>\
                 <p><a href=\"/alerts/{id}\">The alert page</a></p>",
                escape(msg.trim())
            );
            html::respond(
                StatusCode::OK,
                html::page(&format!("Alert {id} acknowledged"), &frame, &b),
            )
        }
        Ok(Err(e)) => html::message(
            StatusCode::CONFLICT,
            "Not acknowledged",
            &format!("{e:#}"),
            &frame,
        ),
        Err(e) => super::failed(&anyhow::anyhow!("{e}"), &frame),
    }
}
