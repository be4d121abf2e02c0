//! Tests of the watch state: one per health flag on a crafted series and none on a clean one,
//! rates against an independent Theil–Sen, completeness, the no-data hook, flagged readings left
//! out, and the residual of an installed stage-response model.

use std::sync::Arc;

use super::*;
use crate::domain::response::StageResponse;

const H: i64 = 3_600_000;
/// 2026-01-01T00:00:00Z, after every example install date.
const T0: i64 = 1_767_225_600_000;

fn cfg() -> Arc<Config> {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    Arc::new(crate::config::load_dir(&dir).expect("example config"))
}

fn reading(id: &str, t_ms: i64, head: f64, temp: Option<f64>) -> ReadingRow {
    ReadingRow {
        instrument: id.into(),
        t_ms,
        arrival_ms: t_ms,
        raw: head,
        temperature_c: temp,
        baro_kpa: None,
        eng_value: 0.0,
        eng_unit: "m",
        pressure_kpa: None,
        pressure_head_m: None,
        total_head_m: Some(head),
        flags: Flags::empty(),
    }
}

/// Check and derive one reading; returns its flags and derived rows.
fn feed(
    w: &mut Watcher,
    id: &str,
    t_ms: i64,
    head: f64,
    temp: Option<f64>,
) -> (Flags, Vec<DerivedRow>) {
    let (f, d, _) = feed_verdict(w, id, t_ms, head, temp);
    (f, d)
}

/// As `feed`, with the earlier reading this one confirmed a spike, if any.
fn feed_verdict(
    w: &mut Watcher,
    id: &str,
    t_ms: i64,
    head: f64,
    temp: Option<f64>,
) -> (Flags, Vec<DerivedRow>, Option<(i64, f64)>) {
    let mut r = reading(id, t_ms, head, temp);
    let spike = w.check(&mut r);
    let d = w.derive(&r);
    (r.flags, d, spike)
}

fn value(rows: &[DerivedRow], quantity: &str) -> Result<f64, String> {
    let r = rows
        .iter()
        .find(|r| r.quantity == quantity)
        .unwrap_or_else(|| panic!("no {quantity} in {rows:?}"));
    r.value.ok_or_else(|| r.reason.clone().unwrap_or_default())
}

/// A clean, slowly rising head with a few millimetres of noise.
fn clean(k: i64) -> f64 {
    95.0 + 0.002 * k as f64 + 0.003 * ((k * 7) % 5 - 2) as f64
}

#[test]
fn a_clean_series_raises_no_flag() {
    let mut w = Watcher::new(&cfg());
    for k in 0..200 {
        let temp = 12.0 + 0.5 * (k as f64 / 24.0 * std::f64::consts::TAU).sin();
        let (f, _) = feed(&mut w, "AB-PZ-1A", T0 + k * H, clean(k), Some(temp));
        assert!(f.is_empty(), "reading {k} flagged {:?}", f.names());
    }
}

#[test]
fn spike_is_confirmed_by_the_next_reading() {
    let mut w = Watcher::new(&cfg());
    for k in 0..30 {
        assert!(feed(&mut w, "AB-PZ-2B", T0 + k * H, clean(k), None)
            .0
            .is_empty());
    }
    // 2 m off the trend: beyond the 0.5 m floor; not judged yet (it could be a real rise).
    let (f, _, spike) = feed_verdict(&mut w, "AB-PZ-2B", T0 + 30 * H, clean(30) + 2.0, None);
    assert!(f.is_empty() && spike.is_none());
    // The next reading is back on the trend: the previous one was a spike.
    let (f, d, spike) = feed_verdict(&mut w, "AB-PZ-2B", T0 + 31 * H, clean(31), None);
    assert!(f.is_empty());
    assert_eq!(spike, Some((T0 + 30 * H, clean(30) + 2.0)));
    assert!(d.iter().any(|r| r.quantity.starts_with("rate_")));
}

#[test]
fn flatline_is_flagged_at_the_count() {
    let mut w = Watcher::new(&cfg());
    // flatline_count = 24 identical heads (tolerance 0).
    for k in 0..23 {
        assert!(
            feed(&mut w, "AB-PZ-2B", T0 + k * H, 95.5, None)
                .0
                .is_empty(),
            "{k}"
        );
    }
    let (f, _) = feed(&mut w, "AB-PZ-2B", T0 + 23 * H, 95.5, None);
    assert_eq!(f.names(), ["flatline"]);
    // One millimetre of change ends it.
    assert!(feed(&mut w, "AB-PZ-2B", T0 + 24 * H, 95.501, None)
        .0
        .is_empty());
}

#[test]
fn thermistor_jump_and_implausible_temperature_are_flagged() {
    let mut w = Watcher::new(&cfg());
    for k in 0..5 {
        assert!(feed(&mut w, "AB-PZ-1A", T0 + k * H, clean(k), Some(12.0))
            .0
            .is_empty());
    }
    // A 6 °C jump (limit 5 °C).
    let (f, _) = feed(&mut w, "AB-PZ-1A", T0 + 5 * H, clean(5), Some(18.0));
    assert_eq!(f.names(), ["thermistor"]);
    assert!(feed(&mut w, "AB-PZ-1A", T0 + 6 * H, clean(6), Some(18.5))
        .0
        .is_empty());
    // Outside −30..60 °C.
    let (f, _) = feed(&mut w, "AB-PZ-1A", T0 + 7 * H, clean(7), Some(85.0));
    assert!(f.contains(Flags::THERMISTOR));
    // A transducer has no thermistor check.
    let (f, _) = feed(&mut w, "AB-PZ-2B", T0, 95.0, Some(85.0));
    assert!(f.is_empty());
}

/// Median of all pairwise slopes, written out here independently of `domain::trend`.
fn theil_sen_per_day(points: &[(i64, f64)]) -> f64 {
    let mut s = Vec::new();
    for i in 0..points.len() {
        for j in i + 1..points.len() {
            let dt = (points[j].0 - points[i].0) as f64 / 86_400_000.0;
            s.push((points[j].1 - points[i].1) / dt);
        }
    }
    s.sort_by(f64::total_cmp);
    let n = s.len();
    if n % 2 == 1 {
        s[n / 2]
    } else {
        (s[n / 2 - 1] + s[n / 2]) / 2.0
    }
}

#[test]
fn rates_follow_theil_sen_once_a_quarter_of_the_window_is_filled() {
    let mut w = Watcher::new(&cfg());
    let mut pts = Vec::new();
    let mut last = Vec::new();
    for k in 0..48 {
        let t = T0 + k * H;
        pts.push((t, clean(k)));
        last = feed(&mut w, "AB-PZ-2B", t, clean(k), None).1;
    }
    // 24 h window: the readings of the last 24 h inclusive of its start (25 points).
    let want = theil_sen_per_day(&pts[23..]);
    assert!((value(&last, "rate_24h").unwrap() - want).abs() < 1e-9);
    // 7 d: 47 h of readings ≥ a quarter of 168 h.
    assert!((value(&last, "rate_7d").unwrap() - theil_sen_per_day(&pts)).abs() < 1e-9);
    // 30 d: 47 h < 180 h.
    assert!(value(&last, "rate_30d")
        .unwrap_err()
        .contains("needs at least 180.0 h"));
    let row = last.iter().find(|r| r.quantity == "rate_24h").unwrap();
    assert_eq!((row.object.as_str(), row.unit), ("AB-PZ-2B", "m/day"));
}

#[test]
fn completeness_counts_the_last_24_hours() {
    let mut w = Watcher::new(&cfg());
    let mut last = Vec::new();
    for k in 0..48 {
        // Six hourly readings missing in the last day.
        if (30..36).contains(&k) {
            continue;
        }
        last = feed(&mut w, "AB-PZ-2B", T0 + k * H, clean(k), None).1;
    }
    assert!((value(&last, "completeness_24h").unwrap() - 75.0).abs() < 1e-9);
}

#[test]
fn silent_instruments_after_k_intervals() {
    let c = cfg();
    let mut w = Watcher::new(&c);
    let t = T0 + 10 * H;
    for id in c.instruments.keys() {
        feed(&mut w, id, t, 100.0, None);
    }
    feed(&mut w, "AB-PZ-2B", t + 2 * H, 100.0, None);
    // no_data_factor 3 × 1 h: silent strictly after 3 h.
    assert!(w.silent_instruments(t + 3 * H).is_empty());
    let silent = w.silent_instruments(t + 3 * H + 1);
    assert_eq!(silent.len(), c.instruments.len() - 1);
    assert!(silent.contains(&("AB-PZ-1A".to_string(), Some(t))));
    assert!(!silent.iter().any(|(id, _)| id == "AB-PZ-2B"));
}

#[test]
fn stage_residual_of_an_installed_model() {
    let mut w = Watcher::new(&cfg());
    let (_, d) = feed(&mut w, "AB-PZ-1B", T0, 95.0, None);
    assert!(value(&d, "stage_residual")
        .unwrap_err()
        .contains("no model AB-RESP-1B fitted yet"));
    let m = StageResponse {
        intercept_m: 50.0,
        ratio: 0.5,
        lag_ms: 6 * H,
        correlation: 0.99,
        r_squared: 0.98,
        sigma_m: 0.02,
        n: 100,
    };
    w.install(Fitted {
        id: "AB-RESP-1B".into(),
        model: Ok(LiveModel::Response(m)),
    });
    // River at 92.0 m six hours before, and 94.0 m five hours before.
    feed(&mut w, "AB-RIVER", T0 + 10 * H, 92.0, None);
    feed(&mut w, "AB-RIVER", T0 + 11 * H, 94.0, None);
    let (_, d) = feed(&mut w, "AB-PZ-1B", T0 + 16 * H, 96.1, None);
    let want = 96.1 - (50.0 + 0.5 * 92.0);
    assert!((value(&d, "stage_residual").unwrap() - want).abs() < 1e-9);
    assert!((value(&d, "stage_residual_sigma").unwrap() - want / 0.02).abs() < 1e-6);
    // Halfway between the stage readings: interpolated stage 93.0 m.
    let (_, d) = feed(&mut w, "AB-PZ-1B", T0 + 16 * H + H / 2, 96.6, None);
    assert!((value(&d, "stage_residual").unwrap() - (96.6 - 96.5)).abs() < 1e-9);
    // Stage at t − lag unknown (no gauge reading near it): no value, with the reason.
    let (_, d) = feed(&mut w, "AB-PZ-1B", T0 + 40 * H, 96.0, None);
    assert!(value(&d, "stage_residual")
        .unwrap_err()
        .contains("stage of AB-RIVER"));
}

#[test]
fn hst_without_a_year_says_so() {
    let mut w = Watcher::new(&cfg());
    feed(&mut w, "TH-POOL", T0, 214.0, None);
    feed(&mut w, "TH-PZ-1", T0, 209.0, None);
    let (_, d) = feed(&mut w, "TH-PZ-1", T0 + 40 * 86_400_000, 209.0, None);
    let why = value(&d, "hst_residual").unwrap_err();
    assert!(
        why.contains("needs a year of data (40.0 days of record so far)"),
        "{why}"
    );
}

/// Batch mode: the rates come once per instrument per batch, stamped with its newest clean
/// reading, and equal the rates computed at that reading without batch mode; completeness is
/// still reported per due reading.
#[test]
fn batch_mode_rates_once_per_batch_at_the_newest_reading() {
    let c = cfg();
    let (mut plain, mut batched) = (Watcher::new(&c), Watcher::new(&c));
    batched.set_batched(true);
    let mut expected = Vec::new();
    let mut got = Vec::new();
    for batch in 0..5_i64 {
        let mut completeness = 0;
        for j in 0..50 {
            let k = batch * 50 + j;
            for id in ["AB-PZ-1A", "AB-PZ-2B"] {
                let (_, d) = feed(&mut plain, id, T0 + k * H, clean(k), Some(12.0));
                if j == 49 {
                    expected.extend(d.into_iter().filter(|r| r.quantity.starts_with("rate_")));
                }
                let (_, d) = feed(&mut batched, id, T0 + k * H, clean(k), Some(12.0));
                assert!(d.iter().all(|r| !r.quantity.starts_with("rate_")), "{d:?}");
                completeness += d
                    .iter()
                    .filter(|r| r.quantity == "completeness_24h")
                    .count();
            }
        }
        assert_eq!(completeness, 100, "one completeness per due reading");
        let rates = batched.take_rates();
        // Three windows for each of the two instruments, all at the batch's last hour.
        assert_eq!(rates.len(), 6, "{rates:?}");
        assert!(rates.iter().all(|r| r.t_ms == T0 + (batch * 50 + 49) * H));
        got.extend(rates);
        assert!(batched.take_rates().is_empty(), "taken once");
    }
    let key = |r: &DerivedRow| (r.object.clone(), r.quantity.clone(), r.t_ms);
    expected.sort_by_key(key);
    got.sort_by_key(key);
    assert_eq!(expected.len(), got.len());
    for (e, g) in expected.iter().zip(&got) {
        assert_eq!(key(e), key(g));
        assert_eq!(e.value, g.value, "{e:?} vs {g:?}");
        assert_eq!(e.reason, g.reason);
    }
    // Some rates exist once the windows have filled (not all errors).
    assert!(got.iter().any(|r| r.value.is_some()));
}
