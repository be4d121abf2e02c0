//! The two scenarios of the example configuration (`config/`): a ten-day levee flood at Ash
//! Bend and a twenty-day pool rise and drawdown at Tarn Hollow dam, each with sensor faults at
//! known hours. Invented numbers, chosen so that the heads stay physically possible: no tip reads
//! above the water that drives it, and the toe head at the levee follows blanket theory for the
//! configured reach with a lag.

use super::{Driver, Fault, FaultKind, Hydrograph, Scenario};
use crate::config::Config;

/// Landside groundwater at Ash Bend, m: the level the toe heads fall back to.
const ASH_BEND_GROUNDWATER_M: f64 = 93.2;

fn fault(instrument: &str, kind: FaultKind, from_h: u32, to_h: u32) -> Fault {
    Fault {
        instrument: instrument.into(),
        kind,
        from_h,
        to_h,
    }
}

/// The river of the levee flood: flat at 94.0 m for 30 h, rising 0.25 m/h to a 100.0 m crest
/// held 12 h, receding 0.05 m/h.
pub fn levee_river() -> Hydrograph {
    Hydrograph {
        base_m: 94.0,
        rise_from_h: 30.0,
        rise_m_per_h: 0.25,
        crest_m: 100.0,
        crest_h: 12.0,
        fall_m_per_h: 0.05,
    }
}

/// Ten days, hourly, at Ash Bend, with the faults of [`levee_faults`].
pub fn levee_flood(cfg: &Config, start_ms: i64) -> Scenario {
    levee_flood_with(cfg, start_ms, levee_faults())
}

/// The levee flood's injected faults (hours from the start).
pub fn levee_faults() -> Vec<Fault> {
    vec![
        // A 1.5 m spike on the toe piezometer near the crest, where it matters most.
        fault("AB-PZ-1B", FaultKind::Spike { offset_m: 1.5 }, 62, 63),
        // The second pair's shallow transducer sticks for 40 h during the recession.
        fault("AB-PZ-2A", FaultKind::Stuck, 100, 140),
        // The shallow vibrating-wire gauge's thermistor fails open for 6 h.
        fault(
            "AB-PZ-1A",
            FaultKind::Thermistor { temp_c: -99.0 },
            150,
            156,
        ),
        // The same gauge's logger channel drops out for 10 h.
        fault("AB-PZ-1A", FaultKind::Dropout, 200, 210),
        // A downward spike on the river gauge on the rise.
        fault("AB-RIVER", FaultKind::Spike { offset_m: -2.0 }, 40, 41),
    ]
}

/// The levee flood with the given faults (none: a clean flood).
pub fn levee_flood_with(cfg: &Config, start_ms: i64, faults: Vec<Fault>) -> Scenario {
    let ratio = cfg
        .objects
        .blankets
        .iter()
        .find(|b| b.id == "AB-R2")
        .and_then(crate::derive::blanket_ratio)
        .unwrap_or(0.6);
    let g = ASH_BEND_GROUNDWATER_M;
    let follows = |source: &str, ratio: f64, lag_h: f64, tip_m: f64| Driver::Follows {
        source: source.into(),
        far_m: g,
        ratio,
        lag_h,
        tip_m,
    };
    Scenario {
        name: "levee flood",
        start_ms,
        hours: 240,
        drivers: vec![
            (
                "AB-BARO".into(),
                Driver::Barometer {
                    mean_kpa: 101.0,
                    swing_kpa: 0.6,
                },
            ),
            ("AB-RIVER".into(), Driver::Water(levee_river())),
            // Deep tips in the pervious foundation under the toe: blanket theory, lagged.
            ("AB-PZ-1B".into(), follows("AB-RIVER", ratio, 3.0, 86.0)),
            (
                "AB-PZ-2B".into(),
                follows("AB-RIVER", 0.9 * ratio, 4.0, 86.3),
            ),
            // Shallow tips inside the 2.5 m top blanket (surface 96.0 m).
            (
                "AB-PZ-1A".into(),
                Driver::InBlanket {
                    base: "AB-PZ-1B".into(),
                    top_m: 96.0,
                    fraction: (96.0 - 95.0) / 2.5,
                    tip_m: 95.0,
                },
            ),
            (
                "AB-PZ-2A".into(),
                Driver::InBlanket {
                    base: "AB-PZ-2B".into(),
                    top_m: 96.0,
                    fraction: (96.0 - 95.2) / 2.5,
                    tip_m: 95.2,
                },
            ),
            // The standpipe 80 m landward answers less and later.
            (
                "AB-SP-3".into(),
                follows("AB-RIVER", 0.5 * ratio, 8.0, 88.0),
            ),
        ],
        faults,
        noise_m: 0.003,
        ground_temp_c: 12.0,
        seed: 17,
    }
}

/// The reservoir of the dam scenario: 214.0 m for a day, rising 0.06 m/h to 221.0 m, held two
/// days, drawn down 0.05 m/h.
pub fn dam_pool_level() -> Hydrograph {
    Hydrograph {
        base_m: 214.0,
        rise_from_h: 24.0,
        rise_m_per_h: 0.06,
        crest_m: 221.0,
        crest_h: 48.0,
        fall_m_per_h: 0.05,
    }
}

/// The dam scenario's injected faults.
pub fn dam_faults() -> Vec<Fault> {
    vec![
        fault("TH-PZ-3", FaultKind::Spike { offset_m: 2.0 }, 160, 161),
        fault("TH-PZ-2", FaultKind::Stuck, 250, 290),
        fault("TH-PZ-1", FaultKind::Dropout, 350, 356),
        fault("TH-PZ-1", FaultKind::Thermistor { temp_c: 85.0 }, 400, 404),
    ]
}

/// Twenty days, hourly, at Tarn Hollow: pool rise and drawdown, piezometers following the pool
/// with their own lags over the tail water, with the faults of [`dam_faults`].
pub fn dam_pool(start_ms: i64) -> Scenario {
    let tail = Hydrograph {
        base_m: 199.4,
        rise_from_h: 24.0,
        rise_m_per_h: 0.002,
        crest_m: 199.6,
        crest_h: 48.0,
        fall_m_per_h: 0.002,
    };
    let follows = |far_m: f64, ratio: f64, lag_h: f64, tip_m: f64| Driver::Follows {
        source: "TH-POOL".into(),
        far_m,
        ratio,
        lag_h,
        tip_m,
    };
    // Each head is `far + ratio·(pool − far)` at steady state; `far` is chosen so the base heads
    // are 209.0, 205.0 and 199.9 m with the pool at 214.0 m.
    let far = |base: f64, ratio: f64| (base - ratio * 214.0) / (1.0 - ratio);
    Scenario {
        name: "dam pool rise and drawdown",
        start_ms,
        hours: 480,
        drivers: vec![
            ("TH-POOL".into(), Driver::Water(dam_pool_level())),
            ("TH-TAIL".into(), Driver::Water(tail)),
            (
                "TH-PZ-1".into(),
                follows(far(209.0, 0.75), 0.75, 12.0, 201.0),
            ),
            ("TH-PZ-2".into(), follows(far(205.0, 0.6), 0.6, 24.0, 200.5)),
            ("TH-PZ-3".into(), follows(far(199.9, 0.4), 0.4, 36.0, 197.0)),
        ],
        faults: dam_faults(),
        noise_m: 0.003,
        ground_temp_c: 9.0,
        seed: 29,
    }
}
