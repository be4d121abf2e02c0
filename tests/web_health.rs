//! Health, readiness and metrics with the real binary and a real Mosquitto: `/metrics` parsed
//! by the Python `prometheus_client` text parser (as a scraper would), its values following
//! readings and quarantined input as they arrive; `/readyz` ready through a short reconnect,
//! failing while the broker stays down and recovering after; none of them needing a sign-in
//! (which the pages do).

mod common;
#[path = "common/web.rs"]
mod web;

use std::collections::BTreeMap;
use std::io::Write as _;
use std::process::{Command, Stdio};
use std::time::Duration;

use common::*;

const TOPIC: &str = "demo/AB-LOG1/json";

/// `/metrics` through the Python parser: "name{labels}" → value, labels sorted.
fn scrape(port: u16) -> BTreeMap<String, f64> {
    let a = web::get(port, "/metrics", None);
    assert_eq!(a.status, 200);
    assert!(a
        .header("content-type")
        .unwrap_or("")
        .starts_with("text/plain; version=0.0.4"));
    let script = r#"
import sys
from prometheus_client.parser import text_string_to_metric_families
for fam in text_string_to_metric_families(sys.stdin.read()):
    for s in fam.samples:
        labels = ','.join('%s=%s' % kv for kv in sorted(s.labels.items()))
        print('%s{%s} %r' % (s.name, labels, s.value))
"#;
    let mut child = Command::new("/usr/bin/python3")
        .args(["-c", script])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("python3 with prometheus_client (tests/run.sh installs it)");
    child
        .stdin
        .take()
        .unwrap()
        .write_all(a.body.as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(
        out.status.success(),
        "the parser refused /metrics: {}\n{}",
        String::from_utf8_lossy(&out.stderr),
        a.body
    );
    String::from_utf8_lossy(&out.stdout)
        .lines()
        .filter_map(|l| l.rsplit_once(' '))
        .map(|(k, v)| (k.to_string(), v.parse().unwrap()))
        .collect()
}

fn metric(m: &BTreeMap<String, f64>, key: &str) -> f64 {
    *m.get(key).unwrap_or_else(|| panic!("no {key} in {m:#?}"))
}

#[test]
fn health_ready_and_metrics_follow_readings_and_the_broker() {
    let port = free_port();
    let mut rig = web::page_rig(port, "ready_reconnect_s = 4");

    // Pages need a sign-in; health endpoints do not.
    let a = web::get(port, "/", None);
    assert_eq!(a.status, 303);
    assert!(a.header("location").unwrap_or("").starts_with("/login"));
    assert_eq!(web::get(port, "/healthz", None).status, 200);
    let ready = web::get(port, "/readyz", None);
    assert_eq!(ready.status, 200, "{}", ready.body);
    assert!(ready.body.contains("broker: connected"));
    assert!(ready.body.contains("database: writable"));

    let m = scrape(port);
    assert_eq!(metric(&m, "seepd_broker_connected{}"), 1.0);
    assert_eq!(metric(&m, "seepd_readings_stored_total{}"), 0.0);
    assert_eq!(metric(&m, "seepd_quarantined_24h{}"), 0.0);
    assert!(
        !m.contains_key("seepd_last_commit_age_seconds{}"),
        "no commit yet"
    );

    // Five river readings and one payload that is not JSON.
    let p = Publisher::connect(rig.broker.port, "pub-web-health");
    let t0 = chrono::Utc::now().timestamp() - 600;
    for i in 0..5 {
        p.send(TOPIC, river_json(t0 + i * 60, 2.0 + i as f64 * 0.1));
    }
    p.send(TOPIC, "this is not json");
    p.wait_acked(6, Duration::from_secs(20));
    let m = wait_for(Duration::from_secs(20), || {
        let m = scrape(port);
        (m.get("seepd_readings_stored_total{}") == Some(&5.0)
            && m.get("seepd_quarantined_total{}") == Some(&1.0))
        .then_some(m)
    })
    .unwrap_or_else(|| {
        panic!(
            "metrics never showed 5 stored and 1 quarantined: {:#?}",
            scrape(port)
        )
    });
    assert_eq!(metric(&m, "seepd_quarantined_24h{}"), 1.0);
    assert_eq!(metric(&m, "seepd_messages_total{}"), 6.0);
    let age = metric(&m, "seepd_last_commit_age_seconds{}");
    assert!((0.0..30.0).contains(&age), "last commit age {age}");
    assert_eq!(metric(&m, "seepd_outbox_messages{state=dead}"), 0.0);
    assert_eq!(metric(&m, "seepd_database_readable{}"), 1.0);

    // The broker stops: ready while reconnecting for less than 4 s, then not ready, and the
    // metric says so; it comes back: ready again.
    rig.broker.stop();
    let short = wait_for(Duration::from_secs(20), || {
        let a = web::get(port, "/readyz", None);
        a.body.contains("reconnecting for").then_some(a)
    })
    .expect("/readyz never said reconnecting");
    assert_eq!(short.status, 200, "{}", short.body);
    let down = wait_for(Duration::from_secs(20), || {
        let a = web::get(port, "/readyz", None);
        (a.status == 503).then_some(a)
    })
    .expect("/readyz never failed with the broker down");
    assert!(down.body.contains("NOT CONNECTED"), "{}", down.body);
    assert_eq!(metric(&scrape(port), "seepd_broker_connected{}"), 0.0);
    assert_eq!(
        web::get(port, "/healthz", None).status,
        200,
        "alive all the same"
    );
    rig.broker.restart();
    wait_for(Duration::from_secs(30), || {
        (web::get(port, "/readyz", None).status == 200).then_some(())
    })
    .expect("/readyz never recovered");
    let m = scrape(port);
    assert_eq!(metric(&m, "seepd_broker_connected{}"), 1.0);
    assert!(metric(&m, "seepd_broker_reconnects_total{}") >= 1.0);
}

#[test]
fn a_bad_http_table_is_refused_with_file_and_line() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = example_config(dir.path(), 1883);
    let mut text = std::fs::read_to_string(cfg.join("seepd.toml")).unwrap();
    let line = text.lines().count() + 3;
    text.push_str("\n[http]\nbind = \"every interface\"\npublic_base_url = \"ftp://x\"\nallow_anonymous = \"yes\"\ncolour = \"blue\"\n");
    std::fs::write(cfg.join("seepd.toml"), text).unwrap();
    let (code, out, err) = seepd_output(&["check", "--config", cfg.to_str().unwrap()]);
    assert_eq!(code, 78, "{out}{err}");
    let all = format!("{out}{err}");
    assert!(
        all.contains(&format!("seepd.toml:{line}:")),
        "bind problem at line {line}: {all}"
    );
    assert!(all.contains("bind \"every interface\""), "{all}");
    assert!(all.contains("public_base_url \"ftp://x\""), "{all}");
    assert!(all.contains("allow_anonymous"), "{all}");
    assert!(all.contains("colour"), "{all}");
}

/// A seepd whose broker is not there at start is not ready (nothing is being received), even
/// within `ready_reconnect_s`: the grace is for a reconnect, not for a first connection.
#[test]
fn not_ready_before_the_first_connection() {
    let dir = tempfile::tempdir().unwrap();
    let port = free_port();
    let cfg = example_config(dir.path(), free_port());
    web::add_http(&cfg, port, "ready_reconnect_s = 600");
    let _d = Daemon::start(&cfg, &dir.path().join("seepd.log"));
    web::wait_up(port);
    let a = web::get(port, "/readyz", None);
    assert_eq!(a.status, 503, "{}", a.body);
    assert!(a.body.contains("NOT CONNECTED yet"), "{}", a.body);
    assert_eq!(web::get(port, "/healthz", None).status, 200);
}
