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

/// Run `series` through a fresh tracker (the head doubling as the raw value) and return the
/// flags of each reading, a confirmed spike put back on the reading it concerns; also the index
/// of the reading whose arrival confirmed each spike.
fn run_with_delay(series: &[(i64, f64, Option<f64>)]) -> (Vec<HealthFlags>, Vec<(usize, usize)>) {
    let mut tr = HealthTracker::new(config(), T0).expect("valid config");
    let mut flags = Vec::new();
    let mut confirmed = Vec::new();
    for (i, &(t, v, c)) in series.iter().enumerate() {
        let verdict = tr.update(t, v, v, c);
        flags.push(verdict.flags);
        if let Some(at) = verdict.spike_at {
            let j = series.iter().position(|s| s.0 == at).expect("a known time");
            flags[j].insert(HealthFlags::SPIKE);
            confirmed.push((j, i));
        }
    }
    (flags, confirmed)
}

fn run(series: &[(i64, f64, Option<f64>)]) -> Vec<HealthFlags> {
    run_with_delay(series).0
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
        tr.update(t, v, v, c);
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
    let (flags, confirmed) = run_with_delay(&series);
    assert_eq!(flagged(&flags, HealthFlags::SPIKE), vec![50, 70]);
    // The verdict comes with the next reading: a delay of one reading.
    assert_eq!(confirmed, vec![(50, 51), (70, 71)]);
}

#[test]
fn a_flood_rise_shared_with_the_trend_is_never_a_spike() {
    // Flat for 30 h, then rising 0.25 m/h for 24 h (5 × the floor of 0.05 m per reading), a
    // crest, and a recession at 0.05 m/h, with the clean series' wobble on top.
    let stage = |h: f64| {
        if h < 30.0 {
            0.0
        } else if h < 54.0 {
            0.25 * (h - 30.0)
        } else if h < 66.0 {
            6.0
        } else {
            (6.0 - 0.05 * (h - 66.0)).max(0.0)
        }
    };
    let series: Vec<_> = (0..240)
        .map(|i| {
            let (t, v, c) = clean(i);
            (t, v + stage(i as f64), c)
        })
        .collect();
    let flags = run(&series);
    assert!(flagged(&flags, HealthFlags::SPIKE).is_empty());
    // The same flood with a 1 m spike at the crest: only that reading.
    let mut spiked = series.clone();
    spiked[60].1 += 1.0;
    assert_eq!(flagged(&run(&spiked), HealthFlags::SPIKE), vec![60]);
    // And a downward spike on the steepest part of the rise.
    let mut spiked = series;
    spiked[40].1 -= 1.0;
    assert_eq!(flagged(&run(&spiked), HealthFlags::SPIKE), vec![40]);
}

#[test]
fn spike_waits_for_a_full_window() {
    // A jump at reading 10, before 24 readings are in the window, is not judged.
    let mut series: Vec<_> = (0..30).map(clean).collect();
    series[10].1 += 1.0;
    assert!(flagged(&run(&series), HealthFlags::SPIKE).is_empty());
}

#[test]
fn a_genuine_step_is_never_a_spike() {
    // Head steps up 0.5 m at reading 50 and stays there (a repair, a valve): the next reading
    // does not come back, so the excursion is not isolated.
    let series: Vec<_> = (0..120)
        .map(|i| {
            let (t, v, c) = clean(i);
            (t, if i >= 50 { v + 0.5 } else { v }, c)
        })
        .collect();
    assert!(flagged(&run(&series), HealthFlags::SPIKE).is_empty());
}

#[test]
fn a_steady_history_uses_the_absolute_floor() {
    // A quantised, perfectly steady history: the spread of the rates is 0, so the floor decides.
    let steady = |i: usize| (T0 + i as i64 * HOUR_MS, 100.0, None);
    let mut series: Vec<_> = (0..40).map(steady).collect();
    series[30].1 = 100.04;
    series[35].1 = 100.06;
    assert_eq!(
        flagged(&run(&series), HealthFlags::SPIKE),
        vec![35],
        "4 cm within the 5 cm floor"
    );
}

#[test]
fn flatline_after_count_identical_readings() {
    let mut series: Vec<_> = (0..60).map(clean).collect();
    // Logger stuck from reading 30 on: the same raw value, with wobble below the tolerance.
    for (k, s) in series.iter_mut().enumerate().skip(30) {
        s.1 = 101.234 + if k % 2 == 0 { 4e-5 } else { 0.0 };
    }
    let flags = run(&series);
    // A steady head read by a working sensor moves in its last digits: no flatline.
    let steady: Vec<_> = (0..60)
        .map(|i| {
            (
                T0 + i as i64 * HOUR_MS,
                101.0 + 0.001 * (i % 3) as f64,
                None,
            )
        })
        .collect();
    assert!(flagged(&run(&steady), HealthFlags::FLATLINE).is_empty());
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
    tr.update(t, 100.0, 100.0, Some(11.0));
    assert_eq!(tr.last_reading_ms(), Some(t));
    assert!(!tr.no_data(t + 3 * HOUR_MS));
    assert!(tr.no_data(t + 3 * HOUR_MS + 1));
    // A late reading does not move the last time back.
    tr.update(t - 5 * HOUR_MS, 100.0, 100.0, Some(11.0));
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
    // 10: out of range (and no reference for the next check, so 11 is clean); 20: jump up;
    // 21: jump back down.
    assert_eq!(flagged(&flags, HealthFlags::THERMISTOR), vec![10, 20, 21]);
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
    assert!(tr.update(T0, 100.0, 100.0, Some(500.0)).flags.is_empty());
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
