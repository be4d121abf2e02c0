//! Tests of the HST model: recovery of known coefficients from noise-free synthetic data, the
//! day-of-year arithmetic against chrono, residuals and typed errors.

use super::*;
use chrono::{Datelike, TimeZone, Timelike, Utc};

const T0: i64 = 1_577_836_800_000 + 3 * DAY_MS / 7; // early January 2020 (a leap year)

/// Synthetic reservoir level (m): two incommensurate waves and a slow rise, so that it moves
/// independently of the season.
fn level(day: f64) -> f64 {
    let tau = std::f64::consts::TAU;
    120.0 + 6.0 * (tau * day / 200.0).sin() + 3.0 * (tau * day / 77.0 + 1.0).cos() + 0.002 * day
}

/// Day of year from chrono (independent of the code under test).
fn chrono_doy(t_ms: i64) -> f64 {
    let dt = Utc.timestamp_millis_opt(t_ms).single().expect("valid time");
    dt.ordinal0() as f64
        + (dt.num_seconds_from_midnight() as f64 * 1000.0 + dt.timestamp_subsec_millis() as f64)
            / DAY_MS as f64
}

/// Noise-free readings from known coefficients, evaluated with formulas written out here.
fn synthetic(days: i64, a: &[f64], b: [f64; 4], c: [f64; 2]) -> Vec<HstObservation> {
    let ts: Vec<i64> = (0..days)
        .map(|d| T0 + d * DAY_MS + (d % 24) * 3_600_000) // readings at varying hours
        .collect();
    let levels: Vec<f64> = ts
        .iter()
        .map(|t| level((t - T0) as f64 / DAY_MS as f64))
        .collect();
    let hmax = levels.iter().cloned().fold(f64::MIN, f64::max);
    let hmin = levels.iter().cloned().fold(f64::MAX, f64::min);
    ts.iter()
        .zip(&levels)
        .map(|(&t, &h)| {
            let z = (hmax - h) / (hmax - hmin);
            let s = 2.0 * std::f64::consts::PI * chrono_doy(t) / 365.25;
            let theta = (t - T0) as f64 / 100.0 / DAY_MS as f64;
            let hyd: f64 = a
                .iter()
                .enumerate()
                .map(|(i, ai)| ai * z.powi(i as i32))
                .sum();
            let sea =
                b[0] * s.sin() + b[1] * s.cos() + b[2] * (2.0 * s).sin() + b[3] * (2.0 * s).cos();
            let tim = c[0] * theta + c[1] * (1.0 + theta).ln();
            HstObservation {
                t_ms: t,
                reservoir_m: h,
                value: hyd + sea + tim,
            }
        })
        .collect()
}

fn assert_recovers(m: &HstModel, a: &[f64], b: [f64; 4], c: [f64; 2]) {
    // Synthetic truth [derived]: noise-free data built from these coefficients.
    for (got, want) in m.hydrostatic.iter().zip(a) {
        assert!((got - want).abs() < 1e-6, "a: {got} vs {want}");
    }
    for (got, want) in m.seasonal.iter().zip(&b) {
        assert!((got - want).abs() < 1e-6, "b: {got} vs {want}");
    }
    for (got, want) in m.time.iter().zip(&c) {
        assert!((got - want).abs() < 1e-6, "c: {got} vs {want}");
    }
    assert!(m.sigma < 1e-8, "σ {}", m.sigma);
}

#[test]
fn recovers_known_coefficients_degree_4() {
    let a = [95.0, 2.0, -1.5, 0.8, -0.3];
    let b = [0.4, -0.25, 0.1, 0.05];
    let c = [0.2, -0.35];
    let obs = synthetic(3 * 365, &a, b, c);
    let m = fit_hst(&obs, 4).expect("fits");
    assert_eq!(m.degree(), 4);
    assert_eq!(m.n, obs.len());
    assert_eq!(m.origin_ms, T0);
    assert_recovers(&m, &a, b, c);
}

#[test]
fn recovers_known_coefficients_degree_2() {
    let a = [88.0, -3.0, 1.25];
    let b = [-0.6, 0.3, 0.0, 0.12];
    let c = [0.05, 0.4];
    let m = fit_hst(&synthetic(400, &a, b, c), 2).expect("fits");
    assert_eq!(m.hydrostatic.len(), 3);
    assert_recovers(&m, &a, b, c);
}

#[test]
fn parts_sum_to_prediction_and_residual_is_measured_minus_predicted() {
    let a = [95.0, 2.0, -1.5, 0.8, -0.3];
    let obs = synthetic(3 * 365, &a, [0.4, -0.25, 0.1, 0.05], [0.2, -0.35]);
    let m = fit_hst(&obs, 4).expect("fits");
    let o = obs[500];
    let p = m.parts(o.t_ms, o.reservoir_m).expect("after origin");
    let pred = m.predict(o.t_ms, o.reservoir_m).expect("after origin");
    assert!((p.hydrostatic + p.seasonal + p.time - pred).abs() < 1e-12);
    assert!((pred - o.value).abs() < 1e-8);
    let r = m
        .residual(o.t_ms, o.reservoir_m, o.value + 0.3)
        .expect("after origin");
    assert!((r - 0.3).abs() < 1e-8);
    assert_eq!(m.predict(T0 - 1, 120.0), None);
    // z is 0 at the highest training level and 1 at the lowest.
    assert_eq!(m.z(m.reservoir_max_m), 0.0);
    assert_eq!(m.z(m.reservoir_min_m), 1.0);
}

#[test]
fn day_of_year_matches_chrono() {
    // Leap and common years, before and after 1970, every 5.3 days over 12 years.
    let start = Utc
        .with_ymd_and_hms(1964, 12, 30, 5, 0, 0)
        .single()
        .expect("valid")
        .timestamp_millis();
    for k in 0..830 {
        let t = start + k * (53 * DAY_MS / 10) + k * 7;
        assert!(
            (day_of_year(t) - chrono_doy(t)).abs() < 1e-12,
            "t {t}: {} vs {}",
            day_of_year(t),
            chrono_doy(t)
        );
    }
    // 31 December of a leap year is day 365 (0-based).
    let dec31 = Utc.with_ymd_and_hms(2024, 12, 31, 0, 0, 0).unwrap();
    assert_eq!(day_of_year(dec31.timestamp_millis()), 365.0);
}

#[test]
fn errors_are_typed() {
    let a = [95.0, 2.0];
    let b = [0.4, -0.25, 0.1, 0.05];
    let c = [0.2, -0.35];
    let short = synthetic(300, &a, b, c);
    assert!(matches!(fit_hst(&short, 1), Err(HstError::TooShort { .. })));
    let obs = synthetic(400, &a, b, c);
    assert_eq!(fit_hst(&obs, 0), Err(HstError::Degree { degree: 0 }));
    assert_eq!(fit_hst(&obs, 5), Err(HstError::Degree { degree: 5 }));
    let mut flat = obs.clone();
    flat.iter_mut().for_each(|o| o.reservoir_m = 110.0);
    assert_eq!(fit_hst(&flat, 1), Err(HstError::ConstantReservoir));
    let mut bad = obs;
    bad[3].value = f64::NAN;
    assert_eq!(fit_hst(&bad, 1), Err(HstError::NonFinite { index: 3 }));
}
