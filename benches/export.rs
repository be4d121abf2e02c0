//! Throughput benchmark (not a test): export catch-up. Pre-fills a database with a queued
//! backlog of river-gauge readings, starts a real VictoriaMetrics, runs the live export worker
//! in-process with the default batch size and reports points per second forwarded until the
//! queue is empty, then checks that every sample arrived.
//!
//! Run: `cargo bench --bench export` (env SEEPD_BENCH_EXPORT_N sets the readings, default
//! 500000). Figures go to the README. Under `cargo test --all-targets` (no `--bench` argument)
//! it runs as a quick smoke check on 2000 readings.

#[path = "../tests/common/mod.rs"]
mod common;

use std::sync::Arc;
use std::time::{Duration, Instant};

use common::*;

fn main() {
    let benching = std::env::args().any(|a| a == "--bench");
    let n: usize = std::env::var("SEEPD_BENCH_EXPORT_N")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(if benching { 500_000 } else { 2000 });
    let dir = tempfile::tempdir().unwrap();
    let vm = Victoria::start(dir.path());
    // Default batch size and flush interval; only the retry timings come from the test helper.
    let cfg_dir = export_config(dir.path(), free_port(), &vm.url(), "");
    let t0 = (chrono::Utc::now().timestamp() - 30 * 86_400) * 1000;
    let filled = Instant::now();
    prefill(&cfg_dir, n, t0, 1000, true);
    eprintln!(
        "pre-filled {n} readings in {:.1} s",
        filled.elapsed().as_secs_f64()
    );

    let cfg = Arc::new(seepd::config::load_dir(&cfg_dir).unwrap_or_else(|p| panic!("{p}")));
    let e = cfg.export.clone().expect("export configured");
    let rt = tokio::runtime::Runtime::new().unwrap();
    let stop = seepd::shutdown::Shutdown::new(std::time::Duration::from_secs(5));
    let stop_rx = stop.clone();
    let started = Instant::now();
    let worker = {
        let cfg = Arc::clone(&cfg);
        rt.spawn(async move {
            let sink = seepd::export::influx::InfluxSink::new(&e)?;
            seepd::export::run_with(&cfg, &e, sink, stop_rx).await
        })
    };
    wait_for(Duration::from_secs(3600), || {
        (count(dir.path(), "export_queue", "1") == 0).then_some(())
    })
    .expect("backlog drained");
    let secs = started.elapsed().as_secs_f64();
    stop.request();
    rt.block_on(worker).unwrap().unwrap();

    let points: i64 = db(dir.path())
        .query_row("SELECT points FROM export_cursor", [], |r| r.get(0))
        .unwrap();
    let samples = vm.samples();
    assert_eq!(samples, n * 4, "every sample arrived");
    println!(
        "export catch-up: {n} readings, {points} points in {secs:.2} s = {:.0} points/s ({:.0} readings/s); VictoriaMetrics holds {samples} samples",
        points as f64 / secs,
        n as f64 / secs
    );
}
