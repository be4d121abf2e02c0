//! Alert email against a real aiosmtpd started per test: a rendered alert read back from the
//! Maildir (plain relay), STARTTLS with a self-signed CA:FALSE certificate and AUTH, implicit
//! TLS, a relay that is down and then up (each message delivered exactly once), and a 550
//! dead-lettered and listed by `seepd alerts`.

mod common;

use std::collections::BTreeSet;
use std::path::Path;
use std::sync::Arc;
use std::time::Duration;

use common::smtp::{header, Opts, SmtpServer, PASSWORD, USER};
use common::*;
use seepd::alerts::{Evaluator, Observation};
use seepd::config::{Config, Secret, Smtp, SmtpSecurity};
use seepd::notify::{deliver_due, Mailer};
use seepd::store::Store;

fn smtp(port: u16, security: SmtpSecurity) -> Smtp {
    Smtp {
        host: "127.0.0.1".into(),
        port,
        security,
        username: None,
        password: None,
        ca_file: None,
        from: "seepd@example.invalid".into(),
        timeout_s: 5,
        retry_min_s: 1,
        retry_max_s: 1,
    }
}

/// The example configuration with no bundle window, loaded.
fn config(dir: &Path, smtp_port: u16) -> Config {
    let cfg = common::smtp::alert_config(dir, 1883, smtp_port, &[]);
    let mut cfg = seepd::config::load_dir(&cfg).unwrap();
    // Only the river is fed here: without this, the toe's and the section's values, never
    // computed, would raise "safety value unavailable" after 3 h.
    cfg.alerting
        .rules
        .retain(|r| !r.id.ends_with(seepd::config::rules::UNAVAILABLE_SUFFIX));
    cfg
}

/// Raise the river-stage rule to its most severe level with readings; commit the messages.
fn raise_river(cfg: Config, store: &mut Store) -> Vec<String> {
    let mut ev = Evaluator::new(Arc::new(cfg));
    let t0 = 1_772_366_400_000_i64;
    let mut writes = seepd::store::AlertWrites::default();
    for (i, head) in [96.0, 97.0, 97.5, 97.9, 98.2].iter().enumerate() {
        let t = t0 + i as i64 * 3_600_000;
        let obs = Observation {
            object: "AB-RIVER".into(),
            quantity: "total_head".into(),
            t_ms: t,
            value: Some(*head),
            unit: "m".into(),
            reason: None,
        };
        // The toe piezometer reports too (its no-data rule stays quiet).
        let pz = Observation {
            object: "AB-PZ-1A".into(),
            quantity: "engineering_value".into(),
            unit: "digits".into(),
            ..obs.clone()
        };
        writes.extend(ev.evaluate(&[obs, pz], t));
    }
    store.write_alerts(&writes).unwrap();
    writes
        .messages
        .iter()
        .map(|m| m.message_id.clone())
        .collect()
}

fn drain(store: &Store, smtp: &Smtp) -> seepd::notify::Pass {
    let mailer = Mailer::new(smtp).unwrap();
    deliver_due(store, &mailer, smtp).unwrap()
}

#[test]
fn plain_relay_receives_the_rendered_alert_with_every_element() {
    let dir = tempfile::tempdir().unwrap();
    let server = SmtpServer::start(dir.path(), Opts::default());
    let cfg = config(dir.path(), server.port);
    let relay = cfg.alerting.smtp.clone().unwrap();
    let mut store = Store::open(&dir.path().join("seepd.sqlite")).unwrap();
    let ids = raise_river(cfg, &mut store);
    // 97.0 after 96.0 raises "watch" (2 readings beyond 95.0); 97.5 confirms "concern"; one
    // hour at concern without acknowledgement (97.9), the escalation list is told; 98.2 after
    // 97.9 confirms "act": raise, escalate, notify_escalation, escalate.
    assert_eq!(ids.len(), 4, "{ids:?}");
    let pass = drain(&store, &relay);
    assert_eq!(pass.sent, 4);
    let msgs = server.wait_messages(4, Duration::from_secs(10));
    let to_second: Vec<&String> = msgs
        .iter()
        .filter(|m| header(m, "To").as_deref() == Some("district-engineer@example.invalid"))
        .collect();
    assert_eq!(
        to_second.len(),
        1,
        "one escalation message to the second list"
    );
    assert!(header(to_second[0], "Subject")
        .unwrap_or_default()
        .contains("Not acknowledged: CONCERN"));
    let last = msgs
        .iter()
        .find(|m| header(m, "Message-ID").as_deref() == ids.last().map(String::as_str))
        .expect("the escalation to act by its Message-ID");
    let subject = header(last, "Subject").unwrap_or_default();
    // Subject: level, site, object, quantity, value.
    for part in ["ACT", "ash-bend", "AB-RIVER", "total_head", "98.2 m"] {
        assert!(subject.contains(part), "subject {subject:?} lacks {part:?}");
    }
    // Once the escalation list has been told, later notices go to both lists.
    assert_eq!(
        header(last, "To").as_deref(),
        Some("district-engineer@example.invalid, levee-oncall@example.invalid")
    );
    // Body: value against bound with direction, rate, last readings, response, link, caution;
    // text and HTML alternatives.
    let body = last.replace("=\r\n", "").replace("=\n", "");
    for part in [
        "bound: above 97.8 m (act level)",
        "clears below 97.6",
        "per hour over the last 5 values",
        "98.2 m",
        "96 m",
        "Continuous patrol",
        "https://status.example.invalid/ash-bend",
        "Automated screening only",
        "emergency action plan",
        "engineer of record",
        "text/plain",
        "text/html",
    ] {
        assert!(body.contains(part), "message lacks {part:?}:\n{last}");
    }
}

#[test]
fn starttls_with_a_self_signed_certificate_and_auth() {
    let dir = tempfile::tempdir().unwrap();
    let server = SmtpServer::start(
        dir.path(),
        Opts {
            starttls: true,
            auth: true,
            ..Opts::default()
        },
    );
    let cfg = config(dir.path(), server.port);
    let mut store = Store::open(&dir.path().join("seepd.sqlite")).unwrap();
    raise_river(cfg, &mut store);

    // Without the CA file the certificate is not trusted: a transient failure, nothing sent.
    let mut relay = smtp(server.port, SmtpSecurity::Starttls);
    relay.username = Some(USER.into());
    relay.password = Some(Secret(PASSWORD.into()));
    let pass = drain(&store, &relay);
    assert_eq!((pass.sent, pass.retried), (0, 1));

    // With it: STARTTLS, AUTH, delivered.
    relay.ca_file = Some(server.cert.clone());
    store
        .conn()
        .execute("UPDATE outbox SET next_attempt_ms = 0", [])
        .unwrap();
    let pass = drain(&store, &relay);
    assert_eq!(pass.sent, 4, "{pass:?}");
    assert_eq!(server.wait_messages(4, Duration::from_secs(10)).len(), 4);
}

#[test]
fn implicit_tls() {
    let dir = tempfile::tempdir().unwrap();
    let server = SmtpServer::start(
        dir.path(),
        Opts {
            implicit_tls: true,
            ..Opts::default()
        },
    );
    let cfg = config(dir.path(), server.port);
    let mut store = Store::open(&dir.path().join("seepd.sqlite")).unwrap();
    raise_river(cfg, &mut store);
    let mut relay = smtp(server.port, SmtpSecurity::Tls);
    relay.ca_file = Some(server.cert.clone());
    assert_eq!(drain(&store, &relay).sent, 4);
    assert_eq!(server.wait_messages(4, Duration::from_secs(10)).len(), 4);
}

#[test]
fn relay_down_then_up_delivers_every_message_exactly_once() {
    let dir = tempfile::tempdir().unwrap();
    let port = free_port();
    let cfg = config(dir.path(), port);
    let relay = cfg.alerting.smtp.clone().unwrap();
    let mut store = Store::open(&dir.path().join("seepd.sqlite")).unwrap();
    let ids: BTreeSet<String> = raise_river(cfg, &mut store).into_iter().collect();
    // Down: every attempt fails and is scheduled again.
    for _ in 0..3 {
        let _ = drain(&store, &relay);
        store
            .conn()
            .execute("UPDATE outbox SET next_attempt_ms = 0", [])
            .unwrap();
    }
    assert_eq!(store.messages("pending").unwrap().len(), 4);
    let attempts: i64 = store
        .conn()
        .query_row("SELECT max(attempts) FROM outbox", [], |r| r.get(0))
        .unwrap();
    assert_eq!(attempts, 3, "the first message was tried at each pass");
    // Up: the worker's retry delivers each once, and passes after that send nothing.
    let server = SmtpServer::start_on(dir.path(), port, Opts::default());
    let sent = wait_for(Duration::from_secs(20), || {
        let _ = drain(&store, &relay);
        (store.messages("sent").unwrap().len() == 4).then_some(())
    });
    assert!(sent.is_some(), "not all delivered");
    for _ in 0..2 {
        assert_eq!(drain(&store, &relay).sent, 0);
    }
    let got = server.message_ids();
    assert_eq!(got.len(), 4, "{got:?}");
    assert_eq!(got.into_iter().collect::<BTreeSet<_>>(), ids);
}

#[test]
fn a_550_is_dead_lettered_and_listed_by_seepd_alerts() {
    let dir = tempfile::tempdir().unwrap();
    let server = SmtpServer::start(
        dir.path(),
        Opts {
            reject: true,
            ..Opts::default()
        },
    );
    let cfg_dir = common::smtp::alert_config(dir.path(), 1883, server.port, &[]);
    let cfg = config(dir.path(), server.port);
    let relay = cfg.alerting.smtp.clone().unwrap();
    let mut store = Store::open(&dir.path().join("seepd.sqlite")).unwrap();
    raise_river(cfg, &mut store);
    let pass = drain(&store, &relay);
    assert_eq!(pass.dead, 4, "{pass:?}");
    // Dead letters are never retried.
    store
        .conn()
        .execute("UPDATE outbox SET next_attempt_ms = 0", [])
        .unwrap();
    assert_eq!(drain(&store, &relay), seepd::notify::Pass::default());
    drop(store);
    let out = std::process::Command::new(seepd_bin())
        .args(["alerts", "--config"])
        .arg(&cfg_dir)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(text.contains("Undeliverable (4):"), "{text}");
    assert!(
        text.contains("550") && text.contains("reject mode"),
        "{text}"
    );
    assert!(text.contains("Active alerts (1):"), "{text}");
}
