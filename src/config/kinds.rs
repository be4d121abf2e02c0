//! Reading an instrument's kind sub-table (`[instrument.vibrating_wire]` and friends) into the
//! reduction settings of `model::Kind`.
//!
//! Owns the keys and checks of the five kind sub-tables. Cross-instrument checks (does the
//! barometer exist?) belong to `load`.

use std::ops::Range;

use super::model::{
    BaroCorrection, Barometer, Kind, LengthUnit, PressureUnit, StageGauge, StageMode, Standpipe,
    Transducer, TransducerOutput, VibratingWire, VwCalibration, VwReading, VwSign, WaterBody,
};
use super::problem::Cx;
use super::reader::Tbl;

/// Names of the kinds, as written in `kind = "..."` and as sub-table names.
pub(crate) const KINDS: [&str; 5] = [
    "vibrating_wire",
    "pressure_transducer",
    "standpipe",
    "stage_gauge",
    "barometer",
];

/// Metres per foot, exactly.
pub(crate) const M_PER_FT: f64 = 0.3048;

/// Accepted pressure unit spellings.
pub(crate) const PRESSURE_UNITS: [(&str, PressureUnit); 7] = [
    ("kPa", PressureUnit::Kpa),
    ("psi", PressureUnit::Psi),
    ("bar", PressureUnit::Bar),
    ("MPa", PressureUnit::Mpa),
    ("hPa", PressureUnit::Hpa),
    ("m_water", PressureUnit::MWater),
    ("ft_water", PressureUnit::FtWater),
];

/// Accepted length unit spellings.
pub(crate) const LENGTH_UNITS: [(&str, LengthUnit); 2] =
    [("m", LengthUnit::M), ("ft", LengthUnit::Ft)];

/// The kind settings read, plus where a barometer reference was written (for `load`).
pub(crate) struct KindRead {
    pub kind: Option<Kind>,
    /// The `barometer = "..."` reference as written (even if other keys had problems), with
    /// the span of its value.
    pub barometer: Option<(String, Option<Range<usize>>)>,
}

/// Read the sub-table of `kind`; `m_per_unit` converts the site's length unit to metres.
pub(crate) fn read(cx: &mut Cx<'_>, kind: &str, t: &Tbl<'_>, m_per_unit: f64) -> KindRead {
    let before = cx.problems.len();
    let reference = if kind == "vibrating_wire" || kind == "pressure_transducer" {
        t.peek_str("barometer")
            .map(|b| (b.to_string(), t.value_span("barometer")))
    } else {
        None
    };
    let kind = match kind {
        "vibrating_wire" => vibrating_wire(cx, t).map(Kind::VibratingWire),
        "pressure_transducer" => transducer(cx, t).map(Kind::Transducer),
        "standpipe" => standpipe(cx, t, m_per_unit).map(Kind::Standpipe),
        "stage_gauge" => stage_gauge(cx, t, m_per_unit).map(Kind::StageGauge),
        _ => barometer(cx, t).map(Kind::Barometer),
    };
    KindRead {
        kind: kind.filter(|_| cx.problems.len() == before),
        barometer: reference,
    }
}

/// Keys of the barometric correction, shared by both pressure-sensor kinds.
const BARO_KEYS: [&str; 3] = ["barometric_correction", "barometer", "zero_barometric_kpa"];

fn baro(cx: &mut Cx<'_>, t: &Tbl<'_>) -> Option<BaroCorrection> {
    #[derive(Clone, Copy, PartialEq)]
    enum Mode {
        None,
        Sealed,
        Absolute,
    }
    let mode = t.choice(
        cx,
        "barometric_correction",
        false,
        &[
            ("none", Mode::None),
            ("sealed", Mode::Sealed),
            ("absolute", Mode::Absolute),
        ],
    );
    if mode.is_none() && t.has("barometric_correction") {
        return None;
    }
    let mode = mode.unwrap_or(Mode::None);
    let barometer = t.nonempty(cx, "barometer");
    let zero = t.number(cx, "zero_barometric_kpa", false);
    let name = match mode {
        Mode::None => "none",
        Mode::Sealed => "sealed",
        Mode::Absolute => "absolute",
    };
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
    if mode != Mode::None && barometer.is_none() && !t.has("barometer") {
        t.missing(
            cx,
            "barometer",
            &format!(" (required by barometric_correction = \"{name}\")"),
        );
    }
    if mode == Mode::Sealed && !t.has("zero_barometric_kpa") {
        t.missing(
            cx,
            "zero_barometric_kpa",
            " (required by barometric_correction = \"sealed\")",
        );
    }
    match mode {
        Mode::None => Some(BaroCorrection::None),
        Mode::Sealed => Some(BaroCorrection::Sealed {
            barometer: barometer?,
            zero_kpa: zero?,
        }),
        Mode::Absolute => Some(BaroCorrection::Absolute {
            barometer: barometer?,
        }),
    }
}

fn vibrating_wire(cx: &mut Cx<'_>, t: &Tbl<'_>) -> Option<VibratingWire> {
    let mut keys = vec![
        "reading",
        "calibration",
        "gauge_factor",
        "zero_reading",
        "sign",
        "poly_a",
        "poly_b",
        "poly_c",
        "calibration_unit",
        "thermal_factor",
        "zero_temperature_c",
    ];
    keys.extend(BARO_KEYS);
    t.check_keys(cx, &keys);
    let reading = t.choice(
        cx,
        "reading",
        true,
        &[
            ("frequency_hz", VwReading::FrequencyHz),
            ("period_s", VwReading::PeriodS),
            ("period_us", VwReading::PeriodUs),
            ("digits", VwReading::Digits),
        ],
    );
    let linear = t.choice(
        cx,
        "calibration",
        true,
        &[("linear", true), ("polynomial", false)],
    );
    let (used, unused): (&[&str], &[&str]) = match linear {
        Some(true) => (
            &["gauge_factor", "zero_reading", "sign"],
            &["poly_a", "poly_b", "poly_c"],
        ),
        Some(false) => (
            &["poly_a", "poly_b", "poly_c"],
            &["gauge_factor", "zero_reading", "sign"],
        ),
        None => (&[], &[]),
    };
    let form = if linear == Some(true) {
        "linear"
    } else {
        "polynomial"
    };
    for key in used {
        if !t.has(key) {
            t.missing(cx, key, &format!(" (required by calibration = \"{form}\")"));
        }
    }
    for key in unused {
        if t.has(key) {
            t.problem_at(
                cx,
                key,
                format!("key \"{key}\" does not apply to calibration = \"{form}\"; remove it or change calibration"),
            );
        }
    }
    let calibration = match linear {
        Some(true) => {
            let gauge_factor = t.number(cx, "gauge_factor", false);
            let zero_reading_digits = t.number(cx, "zero_reading", false);
            let sign = t.choice(
                cx,
                "sign",
                false,
                &[
                    ("zero_minus_current", VwSign::ZeroMinusCurrent),
                    ("current_minus_zero", VwSign::CurrentMinusZero),
                ],
            );
            Some(VwCalibration::Linear {
                gauge_factor: gauge_factor?,
                zero_reading_digits: zero_reading_digits?,
                sign: sign?,
            })
        }
        Some(false) => {
            let a = t.number(cx, "poly_a", false);
            let b = t.number(cx, "poly_b", false);
            let c = t.number(cx, "poly_c", false);
            Some(VwCalibration::Polynomial {
                a: a?,
                b: b?,
                c: c?,
            })
        }
        None => None,
    };
    let calibration_unit = t.choice(cx, "calibration_unit", true, &PRESSURE_UNITS);
    let thermal_factor = t.number(cx, "thermal_factor", false).unwrap_or(0.0);
    let zero_temperature_c = t.number(cx, "zero_temperature_c", false).unwrap_or(20.0);
    let baro = baro(cx, t);
    Some(VibratingWire {
        reading: reading?,
        calibration: calibration?,
        calibration_unit: calibration_unit?,
        thermal_factor,
        zero_temperature_c,
        baro: baro?,
    })
}

fn transducer(cx: &mut Cx<'_>, t: &Tbl<'_>) -> Option<Transducer> {
    let mut keys = vec!["output", "current_range_ma", "pressure_span", "span_unit"];
    keys.extend(BARO_KEYS);
    t.check_keys(cx, &keys);
    let mut outputs: Vec<(&str, Option<PressureUnit>)> =
        PRESSURE_UNITS.iter().map(|(n, u)| (*n, Some(*u))).collect();
    outputs.push(("mA", None));
    let output = t.choice(cx, "output", true, &outputs);
    let ma_keys = ["current_range_ma", "pressure_span", "span_unit"];
    let output = match output {
        Some(Some(unit)) => {
            for key in ma_keys {
                if t.has(key) {
                    t.problem_at(
                        cx,
                        key,
                        format!("key \"{key}\" applies only to output = \"mA\""),
                    );
                }
            }
            Some(TransducerOutput::Pressure(unit))
        }
        Some(None) => {
            for key in ma_keys {
                if !t.has(key) {
                    t.missing(cx, key, " (required by output = \"mA\")");
                }
            }
            let ma = t.pair(cx, "current_range_ma", false);
            let p = t.pair(cx, "pressure_span", false);
            let unit = t.choice(cx, "span_unit", false, &PRESSURE_UNITS);
            match (ma, p, unit) {
                (Some((ma_low, ma_high)), Some((p_low, p_high)), Some(unit)) => {
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
    let baro = baro(cx, t);
    Some(Transducer {
        output: output?,
        baro: baro?,
    })
}

fn standpipe(cx: &mut Cx<'_>, t: &Tbl<'_>, m_per_unit: f64) -> Option<Standpipe> {
    t.check_keys(cx, &["reference_elevation", "depth_unit"]);
    let reference = t.number(cx, "reference_elevation", true);
    let depth_unit = t.choice(cx, "depth_unit", true, &LENGTH_UNITS);
    Some(Standpipe {
        reference_elevation_m: reference? * m_per_unit,
        depth_unit: depth_unit?,
    })
}

fn stage_gauge(cx: &mut Cx<'_>, t: &Tbl<'_>, m_per_unit: f64) -> Option<StageGauge> {
    t.check_keys(cx, &["water_body", "mode", "datum_elevation", "unit"]);
    let water_body = t.choice(
        cx,
        "water_body",
        true,
        &[
            ("reservoir", WaterBody::Reservoir),
            ("river", WaterBody::River),
            ("tailwater", WaterBody::Tailwater),
            ("pond", WaterBody::Pond),
        ],
    );
    let depth = t.choice(
        cx,
        "mode",
        true,
        &[("elevation", false), ("depth_above_datum", true)],
    );
    let unit = t.choice(cx, "unit", true, &LENGTH_UNITS);
    let mode = match depth {
        Some(true) => {
            let datum = t.number(cx, "datum_elevation", false);
            if !t.has("datum_elevation") {
                t.missing(
                    cx,
                    "datum_elevation",
                    " (required by mode = \"depth_above_datum\")",
                );
            }
            Some(StageMode::DepthAboveDatum {
                datum_m: datum? * m_per_unit,
                unit: unit?,
            })
        }
        Some(false) => {
            if t.has("datum_elevation") {
                t.problem_at(
                    cx,
                    "datum_elevation",
                    "key \"datum_elevation\" applies only to mode = \"depth_above_datum\"",
                );
            }
            Some(StageMode::Elevation(unit?))
        }
        None => None,
    };
    Some(StageGauge {
        mode: mode?,
        water_body: water_body?,
    })
}

fn barometer(cx: &mut Cx<'_>, t: &Tbl<'_>) -> Option<Barometer> {
    t.check_keys(cx, &["unit"]);
    let unit = t.choice(cx, "unit", true, &PRESSURE_UNITS);
    Some(Barometer { unit: unit? })
}
