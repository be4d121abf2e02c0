//! Acknowledgement from the email, end to end with the real binary, a real Mosquitto and a
//! real aiosmtpd: the link in the alert email opens a confirmation page and a GET changes
//! nothing; only the POST from that page acknowledges, recording the name and note; a forged,
//! expired, other-level or cross-site request is refused and changes nothing.

mod common;
#[path = "common/web.rs"]
mod web;

use std::time::Duration;

use common::smtp::SmtpServer;
use common::*;

const TOPIC: &str = "demo/AB-LOG1/json";

/// Publish river readings (depth above the 90.0 m datum) at the next free seconds after
/// `t_s` (a minute back at the start), so that no reading repeats an earlier time.
fn river(p: &Publisher, t_s: &mut i64, depths: &[f64]) {
    for d in depths {
        *t_s += 1;
        p.send(TOPIC, river_json(*t_s, *d));
    }
}

/// (acks rows, whether alert `id` is marked acknowledged).
fn acked(dir: &std::path::Path, id: i64) -> (i64, bool) {
    (
        count(dir, "acks", &format!("alert = {id}")),
        count(
            dir,
            "alerts",
            &format!("id = {id} AND acked_ms IS NOT NULL"),
        ) == 1,
    )
}

/// The newest message whose subject mentions `level`, and its acknowledgement link.
fn link_for(smtp: &SmtpServer, level: &str, n: usize) -> String {
    let msgs = smtp.wait_messages(n, Duration::from_secs(30));
    let m = msgs
        .iter()
        .find(|m| {
            common::smtp::header(m, "Subject")
                .unwrap_or_default()
                .contains(level)
        })
        .unwrap_or_else(|| panic!("no {level} message in {msgs:?}"));
    let links = web::ack_paths(m);
    assert_eq!(links.len(), 1, "one link per alert in {m}");
    links[0].clone()
}

#[test]
fn the_email_link_acknowledges_only_by_post_and_only_at_its_level() {
    let r = web::mail_rig();
    let (dir, broker, smtp, log, port) = (&r.dir, &r.broker, &r.smtp, &r.log, r.port);
    let p = Publisher::connect(broker.port, "pub-web-ack");
    let mut t_s = chrono::Utc::now().timestamp() - 60;

    // Watch level (head 95.5 m > 95.0 m), twice for persistence: alert 1 and its email.
    river(&p, &mut t_s, &[5.5, 5.5]);
    let watch = link_for(smtp, "WATCH", 1);

    // A GET (as a mail scanner would) shows the confirmation page and changes nothing.
    for _ in 0..3 {
        let a = web::get(port, &watch, None);
        assert_eq!(a.status, 200, "{}", a.body);
        assert!(a.body.contains("Acknowledge alert 1"), "{}", a.body);
        assert!(a.body.contains("<form method=\"post\""));
    }
    assert_eq!(acked(dir.path(), 1), (0, false));

    // A forged token (signature changed) is refused, on GET and POST.
    let mut forged = watch.clone();
    let last = forged.pop().unwrap();
    forged.push(if last == '0' { '1' } else { '0' });
    assert_eq!(web::get(port, &forged, None).status, 403);
    let a = web::post_form(port, &forged, &[], &[("who", "mallory"), ("note", "x")]);
    assert_eq!(a.status, 403);
    assert!(a.body.contains("not valid"), "{}", a.body);

    // A genuine token past its expiry (signed here with the service's own key file).
    let key_hex = std::fs::read_to_string(dir.path().join("seepd.sqlite.web-key")).unwrap();
    let key_bytes: Vec<u8> = (0..64)
        .step_by(2)
        .map(|i| u8::from_str_radix(&key_hex.trim()[i..i + 2], 16).unwrap())
        .collect();
    let key = seepd::ack_token::Key::from_bytes(&key_bytes);
    let expired = format!(
        "/ack/{}",
        key.sign(1, "watch", chrono::Utc::now().timestamp() - 60)
    );
    let a = web::post_form(port, &expired, &[], &[("who", "late"), ("note", "")]);
    assert_eq!(a.status, 410, "{}", a.body);
    assert!(a.body.contains("expired"));
    // A cross-site POST with the genuine link is refused.
    let a = web::post_form(
        port,
        &watch,
        &[("Origin", "https://elsewhere.example")],
        &[("who", "x"), ("note", "")],
    );
    assert_eq!(a.status, 403);
    assert_eq!(acked(dir.path(), 1), (0, false));

    // Concern level (97.0 m): the alert escalates; the watch link no longer acknowledges.
    river(&p, &mut t_s, &[7.0, 7.0]);
    let concern = link_for(smtp, "CONCERN", 2);
    assert_ne!(concern, watch);
    let a = web::post_form(port, &watch, &[], &[("who", "old link"), ("note", "")]);
    assert_eq!(a.status, 409, "{}", a.body);
    assert!(a.body.contains("changed level"), "{}", a.body);
    assert_eq!(acked(dir.path(), 1), (0, false));

    // The current link's POST acknowledges, with the name and note entered.
    let a = web::post_form(
        port,
        &concern,
        &[("Origin", &format!("http://127.0.0.1:{port}"))],
        &[
            ("who", "duty.engineer@example.invalid"),
            ("note", "patrol sent to reach 2"),
        ],
    );
    assert_eq!(a.status, 200, "{}", a.body);
    assert!(a.body.contains("acknowledged"), "{}", a.body);
    assert_eq!(acked(dir.path(), 1), (1, true));
    let conn = db(dir.path());
    let (who, note): (String, String) = conn
        .query_row("SELECT who, note FROM acks WHERE alert = 1", [], |r| {
            Ok((r.get(0)?, r.get(1)?))
        })
        .unwrap();
    assert_eq!(who, "duty.engineer@example.invalid");
    assert_eq!(note, "patrol sent to reach 2");
    // The service applies it like `seepd ack`: the alert's history says so.
    wait_for(Duration::from_secs(10), || {
        (count(
            dir.path(),
            "alert_events",
            "alert = 1 AND kind = 'acknowledged'",
        ) == 1)
            .then_some(())
    })
    .expect("the service applied the acknowledgement");
    // Opening the link again says who acknowledged; no second acknowledgement.
    let a = web::get(port, &concern, None);
    assert!(a.body.contains("Already acknowledged by"), "{}", a.body);
    assert_eq!(acked(dir.path(), 1).0, 1);

    // The key never reaches the log.
    let text = std::fs::read_to_string(log).unwrap();
    assert!(!text.contains(key_hex.trim()));
}
