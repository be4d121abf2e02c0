//! Benchmark (not a test): the per-reading cost of the watch updates — sensor-health checks,
//! Theil–Sen rates over 24 h / 7 d / 30 d, completeness, and a stage-response residual — with
//! 10,000 instruments holding 30 days of hourly readings; then how the cost grows with the
//! window length. Run with `cargo bench --bench trends` (`SEEPD_BENCH_INSTRUMENTS` changes the
//! instrument count).

use std::fmt::Write as _;
use std::sync::Arc;
use std::time::Instant;

use seepd::config::{load_dir, Config};
use seepd::domain::response::StageResponse;
use seepd::quality::Flags;
use seepd::store::ReadingRow;
use seepd::watch::{Fitted, LiveModel, Watcher};

const H_MS: i64 = 3_600_000;
/// 2026-01-01T00:00:00Z.
const T0: i64 = 1_767_225_600_000;

/// A configuration with `n` piezometers and a gauge; a response model per piezometer when
/// `models`.
fn config(n: usize, windows: &str, max_points: usize, models: bool) -> Arc<Config> {
    let dir = tempfile::tempdir().expect("tempdir");
    let service = "[[subscription]]\npattern = \"t/{logger}/json\"\nformat = \"json\"\n";
    std::fs::write(dir.path().join("seepd.toml"), service).expect("write");
    let mut s = format!(
        "[site]\nid = \"b\"\n[trends]\nrate_windows = [{windows}]\nmax_points = {max_points}\n\
         [[instrument]]\nid = \"G\"\nkind = \"stage_gauge\"\ninstalled = \"2025-01-01\"\n\
         interval_s = 3600\nrange = [0.0, 200.0]\n[instrument.stage_gauge]\n\
         water_body = \"river\"\nmode = \"elevation\"\nunit = \"m\"\n"
    );
    for i in 0..n {
        let _ = write!(
            s,
            "[[instrument]]\nid = \"P{i}\"\nkind = \"pressure_transducer\"\ntip_elevation = 80.0\n\
             installed = \"2025-01-01\"\ninterval_s = 3600\nrange = [0.0, 500.0]\n\
             [instrument.pressure_transducer]\noutput = \"kPa\"\nbarometric_correction = \"none\"\n"
        );
        if models {
            let _ = write!(
                s,
                "[[stage_response]]\nid = \"R{i}\"\npiezometer = \"P{i}\"\nstage_gauge = \"G\"\n"
            );
        }
    }
    std::fs::write(dir.path().join("b.toml"), s).expect("write");
    Arc::new(load_dir(dir.path()).unwrap_or_else(|p| panic!("{p}")))
}

fn head(i: usize, k: i64) -> f64 {
    95.0 + 0.01 * k as f64 + 0.003 * (((k + i as i64) * 7) % 5 - 2) as f64
}

fn reading(id: &str, t_ms: i64, h: f64) -> ReadingRow {
    ReadingRow {
        instrument: id.into(),
        t_ms,
        arrival_ms: t_ms,
        raw: 0.0,
        temperature_c: None,
        baro_kpa: None,
        eng_value: 0.0,
        eng_unit: "kPa",
        pressure_kpa: None,
        pressure_head_m: None,
        total_head_m: Some(h),
        flags: Flags::empty(),
    }
}

/// A watcher holding `days` of hourly readings of every instrument (and a model each).
fn seeded(cfg: &Arc<Config>, n: usize, days: i64) -> (Watcher, Vec<String>) {
    let mut w = Watcher::new(cfg);
    let ids: Vec<String> = (0..n).map(|i| format!("P{i}")).collect();
    for k in 0..days * 24 {
        let t = T0 + k * H_MS;
        w.seed(
            "G",
            t,
            Some(95.0 + (k as f64 / 10.0).sin()),
            95.0 + (k as f64 / 10.0).sin(),
            None,
            Flags::empty(),
        );
        for (i, id) in ids.iter().enumerate() {
            w.seed(id, t, Some(head(i, k)), head(i, k), None, Flags::empty());
        }
    }
    for r in &cfg.trends.stage_responses {
        let m = StageResponse {
            intercept_m: 50.0,
            ratio: 0.5,
            lag_ms: 6 * H_MS,
            correlation: 0.99,
            r_squared: 0.98,
            sigma_m: 0.02,
            n: 500,
        };
        w.install(Fitted {
            id: r.id.clone(),
            model: Ok(LiveModel::Response(m)),
        });
    }
    (w, ids)
}

/// Mean ns per reading of `rounds` new hourly readings of every instrument: (health check
/// only, check + derive).
fn measure(w: &mut Watcher, ids: &[String], from_k: i64, rounds: i64) -> (f64, f64, usize) {
    let (mut check_ns, mut all_ns, mut rows) = (0u128, 0u128, 0usize);
    for k in from_k..from_k + rounds {
        let t = T0 + k * H_MS;
        w.seed("G", t, Some(95.0), 95.0, None, Flags::empty());
        for (i, id) in ids.iter().enumerate() {
            let mut r = reading(id, t, head(i, k));
            let a = Instant::now();
            w.check(&mut r);
            let b = Instant::now();
            rows += w.derive(&r).len();
            let c = Instant::now();
            check_ns += (b - a).as_nanos();
            all_ns += (c - a).as_nanos();
        }
    }
    let count = (ids.len() as i64 * rounds) as f64;
    (check_ns as f64 / count, all_ns as f64 / count, rows)
}

fn main() {
    let n: usize = std::env::var("SEEPD_BENCH_INSTRUMENTS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(10_000);
    println!("trends: {n} instruments, hourly readings, 30 days seeded");
    let windows = "\"24h\", \"7d\", \"30d\"";
    for models in [false, true] {
        let cfg = config(n, windows, 96, models);
        let started = Instant::now();
        let (mut w, ids) = seeded(&cfg, n, 30);
        let seed_s = started.elapsed().as_secs_f64();
        let (check, all, rows) = measure(&mut w, &ids, 30 * 24, 3);
        println!(
            "  rate windows 24h/7d/30d (max_points 96){}: health check {check:.0} ns/reading; \
             health + rates + completeness{} {all:.0} ns/reading ({:.1} derived rows/reading; \
             seeding {seed_s:.1} s)",
            if models {
                ", a response model each"
            } else {
                ""
            },
            if models { " + residual" } else { "" },
            rows as f64 / (3 * n) as f64
        );
    }
    let m = (n / 10).max(100);
    println!("scaling with the window length ({m} instruments, one window, 30 days seeded):");
    for (window, max_points) in [
        ("\"24h\"", 96),
        ("\"7d\"", 96),
        ("\"30d\"", 96),
        ("\"24h\"", 5_000),
        ("\"7d\"", 5_000),
        ("\"30d\"", 5_000),
    ] {
        let cfg = config(m, window, max_points, false);
        let (mut w, ids) = seeded(&cfg, m, 30);
        let (check, all, _) = measure(&mut w, &ids, 30 * 24, 3);
        println!(
            "  window {window:>6}, max_points {max_points:>5}: {:.0} ns/reading (health {check:.0})",
            all
        );
    }
}
