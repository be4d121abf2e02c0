//! Throughput benchmark (not a test): live ingest end to end against a real Mosquitto, next to
//! `mosquitto_sub -q 1` draining the same queued stream, and `seepd replay` throughput.
//!
//! Run: `cargo bench --bench ingest` (env SEEPD_BENCH_N sets the stream length, default 20000).
//! Figures go to the README.

#[path = "../tests/common/mod.rs"]
mod common;

use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::*;

/// Builds a message for a time (s).
type Payload = Box<dyn Fn(i64) -> String>;

fn main() {
    let n: i64 = std::env::var("SEEPD_BENCH_N")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(20_000);
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let cfg = example_config(dir.path(), broker.port);
    let topic = "demo/AB-LOG1/json";
    let t0 = chrono::Utc::now().timestamp() - 30 * 86_400;

    // Live ingest, two streams of one-reading messages:
    // - a standpipe that feeds no derived object (reduction, health check, rates, completeness);
    // - the river gauge, which also feeds the blanket-theory reach (14 derived values per
    //   reading) and an alert rule: the most expensive instrument of the example site.
    let log = dir.path().join("seepd.log");
    let mut d = Daemon::start(&cfg, &log);
    d.wait_connected(1);
    d.terminate();
    let p = Publisher::connect(broker.port, "bench-pub");
    let rounds: [(&str, &str, Payload); 2] = [
        (
            "standpipe AB-SP-3 (no derived objects)",
            "AB-SP-3",
            Box::new(|t| format!(r#"{{"time": {t}, "channel": "5", "value": 4.0}}"#)),
        ),
        (
            "river gauge AB-RIVER (blanket model + rule)",
            "AB-RIVER",
            Box::new(|t| river_json(t, 3.0)),
        ),
    ];
    for (k, (label, instrument, payload)) in rounds.iter().enumerate() {
        // mosquitto_sub draining the same queued QoS 1 stream from its persistent session.
        let sub_id = format!("bench-sub-{k}");
        let sub = |count: Option<i64>| {
            let mut c = Command::new("mosquitto_sub");
            c.args([
                "-p",
                &broker.port.to_string(),
                "-q",
                "1",
                "-c",
                "-i",
                &sub_id,
            ])
            .args(["-t", "demo/+/json"])
            .stdout(Stdio::null());
            match count {
                Some(n) => c.args(["-C", &n.to_string()]),
                None => c.arg("-E"),
            };
            assert!(c
                .status()
                .expect("mosquitto_sub (package mosquitto-clients)")
                .success());
        };
        sub(None);
        let base = p.acked();
        for i in 0..n {
            p.send(topic, payload(t0 + i));
        }
        p.wait_acked(base + n as usize, Duration::from_secs(600));

        let started = Instant::now();
        sub(Some(n));
        let sub_s = started.elapsed().as_secs_f64();

        let started = Instant::now();
        let mut d2 = Daemon::start(&cfg, &log);
        let filter = format!("instrument = '{instrument}'");
        wait_for(Duration::from_secs(600), || {
            (count(dir.path(), "readings", &filter) >= n).then_some(())
        })
        .expect("seepd did not store the stream");
        let seepd_s = started.elapsed().as_secs_f64();
        d2.terminate();

        let sub_rate = n as f64 / sub_s;
        let seepd_rate = n as f64 / seepd_s;
        println!("live ingest, {n} queued QoS 1 messages, {label}:");
        println!("  mosquitto_sub -q 1 drain : {sub_rate:>10.0} msg/s ({sub_s:.2} s)");
        println!("  seepd stored + acked     : {seepd_rate:>10.0} readings/s ({seepd_s:.2} s, incl. start-up)");
        println!("  ratio                    : {:.2}", seepd_rate / sub_rate);
    }

    // 3. Replay throughput: five instruments and the barometer their sealed gauges need, one
    //    reading a minute each; on the instruments alone (reduction, health checks, rates and
    //    completeness) and on the full example site (plus nests, toe checks, blanket theory,
    //    the section, stage-response model and rules).
    let rn: i64 = 200_000;
    let input = dir.path().join("replay.ndjson");
    let ids = [
        "AB-BARO", "AB-PZ-1A", "AB-PZ-2B", "AB-SP-3", "TH-PZ-1", "TH-POOL",
    ];
    let vals = [101.0, 2800.0, 10.0, 4.0, 8000.0, 215.0];
    let mut text = String::with_capacity(rn as usize * 80);
    for i in 0..rn {
        let k = (i % 6) as usize;
        let extra = if k == 1 { ",\"temperature\":12.0" } else { "" };
        text.push_str(&format!(
            "{{\"time\":{},\"instrument\":\"{}\",\"value\":{}{extra}}}\n",
            t0 + i / 6 * 60,
            ids[k],
            vals[k]
        ));
    }
    std::fs::write(&input, text).unwrap();
    let instruments_only = instruments_only_config(&cfg, &dir.path().join("instruments-only"));
    for (label, config, db) in [
        ("instruments only, in-memory", &instruments_only, None),
        ("full example site, in-memory", &cfg, None),
        (
            "full example site, SQLite file",
            &cfg,
            Some(dir.path().join("replay.sqlite")),
        ),
    ] {
        let mut cmd = Command::new(seepd_bin());
        cmd.args(["replay", "--config"])
            .arg(config)
            .arg("--input")
            .arg(&input)
            .args(["--output", "/dev/null"]);
        if let Some(db) = &db {
            cmd.arg("--db").arg(db);
        }
        let started = Instant::now();
        let st = cmd.stderr(Stdio::null()).status().unwrap();
        assert!(st.success());
        let s = started.elapsed().as_secs_f64();
        println!(
            "replay ({label}): {rn} readings in {s:.2} s = {:.0} readings/s",
            rn as f64 / s
        );
    }
}

/// A copy of the configuration with only the service file and the sites' instruments: every
/// table after the instruments (objects, rules, models, reports) is cut.
fn instruments_only_config(cfg: &std::path::Path, out: &std::path::Path) -> std::path::PathBuf {
    std::fs::create_dir_all(out).unwrap();
    for e in std::fs::read_dir(cfg).unwrap() {
        let p = e.unwrap().path();
        if p.extension().is_none_or(|x| x != "toml") {
            continue;
        }
        let text = std::fs::read_to_string(&p).unwrap();
        let mut kept = String::new();
        let mut keep = true;
        for line in text.lines() {
            let t = line.trim();
            if t.starts_with('[') {
                let name = t.trim_matches(|c| c == '[' || c == ']');
                keep = p.file_name().is_some_and(|n| n == "seepd.toml")
                    || name == "site"
                    || name == "instrument"
                    || name.starts_with("instrument.");
            }
            if keep {
                kept.push_str(line);
                kept.push('\n');
            }
        }
        std::fs::write(out.join(p.file_name().unwrap()), kept).unwrap();
    }
    out.to_path_buf()
}
