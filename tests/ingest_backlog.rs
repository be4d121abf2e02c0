//! Catch-up after an outage: a backlog of 200,000 QoS 1 readings queued at the broker while
//! seepd was away, and a burst of the same size while it is connected, drain to exactly N
//! stored — with Mosquitto's default in-flight window (20) and with a larger one (100) — and
//! the link survives it (no keep-alive timeout, no reconnect), and SIGTERM is honoured mid-drain.

mod common;

use std::time::Duration;

use common::*;

const N: usize = 200_000;

/// `n` JSON readings for AB-PZ-2A (a 4–20 mA transducer), a minute apart, ending now.
fn readings(n: usize) -> impl Iterator<Item = String> {
    let t_end = chrono::Utc::now().timestamp() - 60;
    let t0 = t_end - n as i64 * 60;
    (0..n).map(move |i| {
        let ma = 8.0 + (i % 1000) as f64 / 1000.0;
        format!(
            r#"{{"time": {}, "channel": "3", "value": {ma:.3}}}"#,
            t0 + i as i64 * 60
        )
    })
}

/// Publish `n` readings at QoS 1 and wait until the broker has acknowledged every one.
/// (`mosquitto_pub -l` is not used: at end of input it disconnects with messages unsent.)
fn publish(port: u16, n: usize) {
    let started = std::time::Instant::now();
    let p = Publisher::connect(port, &format!("backlog-pub-{port}"));
    for r in readings(n) {
        p.send("demo/AB-LOG1/json", r);
    }
    p.wait_acked(n, Duration::from_secs(300));
    eprintln!("published {n} in {:?}", started.elapsed());
}

fn stored(dir: &std::path::Path) -> i64 {
    count(dir, "readings", "instrument = 'AB-PZ-2A'")
}

/// Wait until `n` readings are stored, failing with the log if progress stops for 60 s.
fn drain(dir: &std::path::Path, n: i64, log: &std::path::Path, broker: &Broker) {
    let started = std::time::Instant::now();
    let mut last = -1;
    loop {
        let got = wait_for(Duration::from_secs(60), || {
            let c = stored(dir);
            (c != last).then_some(c)
        });
        match got {
            Some(c) if c >= n => {
                assert_eq!(c, n, "stored more than published");
                eprintln!("drained {n} in {:?}", started.elapsed());
                return;
            }
            Some(c) => last = c,
            None => panic!(
                "ingestion stalled at {last} of {n}\nseepd log:\n{}\nbroker log tail:\n{}",
                std::fs::read_to_string(log).unwrap_or_default(),
                tail(&broker.log(), 20)
            ),
        }
    }
}

fn tail(s: &str, n: usize) -> String {
    let v: Vec<&str> = s.lines().collect();
    v[v.len().saturating_sub(n)..].join("\n")
}

fn backlog_after_outage(inflight: u32) {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start_with_inflight(dir.path(), inflight);
    let cfg = example_config(dir.path(), broker.port);
    let log = dir.path().join("seepd.log");
    // A first run creates the persistent session and its subscriptions, then seepd goes away.
    let mut d = Daemon::start(&cfg, &log);
    d.wait_connected(1);
    let (code, _) = d.terminate();
    assert_eq!(code, Some(0));
    publish(broker.port, N);
    let d = Daemon::start(&cfg, &log);
    drain(dir.path(), N as i64, &log, &broker);
    let text = std::fs::read_to_string(&d.log).unwrap();
    // One connection per run: the backlog never cost the link.
    assert_eq!(text.matches("Connected to broker").count(), 2, "{text}");
    assert!(!text.contains("Disconnected from broker;"), "{text}");
    assert!(
        !broker.log().contains("exceeded timeout"),
        "{}",
        broker.log()
    );
    assert_eq!(count(dir.path(), "quarantine", "1"), 0);
}

#[test]
fn backlog_of_200000_drains_exactly_with_the_default_inflight_window() {
    backlog_after_outage(20);
}

#[test]
fn backlog_of_200000_drains_exactly_with_a_larger_inflight_window() {
    backlog_after_outage(100);
}

#[test]
fn burst_of_200000_while_connected_drains_and_sigterm_is_honoured_mid_drain() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start_with_inflight(dir.path(), 100);
    let cfg = example_config(dir.path(), broker.port);
    let log = dir.path().join("seepd.log");
    let mut d = Daemon::start(&cfg, &log);
    d.wait_connected(1);
    publish(broker.port, N);
    // Stop in the middle of the drain: the deadline is 10 s in the example config.
    wait_for(Duration::from_secs(120), || {
        (stored(dir.path()) > 1000).then_some(())
    })
    .expect("nothing stored");
    let (code, took) = d.terminate();
    assert_eq!(
        code,
        Some(0),
        "log:\n{}",
        std::fs::read_to_string(&log).unwrap()
    );
    assert!(took < Duration::from_secs(10), "took {took:?}");
    // A restart finishes the drain: nothing lost, nothing twice.
    let _d = Daemon::start(&cfg, &log);
    drain(dir.path(), N as i64, &log, &broker);
}
