//! The instrument page: the latest reading with its raw value, the reduction (engineering
//! value, pore pressure, total head, temperature and barometer used) and flags; a plot of the
//! total head (or the engineering value) over a selectable period; the rules on it and their
//! levels.
//!
//! Owns that page.

use std::fmt::Write as _;

use axum::extract::{Path, Query, State};
use axum::http::{HeaderMap, StatusCode};
use axum::response::Response;
use chrono::Utc;
use serde::Deserialize;

use super::html::{self, escape};
use super::{chart, words, Shared};

/// Periods offered for the plot, in days.
const PERIODS: [i64; 5] = [1, 3, 7, 30, 90];

#[derive(Deserialize)]
pub struct Period {
    days: Option<i64>,
    /// A manual reading just entered: show what became of it.
    entry: Option<i64>,
}

/// GET /instruments/:id?days=N
pub async fn page(
    State(web): State<Shared>,
    Path(id): Path<String>,
    Query(p): Query<Period>,
    headers: HeaderMap,
) -> Response {
    let viewer = match web.viewer(&headers, &format!("/instruments/{id}")) {
        Ok(v) => v,
        Err(r) => return r,
    };
    let Some(inst) = web.cfg.instruments.get(&id).cloned() else {
        return html::message(
            StatusCode::NOT_FOUND,
            "No such instrument",
            &format!("There is no instrument {id:?} in the configuration."),
            &viewer.frame(),
        );
    };
    let days = p.days.filter(|d| PERIODS.contains(d)).unwrap_or(7);
    let now_ms = Utc::now().timestamp_millis();
    let span_ms = days * 86_400_000;
    let id2 = id.clone();
    let entry = p.entry;
    let stage_web = std::sync::Arc::clone(&web);
    let data = web
        .read(move |s| {
            let latest = s.latest_reading(&id2)?;
            // The period ends now; for an instrument silent longer than the period, at its
            // latest reading (an empty plot would show nothing of what it last said).
            let end_ms = match &latest {
                Some(r) if r.t_ms < now_ms - span_ms => r.t_ms + 1,
                _ => now_ms + 1,
            };
            // Total head when the instrument has one, else the engineering value.
            let period = (end_ms - span_ms, end_ms);
            let stage = chart::stage_for(&stage_web, &id2);
            let mut plot = chart::read(s, &id2, "total_head", stage.as_deref(), period)?;
            if plot.is_empty() {
                plot = chart::read(s, &id2, "engineering_value", None, period)?;
            }
            let fate = match entry {
                Some(n) => Some((n, s.manual_fate(n)?)),
                None => None,
            };
            Ok((latest, plot, fate))
        })
        .await;
    let (latest, plot, fate) = match data {
        Ok(x) => x,
        Err(e) => return super::failed(&e, &viewer.frame()),
    };
    let tz = web.tz(&inst.site);
    let units = web.units(&inst.site);
    let mut b = format!(
        "<h1>{} <span class=\"note\">{}</span></h1>",
        escape(&id),
        escape(&inst.kind.name().replace('_', " "))
    );
    if let Some((n, f)) = &fate {
        b.push_str(&super::manual::fate_card(*n, f.as_ref()));
    }
    match &latest {
        None => b.push_str("<div class=\"card warn\"><p>No reading stored yet.</p></div>"),
        Some(r) => {
            let flags = r.flags.names();
            let flags = if flags.is_empty() {
                "none".to_string()
            } else {
                flags
                    .iter()
                    .map(|f| words::flag(f))
                    .collect::<Vec<_>>()
                    .join(", ")
            };
            let opt = |v: Option<f64>, q: &str, u: &str| words::value(v, q, u, units);
            let rows = vec![
                vec![
                    "Time".into(),
                    format!(
                        "{} <span class=\"note\">({}; arrived {})</span>",
                        escape(&html::time(r.t_ms, tz)),
                        escape(&words::age(now_ms - r.t_ms)),
                        escape(&words::age(now_ms - r.arrival_ms))
                    ),
                ],
                vec![
                    if r.flags.contains(crate::quality::Flags::MANUAL) {
                        "Raw value (as read by hand)".into()
                    } else {
                        "Raw value (as the logger sent it)".into()
                    },
                    escape(&r.raw.to_string()),
                ],
                vec![
                    "Engineering value".into(),
                    escape(&opt(Some(r.eng_value), "engineering_value", &r.eng_unit)),
                ],
                vec![
                    "Temperature".into(),
                    escape(
                        &r.temperature_c
                            .map_or("none".into(), |t| opt(Some(t), "temperature", "degC")),
                    ),
                ],
                vec![
                    "Barometric pressure used".into(),
                    escape(
                        &r.baro_kpa
                            .map_or("none".into(), |p| opt(Some(p), "pressure", "kPa")),
                    ),
                ],
                vec![
                    "Pore pressure".into(),
                    escape(&opt(r.pressure_kpa, "pressure", "kPa")),
                ],
                vec![
                    escape(&crate::present::labels::quantity_name(
                        "total_head",
                        Some(inst.kind.name()),
                    )),
                    escape(&opt(r.total_head_m, "total_head", "m")),
                ],
                vec!["Flags".into(), escape(&flags)],
            ];
            let _ = write!(
                b,
                "<h2>Latest reading</h2><div class=\"card\">{}</div>",
                html::kv(&rows)
            );
        }
    }
    let rules: Vec<&crate::config::Rule> = web
        .cfg
        .alerting
        .rules
        .iter()
        .filter(|r| r.object == id)
        .collect();
    let picker: Vec<String> = PERIODS
        .iter()
        .map(|d| {
            if *d == days {
                format!("<strong>{d} d</strong>")
            } else {
                format!(
                    "<a href=\"/instruments/{}?days={d}\">{d} d</a>",
                    escape(&id)
                )
            }
        })
        .collect();
    let end_ms = plot.to_ms;
    let name = web.quantity_name(&id, &plot.quantity);
    let title = if end_ms > now_ms {
        format!("{id} — {name}, last {days} days")
    } else {
        format!("{id} — {name}, the {days} days to its latest reading")
    };
    let svg = chart::render(&web, plot, title);
    let _ = write!(
        b,
        "<h2>Plot</h2><p class=\"noprint\">Period: {}</p>{svg}",
        picker.join(" · ")
    );
    if rules.is_empty() {
        b.push_str("<h2>Rules</h2><p>No rule watches this instrument.</p>");
    } else {
        // One heading per rule (its quantity in words, the rule id small), then its levels:
        // three columns that stay readable at phone width.
        b.push_str("<h2>Rules</h2>");
        for r in &rules {
            let rows: Vec<Vec<String>> = r
                .spec
                .levels
                .iter()
                .map(|l| {
                    vec![
                        html::level(
                            &l.name,
                            r.spec.levels.last().is_some_and(|x| x.name == l.name),
                        ),
                        escape(&format!(
                            "{} {}",
                            l.direction.name(),
                            rule_bound(l.bound, &r.quantity, units)
                        )),
                        escape(&l.response),
                    ]
                })
                .collect();
            let name = crate::present::labels::quantity_name(&r.quantity, Some(inst.kind.name()));
            let _ = write!(
                b,
                "<h3>{} <span class=\"note\">rule {}</span></h3>{}",
                escape(&name),
                escape(&r.id),
                html::table(&["Level", "Bound", "Response"], &rows)
            );
        }
    }
    let may = web.may_change(&viewer).await;
    b.push_str(&super::manual::form(&inst, &viewer, may));
    html::respond(StatusCode::OK, html::page(&id, &viewer.frame(), &b))
}

/// A rule bound on an instrument's own quantity in the site's display units (the stored unit
/// of each reading quantity is fixed; the engineering value's is the instrument's own).
fn rule_bound(bound: f64, quantity: &str, units: crate::config::DisplayUnits) -> String {
    use crate::model::ReadingQuantity as Q;
    let unit = match Q::from_name(quantity) {
        Some(Q::TotalHead | Q::PressureHead) => "m",
        Some(Q::Pressure) => "kPa",
        _ => return bound.to_string(),
    };
    words::value(Some(bound), quantity, unit, units)
}
