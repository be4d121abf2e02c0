//! The page frame every HTML page shares: one inline style sheet (readable on a phone, clean
//! on paper), the navigation, escaping, times in the site's zone, and small building blocks
//! (tables, forms with the CSRF field).
//!
//! Owns the look; knows nothing of the database.

use std::fmt::Write as _;

use axum::http::{header, StatusCode};
use axum::response::{IntoResponse, Response};

pub(crate) use crate::alerts::render::escape;

const STYLE: &str = "\
*{box-sizing:border-box}\
body{font-family:system-ui,-apple-system,'Segoe UI',Roboto,'DejaVu Sans',sans-serif;margin:0;\
color:#1a1a1a;background:#fafafa;line-height:1.4;font-size:16px}\
header{background:#1f3a4d;color:#fff;padding:.5rem .8rem;display:flex;flex-wrap:wrap;gap:.4rem 1rem;align-items:center}\
header a{color:#fff}header .who{margin-left:auto;font-size:.9rem}\
main{padding:.6rem .8rem;max-width:60rem;margin:auto}\
h1{font-size:1.3rem;margin:.6rem 0}h2{font-size:1.1rem;margin:1rem 0 .4rem;border-bottom:1px solid #ccc}\
table{border-collapse:collapse;width:100%;margin:.3rem 0 .8rem;font-size:.95rem}\
th,td{text-align:left;padding:.3rem .4rem;border-bottom:1px solid #ddd;vertical-align:top;overflow-wrap:anywhere}\
table.kv th{background:none;width:38%}.num{white-space:nowrap}.word{overflow-wrap:normal}\
th{font-weight:600;background:#eef1f3;overflow-wrap:normal}\
.lvl{display:inline-block;white-space:nowrap;overflow-wrap:normal;padding:.05rem .45rem;border-radius:.3rem;font-weight:700;border:2px solid #333;background:#fff}\
.lvl-top{background:#000;color:#fff}\
.card{background:#fff;border:1px solid #ccc;border-radius:.4rem;padding:.5rem .7rem;margin:.5rem 0}\
ul.alerts{list-style:none;padding:0;margin:.3rem 0}ul.alerts li{padding:.45rem 0;border-top:1px solid #ddd}\
.warn{border-left:.35rem solid #b00020}.ok{border-left:.35rem solid #2e7d32}.note{color:#555;font-size:.9rem}\
form{margin:.4rem 0}label{display:block;margin:.35rem 0 .1rem;font-weight:600}\
input,select,textarea{font-size:1rem;padding:.45rem;width:100%;max-width:28rem;border:1px solid #888;border-radius:.3rem}\
button{font-size:1.05rem;padding:.55rem 1.1rem;margin-top:.5rem;border-radius:.3rem;border:1px solid #1f3a4d;background:#1f3a4d;color:#fff}\
svg.chart,.drawing svg{width:100%;height:auto;background:#fff}\
.caution{font-size:.85rem;color:#444;border-top:1px solid #ccc;margin-top:1.5rem;padding-top:.5rem}\
@media (max-width:40rem){th,td{padding:.25rem .3rem;font-size:.9rem}.wide{display:none}}\
@media print{header,form,.noprint{display:none}body{background:#fff}.card{border:1px solid #999}a{color:#000;text-decoration:none}}";

/// Who is looking, for the header.
pub struct Frame<'a> {
    /// The signed-in user, if any.
    pub user: Option<&'a str>,
    /// Whether sign-in exists at all (anonymous read access shows a "Sign in" link).
    pub sign_in: bool,
    /// The CSRF token of the session (for the sign-out form).
    pub csrf: Option<&'a str>,
}

/// A whole page.
pub fn page(title: &str, frame: &Frame<'_>, body: &str) -> String {
    let mut s = String::with_capacity(body.len() + 3000);
    let _ = write!(
        s,
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
         <title>{} — seepd</title><style>{STYLE}</style></head><body><header>\
         <strong>seepd</strong><a href=\"/\">Overview</a><a href=\"/quarantine\">Quarantine</a>",
        escape(title)
    );
    match (frame.user, frame.csrf) {
        (Some(u), Some(c)) => {
            let _ = write!(
                s,
                "<span class=\"who\">{} <form method=\"post\" action=\"/logout\" style=\"display:inline\">\
                 {}<button style=\"padding:.1rem .5rem;font-size:.85rem;margin:0\">Sign out</button></form></span>",
                escape(u),
                csrf_field(c)
            );
        }
        _ if frame.sign_in => s.push_str("<a class=\"who\" href=\"/login\">Sign in</a>"),
        _ => {}
    }
    let _ = write!(
        s,
        "</header><main>{body}<p class=\"caution\">{}</p></main></body></html>",
        escape(crate::alerts::render::CAUTION)
    );
    s
}

/// The hidden CSRF field of a form.
pub fn csrf_field(token: &str) -> String {
    format!(
        "<input type=\"hidden\" name=\"csrf\" value=\"{}\">",
        escape(token)
    )
}

/// An HTML response.
pub fn respond(status: StatusCode, html: String) -> Response {
    (
        status,
        [
            (header::CONTENT_TYPE, "text/html; charset=utf-8"),
            (header::CACHE_CONTROL, "no-store"),
        ],
        html,
    )
        .into_response()
}

/// A short page saying something went wrong or is refused.
pub fn message(status: StatusCode, title: &str, text: &str, frame: &Frame<'_>) -> Response {
    let body = format!(
        "<h1>{}</h1><div class=\"card warn\"><p>{}</p></div><p><a href=\"/\">Overview</a></p>",
        escape(title),
        escape(text)
    );
    respond(status, page(title, frame, &body))
}

/// A level as a badge; the most severe level of its rule is drawn filled.
pub fn level(name: &str, top: bool) -> String {
    format!(
        "<span class=\"lvl{}\">{}</span>",
        if top { " lvl-top" } else { "" },
        escape(&name.to_uppercase())
    )
}

/// A time in the zone `tz` to the minute (UTC beside it).
pub fn time(t_ms: i64, tz: chrono_tz::Tz) -> String {
    crate::alerts::render::time(t_ms, tz)
}

/// A two-column table of [label, value] rows (both already escaped), without a header.
pub fn kv(rows: &[Vec<String>]) -> String {
    let mut s = String::from("<table class=\"kv\">");
    for r in rows {
        let (k, v) = (
            r.first().map_or("", String::as_str),
            r.get(1).map_or("", String::as_str),
        );
        let _ = write!(s, "<tr><th>{k}</th><td>{v}</td></tr>");
    }
    s.push_str("</table>");
    s
}

/// A table from a header row and rows of already-escaped cells.
pub fn table(head: &[&str], rows: &[Vec<String>]) -> String {
    let mut s = String::from("<table><tr>");
    for h in head {
        let _ = write!(s, "<th>{}</th>", escape(h));
    }
    s.push_str("</tr>");
    for r in rows {
        s.push_str("<tr>");
        for c in r {
            let _ = write!(s, "<td>{c}</td>");
        }
        s.push_str("</tr>");
    }
    s.push_str("</table>");
    s
}
