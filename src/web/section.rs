//! The section page: the current drawing of an instrumented cross-section, the same one
//! `seepd section` writes (`section_cmd::render`, from the newest stored heads), with links to
//! its piezometers. Linked from the overview.
//!
//! Owns that page; the drawing is `section_cmd`'s.

use std::fmt::Write as _;

use axum::extract::{Path, State};
use axum::http::{HeaderMap, StatusCode};
use axum::response::Response;
use chrono::Utc;

use super::html::{self, escape};
use super::Shared;

/// GET /section/:id
pub async fn page(
    State(web): State<Shared>,
    Path(id): Path<String>,
    headers: HeaderMap,
) -> Response {
    let viewer = match web.viewer(&headers, &format!("/section/{id}")) {
        Ok(v) => v,
        Err(r) => return r,
    };
    let Some(section) = web.cfg.objects.section(&id).cloned() else {
        return html::message(
            StatusCode::NOT_FOUND,
            "No such section",
            &format!("There is no section {id:?} in the configuration."),
            &viewer.frame(),
        );
    };
    let cfg = std::sync::Arc::clone(&web.cfg);
    let id2 = id.clone();
    let drawn = web
        .read(move |s| Ok(crate::section_cmd::render(&cfg, s, &id2, Utc::now())))
        .await;
    let mut b = format!("<h1>Section {}</h1>", escape(&id));
    match drawn {
        Ok(Ok(svg)) => {
            let _ = write!(
                b,
                "<p class=\"note\">From the newest stored heads; a head older than the section's \
                 tolerance is drawn and marked stale with its age.</p>\
                 <div class=\"card drawing\">{svg}</div>"
            );
        }
        // The drawing needs a head from every input: say which one is missing.
        Ok(Err(e)) => {
            let _ = write!(
                b,
                "<div class=\"card warn\"><p>No drawing yet: {}</p></div>",
                escape(&format!("{e:#}"))
            );
        }
        Err(e) => return super::failed(&e, &viewer.frame()),
    }
    let links: Vec<String> = std::iter::once(&section.pool_gauge)
        .chain(section.piezometers.iter())
        .map(|i| format!("<a href=\"/instruments/{0}\">{0}</a>", escape(i)))
        .collect();
    let _ = write!(b, "<h2>Instruments</h2><p>{}</p>", links.join(" · "));
    html::respond(
        StatusCode::OK,
        html::page(&format!("Section {id}"), &viewer.frame(), &b),
    )
}
