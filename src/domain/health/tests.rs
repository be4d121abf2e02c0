//! Tests of the sensor-health flags: one crafted series per flag, and a clean series that raises
//! none.

use super::*;

const HOUR_MS: i64 = 3_600_000;
const T0: i64 = 1_717_200_000_000;

fn config() -> HealthConfig {
    HealthConfig {
        range: (80.0, 120.0),
        spike: SpikeConfig {
            window: 24,
            k: 3.0,
            floor: 0.05,
        },
        flatline: FlatlineConfig {
            count: 12,
            tolerance: 1e-4,
        },
        interval_ms: HOUR_MS,
        no_data_factor: 3.0,
        thermistor: Some(ThermistorConfig::default()),
    }
}

/// A plausible hourly total head (m): a rise of 1.2 cm a day, a daily wobble of ±1 cm and a few
/// mm of deterministic jitter; thermistor near 11 °C.
fn clean(i: usize) -> (i64, f64, Option<f64>) {
    let x = i as f64;
    let head = 100.0
        + 0.0005 * x
        + 0.01 * (std::f64::consts::TAU * x / 24.0).sin()
        + 0.003 * (2.3 * x).sin();
    let temp = 11.0 + 0.1 * (x / 50.0).sin();
    (T0 + i as i64 * HOUR_MS, head, Some(temp))
}

/// Run `series` through a fresh tracker and return the flags of each reading.
fn run(series: &[(i64, f64, Option<f64>)]) -> Vec<HealthFlags> {
    let mut tr = HealthTracker::new(config(), T0).expect("valid config");
    series.iter().map(|&(t, v, c)| tr.update(t, v, c)).collect()
}

/// Indices of readings that carry `flag`.
fn flagged(flags: &[HealthFlags], flag: HealthFlags) -> Vec<usize> {
    (0..flags.len())
        .filter(|&i| flags[i].contains(flag))
        .collect()
}

#[test]
fn clean_series_raises_no_flag() {
    let series: Vec<_> = (0..500).map(clean).collect();
    let flags = run(&series);
    let raised: Vec<(usize, Vec<&str>)> = flags
        .iter()
        .enumerate()
        .filter(|(_, f)| !f.is_empty())
        .map(|(i, f)| (i, f.names()))
        .collect();
    assert!(raised.is_empty(), "unexpected flags: {raised:?}");
    let mut tr = HealthTracker::new(config(), T0).expect("valid config");
    for &(t, v, c) in &series {
        tr.update(t, v, c);
    }
    assert!(!tr.no_data(series[499].0 + HOUR_MS));
    let times: Vec<i64> = series.iter().map(|s| s.0).collect();
    assert_eq!(
        completeness_pct(&times, T0, T0 + 500 * HOUR_MS, HOUR_MS),
        Some(100.0)
    );
}

#[test]
fn out_of_range_flags_only_the_bad_readings() {
    let mut series: Vec<_> = (0..60).map(clean).collect();
    series[30].1 = 150.0;
    series[40].1 = f64::NAN;
    series[45].1 = 79.9;
    let flags = run(&series);
    assert_eq!(flagged(&flags, HealthFlags::OUT_OF_RANGE), vec![30, 40, 45]);
    // Out-of-range values stay out of the window, so they cause no spike afterwards.
    assert!(flagged(&flags, HealthFlags::SPIKE).is_empty());
    assert!(out_of_range(f64::INFINITY, (0.0, 1.0)));
    assert!(!out_of_range(1.0, (0.0, 1.0)));
}

#[test]
fn spike_flags_an_isolated_jump() {
    let mut series: Vec<_> = (0..100).map(clean).collect();
    series[50].1 += 0.3;
    series[70].1 -= 0.25;
    let flags = run(&series);
    assert_eq!(flagged(&flags, HealthFlags::SPIKE), vec![50, 70]);
}

#[test]
fn spike_waits_for_a_full_window() {
    // A jump at reading 10, before 24 readings are in the window, is not judged.
    let mut series: Vec<_> = (0..30).map(clean).collect();
    series[10].1 += 1.0;
    assert!(flagged(&run(&series), HealthFlags::SPIKE).is_empty());
}

#[test]
fn a_genuine_step_stops_being_a_spike() {
    // Head steps up 0.5 m at reading 50 and stays there: flagged at first, accepted once the
    // new level fills half the window.
    let series: Vec<_> = (0..120)
        .map(|i| {
            let (t, v, c) = clean(i);
            (t, if i >= 50 { v + 0.5 } else { v }, c)
        })
        .collect();
    let spikes = flagged(&run(&series), HealthFlags::SPIKE);
    assert_eq!(spikes.first(), Some(&50));
    assert!(spikes.iter().all(|&i| i < 50 + 13), "{spikes:?}");
}

#[test]
fn zero_mad_uses_the_absolute_floor() {
    // A quantised, perfectly steady history: MAD = 0.
    let history = [100.00; 24];
    assert!(
        !is_spike(&history, 100.01, 3.0, 0.05),
        "1 cm is within the floor"
    );
    assert!(
        is_spike(&history, 100.06, 3.0, 0.05),
        "6 cm exceeds the floor"
    );
    // MAD = 0 and no floor: any change would be a spike.
    assert!(is_spike(&history, 100.001, 3.0, 0.0));
    // Scaled MAD: history alternating ±1 around 0 has MAD 1, σ̂ 1.4826, threshold 4.4478.
    let alt: Vec<f64> = (0..24)
        .map(|i| if i % 2 == 0 { 1.0 } else { -1.0 })
        .collect();
    assert!(!is_spike(&alt, 4.4, 3.0, 0.0));
    assert!(is_spike(&alt, 4.5, 3.0, 0.0));
    assert!(!is_spike(&[], 1e9, 3.0, 0.0));
}

#[test]
fn flatline_after_count_identical_readings() {
    let mut series: Vec<_> = (0..60).map(clean).collect();
    // Logger stuck from reading 30 on: the same value, with wobble below the tolerance.
    for (k, s) in series.iter_mut().enumerate().skip(30) {
        s.1 = 101.234 + if k % 2 == 0 { 4e-5 } else { 0.0 };
    }
    let flags = run(&series);
    // The 12th identical reading is index 41.
    assert_eq!(
        flagged(&flags, HealthFlags::FLATLINE),
        (41..60).collect::<Vec<_>>()
    );
    assert!(!is_flatline(&[1.0, 1.0, 1.0], 4, 0.0), "too few readings");
    assert!(is_flatline(&[5.0, 1.0, 1.0, 1.0, 1.0], 4, 0.0));
    assert!(
        !is_flatline(&[1.0, 1.0, 1.0, 1.0001], 4, 0.0),
        "tolerance 0 is strict"
    );
}

#[test]
fn no_data_after_factor_times_interval() {
    let mut tr = HealthTracker::new(config(), T0).expect("valid config");
    // Nothing yet: the silence counts from the start of watching.
    assert!(!tr.no_data(T0 + 3 * HOUR_MS));
    assert!(tr.no_data(T0 + 3 * HOUR_MS + 1));
    let t = T0 + 10 * HOUR_MS;
    tr.update(t, 100.0, Some(11.0));
    assert_eq!(tr.last_reading_ms(), Some(t));
    assert!(!tr.no_data(t + 3 * HOUR_MS));
    assert!(tr.no_data(t + 3 * HOUR_MS + 1));
    // A late reading does not move the last time back.
    tr.update(t - 5 * HOUR_MS, 100.0, Some(11.0));
    assert_eq!(tr.last_reading_ms(), Some(t));
    assert!(no_data(0, 7_201, 1_000, 7.2));
    assert!(!no_data(0, 7_200, 1_000, 7.2));
}

#[test]
fn completeness_counts_distinct_readings_in_the_period() {
    // 24 expected hourly readings; 18 present, one redelivered, two outside the period.
    let mut times: Vec<i64> = (0..18).map(|i| T0 + i * HOUR_MS).collect();
    times.push(T0 + 3 * HOUR_MS);
    times.push(T0 - HOUR_MS);
    times.push(T0 + 24 * HOUR_MS);
    assert_eq!(
        completeness_pct(&times, T0, T0 + 24 * HOUR_MS, HOUR_MS),
        Some(75.0)
    );
    // Readings more often than expected cap at 100 %.
    let dense: Vec<i64> = (0..48).map(|i| T0 + i * HOUR_MS / 2).collect();
    assert_eq!(
        completeness_pct(&dense, T0, T0 + 24 * HOUR_MS, HOUR_MS),
        Some(100.0)
    );
    assert_eq!(
        completeness_pct(&[], T0, T0 + 24 * HOUR_MS, HOUR_MS),
        Some(0.0)
    );
    assert_eq!(
        completeness_pct(&times, T0, T0 + HOUR_MS - 1, HOUR_MS),
        None
    );
}

#[test]
fn thermistor_range_and_jump() {
    let mut series: Vec<_> = (0..40).map(clean).collect();
    series[10].2 = Some(75.0); // implausible; and a jump from ~11 °C
    series[20].2 = Some(17.5); // jump of ~6.5 °C from the previous reading
    series[25].2 = None; // no temperature: nothing to judge
    let flags = run(&series);
    // 10: out of range; 11: jump back from 75 °C; 20: jump up; 21: jump back down.
    assert_eq!(
        flagged(&flags, HealthFlags::THERMISTOR),
        vec![10, 11, 20, 21]
    );
    let cfg = ThermistorConfig::default();
    assert!(thermistor_anomaly(-31.0, None, &cfg));
    assert!(!thermistor_anomaly(12.0, Some(8.0), &cfg));
    assert!(thermistor_anomaly(f64::NAN, None, &cfg));
}

#[test]
fn sensor_without_thermistor_ignores_temperature() {
    let cfg = HealthConfig {
        thermistor: None,
        ..config()
    };
    let mut tr = HealthTracker::new(cfg, T0).expect("valid config");
    assert!(tr.update(T0, 100.0, Some(500.0)).is_empty());
}

#[test]
fn bad_config_lists_every_problem() {
    let mut cfg = config();
    cfg.range = (1.0, 1.0);
    cfg.spike.window = 2;
    cfg.interval_ms = 0;
    let errs = HealthTracker::new(cfg, T0).expect_err("invalid");
    let fields: Vec<&str> = errs.iter().map(|e| e.field).collect();
    assert_eq!(fields, vec!["range", "spike.window", "interval_ms"]);
}

#[test]
fn flag_names() {
    let mut f = HealthFlags::empty();
    f.insert(HealthFlags::SPIKE);
    f.insert(HealthFlags::THERMISTOR);
    assert_eq!(f.names(), vec!["spike", "thermistor"]);
}
