//! kill -9 twenty times, at random moments, while 10,000 QoS 1 readings stream in: every
//! reading is stored exactly once with the value it was published with, nothing is
//! quarantined (a redelivery is recognised, never a conflict), and SQLite's integrity check
//! passes.

use std::time::{Duration, Instant};

use crate::common::*;
use crate::support::*;

const N: i64 = 10_000;
const KILLS: usize = 20;

/// The depth published at step `i` (distinct over any 1,000 steps; the river's range is 0–12 m).
fn depth(i: i64) -> f64 {
    2.0 + (i % 1000) as f64 / 1000.0
}

#[test]
fn kill_9_twenty_times_mid_stream_stores_every_reading_exactly_once() {
    let mut rng = Rng::new("kill9");
    let rig = Rig::start();
    let (dir, cfg, log) = (rig.path().to_path_buf(), rig.cfg.clone(), rig.log.clone());
    let broker = &rig.broker;
    let mut d = rig.daemon;
    let t0 = chrono::Utc::now().timestamp() - 7 * 86_400;
    let p = Publisher::connect(broker.port, "pub-kill9");
    let started = Instant::now();
    for i in 0..N {
        p.send("demo/AB-LOG1/json", river_json(t0 + i, depth(i)));
    }
    // Kill points: random stored counts spread over the stream, then a random few ms more.
    let mut at: Vec<i64> = (0..KILLS)
        .map(|_| 1 + rng.below(N as u64 - 1) as i64)
        .collect();
    at.sort_unstable();
    let mut stored_at_kills = Vec::new();
    for (k, threshold) in at.iter().enumerate() {
        wait_for(Duration::from_secs(60), || {
            (count(&dir, "readings", "1") >= *threshold).then_some(())
        })
        .unwrap_or_else(|| panic!("kill {k}: stuck below {threshold}; log:\n{}", read(&log)));
        std::thread::sleep(Duration::from_millis(rng.below(40)));
        d.kill9();
        stored_at_kills.push(count(&dir, "readings", "1"));
        d = Daemon::start(&cfg, &log);
        d.wait_connected(k + 2);
    }
    p.wait_acked(N as usize, Duration::from_secs(60));
    let all = wait_for(Duration::from_secs(120), || {
        (count(&dir, "readings", "1") >= N).then_some(())
    });
    let took = started.elapsed();
    assert!(
        all.is_some(),
        "stored {} of {N}",
        count(&dir, "readings", "1")
    );
    let (code, _) = d.terminate();
    assert_eq!(code, Some(0), "log:\n{}", read(&log));
    // Exactly once, each with its own value.
    let range = format!("t_ms BETWEEN {} AND {}", t0 * 1000, (t0 + N - 1) * 1000);
    assert_eq!(count(&dir, "readings", "1"), N);
    assert_eq!(count(&dir, "readings", &range), N);
    let wrong = count(
        &dir,
        "readings",
        &format!(
            "abs(raw - (2.0 + ((t_ms / 1000 - {t0}) % 1000) / 1000.0)) > 1e-9 OR \
             instrument <> 'AB-RIVER'"
        ),
    );
    assert_eq!(wrong, 0, "readings stored with another value");
    assert_eq!(count(&dir, "quarantine", "1"), 0, "nothing quarantined");
    let kills_mid_stream = stored_at_kills.iter().filter(|&&s| s < N).count();
    assert!(
        kills_mid_stream >= KILLS / 2,
        "kills came too late: {stored_at_kills:?}"
    );
    let check = integrity(&dir);
    assert_eq!(check, "ok");
    figures(
        "kill9",
        &[
            ("readings published (QoS 1)", N.to_string()),
            (
                "kill -9",
                format!("{KILLS} (at stored counts {stored_at_kills:?})"),
            ),
            (
                "stored",
                format!("{N}, each exactly once with its published value"),
            ),
            ("quarantined", "0".into()),
            ("integrity_check", check),
            ("wall time", secs(took)),
        ],
    );
}

fn read(p: &std::path::Path) -> String {
    std::fs::read_to_string(p).unwrap_or_default()
}
