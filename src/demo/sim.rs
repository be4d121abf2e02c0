//! Simulated loggers for the invented demo site: a flood hydrograph on the river and the
//! reservoir, heads that follow it, and the raw values each logger would send (calibrations
//! inverted from `config/`). Also a few malformed messages. All numbers here are invented.

use chrono::{DateTime, SecondsFormat, Utc};

/// Length of the scenario in simulated days.
pub const SCENARIO_DAYS: u32 = 30;

/// Water levels and heads at one simulated hour (m).
#[derive(Debug, Clone, Copy)]
pub struct Levels {
    pub river_m: f64,
    pub pool_m: f64,
    pub tail_m: f64,
    /// Levee toe: shallow (A) and deep (B) heads at the two nested pairs, standpipe head.
    pub pz1a_m: f64,
    pub pz1b_m: f64,
    pub pz2a_m: f64,
    pub pz2b_m: f64,
    pub sp3_m: f64,
    /// Dam section piezometers, crest to toe.
    pub th1_m: f64,
    pub th2_m: f64,
    pub th3_m: f64,
    pub baro_kpa: f64,
    pub temp_c: f64,
}

/// A smooth flood: 0 before day 8, rising to 1 at day 16, falling back by day 26.
fn flood(day: f64) -> f64 {
    let x = if day < 8.0 {
        0.0
    } else if day < 16.0 {
        (day - 8.0) / 8.0
    } else if day < 26.0 {
        1.0 - (day - 16.0) / 10.0
    } else {
        0.0
    };
    // Smoothstep for a hydrograph-like shape.
    x * x * (3.0 - 2.0 * x)
}

/// A few millimetres of deterministic reading noise for instrument `k` at `hour`, so the
/// simulated sensors do not read exactly the same value for days (a flatline, to the sensor
/// health checks).
fn jitter(hour: u32, k: u32) -> f64 {
    let step = (hour.wrapping_mul(7).wrapping_add(k.wrapping_mul(13))) % 11;
    0.003 * (f64::from(step) - 5.0) / 5.0
}

/// The invented scenario at `hour` since the start.
pub fn levels(hour: u32) -> Levels {
    let day = f64::from(hour) / 24.0;
    let f = flood(day);
    let lag = flood(day - 0.5);
    let river_m = 92.0 + 6.4 * f;
    let deep = 95.2 + 0.45 * 6.4 * lag;
    let pool_m = 214.0 + 6.5 * f;
    let daily = (day * std::f64::consts::TAU).sin();
    let j = |k| jitter(hour, k);
    Levels {
        river_m: river_m + j(1),
        pool_m: pool_m + j(2),
        tail_m: 199.3 + 0.6 * f + j(3),
        pz1a_m: 96.1 + 0.18 * (deep - 95.2) + j(4),
        pz1b_m: deep + j(5),
        pz2a_m: 96.0 + 0.15 * (deep - 95.2) + j(6),
        pz2b_m: deep - 0.3 + j(7),
        sp3_m: 94.8 + 0.4 * (deep - 95.2) + j(8),
        th1_m: 209.0 + 0.75 * (pool_m - 214.0) + j(9),
        th2_m: 205.0 + 0.60 * (pool_m - 214.0) + j(10),
        th3_m: 199.8 + 0.80 * (pool_m - 214.0) + j(11),
        baro_kpa: 101.0 + 0.6 * (day / 3.0).sin(),
        temp_c: 12.0 + 0.5 * daily,
    }
}

const GAMMA_W: f64 = 9.81;

/// Frequency (Hz) a linear sealed VW gauge sends for a pressure (kPa) — inverse of the
/// `AB-PZ-1A` calibration in config/levee-ash-bend.toml.
fn vw_linear_hz(p_kpa: f64, temp_c: f64, baro_kpa: f64) -> f64 {
    let (g, r0, k, t0, s0) = (0.025, 8900.0, 0.02, 15.0, 101.0);
    let digits = r0 - (p_kpa - k * (temp_c - t0) + (baro_kpa - s0)) / g;
    (digits * 1000.0).sqrt()
}

/// Frequency (Hz) for `AB-PZ-1B` (polynomial calibration), inverted.
fn vw_poly_hz(p_kpa: f64, temp_c: f64, baro_kpa: f64) -> f64 {
    let (a, b, c, k, t0, s0) = (1.2e-7, -0.0262, 233.2, 0.02, 15.0, 101.0);
    let p_cal = p_kpa - k * (temp_c - t0) + (baro_kpa - s0);
    let disc = b * b - 4.0 * a * (c - p_cal);
    let digits = (-b - disc.max(0.0).sqrt()) / (2.0 * a);
    (digits * 1000.0).sqrt()
}

fn time(t: DateTime<Utc>) -> String {
    t.to_rfc3339_opts(SecondsFormat::Secs, true)
}

/// The messages every logger publishes at simulated `hour` (time `t`), as (topic, payload).
pub fn messages(hour: u32, t: DateTime<Utc>) -> Vec<(String, Vec<u8>)> {
    let l = levels(hour);
    let ts = time(t);
    let pz = |head: f64, tip: f64| (head - tip) * GAMMA_W;
    // Levee logger: JSON with several channels per message.
    let levee = serde_json::json!({
        "time": ts,
        "readings": [
            {"channel": "river", "value": round(l.river_m - 90.0, 3)},
            {"channel": "baro", "value": round(l.baro_kpa, 3)},
            {"channel": "1", "value": round(vw_linear_hz(pz(l.pz1a_m, 95.0), l.temp_c, l.baro_kpa), 3), "temperature": round(l.temp_c, 2)},
            {"channel": "2", "value": round(vw_poly_hz(pz(l.pz1b_m, 86.0), l.temp_c, l.baro_kpa), 3), "temperature": round(l.temp_c, 2)},
            {"channel": "3", "value": round(4.0 + 16.0 * pz(l.pz2a_m, 95.2) / 200.0, 4)},
            {"channel": "4", "value": round(pz(l.pz2b_m, 86.3) / crate::domain::units::KPA_PER_PSI, 4)},
        ]
    });
    let mut out = vec![(
        "demo/AB-LOG1/json".to_string(),
        levee.to_string().into_bytes(),
    )];
    // The standpipe is read by the same logger's CSV channel.
    out.push((
        "demo/AB-LOG1/csv".to_string(),
        format!("{ts},5,{:.3}\n", 99.4 - l.sp3_m).into_bytes(),
    ));
    // Dam logger: SenML pack with base name and base time.
    let th_digits = |head: f64, tip: f64| 9100.0 - pz(head, tip) / 0.042;
    let senml = serde_json::json!([
        {"bn": "TH-", "bt": t.timestamp(), "n": "POOL", "u": "m", "v": round(l.pool_m, 3)},
        {"n": "TAIL", "u": "m", "v": round(l.tail_m - 199.0, 3)},
        {"n": "PZ-1", "v": round(th_digits(l.th1_m, 201.0), 2)},
        {"n": "PZ-2", "v": round(th_digits(l.th2_m, 200.5), 2)},
        {"n": "PZ-3", "u": "m", "v": round(l.th3_m - 197.0, 3)},
    ]);
    out.push((
        "demo/TH-LOG1/senml".to_string(),
        senml.to_string().into_bytes(),
    ));
    // Now and then, the kinds of bad input a real network produces.
    match hour % 53 {
        7 => out.push((
            "demo/AB-LOG1/json".into(),
            b"{\"time\": \"2026-01-01T00:00:00Z\", \"readings\": [".to_vec(),
        )),
        19 => out.push((
            "demo/AB-LOG1/json".into(),
            format!("{{\"time\":\"{ts}\",\"channel\":\"9\",\"value\":1.0}}").into_bytes(),
        )),
        31 => out.push((
            "demo/AB-LOG1/csv".into(),
            format!("{ts},5,NaN\n").into_bytes(),
        )),
        43 => out.push((
            "demo/AB-LOG1/json".into(),
            format!("{{\"time\":\"{ts}\",\"channel\":\"3\",\"value\":27.5}}").into_bytes(),
        )),
        _ => {}
    }
    out
}

fn round(x: f64, places: i32) -> f64 {
    let m = 10f64.powi(places);
    (x * m).round() / m
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::load_dir;
    use crate::engine::{Engine, Message};
    use std::sync::Arc;

    /// The simulated raw values, reduced by the real engine with the example configuration,
    /// give back the scenario's heads: the inversions above match the calibrations in config/.
    #[test]
    fn simulated_raw_values_reduce_to_the_scenario_heads() {
        let dir = tempfile::tempdir().unwrap();
        let cfg = Arc::new(crate::demo::example_config(dir.path()).unwrap());
        let _ = load_dir;
        let mut engine = Engine::new(cfg);
        let t = Utc::now() - chrono::Duration::days(20);
        let hour = 16 * 24;
        let l = levels(hour);
        let mut heads = std::collections::HashMap::new();
        for (topic, payload) in messages(hour, t) {
            let o = engine.process(&Message {
                topic,
                payload,
                arrival: Utc::now(),
                redelivered: false,
            });
            assert!(o.quarantined.is_empty(), "{:?}", o.quarantined);
            for r in o.readings {
                heads.insert(r.instrument.clone(), r.total_head_m);
            }
        }
        let expect = [
            ("AB-RIVER", l.river_m),
            ("AB-PZ-1A", l.pz1a_m),
            ("AB-PZ-1B", l.pz1b_m),
            ("AB-PZ-2A", l.pz2a_m),
            ("AB-PZ-2B", l.pz2b_m),
            ("AB-SP-3", l.sp3_m),
            ("TH-POOL", l.pool_m),
            ("TH-TAIL", l.tail_m),
            ("TH-PZ-1", l.th1_m),
            ("TH-PZ-2", l.th2_m),
            ("TH-PZ-3", l.th3_m),
        ];
        for (id, want) in expect {
            let got = heads
                .get(id)
                .copied()
                .flatten()
                .unwrap_or_else(|| panic!("{id} missing"));
            assert!((got - want).abs() < 0.01, "{id}: {got} vs {want}");
        }
    }
}
