//! Tests of the stage-response model on synthetic data with a known lag and response ratio.

use super::*;

const HOUR_MS: i64 = 3_600_000;
const DAY_MS: i64 = 24 * HOUR_MS;
const T0: i64 = 1_704_067_200_000; // 2024-01-01T00:00Z, an arbitrary origin

/// A smooth, non-periodic-looking stage (m) as a function of time: two incommensurate waves
/// on a slow rise.
fn true_stage(t_ms: i64) -> f64 {
    let d = (t_ms - T0) as f64 / DAY_MS as f64;
    let tau = std::f64::consts::TAU;
    100.0 + 0.02 * d + 3.0 * (tau * d / 9.3).sin() + 1.2 * (tau * d / 2.1 + 0.7).sin()
}

/// Stage readings every 15 minutes for `days`.
fn stage_series(days: i64) -> StageSeries {
    let pts = (0..days * 96)
        .map(|i| {
            let t = T0 + i * 15 * 60_000;
            (t, true_stage(t))
        })
        .collect();
    StageSeries::new(pts, 2 * HOUR_MS).expect("valid stage")
}

/// Hourly heads, offset 7 minutes from the stage clock so interpolation is exercised:
/// h = 50 + 0.42·stage(t − 18 h) + a small deterministic wobble (±3 mm).
fn heads(days: i64) -> Vec<(i64, f64)> {
    (0..days * 24)
        .map(|i| {
            let t = T0 + i * HOUR_MS + 7 * 60_000;
            let noise = 0.003 * (2.3 * i as f64).sin();
            (t, 50.0 + 0.42 * true_stage(t - 18 * HOUR_MS) + noise)
        })
        .collect()
}

fn hourly_0_to_72() -> LagSearch {
    LagSearch {
        min_ms: 0,
        max_ms: 72 * HOUR_MS,
        step_ms: HOUR_MS,
    }
}

#[test]
fn recovers_known_lag_and_ratio() {
    let stage = stage_series(90);
    let h = heads(90);
    let m = fit_response(&h, &stage, T0, T0 + 60 * DAY_MS, hourly_0_to_72()).expect("fits");
    // Synthetic truth [derived]: lag 18 h, ratio 0.42, intercept 50 m.
    assert_eq!(m.lag_ms, 18 * HOUR_MS);
    assert!((m.ratio - 0.42).abs() < 1e-3, "ratio {}", m.ratio);
    assert!(
        (m.intercept_m - 50.0).abs() < 0.1,
        "intercept {}",
        m.intercept_m
    );
    assert!(m.r_squared > 0.999, "R² {}", m.r_squared);
    assert!(m.sigma_m < 0.005, "σ {}", m.sigma_m);
    assert!(m.correlation > 0.999);
    // Readings before 72 h have no stage at the longest lag, so they are not used.
    assert_eq!(m.n, 60 * 24 - 72);
}

#[test]
fn residuals_after_training_stay_small() {
    let stage = stage_series(90);
    let h = heads(90);
    let m = fit_response(&h, &stage, T0, T0 + 60 * DAY_MS, hourly_0_to_72()).expect("fits");
    let after: Vec<f64> = h
        .iter()
        .filter(|(t, _)| *t >= T0 + 60 * DAY_MS)
        .map(|&(t, v)| residual(v, m.predict_at(&stage, t).expect("stage known")))
        .collect();
    assert_eq!(after.len(), 30 * 24);
    assert!(after.iter().all(|r| r.abs() < 0.01));
    // A head 0.5 m above the model is seen as a residual of about +0.5 m.
    let t = T0 + 70 * DAY_MS + 7 * 60_000;
    let expected = m.predict(true_stage(t - m.lag_ms));
    let r = residual(
        expected + 0.5,
        m.predict_at(&stage, t).expect("stage known"),
    );
    assert!((r - 0.5).abs() < 1e-3);
}

#[test]
fn lag_search_respects_the_range() {
    // The true lag (18 h) lies outside 24..=48 h: the nearest end of the range wins.
    let stage = stage_series(90);
    let search = LagSearch {
        min_ms: 24 * HOUR_MS,
        max_ms: 48 * HOUR_MS,
        step_ms: HOUR_MS,
    };
    let m = fit_response(&heads(90), &stage, T0, T0 + 60 * DAY_MS, search).expect("fits");
    assert_eq!(m.lag_ms, 24 * HOUR_MS);
}

#[test]
fn stage_interpolation_gaps_and_edges() {
    let s = StageSeries::new(
        vec![(0, 10.0), (HOUR_MS, 12.0), (5 * HOUR_MS, 20.0)],
        2 * HOUR_MS,
    )
    .expect("valid");
    assert_eq!(s.at(0), Some(10.0));
    assert_eq!(s.at(HOUR_MS / 4), Some(10.5));
    assert_eq!(s.at(HOUR_MS), Some(12.0));
    assert_eq!(s.at(2 * HOUR_MS), None, "4 h gap exceeds the 2 h bridge");
    assert_eq!(s.at(-1), None);
    assert_eq!(s.at(5 * HOUR_MS + 1), None);
    assert_eq!(
        StageSeries::new(vec![(0, 1.0), (0, 2.0)], HOUR_MS).err(),
        Some(ResponseError::BadStageSeries { index: 1 })
    );
    assert_eq!(
        StageSeries::new(vec![(0, f64::NAN)], HOUR_MS).err(),
        Some(ResponseError::BadStageSeries { index: 0 })
    );
}

#[test]
fn bad_inputs_are_typed_errors() {
    let stage = stage_series(10);
    let h = heads(10);
    let bad = LagSearch {
        min_ms: 0,
        max_ms: HOUR_MS,
        step_ms: 0,
    };
    assert_eq!(
        fit_response(&h, &stage, T0, T0 + 10 * DAY_MS, bad),
        Err(ResponseError::BadLagSearch)
    );
    // A training period of 4 hours holds too few readings.
    assert!(matches!(
        fit_response(
            &h,
            &stage,
            T0 + 5 * DAY_MS,
            T0 + 5 * DAY_MS + 4 * HOUR_MS,
            hourly_0_to_72()
        ),
        Err(ResponseError::TooFewReadings { n: 4, .. })
    ));
    // A flat stage gives no correlation at any lag.
    let flat = StageSeries::new(
        (0..240).map(|i| (T0 + i * HOUR_MS, 100.0)).collect(),
        2 * HOUR_MS,
    )
    .expect("valid");
    assert_eq!(
        fit_response(&h, &flat, T0, T0 + 10 * DAY_MS, hourly_0_to_72()),
        Err(ResponseError::NoVariation)
    );
}
