//! The broker link under stress, with a real Mosquitto and the real binary: a 10 MB message is
//! quarantined and acknowledged instead of looped on; SIGTERM while the broker is unreachable
//! exits within the deadline; a writer that cannot finish makes the exit code non-zero; and
//! `seepd status` shows the outage and the reconnection.

mod common;

use std::process::Command;
use std::time::Duration;

use common::*;

fn base_time() -> i64 {
    chrono::Utc::now().timestamp() - 2 * 86_400
}

fn status(cfg: &std::path::Path) -> String {
    let out = Command::new(seepd_bin())
        .args(["status", "--config"])
        .arg(cfg)
        .output()
        .unwrap();
    assert!(out.status.success(), "{out:?}");
    String::from_utf8(out.stdout).unwrap()
}

#[test]
fn a_10_mb_message_is_quarantined_and_the_stream_goes_on() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let cfg = example_config(dir.path(), broker.port);
    let log = dir.path().join("seepd.log");
    let d = Daemon::start(&cfg, &log);
    d.wait_connected(1);
    let t0 = base_time();
    let p = Publisher::connect(broker.port, "pub-big");
    p.send("demo/AB-LOG1/json", river_json(t0, 3.0));
    p.wait_acked(1, Duration::from_secs(30));
    // 10 MB of JSON-looking text, far above max_payload_bytes (64 KiB) and the 1 MiB
    // max_packet_bytes; sent by mosquitto_pub (the test publisher's own limit is 1 MiB).
    let big = dir.path().join("big.json");
    let mut text = String::from(r#"{"time": 1, "channel": "river", "value": 1.0, "pad": ""#);
    text.push_str(&"x".repeat(10 * 1024 * 1024));
    text.push_str("\"}");
    std::fs::write(&big, &text).unwrap();
    let st = Command::new("mosquitto_pub")
        .args(["-h", "127.0.0.1", "-p", &broker.port.to_string()])
        .args(["-q", "1", "-t", "demo/AB-LOG1/json", "-f"])
        .arg(&big)
        .status()
        .unwrap();
    assert!(st.success());
    for i in 1..=10 {
        p.send("demo/AB-LOG1/json", river_json(t0 + i * 60, 3.0));
    }
    p.wait_acked(11, Duration::from_secs(30));
    let stored = wait_for(Duration::from_secs(30), || {
        let c = count(dir.path(), "readings", "instrument = 'AB-RIVER'");
        (c >= 11).then_some(c)
    });
    assert_eq!(
        stored,
        Some(11),
        "log:\n{}",
        std::fs::read_to_string(&log).unwrap()
    );
    let conn = db(dir.path());
    let (topic, detail, kept): (String, String, i64) = conn
        .query_row(
            "SELECT topic, detail, length(payload) FROM quarantine WHERE reason = 'oversized'",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)),
        )
        .unwrap();
    assert_eq!(topic, "demo/AB-LOG1/json");
    assert!(detail.contains(&text.len().to_string()), "{detail}");
    assert!(kept < 100_000, "payload kept whole: {kept} bytes");
    // Taken once and acknowledged: no reconnection loop, no redelivery.
    std::thread::sleep(Duration::from_secs(2));
    let text = std::fs::read_to_string(&log).unwrap();
    assert_eq!(text.matches("Connected to broker").count(), 1, "{text}");
    assert_eq!(count(dir.path(), "quarantine", "1"), 1);
}

#[test]
fn sigterm_while_the_broker_is_unreachable_exits_within_the_deadline() {
    let dir = tempfile::tempdir().unwrap();
    let mut broker = Broker::start(dir.path());
    let cfg = example_config(dir.path(), broker.port);
    // The shipped backoff cap (30 s), longer than the shutdown deadline (10 s).
    let svc = cfg.join("seepd.toml");
    let text = std::fs::read_to_string(&svc)
        .unwrap()
        .replace("reconnect_max_ms = 1000", "reconnect_max_ms = 30000")
        .replace("reconnect_min_ms = 100", "reconnect_min_ms = 20000");
    std::fs::write(&svc, text).unwrap();
    let log = dir.path().join("seepd.log");
    let mut d = Daemon::start(&cfg, &log);
    d.wait_connected(1);
    broker.stop();
    wait_for(Duration::from_secs(20), || {
        std::fs::read_to_string(&log)
            .unwrap()
            .contains("Disconnected from broker;")
            .then_some(())
    })
    .expect("disconnect not noticed");
    // Now in a 20 s backoff sleep: SIGTERM must still be honoured at once.
    std::thread::sleep(Duration::from_millis(500));
    let (code, took) = d.terminate();
    assert_eq!(code, Some(0), "{}", std::fs::read_to_string(&log).unwrap());
    assert!(took < Duration::from_secs(3), "took {took:?}");
}

#[test]
fn a_writer_that_cannot_finish_makes_the_exit_code_non_zero() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let cfg = example_config(dir.path(), broker.port);
    let svc = cfg.join("seepd.toml");
    let text = std::fs::read_to_string(&svc)
        .unwrap()
        .replace("shutdown_deadline_s = 10", "shutdown_deadline_s = 2");
    std::fs::write(&svc, text).unwrap();
    let log = dir.path().join("seepd.log");
    // The crash-test pause point stops the writer at its first batch, for good.
    let mut d = Daemon::start_env(&cfg, &log, &[("SEEPD_TEST_PAUSE_AT", "writer_batch")]);
    let p = Publisher::connect(broker.port, "pub-stuck");
    let mut k = 0;
    wait_for(Duration::from_secs(20), || {
        let text = std::fs::read_to_string(&log).unwrap();
        if !text.contains("Connected to broker") {
            return None;
        }
        k += 1;
        p.send("demo/AB-LOG1/json", river_json(base_time() + k * 60, 3.0));
        std::thread::sleep(Duration::from_millis(300));
        std::fs::read_to_string(&log)
            .unwrap()
            .contains("Test pause at writer_batch")
            .then_some(())
    })
    .unwrap_or_else(|| {
        panic!(
            "pause point not reached; log:\n{}",
            std::fs::read_to_string(&log).unwrap()
        )
    });
    let (code, took) = d.terminate();
    let text = std::fs::read_to_string(&log).unwrap();
    assert_ne!(code, Some(0), "{text}");
    assert!(text.contains("Shutdown deadline passed"), "{text}");
    assert!(took < Duration::from_secs(5), "took {took:?}");
}

#[test]
fn status_shows_the_outage_and_the_reconnection() {
    let dir = tempfile::tempdir().unwrap();
    let mut broker = Broker::start(dir.path());
    let cfg = example_config(dir.path(), broker.port);
    let log = dir.path().join("seepd.log");
    let d = Daemon::start(&cfg, &log);
    // The database exists once the daemon has connected; asking before that is a race.
    d.wait_connected(1);
    let up = wait_for(Duration::from_secs(20), || {
        let s = status(&cfg);
        s.contains("Broker: connected").then_some(s)
    });
    assert!(up.is_some(), "{}", status(&cfg));
    broker.stop();
    let down = wait_for(Duration::from_secs(20), || {
        let s = status(&cfg);
        s.contains("Broker: NOT CONNECTED").then_some(s)
    })
    .unwrap_or_else(|| status(&cfg));
    assert!(down.contains("last error:"), "{down}");
    assert!(down.contains("failed attempts"), "{down}");
    broker.restart();
    let back = wait_for(Duration::from_secs(20), || {
        let s = status(&cfg);
        s.contains("Broker: connected").then_some(s)
    })
    .unwrap_or_else(|| status(&cfg));
    assert!(back.contains("reconnections since start: 1"), "{back}");
    // One log line per change of state, not one per attempt.
    let text = std::fs::read_to_string(&log).unwrap();
    assert_eq!(
        text.matches("Disconnected from broker;").count(),
        1,
        "{text}"
    );
    assert!(text.matches("Cannot reach broker").count() <= 2, "{text}");
}
