//! Data reduction: a raw logger value to engineering value, pore pressure, pressure head and
//! total head (piezometric elevation), or water-surface elevation for stage gauges.
//!
//! Pure: the caller supplies the thermistor temperature and the barometric pressure that goes
//! with the reading. Formulas and sources: README "Sources of formulas"; Dunnicliff,
//! *Geotechnical Instrumentation for Field Measurements* (1993), for vibrating-wire reduction.

use crate::config::{
    BaroCorrection, Instrument, Kind, StageMode, TransducerOutput, VibratingWire, VwCalibration,
    VwReading, VwSign,
};
use crate::domain::units::{length_to_m, pressure_to_kpa};
use crate::quality::{Flags, Reason, Reject};

/// What a reading reduces to. SI: kPa and m.
#[derive(Debug, Clone, PartialEq)]
pub struct Reduction {
    /// The first reduced value in the instrument's own terms: digits (vibrating wire), kPa
    /// (transducer, barometer), depth to water in m (standpipe), water elevation in m (stage).
    pub engineering_value: f64,
    /// Unit of `engineering_value`.
    pub engineering_unit: &'static str,
    /// Pore pressure (piezometers, standpipes with a tip) or barometric pressure (barometers).
    pub pressure_kpa: Option<f64>,
    /// Pore pressure expressed as a height of water.
    pub pressure_head_m: Option<f64>,
    /// Total head = piezometric elevation; for a stage gauge, the water-surface elevation.
    pub total_head_m: Option<f64>,
    /// Flags raised by the reduction (missing temperature or barometer).
    pub flags: Flags,
}

/// The inputs that accompany a raw value.
#[derive(Debug, Clone, Copy, Default)]
pub struct Context {
    /// Thermistor temperature with the reading, °C.
    pub temperature_c: Option<f64>,
    /// Barometric pressure at the time of the reading, kPa (from the referenced barometer).
    pub baro_kpa: Option<f64>,
    /// Unit weight of water, kN/m³ (site setting).
    pub gamma_w_kn_m3: f64,
}

/// Vibrating-wire "digits" (Hz²/1000) from a frequency in Hz.
pub fn digits_from_frequency(f_hz: f64) -> f64 {
    f_hz * f_hz / 1000.0
}

/// Vibrating-wire digits from a period in seconds: `(1/T)²·10⁻³`.
pub fn digits_from_period(t_s: f64) -> f64 {
    digits_from_frequency(1.0 / t_s)
}

/// Linear vibrating-wire reduction with thermal correction, in the calibration unit:
/// `P = G·(R0 − R1) + K·(T1 − T0)` (or `G·(R1 − R0)` for the other sign convention).
pub fn vw_linear(g: f64, r0: f64, r1: f64, sign: VwSign, k: f64, t0: f64, t1: f64) -> f64 {
    let span = match sign {
        VwSign::ZeroMinusCurrent => r0 - r1,
        VwSign::CurrentMinusZero => r1 - r0,
    };
    g * span + k * (t1 - t0)
}

/// Polynomial vibrating-wire reduction `P = A·R1² + B·R1 + C`, in the calibration unit.
pub fn vw_polynomial(a: f64, b: f64, c: f64, r1: f64) -> f64 {
    a * r1 * r1 + b * r1 + c
}

/// Pressure head (m) from pressure (kPa): `p/γw`.
pub fn pressure_head_m(pressure_kpa: f64, gamma_w_kn_m3: f64) -> f64 {
    pressure_kpa / gamma_w_kn_m3
}

/// Total head (piezometric elevation, m): tip elevation + pressure head.
pub fn total_head_m(tip_elevation_m: f64, pressure_head_m: f64) -> f64 {
    tip_elevation_m + pressure_head_m
}

/// Standpipe total head (m): reference-point elevation − depth to water.
pub fn standpipe_head_m(reference_elevation_m: f64, depth_to_water_m: f64) -> f64 {
    reference_elevation_m - depth_to_water_m
}

/// Reduce one raw value of `instrument`.
///
/// # Errors
/// `Reason::Unreducible` when the value cannot be turned into a finite result (a zero period,
/// a degenerate current span).
pub fn reduce(instrument: &Instrument, raw: f64, ctx: &Context) -> Result<Reduction, Reject> {
    let gw = ctx.gamma_w_kn_m3;
    let mut flags = Flags::empty();
    let r = match &instrument.kind {
        Kind::VibratingWire(vw) => {
            let digits = vw_digits(vw, raw);
            let mut p = vw_pressure_kpa(vw, digits, ctx, gw, &mut flags);
            p -= baro_offset_kpa(&vw.baro, ctx, &mut flags);
            piezometer(instrument, digits, "digits", p, gw, flags)
        }
        Kind::Transducer(t) => {
            let (p_raw, unit) = match &t.output {
                TransducerOutput::Pressure(u) => (raw, *u),
                TransducerOutput::Current {
                    ma_low,
                    ma_high,
                    p_low,
                    p_high,
                    unit,
                } => {
                    let frac = (raw - ma_low) / (ma_high - ma_low);
                    (p_low + frac * (p_high - p_low), *unit)
                }
            };
            let mut p = pressure_to_kpa(p_raw, unit, gw);
            let eng = p;
            p -= baro_offset_kpa(&t.baro, ctx, &mut flags);
            piezometer(instrument, eng, "kPa", p, gw, flags)
        }
        Kind::Standpipe(s) => {
            let depth_m = length_to_m(raw, s.depth_unit);
            let head = standpipe_head_m(s.reference_elevation_m, depth_m);
            let ph = instrument.tip_elevation_m.map(|tip| head - tip);
            Reduction {
                engineering_value: depth_m,
                engineering_unit: "m",
                pressure_kpa: ph.map(|h| h * gw),
                pressure_head_m: ph,
                total_head_m: Some(head),
                flags,
            }
        }
        Kind::StageGauge(g) => {
            let elev = match &g.mode {
                StageMode::Elevation(u) => length_to_m(raw, *u),
                StageMode::DepthAboveDatum { datum_m, unit } => datum_m + length_to_m(raw, *unit),
            };
            Reduction {
                engineering_value: elev,
                engineering_unit: "m",
                pressure_kpa: None,
                pressure_head_m: None,
                total_head_m: Some(elev),
                flags,
            }
        }
        Kind::Barometer(b) => {
            let p = pressure_to_kpa(raw, b.unit, gw);
            Reduction {
                engineering_value: p,
                engineering_unit: "kPa",
                pressure_kpa: Some(p),
                pressure_head_m: None,
                total_head_m: None,
                flags,
            }
        }
    };
    let finite = r.engineering_value.is_finite()
        && [r.pressure_kpa, r.pressure_head_m, r.total_head_m]
            .iter()
            .all(|v| v.is_none_or(f64::is_finite));
    if finite {
        Ok(r)
    } else {
        Err(Reject::new(
            Reason::Unreducible,
            format!(
                "instrument {}: raw value {raw} gives a non-finite result",
                instrument.id
            ),
        ))
    }
}

/// Raw logger value → digits.
fn vw_digits(vw: &VibratingWire, raw: f64) -> f64 {
    match vw.reading {
        VwReading::FrequencyHz => digits_from_frequency(raw),
        VwReading::PeriodS => digits_from_period(raw),
        VwReading::PeriodUs => digits_from_period(raw * 1e-6),
        VwReading::Digits => raw,
    }
}

/// Calibration plus thermal correction, converted to kPa.
fn vw_pressure_kpa(
    vw: &VibratingWire,
    digits: f64,
    ctx: &Context,
    gw: f64,
    flags: &mut Flags,
) -> f64 {
    let (k, t0, t1) = match (vw.thermal_factor, ctx.temperature_c) {
        (0.0, _) => (0.0, 0.0, 0.0),
        (k, Some(t1)) => (k, vw.zero_temperature_c, t1),
        (_, None) => {
            flags.insert(Flags::TEMP_MISSING);
            (0.0, 0.0, 0.0)
        }
    };
    let p = match &vw.calibration {
        VwCalibration::Linear {
            gauge_factor,
            zero_reading_digits,
            sign,
        } => vw_linear(
            *gauge_factor,
            *zero_reading_digits,
            digits,
            *sign,
            k,
            t0,
            t1,
        ),
        VwCalibration::Polynomial { a, b, c } => vw_polynomial(*a, *b, *c, digits) + k * (t1 - t0),
    };
    pressure_to_kpa(p, vw.calibration_unit, gw)
}

/// What to subtract for barometric compensation (kPa): `S1 − S0` for sealed gauges, `S1` for
/// absolute sensors, 0 for vented. Flags `BARO_MISSING` (and subtracts nothing) when the
/// barometer reading is absent.
fn baro_offset_kpa(baro: &BaroCorrection, ctx: &Context, flags: &mut Flags) -> f64 {
    match (baro, ctx.baro_kpa) {
        (BaroCorrection::None, _) => 0.0,
        (BaroCorrection::Sealed { zero_kpa, .. }, Some(s1)) => s1 - zero_kpa,
        (BaroCorrection::Absolute { .. }, Some(s1)) => s1,
        (_, None) => {
            flags.insert(Flags::BARO_MISSING);
            0.0
        }
    }
}

/// Pressure → pressure head → total head for a piezometer.
fn piezometer(
    instrument: &Instrument,
    engineering_value: f64,
    engineering_unit: &'static str,
    pressure_kpa: f64,
    gw: f64,
    flags: Flags,
) -> Reduction {
    let ph = pressure_head_m(pressure_kpa, gw);
    Reduction {
        engineering_value,
        engineering_unit,
        pressure_kpa: Some(pressure_kpa),
        pressure_head_m: Some(ph),
        total_head_m: instrument.tip_elevation_m.map(|tip| total_head_m(tip, ph)),
        flags,
    }
}

#[cfg(test)]
mod tests;
