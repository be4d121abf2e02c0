//! The web pages in a real browser (headless Chromium over WebDriver) at phone width, with the
//! real binary, Mosquitto and aiosmtpd: a river rise through Mosquitto raises an alert; the
//! engineer signs in and sees it on the overview and its page (both fit a phone's width), then
//! follows the acknowledgement link from the email captured by the SMTP server, confirms, and
//! sees the alert acknowledged. Screenshots go to `target/tmp/web-screens/`, and to
//! `docs/screenshots/` (the README's) when `SEEPD_SCREENSHOTS_TO_DOCS=1`.

#[path = "common/browser.rs"]
mod browser;
mod common;
#[path = "common/web.rs"]
mod web;

use std::path::PathBuf;
use std::time::Duration;

use common::*;

const TOPIC: &str = "demo/AB-LOG1/json";
const PASSWORD: &str = "levee-night-shift-7";
/// A phone's CSS width and a tall window for whole-page pictures.
const PHONE: (u32, u32) = (390, 1500);

/// Save a screenshot of the page in `target/tmp/web-screens/`, and in `docs/screenshots/`
/// when `for_docs` and `SEEPD_SCREENSHOTS_TO_DOCS=1` (how the README's pictures are made).
fn save(b: &browser::Browser, name: &str, for_docs: bool) {
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    let mut dirs = vec![root.join("target/tmp/web-screens")];
    if for_docs && std::env::var("SEEPD_SCREENSHOTS_TO_DOCS").is_ok_and(|v| v == "1") {
        dirs.push(root.join("docs/screenshots"));
    }
    for d in dirs {
        std::fs::create_dir_all(&d).unwrap();
        b.screenshot(&d.join(name));
    }
}

#[test]
fn sign_in_see_the_alert_and_acknowledge_from_the_email_at_phone_width() {
    let r = web::mail_rig();
    let (dir, broker, smtp, cfg, port) = (&r.dir, &r.broker, &r.smtp, &r.cfg, r.port);
    web::add_user(seepd_bin(), cfg, "alice", PASSWORD, "responder");

    // Two days of hourly river stage rising from 2.0 m to 5.6 m depth (95.6 m: watch level).
    let p = Publisher::connect(broker.port, "pub-web-browser");
    let now = chrono::Utc::now().timestamp();
    let hours = 48;
    for h in 0..=hours {
        let depth = 2.0 + 3.6 * (h as f64 / hours as f64).powi(2);
        p.send(TOPIC, river_json(now - (hours - h) * 3600, depth));
    }
    let mail = smtp.wait_messages(1, Duration::from_secs(30));
    let link = web::ack_paths(&mail[0]).pop().expect("a link in the email");

    let b = browser::Browser::start(dir.path(), PHONE.0, PHONE.1);
    let base = format!("http://127.0.0.1:{port}");

    // Not signed in: the sign-in page.
    b.goto(&format!("{base}/"));
    assert!(b.url().contains("/login"), "{}", b.url());
    b.type_into("#user", "alice");
    b.type_into("#password", PASSWORD);
    b.click("button[type=submit]");
    let src = b.wait_text("<h1>Overview</h1>");
    assert_eq!(b.url(), format!("{base}/"));
    assert!(
        src.contains("WATCH") && src.contains("not acknowledged"),
        "{src}"
    );
    assert!(b.fits_width(), "the overview fits a phone's width");
    save(&b, "overview-phone.png", false);

    b.goto(&format!("{base}/alerts/1"));
    let src = b.source();
    assert!(
        src.contains("Daily levee patrol") && src.contains("<svg"),
        "{src}"
    );
    assert!(b.fits_width(), "the alert page fits a phone's width");
    save(&b, "alert-phone.png", false);

    // The link from the email: a confirmation page; nothing changes until the button.
    b.goto(&format!("{base}{link}"));
    assert!(b.source().contains("Acknowledge alert 1"));
    assert_eq!(count(dir.path(), "acks", "1"), 0);
    assert!(b.fits_width());
    save(&b, "ack-phone.png", true);
    b.type_into("#note", "patrol on its way");
    b.click("button[type=submit]");
    b.wait_text("Alert 1 acknowledged");
    assert_eq!(
        count(
            dir.path(),
            "acks",
            "who = 'alice' AND note = 'patrol on its way'"
        ),
        1
    );
    b.goto(&format!("{base}/"));
    let src = b.source();
    assert!(!src.contains("not acknowledged"), "{src}");
    assert!(src.contains("alice"));

    // A responder records a hand-read river level from the instrument page.
    b.goto(&format!("{base}/instruments/AB-RIVER?days=3"));
    b.type_into("#value", "5.7");
    b.click("button[type=submit]");
    let src = b.wait_text("Manual reading 1:");
    assert!(src.contains("Manual reading 1: stored."), "{src}");
    assert_eq!(
        count(
            dir.path(),
            "readings",
            "instrument = 'AB-RIVER' AND raw = 5.7 AND (flags & 128) != 0"
        ),
        1
    );
    assert!(b.fits_width(), "the instrument page fits a phone's width");
    save(&b, "manual-phone.png", true);
    // A vibrating-wire piezometer's form also takes the readout's thermistor temperature.
    b.goto(&format!("{base}/instruments/AB-PZ-1A?days=3"));
    b.type_into("#value", "2450.5");
    b.type_into("#temperature", "11.5");
    save(&b, "manual-vw-phone.png", false);
    b.click("button[type=submit]");
    let src = b.wait_text("Manual reading 2:");
    assert!(src.contains("Manual reading 2: stored."), "{src}");
    // The engineering value at the readout's resolution: 2450.5² / 1000 digits.
    b.goto(&format!("{base}/instruments/AB-PZ-1A?days=3"));
    let src = b.wait_text("Engineering value");
    assert!(src.contains("6004.95 digits"), "{src}");
    assert_eq!(
        count(
            dir.path(),
            "readings",
            "instrument = 'AB-PZ-1A' AND raw = 2450.5 AND temperature_c = 11.5"
        ),
        1
    );

    // A viewer signs in on the same browser: no form, and the page says why.
    web::add_user(seepd_bin(), cfg, "victor", PASSWORD, "viewer");
    b.click("header button");
    b.wait_text("Sign in");
    b.goto(&format!("{base}/login?next=/instruments/AB-RIVER"));
    b.type_into("#user", "victor");
    b.type_into("#password", PASSWORD);
    b.click("button[type=submit]");
    let src = b.wait_text("needs the responder role");
    assert!(!src.contains("id=\"value\""), "no manual form for a viewer");
    assert_eq!(
        count(dir.path(), "manual_inbox", "1"),
        2,
        "the two responder entries"
    );
    drop(b);
}

/// The demo's flood (the invented sites, `seepd::demo::sim`) published through Mosquitto up to
/// the levee's crest (hour 66) so that it ends now, then the overview, the first alert's page
/// and a toe piezometer's page at phone width: the pictures of the README.
#[test]
fn the_demo_flood_at_phone_width() {
    let port = free_port();
    let rig = web::page_rig(port, "allow_anonymous = true");
    let config = seepd::config::load_dir(&rig.cfg).unwrap_or_else(|p| panic!("{p}"));
    let hours: u32 = 66;
    let now = chrono::Utc::now();
    let start = now - chrono::Duration::hours(i64::from(hours));
    let sim = seepd::demo::sim::Sim::new(&config, start.timestamp_millis()).unwrap();
    let p = Publisher::connect(rig.broker.port, "pub-web-demo");
    let mut sent = 0;
    for hour in 0..=hours {
        let t = start + chrono::Duration::hours(i64::from(hour));
        for (topic, payload) in sim.messages(hour, t) {
            p.send(&topic, payload);
            sent += 1;
        }
    }
    p.wait_acked(sent, Duration::from_secs(120));
    // Every message processed: the message count stops growing at what was sent.
    let newest = || -> i64 {
        db(rig.path())
            .query_row("SELECT coalesce(max(t_ms), 0) FROM readings", [], |r| {
                r.get(0)
            })
            .unwrap()
    };
    let last_ms = (now - chrono::Duration::hours(1)).timestamp_millis();
    wait_for(Duration::from_secs(120), || {
        (newest() >= last_ms).then_some(())
    })
    .unwrap_or_else(|| panic!("newest reading {} < {last_ms}", newest()));
    let b = browser::Browser::start(rig.path(), PHONE.0, 1900);
    let base = format!("http://127.0.0.1:{port}");
    b.goto(&format!("{base}/"));
    let src = b.wait_text("Safety quantities");
    assert!(src.contains("Factor of safety"), "{src}");
    assert!(b.fits_width(), "the overview fits a phone's width");
    save(&b, "demo-overview-phone.png", true);
    let first: i64 = db(rig.path())
        .query_row("SELECT min(id) FROM alerts", [], |r| r.get(0))
        .expect("the flood raised an alert");
    b.goto(&format!("{base}/alerts/{first}"));
    b.wait_text("History");
    assert!(b.fits_width(), "the alert page fits a phone's width");
    save(&b, "demo-river-alert-phone.png", false);
    // An alert on a derived value (the toe's factor of safety): its own plot, then the heads it
    // was computed from beside the river.
    let toe: i64 = db(rig.path())
        .query_row(
            "SELECT min(id) FROM alerts WHERE object = 'AB-TOE-1'",
            [],
            |r| r.get(0),
        )
        .expect("the flood raised a toe alert");
    b.goto(&format!("{base}/alerts/{toe}"));
    let src = b.wait_text("Related heads");
    assert_eq!(src.matches("<svg").count(), 2, "two charts");
    let related = &src[src.find("Related heads").unwrap()..];
    assert!(
        related.contains("AB-PZ-1B") && related.contains("AB-RIVER water level"),
        "{related}"
    );
    assert!(b.fits_width(), "the alert page fits a phone's width");
    save(&b, "demo-alert-phone.png", true);
    b.goto(&format!("{base}/instruments/AB-PZ-1B?days=3"));
    b.wait_text("Raw value");
    assert!(b.fits_width(), "the instrument page fits a phone's width");
    save(&b, "demo-instrument-phone.png", false);
    b.goto(&format!("{base}/section/TH-S1"));
    let src = b.wait_text("Section TH-S1");
    assert!(
        src.contains("<svg") && !src.contains("No drawing yet"),
        "{src}"
    );
    assert!(b.fits_width(), "the section page fits a phone's width");
    save(&b, "demo-section-phone.png", true);
}
