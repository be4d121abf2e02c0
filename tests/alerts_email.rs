//! Alert email against a real aiosmtpd started per test: a rendered alert read back from the
//! Maildir (plain relay), STARTTLS with a self-signed CA:FALSE certificate and AUTH, implicit
//! TLS, a relay that is down and then up (each message delivered exactly once), and a 550
//! dead-lettered and listed by `seepd alerts`.

mod common;

use std::collections::BTreeSet;
use std::path::Path;
use std::time::Duration;

use common::smtp::{header, Opts, SmtpServer, PASSWORD, USER};
use common::*;
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
    river_alerts(cfg, store, &[96.0, 97.0, 97.5, 97.9, 98.2])
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
    // One conversation per alert on the engineer's phone: every message about alert 1 (raise,
    // level changes, escalation to the second list) refers to the alert's thread, and each
    // message keeps its own Message-ID.
    let thread = "<seepd.alert-thread-1@example.invalid>";
    for m in &msgs {
        assert_eq!(header(m, "In-Reply-To").as_deref(), Some(thread), "{m}");
        assert_eq!(header(m, "References").as_deref(), Some(thread), "{m}");
    }
    let mut ids_seen: Vec<_> = msgs
        .iter()
        .filter_map(|m| header(m, "Message-ID"))
        .collect();
    ids_seen.sort();
    ids_seen.dedup();
    assert_eq!(ids_seen.len(), 4, "four distinct Message-IDs: {ids_seen:?}");
    let subject = header(last, "Subject").unwrap_or_default();
    // Subject: level, site, object, quantity, value.
    for part in ["ACT", "ash-bend", "AB-RIVER", "water level", "98.200 m"] {
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
        "bound: above 97.800 m (act level)",
        "clears below 97.600 m",
        "m per day over the last 5 values",
        "98.200 m",
        "96.000 m",
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

/// The example configuration with a second address on the on-call list.
fn two_oncall(dir: &Path, smtp_port: u16) -> (std::path::PathBuf, Config) {
    let cfg_dir = common::smtp::alert_config(
        dir,
        1883,
        smtp_port,
        &[(
            "emails = [\"levee-oncall@example.invalid\"]",
            "emails = [\"levee-oncall@example.invalid\", \"gone@example.invalid\"]",
        )],
    );
    let cfg = seepd::config::load_dir(&cfg_dir).unwrap();
    (cfg_dir, cfg)
}

/// Every (Message-ID, recipient) the outbox asks for, leaving out `except`.
fn wanted(store: &Store, except: &str) -> Vec<(String, String)> {
    let mut v: Vec<(String, String)> = ["pending", "sent", "dead"]
        .iter()
        .flat_map(|s| store.messages(s).unwrap())
        .flat_map(|m| {
            m.recipients
                .iter()
                .filter(|r| *r != except)
                .map(|r| (m.message_id.clone(), r.clone()))
                .collect::<Vec<_>>()
        })
        .collect();
    v.sort();
    v
}

#[test]
fn one_refused_recipient_does_not_silence_the_others() {
    let dir = tempfile::tempdir().unwrap();
    let gone = "gone@example.invalid";
    let server = SmtpServer::start(
        dir.path(),
        Opts {
            refuse: vec![gone.into()],
            ..Opts::default()
        },
    );
    let (cfg_dir, cfg) = two_oncall(dir.path(), server.port);
    let relay = cfg.alerting.smtp.clone().unwrap();
    let mut store = Store::open(&dir.path().join("seepd.sqlite")).unwrap();
    let total = raise_river(cfg, &mut store).len();
    let to_gone = store
        .messages("pending")
        .unwrap()
        .iter()
        .filter(|m| m.recipients.iter().any(|r| r == gone))
        .count();
    assert!(to_gone >= 2, "the on-call list gets several messages");
    let pass = drain(&store, &relay);
    assert_eq!(
        (pass.sent, pass.refused, pass.dead),
        (total, to_gone, 0),
        "{pass:?}"
    );
    // Every other recipient got every message once; the refused one got nothing.
    let want = wanted(&store, gone);
    assert_eq!(server.deliveries(), want);
    assert_eq!(store.messages("sent").unwrap().len(), total);
    // Nothing is sent again.
    store
        .conn()
        .execute("UPDATE outbox SET next_attempt_ms = 0", [])
        .unwrap();
    assert_eq!(drain(&store, &relay), seepd::notify::Pass::default());
    assert_eq!(server.deliveries(), want);
    drop(store);
    let (code, text, err) = seepd_output(&["alerts", "--config", &cfg_dir.display().to_string()]);
    assert_eq!(code, 0, "{err}");
    assert!(
        text.contains(&format!("Undeliverable ({to_gone}):")),
        "{text}"
    );
    assert!(
        text.contains(&format!(
            "not delivered to {gone}; server reply: RCPT TO: permanent error (550)"
        )),
        "{text}"
    );
    assert!(
        text.contains("delivered to levee-oncall@example.invalid"),
        "{text}"
    );
}

#[test]
fn a_deferred_recipient_is_retried_alone_and_served_once() {
    let dir = tempfile::tempdir().unwrap();
    let gone = "gone@example.invalid";
    let port = free_port();
    let mut server = SmtpServer::start_on(
        dir.path(),
        port,
        Opts {
            defer: vec![gone.into()],
            ..Opts::default()
        },
    );
    let (_, cfg) = two_oncall(dir.path(), port);
    let relay = cfg.alerting.smtp.clone().unwrap();
    let mut store = Store::open(&dir.path().join("seepd.sqlite")).unwrap();
    let total = raise_river(cfg, &mut store).len();
    let pass = drain(&store, &relay);
    assert_eq!(
        (pass.sent, pass.dead, pass.refused),
        (total, 0, 0),
        "{pass:?}"
    );
    assert!(pass.retried >= 2, "{pass:?}");
    assert_eq!(server.deliveries(), wanted(&store, gone));
    // The relay takes the deferred address again: only it gets the messages still owed.
    server.stop();
    let server = SmtpServer::start_on(dir.path(), port, Opts::default());
    store
        .conn()
        .execute("UPDATE outbox SET next_attempt_ms = 0", [])
        .unwrap();
    let pass = drain(&store, &relay);
    assert_eq!(pass.retried, 0, "{pass:?}");
    assert_eq!(store.messages("pending").unwrap().len(), 0);
    assert_eq!(server.deliveries(), wanted(&store, ""));
}

/// One connection serves a burst (aiosmtpd's `X-Peer` names the client's port), and a kept
/// connection the relay dropped meanwhile is replaced without losing or doubling a message.
#[test]
fn a_kept_connection_serves_a_burst_and_survives_a_relay_restart() {
    let dir = tempfile::tempdir().unwrap();
    let port = free_port();
    let mut server = SmtpServer::start_on(dir.path(), port, Opts::default());
    let cfg = config(dir.path(), port);
    let relay = cfg.alerting.smtp.clone().unwrap();
    let mut store = Store::open(&dir.path().join("seepd.sqlite")).unwrap();
    let ids = raise_river(cfg, &mut store);
    let mailer = Mailer::new(&relay).unwrap();
    assert_eq!(
        deliver_due(&store, &mailer, &relay).unwrap().sent,
        ids.len()
    );
    let peers: BTreeSet<String> = server
        .messages()
        .iter()
        .filter_map(|m| header(m, "X-Peer"))
        .collect();
    assert_eq!(peers.len(), 1, "one connection for the burst: {peers:?}");
    // The relay restarts under the kept connection; one message is owed again.
    server.stop();
    let server = SmtpServer::start_on(dir.path(), port, Opts::default());
    let before = server.messages().len();
    store
        .conn()
        .execute_batch(
            "DELETE FROM outbox_recipients WHERE outbox = (SELECT min(id) FROM outbox);
             UPDATE outbox SET status = 'pending', next_attempt_ms = 0
              WHERE id = (SELECT min(id) FROM outbox);",
        )
        .unwrap();
    let pass = deliver_due(&store, &mailer, &relay).unwrap();
    assert_eq!((pass.sent, pass.retried), (1, 0), "{pass:?}");
    assert_eq!(server.messages().len(), before + 1);
}
