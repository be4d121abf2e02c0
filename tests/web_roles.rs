//! Roles on the web pages, with the real binary, Mosquitto and users added by `seepd user
//! add --role`: a viewer signs in and reads every page but each change (acknowledge, silence,
//! manual reading) is refused server-side even with a valid session, CSRF token and origin,
//! and nothing is written; a responder records a manual reading from the instrument page,
//! stored flagged `manual` under their name; a role taken away counts at once, without
//! signing out.

mod common;
#[path = "common/web.rs"]
mod web;

use std::time::Duration;

use common::*;

const TOPIC: &str = "demo/AB-LOG1/json";
const PASSWORD: &str = "levee-night-shift-7";

#[test]
fn a_viewer_reads_but_every_change_is_refused_and_a_responder_records_a_reading() {
    let port = free_port();
    let rig = web::page_rig(port, "");
    web::add_user(seepd_bin(), &rig.cfg, "victor", PASSWORD, "viewer");
    web::add_user(seepd_bin(), &rig.cfg, "rhea", PASSWORD, "responder");
    let list = std::process::Command::new(seepd_bin())
        .args(["user", "list", "--config"])
        .arg(&rig.cfg)
        .output()
        .unwrap();
    let list = String::from_utf8_lossy(&list.stdout).to_string();
    assert!(
        list.contains("rhea\tresponder") && list.contains("victor\tviewer"),
        "{list}"
    );

    let p = Publisher::connect(rig.broker.port, "pub-web-roles");
    let t0 = chrono::Utc::now().timestamp() - 120;
    p.send(TOPIC, river_json(t0, 5.5));
    p.send(TOPIC, river_json(t0 + 60, 5.5));
    wait_for(Duration::from_secs(20), || {
        (count(rig.path(), "alerts", "1") == 1).then_some(())
    })
    .expect("alert raised");
    let origin = format!("http://127.0.0.1:{port}");

    // The viewer reads; no change form is offered, and each POST is refused.
    let viewer = web::sign_in(port, "victor", PASSWORD);
    let page = web::get(port, "/alerts/1", Some(&viewer));
    assert_eq!(page.status, 200);
    assert!(
        page.body.contains("need the responder role"),
        "{}",
        page.body
    );
    assert!(!page.body.contains("action=\"/alerts/1/ack\""));
    let inst = web::get(port, "/instruments/AB-RIVER", Some(&viewer));
    assert_eq!(inst.status, 200);
    assert!(
        !inst.body.contains("/manual\""),
        "no manual form for a viewer"
    );
    // The session's token is on every page (the sign-out form): use it as a forger would.
    let csrf = web::csrf(&page.body).expect("the session's CSRF token");
    let headers = [("Cookie", viewer.as_str()), ("Origin", origin.as_str())];
    for (path, fields) in [
        (
            "/alerts/1/ack",
            vec![("csrf", csrf.as_str()), ("note", "x")],
        ),
        (
            "/alerts/1/silence",
            vec![("csrf", csrf.as_str()), ("until", "+4h"), ("reason", "x")],
        ),
        (
            "/instruments/AB-RIVER/manual",
            vec![("csrf", csrf.as_str()), ("value", "5.6"), ("time", "")],
        ),
    ] {
        let a = web::post_form(port, path, &headers, &fields);
        assert_eq!(a.status, 403, "{path}: {}", a.body);
        assert!(a.body.contains("role viewer"), "{}", a.body);
    }
    assert_eq!(count(rig.path(), "acks", "1"), 0);
    assert_eq!(count(rig.path(), "silences", "1"), 0);
    assert_eq!(count(rig.path(), "manual_inbox", "1"), 0);
    assert!(rig.log_text().contains("Web change refused"));

    // The responder records a hand-read river level from the instrument page.
    let responder = web::sign_in(port, "rhea", PASSWORD);
    let inst = web::get(port, "/instruments/AB-RIVER", Some(&responder));
    assert!(inst
        .body
        .contains("action=\"/instruments/AB-RIVER/manual\""));
    let csrf = web::csrf(&inst.body).unwrap();
    let headers = [("Cookie", responder.as_str()), ("Origin", origin.as_str())];
    // A bad value is refused in words, nothing queued.
    let a = web::post_form(
        port,
        "/instruments/AB-RIVER/manual",
        &headers,
        &[("csrf", &csrf), ("value", "deep"), ("time", "")],
    );
    assert_eq!(a.status, 422, "{}", a.body);
    assert!(a.body.contains("not a finite number"));
    assert_eq!(count(rig.path(), "manual_inbox", "1"), 0);
    let a = web::post_form(
        port,
        "/instruments/AB-RIVER/manual",
        &headers,
        &[("csrf", &csrf), ("value", "5.62"), ("time", "")],
    );
    assert_eq!(a.status, 303, "{}", a.body);
    let to = a.header("location").unwrap().to_string();
    assert!(to.starts_with("/instruments/AB-RIVER?entry="), "{to}");
    let after = web::get(port, &to, Some(&responder));
    assert!(after.body.contains(": stored."), "{}", after.body);
    assert_eq!(
        count(
            rig.path(),
            "readings",
            "instrument = 'AB-RIVER' AND raw = 5.62 AND (flags & 128) != 0"
        ),
        1
    );
    assert_eq!(count(rig.path(), "manual_inbox", "by = 'rhea'"), 1);
    // A stage gauge's form asks no temperature; a vibrating-wire piezometer's does, and the
    // reading keeps it.
    assert!(!inst.body.contains("name=\"temperature\""));
    let vw = web::get(port, "/instruments/AB-PZ-1A", Some(&responder));
    assert!(vw.body.contains("name=\"temperature\""), "{}", vw.body);
    assert!(
        vw.body.contains("The frequency in Hz, as its logger"),
        "{}",
        vw.body
    );
    let a = web::post_form(
        port,
        "/instruments/AB-PZ-1A/manual",
        &headers,
        &[
            ("csrf", &csrf),
            ("value", "2450"),
            ("temperature", "11.5"),
            ("time", ""),
        ],
    );
    assert_eq!(a.status, 303, "{}", a.body);
    assert_eq!(
        count(
            rig.path(),
            "readings",
            "instrument = 'AB-PZ-1A' AND temperature_c = 11.5 AND (flags & 128) != 0"
        ),
        1
    );

    // Taking the role away counts at once, in the session already open.
    web::add_user(seepd_bin(), &rig.cfg, "rhea", PASSWORD, "viewer");
    let a = web::post_form(
        port,
        "/alerts/1/ack",
        &headers,
        &[("csrf", &csrf), ("note", "x")],
    );
    assert_eq!(a.status, 403, "{}", a.body);
    assert_eq!(count(rig.path(), "acks", "1"), 0);
}
