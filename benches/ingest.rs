//! Throughput benchmark (not a test), on field-shaped data: hourly readings, each with its
//! anchor measured in the same run.
//!
//! - live: a backlog of the example site's mix (both invented sites: vibrating-wire and
//!   transducer piezometers, nests, toe checks, the blanket reach, a section, standpipe, gauges,
//!   barometer, rules and models), one reading per message, hourly-spaced and with the
//!   scenarios' faults, queued in a real Mosquitto (started here on a free port) while seepd is
//!   down; then `mosquitto_sub -q 1` drains the same backlog from its own persistent session,
//!   and seepd catches up (stored with `synchronous=FULL` and acknowledged, start-up included).
//! - live, re-solving: the same backlog once more with the example dam's section model set to
//!   re-solve on every pool reading (`resolve_change` 1 µm, `resolve_every_s` 60 with hourly
//!   readings), to show that the seepage solves on their own thread do not hold up ingest.
//! - replay: `seepd replay --db` of hourly readings of an invented 200-instrument fleet
//!   (`benches/fleet`), next to `benches/reference_pipeline.py` doing the same reductions and
//!   gradients in Python, and a plain Python sqlite3 batched insert of the same readings; the
//!   Python pipeline's values are checked against seepd's database.
//!
//! Run: `cargo bench --bench ingest` (`SEEPD_BENCH_PART=live|replay` for one part, `live` runs
//! both live variants;
//! `SEEPD_BENCH_N` the backlog, default 30,000 messages; `SEEPD_BENCH_REPLAY_N` the replay
//! readings, default 1,000,000; `SEEPD_BENCH_DIR` keeps the files there). Figures go to the
//! README.

#[path = "../tests/common/mod.rs"]
mod common;
mod fleet;

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::*;

fn env_n(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(default)
}

fn main() {
    let part = std::env::var("SEEPD_BENCH_PART").unwrap_or_default();
    let tmp = tempfile::tempdir().expect("tempdir");
    // SEEPD_BENCH_DIR keeps the inputs, configurations and databases (to profile on them).
    let root =
        std::env::var_os("SEEPD_BENCH_DIR").map_or_else(|| tmp.path().to_path_buf(), Into::into);
    if part.is_empty() || part == "live" {
        let n = env_n("SEEPD_BENCH_N", 30_000);
        let plain = live(&root, n, false);
        let resolving = live(&root, n, true);
        println!(
            "  ratio re-solving / plain seepd : {:.2}",
            resolving / plain
        );
    }
    if part.is_empty() || part == "replay" {
        replay(&root, env_n("SEEPD_BENCH_REPLAY_N", 1_000_000));
    }
}

/// The example site's hourly readings, both scenarios merged in time order, extended to at least
/// `n` readings; each as (topic, payload).
fn example_mix(cfg: &seepd::config::Config, n: usize) -> Vec<(String, String)> {
    let probe = seepd::scenario::dam_pool(0);
    let per_hour = probe.drivers.len() + seepd::scenario::levee_flood(cfg, 0).drivers.len();
    let hours = (n / per_hour + 2) as u32;
    // Ending two hours ago, so that nothing is stamped ahead of the clock.
    let now_h = chrono::Utc::now().timestamp() / 3600;
    let start_ms = (now_h - i64::from(hours) - 2) * 3_600_000;
    let mut levee = seepd::scenario::levee_flood(cfg, start_ms);
    levee.hours = hours;
    let mut dam = seepd::scenario::dam_pool(start_ms);
    dam.hours = hours;
    let mut all = Vec::new();
    for s in [&levee, &dam] {
        all.extend(seepd::scenario::raw::readings(s, cfg).expect("scenario readings"));
    }
    all.sort_by_key(|r| r.t_ms); // stable: each scenario's order within an hour is kept
    all.truncate(n);
    all.into_iter()
        .map(|r| {
            let logger = cfg.instruments[&r.instrument]
                .logger
                .clone()
                .unwrap_or_else(|| "LOG".into());
            (format!("demo/{logger}/json"), r.ndjson())
        })
        .collect()
}

/// Live catch-up of a queued backlog of `n` messages vs `mosquitto_sub -q 1`; with `resolve`,
/// the example dam's section model re-solves on every pool reading. Returns seepd's rate.
fn live(root: &Path, n: usize, resolve: bool) -> f64 {
    let dir = root.join(if resolve { "live-resolve" } else { "live" });
    std::fs::create_dir_all(&dir).expect("dir");
    let broker = Broker::start(&dir);
    let cfg = example_config(&dir, broker.port);
    if resolve {
        let site = cfg.join("dam-tarn.toml");
        let text = std::fs::read_to_string(&site).expect("dam site file");
        let patched = text
            .replace("resolve_change = 0.1\n", "resolve_change = 0.000001\n")
            .replace("resolve_every_s = 21600\n", "resolve_every_s = 60\n");
        assert_ne!(text, patched, "the example dam's model keys moved");
        std::fs::write(&site, patched).expect("write site file");
    }
    let loaded = seepd::config::load_dir(&cfg).unwrap_or_else(|p| panic!("{p}"));
    let messages = example_mix(&loaded, n);
    let n = messages.len();

    // Persistent sessions of seepd and mosquitto_sub exist before the backlog is queued.
    let log = dir.join("seepd.log");
    let mut d = Daemon::start(&cfg, &log);
    d.wait_connected(1);
    d.terminate();
    let sub = |count: Option<usize>| {
        let mut c = Command::new("mosquitto_sub");
        c.args([
            "-p",
            &broker.port.to_string(),
            "-q",
            "1",
            "-c",
            "-i",
            "bench-sub",
        ])
        .args(["-t", "demo/+/json"])
        .stdout(Stdio::null());
        match count {
            Some(n) => c.args(["-C", &n.to_string()]),
            None => c.arg("-E"),
        };
        let ok = c
            .status()
            .expect("mosquitto_sub (package mosquitto-clients)");
        assert!(ok.success());
    };
    sub(None);
    let p = Publisher::connect(broker.port, "bench-pub");
    for (topic, payload) in &messages {
        p.send(topic, payload.clone());
    }
    p.wait_acked(n, Duration::from_secs(1200));

    let started = Instant::now();
    sub(Some(n));
    let sub_s = started.elapsed().as_secs_f64();

    let started = Instant::now();
    let mut d = Daemon::start(&cfg, &log);
    wait_for(Duration::from_secs(1800), || {
        let done = count(&dir, "readings", "1=1") + count(&dir, "quarantine", "1=1");
        (done >= n as i64).then_some(())
    })
    .expect("seepd did not store the backlog");
    let seepd_s = started.elapsed().as_secs_f64();
    d.terminate();
    let stored = count(&dir, "readings", "1=1");
    let quarantined = count(&dir, "quarantine", "1=1");
    let derived = count(&dir, "derived", "1=1");
    let solves = count(&dir, "derived", "quantity = 'model_flow'");
    let pool = count(&dir, "readings", "instrument = 'TH-POOL'");

    let sub_rate = n as f64 / sub_s;
    let seepd_rate = n as f64 / seepd_s;
    println!(
        "live catch-up, {n} queued QoS 1 messages, example site mix, hourly readings{}:",
        if resolve {
            ", section model re-solving on every pool reading"
        } else {
            ""
        }
    );
    println!("  mosquitto_sub -q 1 drain : {sub_rate:>9.0} msg/s ({sub_s:.2} s)");
    println!(
        "  seepd stored + acked     : {seepd_rate:>9.0} readings/s ({seepd_s:.2} s, incl. start-up; \
         {stored} readings, {quarantined} quarantined, {derived} derived rows)"
    );
    println!("  section solves answered  : {solves} (pool readings {pool})");
    println!("  ratio                    : {:.2}", seepd_rate / sub_rate);
    seepd_rate
}

/// `seepd replay --db` of `n` hourly readings of a 200-instrument fleet vs the Python anchors.
fn replay(root: &Path, n: usize) {
    let dir = root.join("replay");
    let cfg = dir.join("config");
    let insts = fleet::write(&cfg, 200, 1883);
    let hours = (n / insts.len()).max(1) as i64;
    let n = hours as usize * insts.len();
    let t0 = (chrono::Utc::now().timestamp() / 3600 - hours - 2) * 3600;
    let input = dir.join("replay.ndjson");
    let mut text = String::with_capacity(n * 90);
    for k in 0..hours {
        for (i, inst) in insts.iter().enumerate() {
            fleet::ndjson_line(&mut text, inst, i, k, t0);
        }
    }
    std::fs::write(&input, text).expect("write input");
    println!(
        "replay, {n} hourly readings of {} instruments ({hours} h; nests, toe checks, rules):",
        insts.len()
    );

    let db = dir.join("seepd-replay.sqlite");
    let started = Instant::now();
    let st = Command::new(seepd_bin())
        .args(["replay", "--config"])
        .arg(&cfg)
        .arg("--input")
        .arg(&input)
        .arg("--db")
        .arg(&db)
        .args(["--output", "/dev/null"])
        .stderr(Stdio::null())
        .status()
        .expect("seepd replay");
    assert!(st.success());
    let seepd_s = started.elapsed().as_secs_f64();
    let seepd_rate = n as f64 / seepd_s;
    println!(
        "  seepd replay --db                      : {seepd_rate:>9.0} readings/s ({seepd_s:.2} s)"
    );

    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/reference_pipeline.py");
    let python = |args: &[&Path]| -> f64 {
        let started = Instant::now();
        let out = Command::new("python3")
            .arg(&script)
            .args(args)
            .stderr(Stdio::inherit())
            .output()
            .expect("python3");
        let s = started.elapsed().as_secs_f64();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stdout)
        );
        // The pipeline's own timer stops before its check against seepd's database.
        String::from_utf8_lossy(&out.stdout)
            .split_whitespace()
            .last()
            .and_then(|x| x.parse().ok())
            .unwrap_or(s)
    };
    let py = dir.join("python-pipeline.sqlite");
    let pipe_s = python(&[
        Path::new("pipeline"),
        &cfg,
        &input,
        &py,
        Path::new("--check"),
        &db,
    ]);
    let pipe_rate = n as f64 / pipe_s;
    println!("  Python reference pipeline (same reductions and gradients): {pipe_rate:>9.0} readings/s ({pipe_s:.2} s)");
    let ins = dir.join("python-insert.sqlite");
    let ins_s = python(&[Path::new("insert"), &input, &ins]);
    let ins_rate = n as f64 / ins_s;
    println!(
        "  Python sqlite3 batched insert          : {ins_rate:>9.0} readings/s ({ins_s:.2} s)"
    );
    println!(
        "  ratio seepd / Python pipeline          : {:.2}\n  ratio seepd / Python insert            : {:.2}",
        seepd_rate / pipe_rate,
        seepd_rate / ins_rate
    );
}
