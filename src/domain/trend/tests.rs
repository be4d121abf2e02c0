//! Tests of the Theil–Sen trend: check value #13, a cross-check against scipy on seeded random
//! data, and the window bookkeeping.

use super::*;
use std::io::Write;
use std::process::{Command, Stdio};

const HOUR_MS: i64 = 3_600_000;

/// SplitMix64: a tiny seeded generator so the random tests are reproducible.
struct Rng(u64);

impl Rng {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
}

// #13 — x 0..4, y [0, 1, 2, 3, 100] → slope 1.0, intercept 0.0 (tolerance 1e-12).
// Source: Theil (1950), Sen (1968) formula [pub]; value [derived]; scipy.stats.theilslopes
// gives the same (cross-checked by `matches_scipy_theilslopes` below).
#[test]
fn check_13_theil_sen_ignores_outlier() {
    let pts: Vec<(f64, f64)> = [0.0, 1.0, 2.0, 3.0, 100.0]
        .iter()
        .enumerate()
        .map(|(i, &y)| (i as f64, y))
        .collect();
    let line = theil_sen(&pts).expect("five distinct x");
    assert!((line.slope - 1.0).abs() <= 1e-12, "slope {}", line.slope);
    assert!(
        (line.intercept - 0.0).abs() <= 1e-12,
        "intercept {}",
        line.intercept
    );
}

#[test]
fn median_odd_even_and_empty() {
    assert_eq!(median_in_place(&mut [3.0, 1.0, 2.0]), Some(2.0));
    assert_eq!(median_in_place(&mut [4.0, 1.0, 3.0, 2.0]), Some(2.5));
    assert_eq!(median_in_place(&mut []), None);
}

#[test]
fn pairs_with_equal_x_are_skipped() {
    // Two readings at x = 0 (a vertical pair has no slope) and points on y = 2x + 1.
    let pts = [(0.0, 1.0), (0.0, 5.0), (1.0, 3.0), (2.0, 5.0)];
    let line = theil_sen(&pts).expect("distinct x exist");
    // Pairwise slopes over distinct x: (0,1)-(1,3)=2, (0,1)-(2,5)=2, (0,5)-(1,3)=-2,
    // (0,5)-(2,5)=0, (1,3)-(2,5)=2 → median 2.
    assert_eq!(line.slope, 2.0);
    // median(y) = 4, median(x) = 0.5 → 4 − 2·0.5 = 3.
    assert_eq!(line.intercept, 3.0);
}

#[test]
fn too_few_and_non_finite_are_errors() {
    assert_eq!(
        theil_sen(&[(1.0, 2.0), (1.0, 3.0)]),
        Err(TrendError::TooFewPoints { n: 2, distinct: 1 })
    );
    assert_eq!(
        theil_sen(&[]),
        Err(TrendError::TooFewPoints { n: 0, distinct: 0 })
    );
    assert_eq!(
        theil_sen(&[(0.0, 1.0), (1.0, f64::NAN)]),
        Err(TrendError::NonFinite)
    );
}

#[test]
fn rate_is_per_day_from_milliseconds() {
    // 0.05 m/day rise sampled hourly for three days, starting at an arbitrary epoch time.
    let t0 = 1_700_000_000_000_i64;
    let pts: Vec<(i64, f64)> = (0..72)
        .map(|i| {
            let t = t0 + i * HOUR_MS;
            (t, 12.0 + 0.05 * (i as f64) / 24.0)
        })
        .collect();
    let r = rate_per_day(&pts).expect("72 points");
    assert!((r.per_day - 0.05).abs() < 1e-12, "{}", r.per_day);
    assert!((r.value_at_origin - 12.0).abs() < 1e-12);
    assert_eq!(r.origin_ms, t0);
    assert_eq!(r.n, 72);
}

/// Run scipy.stats.theilslopes on (x, y) in a child Python and return (slope, intercept).
fn scipy_theilslopes(x: &[f64], y: &[f64]) -> (f64, f64) {
    let probe = Command::new("/usr/bin/python3")
        .args(["-c", "import scipy"])
        .output();
    match probe {
        Ok(out) if out.status.success() => {}
        Ok(out) => panic!(
            "scipy is not importable by /usr/bin/python3 ({}); install it with \
             `apt-get install -y python3-scipy` (the project's test script does this)",
            String::from_utf8_lossy(&out.stderr).trim()
        ),
        Err(e) => panic!(
            "cannot run /usr/bin/python3 ({e}); install python3 and python3-scipy \
             (`apt-get install -y python3-scipy`)"
        ),
    }
    let script = "import json, sys\n\
                  from scipy.stats import theilslopes\n\
                  d = json.load(sys.stdin)\n\
                  r = theilslopes(d['y'], d['x'])\n\
                  print(json.dumps({'slope': float(r[0]), 'intercept': float(r[1])}))\n";
    let mut child = Command::new("/usr/bin/python3")
        .args(["-c", script])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn python3");
    let input = serde_json::json!({ "x": x, "y": y }).to_string();
    child
        .stdin
        .take()
        .expect("stdin is piped")
        .write_all(input.as_bytes())
        .expect("write to python3");
    let out = child.wait_with_output().expect("python3 finishes");
    assert!(
        out.status.success(),
        "python3 failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON from python3");
    (
        v["slope"].as_f64().expect("slope"),
        v["intercept"].as_f64().expect("intercept"),
    )
}

// Cross-check: scipy.stats.theilslopes (default method "separate") on seeded random data,
// odd and even counts, repeated x values and outliers. Tolerance 1e-9.
#[test]
fn matches_scipy_theilslopes() {
    let mut rng = Rng(0x5EED_0013);
    for case in 0..6 {
        let n = 15 + case * 7; // 15, 22, 29, ... mixes odd and even counts
        let true_slope = (rng.unit() - 0.5) * 4.0;
        let mut x = Vec::with_capacity(n);
        let mut y = Vec::with_capacity(n);
        for _ in 0..n {
            // Half of the cases draw x from a coarse grid so that ties in x occur.
            let xi = if case % 2 == 0 {
                (rng.unit() * 10.0).floor()
            } else {
                rng.unit() * 50.0
            };
            let mut yi = 3.0 + true_slope * xi + (rng.unit() - 0.5);
            if rng.unit() < 0.1 {
                yi += 40.0 * (rng.unit() - 0.5); // outliers
            }
            x.push(xi);
            y.push(yi);
        }
        let pts: Vec<(f64, f64)> = x.iter().copied().zip(y.iter().copied()).collect();
        let ours = theil_sen(&pts).expect("random x has distinct values");
        let (slope, intercept) = scipy_theilslopes(&x, &y);
        assert!(
            (ours.slope - slope).abs() <= 1e-9,
            "case {case}: slope {} vs scipy {slope}",
            ours.slope
        );
        assert!(
            (ours.intercept - intercept).abs() <= 1e-9,
            "case {case}: intercept {} vs scipy {intercept}",
            ours.intercept
        );
    }
}

#[test]
fn thin_keeps_newest_and_bounds_count() {
    let pts: Vec<(i64, f64)> = (0..10).map(|i| (i, i as f64)).collect();
    let t = thin(&pts, 4);
    // k = ceil(10/4) = 3, counted back from index 9: 9, 6, 3, 0.
    assert_eq!(t.iter().map(|p| p.0).collect::<Vec<_>>(), vec![0, 3, 6, 9]);
    assert!(thin(&pts, 3).len() <= 3);
    assert_eq!(thin(&pts, 3).last(), Some(&(9, 9.0)));
    assert_eq!(thin(&pts, 20).len(), 10);
}

#[test]
fn window_evicts_by_span_and_replaces_duplicates() {
    let mut w = RateWindow::new(24 * HOUR_MS, 1000).expect("valid window");
    for i in 0..48 {
        w.push(i * HOUR_MS, i as f64).expect("in order");
    }
    // Newest at 47 h; the window keeps t ≥ 23 h: 25 points.
    assert_eq!(w.len(), 25);
    assert_eq!(w.points().next(), Some(&(23 * HOUR_MS, 23.0)));
    // A redelivered reading replaces the one held.
    w.push(40 * HOUR_MS, 40.0).expect("inside window");
    assert_eq!(w.len(), 25);
    // A reading before the window start is refused and changes nothing.
    assert_eq!(
        w.push(HOUR_MS, 1.0),
        Err(TrendError::TooOld {
            t_ms: HOUR_MS,
            start_ms: 23 * HOUR_MS
        })
    );
    assert_eq!(w.push(30 * HOUR_MS, f64::NAN), Err(TrendError::NonFinite));
    assert_eq!(w.len(), 25);
    // One reading an hour rising 1 per hour = 24 per day.
    let r = w.rate().expect("25 points");
    assert!((r.per_day - 24.0).abs() < 1e-9);
    // No reading for a day: evicting at a later time empties the window.
    assert_eq!(w.evict(47 * HOUR_MS + 24 * HOUR_MS + 1), 25);
    assert!(w.is_empty());
    assert!(matches!(w.rate(), Err(TrendError::TooFewPoints { .. })));
}

#[test]
fn window_late_reading_is_inserted_in_order() {
    let mut w = RateWindow::new(7 * 24 * HOUR_MS, 100).expect("valid window");
    for &t in &[0, 2, 3, 1] {
        w.push(t * HOUR_MS, t as f64).expect("in window");
    }
    let times: Vec<i64> = w.points().map(|p| p.0 / HOUR_MS).collect();
    assert_eq!(times, vec![0, 1, 2, 3]);
}

#[test]
fn window_cap_limits_points_used() {
    let mut w = RateWindow::new(30 * 24 * HOUR_MS, 50).expect("valid window");
    for i in 0..720 {
        w.push(i * HOUR_MS, 0.5 * i as f64 / 24.0)
            .expect("in order");
    }
    let r = w.rate().expect("many points");
    assert!(r.n <= 50, "used {} points", r.n);
    assert!((r.per_day - 0.5).abs() < 1e-9);
}

#[test]
fn bad_windows_are_refused() {
    assert!(RateWindow::new(0, 10).is_err());
    assert!(RateWindow::new(HOUR_MS, 1).is_err());
}
