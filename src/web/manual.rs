//! The manual-reading form of the instrument page (responders only) and its POST: the value
//! is checked like `seepd record`'s (`crate::manual::check`), put in the inbox under the
//! signed-in user's name, and the service's writer takes it through the engine within about a
//! second; the page then shows what became of it.
//!
//! Owns that form, its POST and the result card.

use axum::extract::{Form, Path, State};
use axum::http::{HeaderMap, StatusCode};
use axum::response::{IntoResponse, Redirect, Response};
use chrono::{NaiveDateTime, TimeZone as _, Utc};
use serde::Deserialize;

use super::html::{self, escape};
use super::Shared;
use crate::config::{Instrument, Kind};
use crate::store::pages::ManualFate;

/// The form (or, for a viewer, a line saying who may use it).
pub fn form(inst: &Instrument, viewer: &super::auth::Viewer, may_change: bool) -> String {
    let Some(s) = &viewer.session else {
        return String::new();
    };
    if !may_change {
        return "<h2>Manual reading</h2><p class=\"note\">Recording a hand-read value needs the \
                responder role.</p>"
            .into();
    }
    let (lo, hi) = inst.raw_range;
    format!(
        "<h2>Manual reading</h2><form method=\"post\" action=\"/instruments/{id}/manual\">{csrf}\
         <label for=\"value\">Value read by hand</label>\
         <input id=\"value\" name=\"value\" inputmode=\"decimal\" required maxlength=\"40\">\
         <p class=\"note\">The {raw}, as its logger would send it (physical range {lo} to \
         {hi}).</p>\
         {temperature}<label for=\"time\">Read at (site time; empty: now)</label>\
         <input id=\"time\" name=\"time\" type=\"datetime-local\">\
         <button type=\"submit\">Record as {user}</button></form>",
        id = escape(&inst.id),
        temperature = temperature_field(inst),
        raw = escape(&crate::present::labels::raw_value(&inst.kind)),
        csrf = html::csrf_field(&s.csrf),
        user = escape(&s.user),
    )
}

/// The thermistor temperature field, for a vibrating-wire piezometer only (the others' reduction
/// uses none).
fn temperature_field(inst: &Instrument) -> &'static str {
    match inst.kind {
        Kind::VibratingWire(_) => {
            "<label for=\"temperature\">Thermistor temperature, °C (empty: none read)</label>\
             <input id=\"temperature\" name=\"temperature\" inputmode=\"decimal\" \
             maxlength=\"20\"><p class=\"note\">Without it the reading is stored without the \
             thermal correction, flagged temp_missing.</p>"
        }
        _ => "",
    }
}

/// The card saying what became of manual reading `entry` (`None`: still waiting).
pub fn fate_card(entry: i64, fate: Option<&ManualFate>) -> String {
    match fate {
        Some(f) if f.result.starts_with("quarantined") => format!(
            "<div class=\"card warn\"><p>Manual reading {entry} was not stored: {}</p></div>",
            escape(&f.result)
        ),
        Some(f) => format!(
            "<div class=\"card ok\"><p>Manual reading {entry}: {}.</p></div>",
            escape(&f.result)
        ),
        None => format!(
            "<div class=\"card warn\"><p>Manual reading {entry} is waiting for the service to \
             take it; reload this page.</p></div>"
        ),
    }
}

#[derive(Deserialize)]
pub struct ManualForm {
    csrf: String,
    value: String,
    #[serde(default)]
    temperature: String,
    #[serde(default)]
    time: String,
}

/// POST /instruments/:id/manual
pub async fn post(
    State(web): State<Shared>,
    Path(id): Path<String>,
    headers: HeaderMap,
    Form(f): Form<ManualForm>,
) -> Response {
    let session = match web.check_change(&headers, &f.csrf).await {
        Ok(s) => s,
        Err(r) => return r,
    };
    let frame = html::Frame {
        user: Some(&session.user),
        sign_in: true,
        csrf: Some(&session.csrf),
    };
    let refused = |text: String| {
        html::message(
            StatusCode::UNPROCESSABLE_ENTITY,
            "Manual reading refused",
            &text,
            &frame,
        )
    };
    let now = Utc::now();
    let site = web.site_of(&id).unwrap_or_default();
    let time = match f.time.trim() {
        "" => None,
        t => match NaiveDateTime::parse_from_str(t, "%Y-%m-%dT%H:%M")
            .or_else(|_| NaiveDateTime::parse_from_str(t, "%Y-%m-%dT%H:%M:%S"))
            .ok()
            .and_then(|n| web.tz(&site).from_local_datetime(&n).earliest())
        {
            Some(t) => Some(t.with_timezone(&Utc)),
            None => return refused(format!("time {t:?}: expected a date and time of day")),
        },
    };
    let given = crate::manual::Given {
        instrument: &id,
        value: &f.value,
        temperature: Some(&f.temperature),
        time,
        by: &session.user,
    };
    let entry = match crate::manual::check(&web.cfg, &given, now) {
        Ok(e) => e,
        Err(e) => return refused(format!("{e:#}")),
    };
    let db = web.cfg.service.database.clone();
    let queued = tokio::task::spawn_blocking(move || crate::manual::submit(&db, &entry, now)).await;
    let inbox = match queued {
        Ok(Ok(n)) => n,
        Ok(Err(e)) => return super::failed(&e, &frame),
        Err(e) => return super::failed(&anyhow::anyhow!("{e}"), &frame),
    };
    tracing::info!(user = %session.user, instrument = %id, value = %f.value.trim(), entry = inbox, "Web change: manual reading");
    // The writer takes the inbox at its next tick: wait briefly so the page shows the result.
    for _ in 0..30 {
        tokio::time::sleep(std::time::Duration::from_millis(100)).await;
        if let Ok(Some(_)) = web.read(move |s| Ok(s.manual_fate(inbox)?)).await {
            break;
        }
    }
    Redirect::to(&format!(
        "/instruments/{}?entry={inbox}",
        super::auth::percent(&id)
    ))
    .into_response()
}
