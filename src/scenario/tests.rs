//! The scenarios are physically possible and the raw values give back their heads.

use std::sync::Arc;

use super::*;
use crate::engine::{Engine, Message};

fn example() -> Arc<Config> {
    let dir = tempfile::tempdir().unwrap();
    Arc::new(super::example_config(dir.path()).unwrap())
}

use crate::config::Config;

#[test]
fn hydrograph_rises_crests_and_recedes_at_its_rates() {
    let h = sites::levee_river();
    assert_eq!(h.level(0.0), 94.0);
    assert_eq!(h.level(30.0), 94.0);
    assert!((h.level(34.0) - 95.0).abs() < 1e-9, "0.25 m/h");
    assert_eq!(h.crest_from_h(), 54.0);
    assert_eq!(h.level(60.0), 100.0);
    assert_eq!(h.fall_from_h(), 66.0);
    assert!((h.level(86.0) - 99.0).abs() < 1e-9, "0.05 m/h");
    assert_eq!(h.back_at_base_h(), 186.0);
    assert_eq!(h.level(239.0), 94.0);
}

#[test]
fn a_lag_follows_a_ramp_with_a_delay_of_its_time_constant() {
    let mut lag = Lag::new(3.0);
    let mut y = 0.0;
    for k in 0..100 {
        y = lag.step(0.1 * f64::from(k), 1.0);
    }
    // Steady ramp response of the sampled first-order lag: input − rate·(1 − α)/α with
    // α = 1 − e^(−Δt/τ) [derived]; it tends to rate·τ as Δt/τ → 0.
    let alpha = 1.0 - (-1.0f64 / 3.0).exp();
    let expect = 0.1 * 99.0 - 0.1 * (1.0 - alpha) / alpha;
    assert!((y - expect).abs() < 1e-6, "{y} vs {expect}");
    assert!((0.1 * (1.0 - alpha) / alpha - 0.3).abs() < 0.05);
}

#[test]
fn levee_heads_never_read_above_the_river_or_below_their_tips() {
    let cfg = example();
    let s = levee_flood(&cfg, 0);
    let truth = s.truth();
    let river = sites::levee_river();
    for (h, t) in truth.iter().enumerate() {
        let r = river.level(h as f64);
        for (id, tip) in [
            ("AB-PZ-1B", 86.0),
            ("AB-PZ-2B", 86.3),
            ("AB-PZ-1A", 95.0),
            ("AB-PZ-2A", 95.2),
            ("AB-SP-3", 88.0),
        ] {
            let v = t.values[id];
            // Above the river only when dry: a dry tip reads its own elevation (no pressure).
            assert!(
                v <= r + 1e-9 || v == tip,
                "hour {h}: {id} {v} above the river {r}"
            );
            assert!(v >= tip, "hour {h}: {id} below its tip");
        }
        // Shallow tips never read above the deep head under them.
        assert!(t.values["AB-PZ-1A"] <= t.values["AB-PZ-1B"].max(95.0) + 1e-9);
    }
    // Blanket theory at the toe: at the crest (after the lag) the deep head's rise over the
    // landside groundwater is the reach's residual-head ratio times the river's rise over it.
    let ratio = crate::derive::blanket_ratio(&cfg.objects.blankets[0]).unwrap();
    let at = truth[65].values["AB-PZ-1B"];
    let expect = 93.2 + ratio * (100.0 - 93.2);
    assert!((at - expect).abs() < 0.02, "{at} vs {expect}");
}

#[test]
fn dam_heads_stay_below_the_pool_and_follow_it_with_their_own_lags() {
    let s = dam_pool(0);
    let truth = s.truth();
    let pool = sites::dam_pool_level();
    let mut peak_h = [0usize; 3];
    let mut peak = [f64::MIN; 3];
    for (h, t) in truth.iter().enumerate() {
        for (k, id) in ["TH-PZ-1", "TH-PZ-2", "TH-PZ-3"].iter().enumerate() {
            let v = t.values[*id];
            assert!(v < pool.level(h as f64), "hour {h}: {id} above the pool");
            if v > peak[k] + 1e-9 {
                (peak[k], peak_h[k]) = (v, h);
            }
        }
    }
    assert!(
        peak_h[0] < peak_h[1] && peak_h[1] < peak_h[2],
        "longer lag, later peak: {peak_h:?}"
    );
}

#[test]
fn raw_values_reduce_to_the_sensed_heads_through_the_real_engine() {
    let cfg = example();
    let mut s = levee_flood_with(&cfg, 1_767_225_600_000, Vec::new());
    s.hours = 80;
    let sensed = s.sensed();
    let mut engine = Engine::new(Arc::new(crate::replay::replay_config(
        &cfg,
        crate::config::PayloadFormat::Json,
    )));
    let lines = raw::readings(&s, &cfg).unwrap();
    assert_eq!(lines.len(), sensed.len());
    for (line, want) in lines.iter().zip(&sensed) {
        let o = engine.process(&Message {
            topic: crate::replay::REPLAY_TOPIC.into(),
            payload: line.ndjson().into_bytes(),
            arrival: chrono::Utc::now(),
            redelivered: false,
        });
        assert!(o.quarantined.is_empty(), "{:?}", o.quarantined);
        let r = &o.readings[0];
        let got = if line.instrument == "AB-BARO" {
            r.pressure_kpa
        } else {
            r.total_head_m
        }
        .unwrap();
        assert!(
            (got - want.value).abs() < 0.005,
            "{} hour {}: {got} vs {}",
            line.instrument,
            line.hour,
            want.value
        );
    }
}

#[test]
fn faults_happen_where_the_scenario_says() {
    let cfg = example();
    let s = levee_flood(&cfg, 0);
    let readings = raw::readings(&s, &cfg).unwrap();
    let of = |id: &str| -> Vec<&raw::RawReading> {
        readings.iter().filter(|r| r.instrument == id).collect()
    };
    // Dropout: ten hours without AB-PZ-1A.
    let a = of("AB-PZ-1A");
    assert_eq!(a.len(), 240 - 10);
    assert!(!a.iter().any(|r| (200..210).contains(&r.hour)));
    // Stuck: identical raw values from hour 99 to 139.
    let stuck: Vec<f64> = of("AB-PZ-2A")
        .iter()
        .filter(|r| (99..140).contains(&r.hour))
        .map(|r| r.raw)
        .collect();
    assert!(stuck.iter().all(|v| *v == stuck[0]), "{stuck:?}");
    // Thermistor: −99 °C reported.
    assert!(a
        .iter()
        .filter(|r| (150..156).contains(&r.hour))
        .all(|r| r.temperature_c == Some(-99.0)));
}
