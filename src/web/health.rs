//! `/healthz` (the process answers), `/readyz` (broker connected or reconnecting for less than
//! `[http] ready_reconnect_s`, database writable, last commit age within `[http]
//! ready_commit_age_s` when set) and `/metrics` (Prometheus text format, version 0.0.4). No
//! sign-in; nothing secret in them.
//!
//! Owns the metric names and the readiness rule.

use std::fmt::Write as _;

use axum::extract::State;
use axum::http::{header, StatusCode};
use axum::response::{IntoResponse, Response};
use chrono::Utc;

use super::Shared;
use crate::store::export;

/// GET /healthz
pub async fn healthz() -> Response {
    (StatusCode::OK, "ok\n").into_response()
}

/// GET /readyz: 200 when ready, 503 otherwise; the body says each check in words.
pub async fn readyz(State(web): State<Shared>) -> Response {
    let now_ms = Utc::now().timestamp_millis();
    let link = web.link_state();
    let writable = web.read(|s| Ok(s.writable()?)).await;
    let age = web.commit_age_s(now_ms);
    // A link that was up and has been down for less than `ready_reconnect_s` is a reconnect in
    // progress, not an outage. Before its first connection seepd is not ready: nothing is
    // being received yet.
    let down_s = (now_ms - link.since_ms).max(0) / 1000;
    let reconnecting =
        link.ever_connected && !link.connected && down_s < web.http.ready_reconnect_s as i64;
    let mut ready = (link.connected || reconnecting) && writable.is_ok();
    let mut body = String::new();
    let state = if link.connected {
        "connected".to_string()
    } else if reconnecting {
        format!(
            "reconnecting for {down_s} s (ready up to {} s)",
            web.http.ready_reconnect_s
        )
    } else if !link.ever_connected {
        format!("NOT CONNECTED yet, {down_s} s since start")
    } else {
        format!("NOT CONNECTED for {down_s} s")
    };
    let _ = writeln!(body, "broker: {state} ({})", link.broker);
    match &writable {
        Ok(()) => body.push_str("database: writable\n"),
        Err(e) => {
            let _ = writeln!(body, "database: NOT WRITABLE: {e:#}");
        }
    }
    match (age, web.http.ready_commit_age_s) {
        (Some(a), Some(limit)) if a > limit as f64 => {
            ready = false;
            let _ = writeln!(body, "last commit: {a:.1} s ago, OLDER than {limit} s");
        }
        (Some(a), _) => {
            let _ = writeln!(body, "last commit: {a:.1} s ago");
        }
        (None, _) => body.push_str("last commit: none since start\n"),
    }
    body.insert_str(0, if ready { "ready\n" } else { "not ready\n" });
    let status = if ready {
        StatusCode::OK
    } else {
        StatusCode::SERVICE_UNAVAILABLE
    };
    (status, [(header::CACHE_CONTROL, "no-store")], body).into_response()
}

/// What `/metrics` reads from the database.
struct FromDb {
    quarantined_24h: i64,
    outbox: Vec<(String, i64)>,
    backlog: export::Backlog,
    /// (level, acknowledged, count) of open alerts.
    alerts: Vec<(String, bool, i64)>,
}

/// One metric family: HELP, TYPE and samples.
fn family(out: &mut String, name: &str, kind: &str, help: &str, samples: &[(String, f64)]) {
    let _ = writeln!(out, "# HELP {name} {help}");
    let _ = writeln!(out, "# TYPE {name} {kind}");
    for (labels, v) in samples {
        let _ = writeln!(out, "{name}{labels} {v}");
    }
}

fn label_value(v: &str) -> String {
    v.replace('\\', "\\\\")
        .replace('"', "\\\"")
        .replace('\n', "\\n")
}

/// GET /metrics
pub async fn metrics(State(web): State<Shared>) -> Response {
    let now_ms = Utc::now().timestamp_millis();
    let db = web
        .read(move |s| {
            let mut alerts: Vec<(String, bool, i64)> = Vec::new();
            for a in s.open_alerts()? {
                let acked = a.acked_ms.is_some();
                match alerts.iter_mut().find(|x| x.0 == a.level && x.1 == acked) {
                    Some(x) => x.2 += 1,
                    None => alerts.push((a.raised.level, acked, 1)),
                }
            }
            Ok(FromDb {
                quarantined_24h: s.quarantined_since(now_ms - 86_400_000)?,
                outbox: s.outbox_counts()?,
                backlog: export::backlog(s.conn())?,
                alerts,
            })
        })
        .await;
    let (messages, stored, duplicates, quarantined) = web.counters.snapshot();
    let link = web.link_state();
    let mut out = String::new();
    let one = |v: f64| vec![(String::new(), v)];
    family(
        &mut out,
        "seepd_messages_total",
        "counter",
        "MQTT messages committed since start.",
        &one(messages as f64),
    );
    family(
        &mut out,
        "seepd_readings_stored_total",
        "counter",
        "Readings newly stored since start.",
        &one(stored as f64),
    );
    family(
        &mut out,
        "seepd_readings_duplicate_total",
        "counter",
        "Readings received again and already stored, since start.",
        &one(duplicates as f64),
    );
    family(
        &mut out,
        "seepd_quarantined_total",
        "counter",
        "Inputs put in quarantine since start.",
        &one(quarantined as f64),
    );
    family(
        &mut out,
        "seepd_broker_connected",
        "gauge",
        "1 while connected to the MQTT broker.",
        &one(if link.connected { 1.0 } else { 0.0 }),
    );
    family(
        &mut out,
        "seepd_broker_reconnects_total",
        "counter",
        "Reconnections to the broker since start.",
        &one(f64::from(link.reconnects)),
    );
    if let Some(a) = web.commit_age_s(now_ms) {
        family(
            &mut out,
            "seepd_last_commit_age_seconds",
            "gauge",
            "Seconds since the last commit of received messages (absent before the first).",
            &one(a),
        );
    }
    let ok = match db {
        Ok(d) => {
            family(
                &mut out,
                "seepd_quarantined_24h",
                "gauge",
                "Inputs quarantined in the last 24 hours.",
                &one(d.quarantined_24h as f64),
            );
            let status =
                |s: &str| d.outbox.iter().find(|(k, _)| k == s).map_or(0, |(_, n)| *n) as f64;
            family(
                &mut out,
                "seepd_outbox_messages",
                "gauge",
                "Messages in the outbox by state: pending (to send or retry) and dead (undeliverable).",
                &[
                    ("{state=\"pending\"}".into(), status("pending")),
                    ("{state=\"dead\"}".into(), status("dead")),
                ],
            );
            family(
                &mut out,
                "seepd_export_backlog_entries",
                "gauge",
                "Entries waiting in the export queue.",
                &one(d.backlog.entries as f64),
            );
            let lag = d
                .backlog
                .oldest_queued_ms
                .map_or(0, |t| (now_ms - t).max(0)) as f64
                / 1000.0;
            family(
                &mut out,
                "seepd_export_lag_seconds",
                "gauge",
                "Age of the oldest entry in the export queue.",
                &one(lag),
            );
            let samples: Vec<(String, f64)> = d
                .alerts
                .iter()
                .map(|(level, acked, n)| {
                    (
                        format!(
                            "{{level=\"{}\",acknowledged=\"{acked}\"}}",
                            label_value(level)
                        ),
                        *n as f64,
                    )
                })
                .collect();
            family(
                &mut out,
                "seepd_alerts_active",
                "gauge",
                "Open alerts by level and whether acknowledged.",
                &samples,
            );
            1.0
        }
        Err(e) => {
            tracing::warn!(error = %format!("{e:#}"), "Metrics: database not readable");
            0.0
        }
    };
    family(
        &mut out,
        "seepd_database_readable",
        "gauge",
        "1 when the database answered this scrape.",
        &one(ok),
    );
    (
        StatusCode::OK,
        [(
            header::CONTENT_TYPE,
            "text/plain; version=0.0.4; charset=utf-8",
        )],
        out,
    )
        .into_response()
}
