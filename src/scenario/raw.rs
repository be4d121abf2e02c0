//! Raw logger values for a scenario: the value an instrument must send for the engine to reduce
//! it to a given head (or pressure), found by bisection on the real reduction
//! (`reduce`) over the instrument's physical range and rounded to what a logger sends.
//! So a scenario fits any calibration in the configuration, and a change to the reduction cannot
//! make the scenario and the engine disagree silently.

use std::collections::HashMap;

use chrono::{SecondsFormat, TimeZone, Utc};

use super::{Driver, Scenario};
use crate::config::{Config, Instrument, Kind};
use crate::reduce::{reduce, Context};

/// One reading as a logger sends it.
#[derive(Debug, Clone, PartialEq)]
pub struct RawReading {
    pub instrument: String,
    pub hour: u32,
    pub t_ms: i64,
    pub raw: f64,
    /// Thermistor temperature sent with it (vibrating-wire gauges).
    pub temperature_c: Option<f64>,
}

impl RawReading {
    /// The replay NDJSON line (`seepd replay --format ndjson`).
    pub fn ndjson(&self) -> String {
        let time = Utc
            .timestamp_millis_opt(self.t_ms)
            .single()
            .map(|t| t.to_rfc3339_opts(SecondsFormat::Secs, true))
            .unwrap_or_default();
        let mut v =
            serde_json::json!({"time": time, "instrument": self.instrument, "value": self.raw});
        if let Some(t) = self.temperature_c {
            v["temperature"] = serde_json::json!(t);
        }
        v.to_string()
    }
}

/// Decimal places a logger sends for this kind of instrument (its resolution).
pub fn decimals(i: &Instrument) -> i32 {
    match &i.kind {
        Kind::VibratingWire(_) => 3,
        Kind::Transducer(_) => 4,
        _ => 3,
    }
}

fn round(x: f64, places: i32) -> f64 {
    let m = 10f64.powi(places);
    (x * m).round() / m
}

/// The value the reduction gives for `raw`: total head (m), or pressure (kPa) for a barometer.
fn reduced(i: &Instrument, raw: f64, ctx: &Context) -> Option<f64> {
    let r = reduce(i, raw, ctx).ok()?;
    match i.kind {
        Kind::Barometer(_) => r.pressure_kpa,
        _ => r.total_head_m,
    }
}

/// The raw value (unrounded) that reduces to `target` under `ctx`, by bisection over the
/// instrument's physical range; `None` when the target lies outside what the range can give.
pub fn invert(i: &Instrument, target: f64, ctx: &Context) -> Option<f64> {
    let (mut lo, mut hi) = i.raw_range;
    let f = |x: f64| reduced(i, x, ctx).map(|v| v - target);
    let (mut flo, fhi) = (f(lo)?, f(hi)?);
    if flo.signum() == fhi.signum() && flo != 0.0 {
        return None;
    }
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        let fm = f(mid)?;
        if fm == 0.0 {
            return Some(mid);
        }
        if fm.signum() == flo.signum() {
            lo = mid;
            flo = fm;
        } else {
            hi = mid;
        }
    }
    Some(0.5 * (lo + hi))
}

/// Every reading the scenario's loggers send, in time order (instruments in driver order within
/// an hour; barometers are computed first so sealed gauges are corrected with their reading).
///
/// # Errors
/// An instrument of the scenario missing from `cfg`, or a value its range cannot express.
pub fn readings(s: &Scenario, cfg: &Config) -> Result<Vec<RawReading>, String> {
    let truth = s.truth();
    let mut last_raw: HashMap<String, f64> = HashMap::new();
    let mut out = Vec::new();
    for x in s.sensed() {
        let i = cfg
            .instruments
            .get(&x.instrument)
            .ok_or_else(|| format!("scenario instrument {} is not configured", x.instrument))?;
        let gamma = cfg.site_of(i).map_or(9.81, |site| site.gamma_w_kn_m3);
        let baro = i
            .kind
            .barometer()
            .and_then(|b| truth[x.hour as usize].values.get(b).copied());
        let is_vw = matches!(i.kind, Kind::VibratingWire(_));
        // The wire answers the true temperature; the thermistor may report something else.
        let ctx = Context {
            temperature_c: is_vw.then_some(x.true_temp_c),
            baro_kpa: baro,
            gamma_w_kn_m3: gamma,
        };
        let raw = match (x.stuck, last_raw.get(&x.instrument)) {
            (true, Some(r)) => *r,
            _ => {
                let r = invert(i, x.value, &ctx).ok_or_else(|| {
                    format!(
                        "{}: {:.3} at hour {} is outside what its range can send",
                        x.instrument, x.value, x.hour
                    )
                })?;
                round(r, decimals(i))
            }
        };
        last_raw.insert(x.instrument.clone(), raw);
        out.push(RawReading {
            instrument: x.instrument.clone(),
            hour: x.hour,
            t_ms: x.t_ms,
            raw,
            temperature_c: is_vw.then_some(round(x.reported_temp_c, 2)),
        });
    }
    Ok(out)
}

/// The scenario as replay input: one NDJSON line per reading.
///
/// # Errors
/// As [`readings`].
pub fn ndjson(s: &Scenario, cfg: &Config) -> Result<String, String> {
    let mut text = String::new();
    for r in readings(s, cfg)? {
        text.push_str(&r.ndjson());
        text.push('\n');
    }
    Ok(text)
}

/// Whether `driver` makes a head (not a barometric pressure).
pub fn is_head(driver: &Driver) -> bool {
    !matches!(driver, Driver::Barometer { .. })
}
