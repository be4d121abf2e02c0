//! The InfluxDB-compatible server (VictoriaMetrics) stopped while readings stream in through
//! the broker, then started again: every point of every reading is in it afterwards. A point
//! is there twice only when the server stopped while it was taking that point's batch (the
//! batch is sent again, at least once, README "InfluxDB export"): then with the same value, on
//! the same series and time, which InfluxDB overwrites; never more than one batch's worth.

use std::collections::{BTreeMap, BTreeSet};
use std::time::{Duration, Instant};

use crate::common::*;
use crate::support::*;

const PER_PHASE: i64 = 1_000;
/// Samples per river reading with `series = ["readings"]`: engineering value and total head
/// (`seepd_reading_value`), raw and flags (`seepd_input_raw`, `seepd_input_flags`).
const SAMPLES: usize = 4;

fn publish(p: &Publisher, t0: i64, from: i64) {
    for i in from..from + PER_PHASE {
        p.send(
            "demo/AB-LOG1/json",
            river_json(t0 + i, 2.0 + (i % 500) as f64 / 100.0),
        );
    }
}

#[test]
fn export_server_down_mid_stream_every_point_arrives_once() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let mut vm = Victoria::start(dir.path());
    let cfg = export_config(
        dir.path(),
        broker.port,
        &vm.url(),
        "batch_size = 200\nseries = [\"readings\"]",
    );
    let log = dir.path().join("seepd.log");
    let d = Daemon::start(&cfg, &log);
    d.wait_connected(1);
    let p = Publisher::connect(broker.port, "pub-export");
    let t0 = chrono::Utc::now().timestamp() - 3 * 86_400;
    publish(&p, t0, 0);
    // Down while the stream is on: some of the first phase is out, the rest queues.
    wait_for(Duration::from_secs(60), || {
        (vm.samples() >= 200 * SAMPLES).then_some(())
    })
    .expect("export started");
    vm.stop();
    let down = Instant::now();
    publish(&p, t0, PER_PHASE);
    assert!(
        wait_log(&log, "Export write failed", 3, Duration::from_secs(30)),
        "retries during the outage: {}",
        std::fs::read_to_string(&log).unwrap_or_default()
    );
    // A few seconds of outage, as a restart of the server would take.
    std::thread::sleep(Duration::from_secs(3).saturating_sub(down.elapsed()));
    let queued = count(dir.path(), "export_queue", "1");
    vm.restart();
    let outage = down.elapsed();
    let up = Instant::now();
    publish(&p, t0, 2 * PER_PHASE);
    let n = 3 * PER_PHASE;
    let want = n as usize * SAMPLES;
    let arrived = wait_for(Duration::from_secs(90), || {
        (vm.samples() >= want && count(dir.path(), "export_queue", "1") == 0).then_some(())
    });
    let catch_up = up.elapsed();
    assert!(
        arrived.is_some(),
        "{} of {want} samples; log:\n{}",
        vm.samples(),
        std::fs::read_to_string(&log).unwrap_or_default()
    );
    // Every (series, time) there; a repeat only as a re-sent batch: the same value, at most
    // one batch (200 readings) per series.
    let mut by: BTreeMap<String, BTreeMap<i64, Vec<f64>>> = BTreeMap::new();
    for s in vm.series() {
        let name = format!(
            "{}/{}",
            s.metric["__name__"],
            s.metric.get("quantity").map_or("", String::as_str)
        );
        let points = by.entry(name).or_default();
        for (t, v) in s.timestamps.iter().zip(&s.values) {
            points.entry(*t).or_default().push(*v);
        }
    }
    let times: BTreeSet<i64> = (0..n).map(|i| (t0 + i) * 1000).collect();
    assert_eq!(by.len(), SAMPLES, "{:?}", by.keys());
    let mut repeated = 0;
    for (name, got) in &by {
        let distinct: BTreeSet<i64> = got.keys().copied().collect();
        assert_eq!(distinct, times, "{name}: missing points");
        for (t, values) in got.iter().filter(|(_, v)| v.len() > 1) {
            assert!(
                values.iter().all(|v| *v == values[0]),
                "{name} at {t}: different values {values:?}"
            );
            repeated += values.len() - 1;
            assert_eq!(values.len(), 2, "{name} at {t}: sent more than twice");
        }
        let extra: usize = got.values().map(|v| v.len() - 1).sum();
        assert!(
            extra <= 200,
            "{name}: {extra} points twice, more than one batch"
        );
    }
    assert_eq!(count(dir.path(), "readings", "1"), n);
    drop(d);
    figures(
        "export",
        &[
            (
                "readings published",
                format!("{n} (1,000 before, during and after the outage)"),
            ),
            (
                "points",
                format!(
                    "{want} expected, all in VictoriaMetrics; {repeated} twice (a batch re-sent \
                     after the server stopped while taking it)"
                ),
            ),
            (
                "outage",
                format!("{} ({queued} entries queued meanwhile)", secs(outage)),
            ),
            ("backlog drained after the server came back", secs(catch_up)),
        ],
    );
}
