//! Benchmark (not a test): configuration size. Writes an invented fleet (`fleet::write`: the
//! example site's mix of vibrating-wire and transducer nests, standpipes, toe checks, rules, a
//! river gauge and a barometer per site) of 1,000 / 10,000 / 100,000 instruments, times
//! `seepd check` on each and reads its peak RSS; then runs `seepd run` on the 10,000-instrument
//! fleet against a real Mosquitto, feeds it two hours of readings of every instrument, and
//! samples its resident memory once it is idle.
//!
//! Run: `cargo bench --bench scale` (`SEEPD_BENCH_SCALE=1000,10000` picks the sizes;
//! `SEEPD_BENCH_RUN_N` the fleet for `seepd run`, 0 to skip). Figures go to the README.

#[path = "../tests/common/mod.rs"]
mod common;
mod fleet;

use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::*;

fn main() {
    let sizes: Vec<usize> = std::env::var("SEEPD_BENCH_SCALE")
        .ok()
        .map(|s| s.split(',').filter_map(|x| x.trim().parse().ok()).collect())
        .unwrap_or_else(|| vec![1_000, 10_000, 100_000]);
    let run_n: usize = std::env::var("SEEPD_BENCH_RUN_N")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(10_000);
    let dir = tempfile::tempdir().expect("tempdir");

    println!(
        "seepd check on an invented fleet (one site file per {} instruments):",
        fleet::SITE_SIZE
    );
    let mut first: Option<(usize, f64)> = None;
    for &n in &sizes {
        let cfg = dir.path().join(format!("fleet-{n}"));
        fleet::write(&cfg, n, 1883);
        let bytes: u64 = std::fs::read_dir(&cfg)
            .expect("read dir")
            .filter_map(|e| e.ok()?.metadata().ok())
            .map(|m| m.len())
            .sum();
        let started = Instant::now();
        let (ok, stdout, rss_kib) = timed_child(
            Command::new(seepd_bin())
                .args(["check", "--config"])
                .arg(&cfg),
        );
        let s = started.elapsed().as_secs_f64();
        assert!(ok, "seepd check refused the fleet:\n{stdout}");
        println!(
            "  {n:>7} instruments ({:.1} MB of TOML): {s:>7.2} s, peak RSS {:>7.1} MiB",
            bytes as f64 / 1e6,
            rss_kib as f64 / 1024.0
        );
        match first {
            None => first = Some((n, rss_kib as f64)),
            Some((n0, r0)) => println!(
                "          memory per instrument beyond the {n0}-instrument fleet: {:.2} KiB",
                (rss_kib as f64 - r0) / (n - n0) as f64
            ),
        }
    }

    if run_n > 0 {
        run_memory(dir.path(), run_n);
    }
}

/// Run a child to completion; (success, stdout, peak RSS in KiB from `wait4`'s rusage).
fn timed_child(cmd: &mut Command) -> (bool, String, i64) {
    let out = tempfile::NamedTempFile::new().expect("temp");
    let child = cmd
        .stdout(out.reopen().expect("reopen"))
        .stderr(Stdio::null())
        .spawn()
        .expect("spawn seepd");
    let pid = child.id() as libc::pid_t;
    let mut status = 0;
    // SAFETY: plain syscall on our own child; `ru` is a valid out-pointer.
    let mut ru: libc::rusage = unsafe { std::mem::zeroed() };
    let r = unsafe { libc::wait4(pid, &mut status, 0, &mut ru) };
    assert_eq!(r, pid, "wait4");
    std::mem::forget(child); // already reaped
    let text = std::fs::read_to_string(out.path()).unwrap_or_default();
    (
        libc::WIFEXITED(status) && libc::WEXITSTATUS(status) == 0,
        text,
        ru.ru_maxrss,
    )
}

/// `VmRSS` and `VmHWM` of a process, KiB.
fn rss(pid: u32) -> (u64, u64) {
    let text = std::fs::read_to_string(format!("/proc/{pid}/status")).unwrap_or_default();
    let field = |name: &str| {
        text.lines()
            .find(|l| l.starts_with(name))
            .and_then(|l| l.split_whitespace().nth(1))
            .and_then(|v| v.parse().ok())
            .unwrap_or(0)
    };
    (field("VmRSS:"), field("VmHWM:"))
}

/// `seepd run` on an `n`-instrument fleet: start-up time, then resident memory after two hourly
/// rounds of readings of every instrument.
fn run_memory(root: &std::path::Path, n: usize) {
    let broker = Broker::start(root);
    let cfg = root.join(format!("run-{n}"));
    let insts = fleet::write(&cfg, n, broker.port);
    let log = root.join("run.log");
    let started = Instant::now();
    let d = Daemon::start(&cfg, &log);
    wait_for(Duration::from_secs(600), || {
        let text = std::fs::read_to_string(&log).unwrap_or_default();
        text.contains("Connected to broker").then_some(())
    })
    .expect("seepd run did not connect");
    let start_s = started.elapsed().as_secs_f64();
    let (after_start, _) = rss(d.child.id());

    let p = Publisher::connect(broker.port, "fleet-pub");
    let t0 = chrono::Utc::now().timestamp() / 3600 * 3600 - 2 * 3600;
    let mut sent = 0;
    for k in 0..2 {
        for (i, inst) in insts.iter().enumerate() {
            let mut line = String::new();
            fleet::ndjson_line(&mut line, inst, i, k, t0);
            let logger = logger_of(&inst.id);
            p.send(&format!("fleet/{logger}/json"), line.trim_end().to_string());
            sent += 1;
        }
    }
    p.wait_acked(sent, Duration::from_secs(600));
    wait_for(Duration::from_secs(600), || {
        (count(&cfg, "readings", "1=1") >= sent as i64).then_some(())
    })
    .expect("seepd did not store the readings");
    std::thread::sleep(Duration::from_secs(5));
    let mut samples = Vec::new();
    for _ in 0..5 {
        samples.push(rss(d.child.id()));
        std::thread::sleep(Duration::from_secs(1));
    }
    let steady = samples.iter().map(|s| s.0).max().unwrap_or(0);
    let hwm = samples.iter().map(|s| s.1).max().unwrap_or(0);
    println!("seepd run, {n} instruments, Mosquitto on a free port:");
    println!("  start-up to connected          : {start_s:.2} s");
    println!(
        "  RSS after start-up             : {:.1} MiB",
        after_start as f64 / 1024.0
    );
    println!(
        "  RSS steady after {sent} readings: {:.1} MiB (peak {:.1} MiB)",
        steady as f64 / 1024.0,
        hwm as f64 / 1024.0
    );
    drop(d);
}

/// The logger of a fleet instrument (`S3-G7-VA` → `S3-L7`; the site gauge and barometer are on
/// `S3-LOGR`).
fn logger_of(id: &str) -> String {
    let mut parts = id.split('-');
    let site = parts.next().unwrap_or_default();
    match parts.next() {
        Some(g) if g.starts_with('G') => format!("{site}-L{}", &g[1..]),
        _ => format!("{site}-LOGR"),
    }
}
