//! Reading an instrument's kind sub-table (`[instrument.vibrating_wire]` and friends) into the
//! reduction settings of `model::Kind`.
//!
//! Owns the kind names, the keys of the five kind sub-tables (one raw struct each, read by
//! `de::table`) and the checks between their keys. Cross-instrument checks (does the barometer
//! exist?) belong to `load`.

use std::ops::Range;

use serde::de::value::StrDeserializer;
use serde::Deserialize;

use super::de::{self, Num, Pair, Text};
use super::model::{
    BaroCorrection, Barometer, Kind, LengthUnit, PressureUnit, StageGauge, StageMode, Standpipe,
    Transducer, TransducerOutput, VibratingWire, VwCalibration, VwReading, VwSign, WaterBody,
};
use super::problem::Cx;
use super::reader::Tbl;

/// An instrument kind as written in `kind = "..."`; its name is also its sub-table's.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum KindName {
    VibratingWire,
    PressureTransducer,
    Standpipe,
    StageGauge,
    Barometer,
}

impl KindName {
    /// The name as written (also its sub-table's).
    pub fn name(self) -> &'static str {
        de::variants::<KindName>()[self as usize]
    }

    /// A piezometer kind (needs a tip elevation; may be barometrically corrected).
    pub fn piezometer(self) -> bool {
        matches!(self, KindName::VibratingWire | KindName::PressureTransducer)
    }
}

/// Metres per foot, exactly.
pub(crate) const M_PER_FT: f64 = 0.3048;

/// The kind settings read, plus where a barometer reference was written (for `load`).
pub(crate) struct KindRead {
    pub kind: Option<Kind>,
    /// The `barometer = "..."` reference as written (even if other keys had problems), with
    /// the span of its value.
    pub barometer: Option<(String, Option<Range<usize>>)>,
}

/// Read the sub-table of `kind`; `m_per_unit` converts the site's length unit to metres.
pub(crate) fn read(cx: &mut Cx<'_>, kind: KindName, t: &Tbl<'_>, m_per_unit: f64) -> KindRead {
    let before = cx.problems.len();
    let reference = kind
        .piezometer()
        .then(|| t.peek_str("barometer"))
        .flatten()
        .map(|b| (b.to_string(), t.value_span("barometer")));
    let kind = match kind {
        KindName::VibratingWire => vibrating_wire(cx, t).map(Kind::VibratingWire),
        KindName::PressureTransducer => transducer(cx, t).map(Kind::Transducer),
        KindName::Standpipe => standpipe(cx, t, m_per_unit).map(Kind::Standpipe),
        KindName::StageGauge => stage_gauge(cx, t, m_per_unit).map(Kind::StageGauge),
        KindName::Barometer => barometer(cx, t).map(Kind::Barometer),
    };
    KindRead {
        kind: kind.filter(|_| cx.problems.len() == before),
        barometer: reference,
    }
}

/// `barometric_correction` as written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
enum Mode {
    None,
    Sealed,
    Absolute,
}

/// The barometric correction's keys, shared by both pressure-sensor kinds.
fn baro(
    cx: &mut Cx<'_>,
    t: &Tbl<'_>,
    (mode, barometer, zero): (Option<Mode>, Option<Text>, Option<Num>),
) -> Option<BaroCorrection> {
    if mode.is_none() && t.has("barometric_correction") {
        return None;
    }
    let mode = mode.unwrap_or(Mode::None);
    let name = de::variants::<Mode>()[mode as usize];
    if mode == Mode::None && t.has("barometer") {
        t.problem_at(
            cx,
            "barometer",
            "key \"barometer\" is set but barometric_correction is \"none\"; expected \
             barometric_correction = \"sealed\" or \"absolute\", or no barometer",
        );
    }
    if mode != Mode::Sealed && t.has("zero_barometric_kpa") {
        t.problem_at(
            cx,
            "zero_barometric_kpa",
            format!(
                "key \"zero_barometric_kpa\" is set but barometric_correction is \"{name}\"; \
                 expected it only with \"sealed\""
            ),
        );
    }
    let why = format!(" (required by barometric_correction = \"{name}\")");
    if mode != Mode::None && !t.has("barometer") {
        t.missing(cx, "barometer", &why);
    }
    if mode == Mode::Sealed && !t.has("zero_barometric_kpa") {
        t.missing(cx, "zero_barometric_kpa", &why);
    }
    let barometer = barometer.map(|b| b.0);
    match mode {
        Mode::None => Some(BaroCorrection::None),
        Mode::Sealed => Some(BaroCorrection::Sealed {
            barometer: barometer?,
            zero_kpa: zero?.0,
        }),
        Mode::Absolute => Some(BaroCorrection::Absolute {
            barometer: barometer?,
        }),
    }
}

/// `calibration` of a vibrating-wire piezometer as written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
enum Form {
    Linear,
    Polynomial,
}

/// `[instrument.vibrating_wire]` as written.
#[derive(Deserialize, Default)]
struct RawVw {
    reading: Option<VwReading>,
    calibration: Option<Form>,
    gauge_factor: Option<Num>,
    zero_reading: Option<Num>,
    sign: Option<VwSign>,
    poly_a: Option<Num>,
    poly_b: Option<Num>,
    poly_c: Option<Num>,
    calibration_unit: Option<PressureUnit>,
    thermal_factor: Option<Num>,
    zero_temperature_c: Option<Num>,
    barometric_correction: Option<Mode>,
    barometer: Option<Text>,
    zero_barometric_kpa: Option<Num>,
}

const LINEAR_KEYS: [&str; 3] = ["gauge_factor", "zero_reading", "sign"];
const POLY_KEYS: [&str; 3] = ["poly_a", "poly_b", "poly_c"];

fn vibrating_wire(cx: &mut Cx<'_>, t: &Tbl<'_>) -> Option<VibratingWire> {
    let r: RawVw = de::table(cx, t).unwrap_or_default();
    let reading = t.need(cx, "reading", r.reading);
    let form = t.need(cx, "calibration", r.calibration);
    let (used, unused, name) = match form {
        Some(Form::Linear) => (LINEAR_KEYS, POLY_KEYS, "linear"),
        Some(Form::Polynomial) => (POLY_KEYS, LINEAR_KEYS, "polynomial"),
        None => ([""; 3], [""; 3], ""),
    };
    for key in used.into_iter().filter(|k| !k.is_empty() && !t.has(k)) {
        t.missing(cx, key, &format!(" (required by calibration = \"{name}\")"));
    }
    for key in unused.into_iter().filter(|k| !k.is_empty() && t.has(k)) {
        let message = format!(
            "key \"{key}\" does not apply to calibration = \"{name}\"; remove it or change calibration"
        );
        t.problem_at(cx, key, message);
    }
    let calibration = form.and_then(|form| match form {
        Form::Linear => Some(VwCalibration::Linear {
            gauge_factor: r.gauge_factor?.0,
            zero_reading_digits: r.zero_reading?.0,
            sign: r.sign?,
        }),
        Form::Polynomial => Some(VwCalibration::Polynomial {
            a: r.poly_a?.0,
            b: r.poly_b?.0,
            c: r.poly_c?.0,
        }),
    });
    let calibration_unit = t.need(cx, "calibration_unit", r.calibration_unit);
    let baro = baro(
        cx,
        t,
        (r.barometric_correction, r.barometer, r.zero_barometric_kpa),
    );
    Some(VibratingWire {
        reading: reading?,
        calibration: calibration?,
        calibration_unit: calibration_unit?,
        thermal_factor: r.thermal_factor.map_or(0.0, |k| k.0),
        zero_temperature_c: r.zero_temperature_c.map_or(20.0, |z| z.0),
        baro: baro?,
    })
}

/// `[instrument.pressure_transducer]` as written (`output` is a pressure unit or "mA").
#[derive(Deserialize, Default)]
struct RawTransducer {
    output: Option<String>,
    current_range_ma: Option<Pair>,
    pressure_span: Option<Pair>,
    span_unit: Option<PressureUnit>,
    barometric_correction: Option<Mode>,
    barometer: Option<Text>,
    zero_barometric_kpa: Option<Num>,
}

fn transducer(cx: &mut Cx<'_>, t: &Tbl<'_>) -> Option<Transducer> {
    let r: RawTransducer = de::table(cx, t).unwrap_or_default();
    let output = t.need(cx, "output", r.output).and_then(|o| {
        let unit = PressureUnit::deserialize(StrDeserializer::<serde::de::value::Error>::new(&o));
        match (o.as_str(), unit) {
            ("mA", _) => Some(None),
            (_, Ok(unit)) => Some(Some(unit)),
            _ => {
                let message = format!("key \"output\" is {o:?}, expected one of: kPa, psi, bar, MPa, hPa, m_water, ft_water, mA");
                t.problem_at(cx, "output", message);
                None
            }
        }
    });
    let ma_keys = ["current_range_ma", "pressure_span", "span_unit"];
    let output = match output {
        Some(Some(unit)) => {
            for key in ma_keys.into_iter().filter(|k| t.has(k)) {
                let message = format!("key \"{key}\" applies only to output = \"mA\"");
                t.problem_at(cx, key, message);
            }
            Some(TransducerOutput::Pressure(unit))
        }
        Some(None) => {
            for key in ma_keys.into_iter().filter(|k| !t.has(k)) {
                t.missing(cx, key, " (required by output = \"mA\")");
            }
            match (r.current_range_ma, r.pressure_span, r.span_unit) {
                (Some(Pair(ma_low, ma_high)), Some(Pair(p_low, p_high)), Some(unit)) => {
                    Some(TransducerOutput::Current {
                        ma_low,
                        ma_high,
                        p_low,
                        p_high,
                        unit,
                    })
                }
                _ => None,
            }
        }
        None => None,
    };
    let baro = baro(
        cx,
        t,
        (r.barometric_correction, r.barometer, r.zero_barometric_kpa),
    );
    Some(Transducer {
        output: output?,
        baro: baro?,
    })
}

/// `[instrument.standpipe]` as written.
#[derive(Deserialize, Default)]
struct RawStandpipe {
    reference_elevation: Option<Num>,
    depth_unit: Option<LengthUnit>,
}

fn standpipe(cx: &mut Cx<'_>, t: &Tbl<'_>, m_per_unit: f64) -> Option<Standpipe> {
    let r: RawStandpipe = de::table(cx, t).unwrap_or_default();
    let reference = t.need(cx, "reference_elevation", r.reference_elevation);
    let depth_unit = t.need(cx, "depth_unit", r.depth_unit);
    Some(Standpipe {
        reference_elevation_m: reference?.0 * m_per_unit,
        depth_unit: depth_unit?,
    })
}

/// `mode` of a stage gauge as written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
enum Stage {
    Elevation,
    DepthAboveDatum,
}

/// `[instrument.stage_gauge]` as written.
#[derive(Deserialize, Default)]
struct RawStage {
    water_body: Option<WaterBody>,
    mode: Option<Stage>,
    datum_elevation: Option<Num>,
    unit: Option<LengthUnit>,
}

fn stage_gauge(cx: &mut Cx<'_>, t: &Tbl<'_>, m_per_unit: f64) -> Option<StageGauge> {
    let r: RawStage = de::table(cx, t).unwrap_or_default();
    let water_body = t.need(cx, "water_body", r.water_body);
    let stage = t.need(cx, "mode", r.mode);
    let unit = t.need(cx, "unit", r.unit);
    let mode = match stage? {
        Stage::DepthAboveDatum => {
            if !t.has("datum_elevation") {
                let why = " (required by mode = \"depth_above_datum\")";
                t.missing(cx, "datum_elevation", why);
            }
            StageMode::DepthAboveDatum {
                datum_m: r.datum_elevation?.0 * m_per_unit,
                unit: unit?,
            }
        }
        Stage::Elevation => {
            if t.has("datum_elevation") {
                let message =
                    "key \"datum_elevation\" applies only to mode = \"depth_above_datum\"";
                t.problem_at(cx, "datum_elevation", message);
            }
            StageMode::Elevation(unit?)
        }
    };
    Some(StageGauge {
        mode,
        water_body: water_body?,
    })
}

/// `[instrument.barometer]` as written.
#[derive(Deserialize, Default)]
struct RawBarometer {
    unit: Option<PressureUnit>,
}

fn barometer(cx: &mut Cx<'_>, t: &Tbl<'_>) -> Option<Barometer> {
    let r: RawBarometer = de::table(cx, t).unwrap_or_default();
    Some(Barometer {
        unit: t.need(cx, "unit", r.unit)?,
    })
}
