//! The quarantine page: counts by reason (all time and the last 24 h) and the newest
//! quarantined inputs with topic, reason, detail and the start of the payload.
//!
//! Owns that page.

use std::fmt::Write as _;

use axum::extract::State;
use axum::http::{HeaderMap, StatusCode};
use axum::response::Response;
use chrono::Utc;

use super::html::{self, escape};
use super::{words, Shared};

/// How many quarantined inputs the page lists.
const SHOWN: usize = 100;
/// How much of a payload is shown.
const PAYLOAD_CHARS: usize = 160;

/// GET /quarantine
pub async fn page(State(web): State<Shared>, headers: HeaderMap) -> Response {
    let viewer = match web.viewer(&headers, "/quarantine") {
        Ok(v) => v,
        Err(r) => return r,
    };
    let now_ms = Utc::now().timestamp_millis();
    let data = web
        .read(move |s| {
            Ok((
                s.quarantine_counts()?,
                s.quarantined_since(now_ms - 86_400_000)?,
                s.quarantine_recent(SHOWN)?,
            ))
        })
        .await;
    let (counts, last_day, recent) = match data {
        Ok(x) => x,
        Err(e) => return super::failed(&e, &viewer.frame()),
    };
    let total: i64 = counts.iter().map(|(_, n)| n).sum();
    let mut b = format!(
        "<h1>Quarantine</h1><p>{total} inputs in quarantine, {last_day} of them in the last 24 hours. \
         Quarantined inputs were acknowledged to the broker and kept here with the reason; they \
         are in no computation.</p>"
    );
    let rows: Vec<Vec<String>> = counts
        .iter()
        .map(|(r, n)| vec![escape(&words::reason(r)), n.to_string()])
        .collect();
    let _ = write!(
        b,
        "<h2>By reason</h2>{}",
        html::table(&["Reason", "Inputs"], &rows)
    );
    let rows: Vec<Vec<String>> = recent
        .iter()
        .map(|q| {
            let text = String::from_utf8_lossy(&q.payload);
            let mut shown: String = text.chars().take(PAYLOAD_CHARS).collect();
            if text.chars().count() > PAYLOAD_CHARS {
                shown.push('…');
            }
            vec![
                escape(&html::time(q.received_ms, chrono_tz::UTC)),
                escape(&q.topic),
                escape(&words::reason(q.reason.code())),
                format!("{}<br><code>{}</code>", escape(&q.detail), escape(&shown)),
            ]
        })
        .collect();
    let _ = write!(
        b,
        "<h2>Newest {}</h2>{}",
        recent.len(),
        html::table(
            &["Received", "Topic", "Reason", "Detail and payload"],
            &rows
        )
    );
    html::respond(
        StatusCode::OK,
        html::page("Quarantine", &viewer.frame(), &b),
    )
}
