//! Sign-in, sessions and CSRF on the web pages, with the real binary, Mosquitto and a user
//! added by `seepd user add`: no page without a session; a wrong password is refused; the
//! session cookie is HttpOnly and SameSite=Strict; an acknowledgement from the alert page needs
//! the session's CSRF token and the same origin; the password hash and the web key never
//! appear in a page or the log; anonymous read access shows pages but allows no change.

mod common;
#[path = "common/web.rs"]
mod web;

use std::time::Duration;

use common::*;

const TOPIC: &str = "demo/AB-LOG1/json";
const PASSWORD: &str = "levee-night-shift-7";

/// Raise the river-stage alert (watch level) with two readings; returns once it is stored.
fn raise(rig: &Rig) {
    let p = Publisher::connect(rig.broker.port, "pub-web-auth");
    let t0 = chrono::Utc::now().timestamp() - 120;
    p.send(TOPIC, river_json(t0, 5.5));
    p.send(TOPIC, river_json(t0 + 60, 5.5));
    wait_for(Duration::from_secs(20), || {
        (count(rig.path(), "alerts", "1") == 1).then_some(())
    })
    .expect("alert raised");
}

#[test]
fn pages_need_a_session_and_changes_need_its_csrf_token() {
    let port = free_port();
    let rig = web::page_rig(port, "");
    web::add_user(seepd_bin(), &rig.cfg, "alice", PASSWORD, "responder");
    raise(&rig);

    for path in ["/", "/alerts/1", "/instruments/AB-RIVER", "/quarantine"] {
        let a = web::get(port, path, None);
        assert_eq!(a.status, 303, "{path} without a session");
        assert!(a
            .header("location")
            .unwrap_or("")
            .starts_with("/login?next="));
    }
    let a = web::post_form(
        port,
        "/login",
        &[],
        &[
            ("user", "alice"),
            ("password", "wrong password"),
            ("next", "/"),
        ],
    );
    assert_eq!(a.status, 401);
    assert!(web::session_cookie(&a).is_none());

    let a = web::post_form(
        port,
        "/login",
        &[],
        &[
            ("user", "alice"),
            ("password", PASSWORD),
            ("next", "/alerts/1"),
        ],
    );
    assert_eq!(a.status, 303, "{}", a.body);
    assert_eq!(a.header("location"), Some("/alerts/1"));
    let set = a.header("set-cookie").unwrap().to_string();
    assert!(
        set.contains("HttpOnly") && set.contains("SameSite=Strict"),
        "{set}"
    );
    let cookie = web::session_cookie(&a).unwrap();

    let overview = web::get(port, "/", Some(&cookie));
    assert_eq!(overview.status, 200);
    assert!(
        overview.body.contains("Ash Bend levee"),
        "{}",
        overview.body
    );
    assert!(
        overview.body.contains("WATCH"),
        "the open alert is on the overview"
    );
    assert!(overview.body.contains("not acknowledged"));
    let page = web::get(port, "/alerts/1", Some(&cookie));
    assert_eq!(page.status, 200);
    assert!(
        page.body.contains("Daily levee patrol"),
        "response text shown"
    );
    assert!(page.body.contains("<svg"), "the plot");
    let csrf = web::csrf(&page.body).expect("a CSRF field on the alert page");
    let inst = web::get(port, "/instruments/AB-RIVER?days=1", Some(&cookie));
    assert_eq!(inst.status, 200);
    assert!(inst.body.contains("Raw value"), "{}", inst.body);
    assert_eq!(web::get(port, "/quarantine", Some(&cookie)).status, 200);

    // No token, a wrong token, another site: refused, nothing written.
    let origin = format!("http://127.0.0.1:{port}");
    for (headers, token) in [
        (vec![("Cookie", cookie.as_str())], "".to_string()),
        (vec![("Cookie", cookie.as_str())], "0".repeat(64)),
        (
            vec![
                ("Cookie", cookie.as_str()),
                ("Origin", "https://elsewhere.example"),
            ],
            csrf.clone(),
        ),
    ] {
        let a = web::post_form(
            port,
            "/alerts/1/ack",
            &headers,
            &[("csrf", &token), ("note", "x")],
        );
        assert_eq!(a.status, 403, "{}", a.body);
    }
    // Without a session, even with a token: to the sign-in page.
    let a = web::post_form(
        port,
        "/alerts/1/ack",
        &[],
        &[("csrf", &csrf), ("note", "x")],
    );
    assert_eq!(a.status, 303);
    assert_eq!(count(rig.path(), "acks", "1"), 0);

    // The session, its token, same origin: acknowledged as alice.
    let a = web::post_form(
        port,
        "/alerts/1/ack",
        &[("Cookie", &cookie), ("Origin", &origin)],
        &[("csrf", &csrf), ("note", "gauge checked by eye")],
    );
    assert_eq!(a.status, 303, "{}", a.body);
    assert_eq!(
        count(
            rig.path(),
            "acks",
            "who = 'alice' AND note = 'gauge checked by eye'"
        ),
        1
    );
    let page = web::get(port, "/alerts/1", Some(&cookie));
    assert!(page.body.contains("acknowledged by alice"), "{}", page.body);

    // Silence from the page goes through the same check and `seepd silence`'s code.
    let a = web::post_form(
        port,
        "/alerts/1/silence",
        &[("Cookie", &cookie)],
        &[
            ("csrf", &csrf),
            ("until", "+4h"),
            ("reason", "gauge maintenance"),
        ],
    );
    assert_eq!(a.status, 303, "{}", a.body);
    assert_eq!(
        count(
            rig.path(),
            "silences",
            "who = 'alice' AND rule = 'ash-bend-river-stage'"
        ),
        1
    );

    // Signing out ends the session.
    let a = web::post_form(port, "/logout", &[("Cookie", &cookie)], &[("csrf", &csrf)]);
    assert_eq!(a.status, 303);
    assert_eq!(web::get(port, "/", Some(&cookie)).status, 303);

    // Neither the hash nor the key shows anywhere.
    let hash: String = db(rig.path())
        .query_row("SELECT hash FROM web_users WHERE name = 'alice'", [], |r| {
            r.get(0)
        })
        .unwrap();
    assert!(hash.starts_with("$argon2id$"));
    let key = std::fs::read_to_string(rig.path().join("seepd.sqlite.web-key")).unwrap();
    let log = rig.log_text();
    for secret in [hash.as_str(), key.trim(), PASSWORD] {
        assert!(!log.contains(secret));
        assert!(!overview.body.contains(secret));
        assert!(!page.body.contains(secret));
    }
}

#[test]
fn anonymous_read_access_shows_pages_but_changes_nothing() {
    let port = free_port();
    let rig = web::page_rig(port, "allow_anonymous = true");
    raise(&rig);
    let page = web::get(port, "/alerts/1", None);
    assert_eq!(page.status, 200);
    assert!(
        web::csrf(&page.body).is_none(),
        "no forms without a session"
    );
    assert!(page.body.contains("Sign in"));
    let a = web::post_form(port, "/alerts/1/ack", &[], &[("csrf", ""), ("note", "x")]);
    assert_eq!(a.status, 303);
    assert_eq!(count(rig.path(), "acks", "1"), 0);
}
