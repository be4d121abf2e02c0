//! The broker stopped and restarted under a running seepd, twice: once with its store kept
//! (seepd's session and the readings queued for it survive) and once with its store emptied
//! (no session: seepd must subscribe again). After each restart every reading published is
//! stored; the figures give the time from the broker listening again to seepd connected (and
//! subscribed), and `seepd status` tells of the outage.

use std::time::{Duration, Instant};

use crate::common::*;
use crate::support::*;

const PER_PHASE: i64 = 1_000;

/// Publish `PER_PHASE` readings from step `from` and wait until they are all stored.
fn publish_and_store(
    p: &Publisher,
    dir: &std::path::Path,
    t0: i64,
    from: i64,
    log: &std::path::Path,
) {
    for i in from..from + PER_PHASE {
        p.send(
            "demo/AB-LOG1/json",
            river_json(t0 + i, 3.0 + (i % 100) as f64 / 100.0),
        );
    }
    let want = from + PER_PHASE;
    let ok = wait_for(Duration::from_secs(60), || {
        (count(dir, "readings", "instrument = 'AB-RIVER'") >= want).then_some(())
    });
    assert!(
        ok.is_some(),
        "stored {} of {want}; log:\n{}",
        count(dir, "readings", "1"),
        std::fs::read_to_string(log).unwrap_or_default()
    );
}

/// Wait until seepd has connected `n` times; the time it took from `since`.
fn reconnected(log: &std::path::Path, n: usize, since: Instant) -> Duration {
    assert!(
        wait_log(log, "Connected to broker", n, Duration::from_secs(30)),
        "seepd did not reconnect; log:\n{}",
        std::fs::read_to_string(log).unwrap_or_default()
    );
    since.elapsed()
}

#[test]
fn broker_restarts_with_its_store_kept_and_emptied_lose_nothing_published_after() {
    let mut rig = Rig::start();
    let (dir, cfg, log) = (rig.path().to_path_buf(), rig.cfg.clone(), rig.log.clone());
    let broker = &mut rig.broker;
    let p = Publisher::connect(broker.port, "pub-broker-restart");
    let t0 = chrono::Utc::now().timestamp() - 7 * 86_400;
    publish_and_store(&p, &dir, t0, 0, &log);

    // 1. Store kept: a stop of a few seconds, then the same broker again. Meanwhile
    // `seepd status` tells of the outage.
    broker.stop();
    let down = Instant::now();
    let during = wait_for(Duration::from_secs(10), || {
        let (_, out, _) = seepd_output(&["status", "--config", &cfg.display().to_string()]);
        out.contains("Broker: NOT CONNECTED").then_some(out)
    })
    .expect("status shows the outage");
    std::thread::sleep(Duration::from_secs(2).saturating_sub(down.elapsed()));
    broker.restart();
    let up = Instant::now();
    let outage_kept = up - down;
    let reconnect_kept = reconnected(&log, 2, up);
    publish_and_store(&p, &dir, t0, PER_PHASE, &log);
    let text = std::fs::read_to_string(&log).unwrap();
    assert!(text.contains("session_present=true"), "{text}");

    // 2. Store emptied: seepd's session is gone; it must subscribe again before readings flow.
    broker.stop();
    let down = Instant::now();
    std::thread::sleep(Duration::from_secs(2));
    broker.restart_empty();
    let up = Instant::now();
    let outage_empty = up - down;
    let reconnect_empty = reconnected(&log, 3, up);
    assert!(
        wait_log(
            &log,
            "Subscribed (broker had no session)",
            2,
            Duration::from_secs(10)
        ),
        "no resubscription"
    );
    let resubscribed = up.elapsed();
    // The publisher's own session went with the store: it reconnects on its own.
    let p2 = Publisher::connect(broker.port, "pub-broker-restart-2");
    publish_and_store(&p2, &dir, t0, 2 * PER_PHASE, &log);
    assert_eq!(count(&dir, "readings", "1"), 3 * PER_PHASE);
    assert_eq!(count(&dir, "quarantine", "1"), 0);

    // The link state is recorded within a second of a change.
    let status = wait_for(Duration::from_secs(10), || {
        let (code, out, err) = seepd_output(&["status", "--config", &cfg.display().to_string()]);
        assert_eq!(code, 0, "{err}");
        out.contains("Broker: connected").then_some(out)
    })
    .expect("status shows the link up again");
    assert!(
        status.contains(&format!("Readings: {}", 3 * PER_PHASE)),
        "{status}"
    );
    assert!(status.contains("Broker: connected"), "{status}");
    assert!(status.contains("reconnections since start: 2"), "{status}");
    let outage_line = during
        .lines()
        .find(|l| l.starts_with("Broker:"))
        .unwrap_or("")
        .to_string();
    figures(
        "broker",
        &[
            ("readings published around the restarts", format!("{}, all stored once", 3 * PER_PHASE)),
            (
                "store kept",
                format!(
                    "outage {}, seepd connected again {} after the broker listened (session present)",
                    secs(outage_kept),
                    secs(reconnect_kept)
                ),
            ),
            (
                "store emptied",
                format!(
                    "outage {}, connected {} and subscribed again {} after the broker listened",
                    secs(outage_empty),
                    secs(reconnect_empty),
                    secs(resubscribed)
                ),
            ),
            ("reconnect backoff", "reconnect_min_ms 100, reconnect_max_ms 1000".into()),
            ("`seepd status` during the outage", outage_line),
        ],
    );
}
