//! Physically consistent flood scenarios, shared by `seepd demo` and the scenario tests: a
//! river or reservoir that follows a flood hydrograph (rise, crest, recession), piezometer heads
//! that follow the water driving them with their own lag and attenuation (blanket theory at a
//! levee toe, a fixed response ratio inside a dam), sensor noise, and sensor faults injected on
//! purpose at known hours (spike, stuck value, drift, dropout, thermistor failure). The raw value
//! each logger would send is found by inverting the real reduction of the configured instrument
//! (`raw`), so a scenario is consistent with whatever calibration the configuration holds.
//!
//! Owns the water and head histories of a scenario and its fault list. Pure: no clock, no I/O;
//! times are hours from the scenario start handed in by the caller. Must not know MQTT or the
//! store. All numbers are invented.

mod hydro;
pub mod raw;
mod sites;
#[cfg(test)]
mod tests;

use std::collections::BTreeMap;

pub use hydro::{Hydrograph, Lag};
pub use sites::{dam_pool, levee_flood, levee_flood_with};

/// The example configuration (`config/`), compiled in so the demo and the scenario tests run
/// from anywhere.
pub const EXAMPLE_CONFIG: [(&str, &str); 3] = [
    ("seepd.toml", include_str!("../../config/seepd.toml")),
    (
        "levee-ash-bend.toml",
        include_str!("../../config/levee-ash-bend.toml"),
    ),
    ("dam-tarn.toml", include_str!("../../config/dam-tarn.toml")),
];

/// Write the example configuration into `dir` and load it.
///
/// # Errors
/// I/O errors, or problems in the example configuration (a bug).
pub fn example_config(dir: &std::path::Path) -> anyhow::Result<crate::config::Config> {
    for (name, text) in EXAMPLE_CONFIG {
        std::fs::write(dir.join(name), text)?;
    }
    crate::config::load_dir(dir).map_err(|p| anyhow::anyhow!("example configuration: {p}"))
}

/// How one instrument's head (or pressure, for a barometer) is made, hour by hour.
#[derive(Debug, Clone, PartialEq)]
pub enum Driver {
    /// A water body following a hydrograph (stage gauges), m.
    Water(Hydrograph),
    /// A piezometer driven by another series (`source`): `head = far + ratio·(lagged − far)`,
    /// where `lagged` is the source passed through a first-order lag of `lag_h` hours and `far`
    /// the level the head falls back to when the source is at it (the landside groundwater,
    /// the tail water). A tip above the resulting water reads its own elevation (dry, zero
    /// pressure).
    Follows {
        source: String,
        far_m: f64,
        ratio: f64,
        lag_h: f64,
        tip_m: f64,
    },
    /// A tip inside a top blanket of upward flow: the head varies linearly from the head at the
    /// blanket base (`base`, another instrument) to `top_m` at the blanket surface; `fraction`
    /// is the tip's depth below the surface over the blanket thickness. Without upward flow
    /// (base head below the surface) the water in the blanket stands at the base head.
    InBlanket {
        base: String,
        top_m: f64,
        fraction: f64,
        tip_m: f64,
    },
    /// Barometric pressure, kPa: a slow swing around `mean_kpa`.
    Barometer { mean_kpa: f64, swing_kpa: f64 },
}

/// A sensor fault injected at known hours `[from_h, to_h)`.
#[derive(Debug, Clone, PartialEq)]
pub struct Fault {
    pub instrument: String,
    pub kind: FaultKind,
    pub from_h: u32,
    pub to_h: u32,
}

/// What goes wrong.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FaultKind {
    /// The head reads `offset_m` off (one reading when `to_h = from_h + 1`).
    Spike { offset_m: f64 },
    /// The logger sends the same raw value as at `from_h − 1` (a stuck sensor).
    Stuck,
    /// The head drifts away at this rate from `from_h` on.
    Drift { m_per_day: f64 },
    /// No reading at all.
    Dropout,
    /// The thermistor reports this temperature (the vibrating wire itself is unaffected).
    Thermistor { temp_c: f64 },
}

impl FaultKind {
    /// Short name for tables and messages.
    pub fn name(&self) -> &'static str {
        match self {
            FaultKind::Spike { .. } => "spike",
            FaultKind::Stuck => "stuck",
            FaultKind::Drift { .. } => "drift",
            FaultKind::Dropout => "dropout",
            FaultKind::Thermistor { .. } => "thermistor",
        }
    }
}

/// A whole scenario: instruments with their drivers, the hourly readings from `start`, noise.
#[derive(Debug, Clone)]
pub struct Scenario {
    pub name: &'static str,
    /// Reading times: `start_ms + h·3600 s` for h in 0..hours.
    pub start_ms: i64,
    pub hours: u32,
    /// Instrument id → driver, in the order the series are computed (sources first).
    pub drivers: Vec<(String, Driver)>,
    pub faults: Vec<Fault>,
    /// Standard deviation of the reading noise on heads, m (0: none).
    pub noise_m: f64,
    /// Ground temperature around the sensors, °C (a small daily swing is added).
    pub ground_temp_c: f64,
    pub seed: u64,
}

/// The true state at one hour: head (or kPa) per instrument, and the ground temperature.
#[derive(Debug, Clone, PartialEq)]
pub struct Truth {
    pub values: BTreeMap<String, f64>,
    pub temp_c: f64,
}

/// What a logger reports for one instrument at one hour (before the raw inversion).
#[derive(Debug, Clone, PartialEq)]
pub struct Sensed {
    pub instrument: String,
    pub hour: u32,
    pub t_ms: i64,
    /// The head (or kPa) the sensor responds to: truth + noise + fault.
    pub value: f64,
    /// The temperature the thermistor reports, and the one the sensor really has.
    pub reported_temp_c: f64,
    pub true_temp_c: f64,
    /// The raw value is to be frozen at the previous hour's (a stuck sensor).
    pub stuck: bool,
}

/// A small deterministic generator (xorshift64*), so scenarios repeat exactly.
#[derive(Debug, Clone)]
pub struct Noise(u64);

impl Noise {
    pub fn new(seed: u64) -> Noise {
        Noise(seed.max(1))
    }
    /// Uniform in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Roughly normal, mean 0, standard deviation 1 (sum of 12 uniforms).
    pub fn normal(&mut self) -> f64 {
        (0..12).map(|_| self.uniform()).sum::<f64>() - 6.0
    }
}

impl Scenario {
    /// Reading time of hour `h`.
    pub fn t_ms(&self, h: u32) -> i64 {
        self.start_ms + i64::from(h) * 3_600_000
    }

    /// The true (noise- and fault-free) state at every hour.
    pub fn truth(&self) -> Vec<Truth> {
        let mut series: BTreeMap<String, Vec<f64>> = BTreeMap::new();
        for (id, d) in &self.drivers {
            let v: Vec<f64> = match d {
                Driver::Water(h) => (0..self.hours).map(|k| h.level(f64::from(k))).collect(),
                Driver::Follows {
                    source,
                    far_m,
                    ratio,
                    lag_h,
                    tip_m,
                } => {
                    let src = series.get(source).cloned().unwrap_or_default();
                    let mut lag = Lag::new(*lag_h);
                    src.iter()
                        .map(|s| {
                            let water = far_m + ratio * (lag.step(*s, 1.0) - far_m);
                            water.max(*tip_m)
                        })
                        .collect()
                }
                Driver::InBlanket {
                    base,
                    top_m,
                    fraction,
                    tip_m,
                } => series
                    .get(base)
                    .cloned()
                    .unwrap_or_default()
                    .iter()
                    .map(|b| {
                        let water = if *b > *top_m {
                            top_m + (b - top_m) * fraction
                        } else {
                            *b
                        };
                        water.max(*tip_m)
                    })
                    .collect(),
                Driver::Barometer {
                    mean_kpa,
                    swing_kpa,
                } => (0..self.hours)
                    .map(|k| mean_kpa + swing_kpa * (f64::from(k) / 72.0).sin())
                    .collect(),
            };
            series.insert(id.clone(), v);
        }
        (0..self.hours as usize)
            .map(|k| Truth {
                values: series.iter().map(|(id, v)| (id.clone(), v[k])).collect(),
                temp_c: self.temp_at(k as u32),
            })
            .collect()
    }

    fn temp_at(&self, h: u32) -> f64 {
        self.ground_temp_c + 0.3 * (f64::from(h) / 24.0 * std::f64::consts::TAU).sin()
    }

    /// The fault on `instrument` at hour `h`, if any.
    pub fn fault_at(&self, instrument: &str, h: u32) -> Option<&Fault> {
        self.faults
            .iter()
            .find(|f| f.instrument == instrument && (f.from_h..f.to_h).contains(&h))
    }

    /// What every sensor reports, hour by hour (dropouts left out), noise and faults applied.
    pub fn sensed(&self) -> Vec<Sensed> {
        let truth = self.truth();
        let mut noise = Noise::new(self.seed);
        let mut out = Vec::new();
        for (h, t) in truth.iter().enumerate() {
            let h = h as u32;
            for (id, d) in &self.drivers {
                let n = noise.normal() * self.noise_m;
                let mut value = t.values[id];
                if !matches!(d, Driver::Barometer { .. }) {
                    value += n;
                }
                let mut reported = t.temp_c;
                let mut stuck = false;
                match self.fault_at(id, h).map(|f| (f.kind, f.from_h)) {
                    Some((FaultKind::Dropout, _)) => continue,
                    Some((FaultKind::Spike { offset_m }, _)) => value += offset_m,
                    Some((FaultKind::Drift { m_per_day }, from)) => {
                        value += m_per_day * f64::from(h - from) / 24.0;
                    }
                    Some((FaultKind::Thermistor { temp_c }, _)) => reported = temp_c,
                    Some((FaultKind::Stuck, _)) => stuck = true,
                    None => {}
                }
                out.push(Sensed {
                    instrument: id.clone(),
                    hour: h,
                    t_ms: self.t_ms(h),
                    value,
                    reported_temp_c: reported,
                    true_temp_c: t.temp_c,
                    stuck,
                });
            }
        }
        out
    }
}
