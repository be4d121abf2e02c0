//! Check values for data reduction (../shared/check-values.md #8, #9, #10, #12), each with its
//! source beside the assertion.

use super::*;
use crate::config::{
    Barometer, Instrument, LengthUnit, Location, PressureUnit, StageGauge, Standpipe, Transducer,
    WaterBody,
};
use chrono::{TimeZone, Utc};

fn instrument(kind: Kind, tip: Option<f64>) -> Instrument {
    Instrument {
        id: "T-1".into(),
        site: "s".into(),
        kind,
        location: Location::default(),
        tip_elevation_m: tip,
        installed: Utc.with_ymd_and_hms(2020, 1, 1, 0, 0, 0).unwrap(),
        calibrated: None,
        interval_s: 3600,
        raw_range: (f64::MIN, f64::MAX),
        logger: None,
        channel: None,
    }
}

fn vw(reading: VwReading, calibration: VwCalibration, k: f64, baro: BaroCorrection) -> Kind {
    Kind::VibratingWire(VibratingWire {
        reading,
        calibration,
        calibration_unit: PressureUnit::Kpa,
        thermal_factor: k,
        zero_temperature_c: 20.0,
        baro,
    })
}

fn ctx(t: Option<f64>, baro: Option<f64>, gw: f64) -> Context {
    Context {
        temperature_c: t,
        baro_kpa: baro,
        gamma_w_kn_m3: gw,
    }
}

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol
}

// #8 — digits = f²/1000; 2828 Hz → 7997.58, 2768.5 Hz → 7664.59 (tolerance 0.01).
// Source: Dunnicliff (1993) and manufacturers' manuals, worked examples ±1 digit [pub].
#[test]
fn check_8_digits_from_frequency() {
    assert!(close(digits_from_frequency(2828.0), 7997.58, 0.01));
    assert!(close(digits_from_frequency(2768.5), 7664.59, 0.01));
    // The same from the period: T = 1/f.
    assert!(close(digits_from_period(1.0 / 2828.0), 7997.58, 0.01));
}

// #9 — P = G(R0 − R1) + K(T1 − T0) with G 0.025 kPa/digit, R0 9000, R1 8000, K 0.05 kPa/°C,
// T0 20 °C, T1 12 °C → 24.6 kPa. Formula: Dunnicliff (1993) [pub]; value [derived].
#[test]
fn check_9_linear_with_thermal() {
    let p = vw_linear(
        0.025,
        9000.0,
        8000.0,
        VwSign::ZeroMinusCurrent,
        0.05,
        20.0,
        12.0,
    );
    assert!(close(p, 24.6, 1e-9), "{p}");
    // Through the full reduction from digits, tip at 100 m.
    let cal = VwCalibration::Linear {
        gauge_factor: 0.025,
        zero_reading_digits: 9000.0,
        sign: VwSign::ZeroMinusCurrent,
    };
    let i = instrument(
        vw(VwReading::Digits, cal, 0.05, BaroCorrection::None),
        Some(100.0),
    );
    let r = reduce(&i, 8000.0, &ctx(Some(12.0), None, 9.81)).unwrap();
    assert!(close(r.pressure_kpa.unwrap(), 24.6, 1e-9));
    assert!(r.flags.is_empty());
}

#[test]
fn sign_convention_flips_the_span() {
    let a = vw_linear(
        0.025,
        9000.0,
        8000.0,
        VwSign::ZeroMinusCurrent,
        0.0,
        0.0,
        0.0,
    );
    let b = vw_linear(
        0.025,
        9000.0,
        8000.0,
        VwSign::CurrentMinusZero,
        0.0,
        0.0,
        0.0,
    );
    assert!(close(a, 25.0, 1e-12) && close(b, -25.0, 1e-12));
}

#[test]
fn polynomial_reduction() {
    // P = A·R1² + B·R1 + C with A 1e-7, B −0.03, C 250, R1 8000: 6.4 − 240 + 250 = 16.4 [derived].
    assert!(close(vw_polynomial(1e-7, -0.03, 250.0, 8000.0), 16.4, 1e-9));
}

// #10 — pressure head = p/γw: 25 kPa → 2.54929 m (γw 9.80665) / 2.54842 m (γw 9.81);
// total head = tip 100.00 m + 2.54929 = 102.549 m [derived from the practice formula].
#[test]
fn check_10_pressure_head_and_total_head() {
    assert!(close(pressure_head_m(25.0, 9.80665), 2.54929, 1e-5));
    assert!(close(pressure_head_m(25.0, 9.81), 2.54842, 1e-5));
    assert!(close(
        total_head_m(100.0, pressure_head_m(25.0, 9.80665)),
        102.549,
        1e-3
    ));
    let i = instrument(
        Kind::Transducer(Transducer {
            output: TransducerOutput::Pressure(PressureUnit::Kpa),
            baro: BaroCorrection::None,
        }),
        Some(100.0),
    );
    let r = reduce(&i, 25.0, &ctx(None, None, 9.80665)).unwrap();
    assert!(close(r.total_head_m.unwrap(), 102.54929, 1e-5));
}

// #12 — standpipe: top of casing 105.32 m, depth to water 3.87 m → 101.45 m [practice].
#[test]
fn check_12_standpipe() {
    assert!(close(standpipe_head_m(105.32, 3.87), 101.45, 1e-9));
    let i = instrument(
        Kind::Standpipe(Standpipe {
            reference_elevation_m: 105.32,
            depth_unit: LengthUnit::M,
        }),
        Some(95.0),
    );
    let r = reduce(&i, 3.87, &ctx(None, None, 9.81)).unwrap();
    assert!(close(r.total_head_m.unwrap(), 101.45, 1e-9));
    assert!(close(r.pressure_head_m.unwrap(), 6.45, 1e-9));
    // Depth in feet: 12.7 ft = 3.87096 m.
    let f = instrument(
        Kind::Standpipe(Standpipe {
            reference_elevation_m: 105.32,
            depth_unit: LengthUnit::Ft,
        }),
        None,
    );
    let r = reduce(&f, 12.7, &ctx(None, None, 9.81)).unwrap();
    assert!(close(r.total_head_m.unwrap(), 105.32 - 12.7 * 0.3048, 1e-9));
    assert_eq!(r.pressure_head_m, None);
}

#[test]
fn sealed_gauge_barometric_correction() {
    // − (S1 − S0): baro rose 1.2 kPa since zeroing, so 1.2 kPa comes off.
    let cal = VwCalibration::Linear {
        gauge_factor: 0.025,
        zero_reading_digits: 9000.0,
        sign: VwSign::ZeroMinusCurrent,
    };
    let baro = BaroCorrection::Sealed {
        barometer: "B".into(),
        zero_kpa: 100.0,
    };
    let i = instrument(vw(VwReading::Digits, cal, 0.0, baro), Some(50.0));
    let r = reduce(&i, 8000.0, &ctx(None, Some(101.2), 9.81)).unwrap();
    assert!(close(r.pressure_kpa.unwrap(), 25.0 - 1.2, 1e-9));
    assert!(r.flags.is_empty());
    let r = reduce(&i, 8000.0, &ctx(None, None, 9.81)).unwrap();
    assert!(close(r.pressure_kpa.unwrap(), 25.0, 1e-9));
    assert!(r.flags.contains(Flags::BARO_MISSING));
}

#[test]
fn absolute_transducer_subtracts_barometer() {
    let i = instrument(
        Kind::Transducer(Transducer {
            output: TransducerOutput::Pressure(PressureUnit::Psi),
            baro: BaroCorrection::Absolute {
                barometer: "B".into(),
            },
        }),
        Some(10.0),
    );
    let r = reduce(&i, 20.0, &ctx(None, Some(101.0), 9.81)).unwrap();
    assert!(close(
        r.pressure_kpa.unwrap(),
        20.0 * 6.894_757_293_168 - 101.0,
        1e-9
    ));
}

#[test]
fn missing_temperature_is_flagged_not_guessed() {
    let cal = VwCalibration::Linear {
        gauge_factor: 0.025,
        zero_reading_digits: 9000.0,
        sign: VwSign::ZeroMinusCurrent,
    };
    let i = instrument(
        vw(VwReading::FrequencyHz, cal, 0.05, BaroCorrection::None),
        Some(0.0),
    );
    let r = reduce(&i, 2828.0, &ctx(None, None, 9.81)).unwrap();
    assert!(r.flags.contains(Flags::TEMP_MISSING));
    assert!(close(r.engineering_value, 7997.584, 1e-9));
}

#[test]
fn current_loop_maps_linearly() {
    // 12 mA on 4–20 mA over 0–200 kPa is mid-span: 100 kPa; 4 mA is 0; 20 mA is 200.
    let i = instrument(
        Kind::Transducer(Transducer {
            output: TransducerOutput::Current {
                ma_low: 4.0,
                ma_high: 20.0,
                p_low: 0.0,
                p_high: 200.0,
                unit: PressureUnit::Kpa,
            },
            baro: BaroCorrection::None,
        }),
        Some(80.0),
    );
    for (ma, kpa) in [(4.0, 0.0), (12.0, 100.0), (20.0, 200.0)] {
        let r = reduce(&i, ma, &ctx(None, None, 9.81)).unwrap();
        assert!(close(r.pressure_kpa.unwrap(), kpa, 1e-9), "{ma} mA");
    }
}

#[test]
fn stage_gauge_modes() {
    let elev = instrument(
        Kind::StageGauge(StageGauge {
            mode: StageMode::Elevation(LengthUnit::Ft),
            water_body: WaterBody::Reservoir,
        }),
        None,
    );
    let r = reduce(&elev, 700.0, &ctx(None, None, 9.81)).unwrap();
    assert!(close(r.total_head_m.unwrap(), 213.36, 1e-9));
    let depth = instrument(
        Kind::StageGauge(StageGauge {
            mode: StageMode::DepthAboveDatum {
                datum_m: 90.0,
                unit: LengthUnit::M,
            },
            water_body: WaterBody::River,
        }),
        None,
    );
    let r = reduce(&depth, 4.25, &ctx(None, None, 9.81)).unwrap();
    assert!(close(r.total_head_m.unwrap(), 94.25, 1e-12));
}

#[test]
fn barometer_in_hpa() {
    let b = instrument(
        Kind::Barometer(Barometer {
            unit: PressureUnit::Hpa,
        }),
        None,
    );
    let r = reduce(&b, 1013.25, &ctx(None, None, 9.81)).unwrap();
    assert!(close(r.pressure_kpa.unwrap(), 101.325, 1e-12));
}

#[test]
fn zero_period_is_unreducible() {
    let cal = VwCalibration::Polynomial {
        a: 0.0,
        b: 1.0,
        c: 0.0,
    };
    let i = instrument(
        vw(VwReading::PeriodS, cal, 0.0, BaroCorrection::None),
        Some(0.0),
    );
    let e = reduce(&i, 0.0, &ctx(None, None, 9.81)).unwrap_err();
    assert_eq!(e.reason, Reason::Unreducible);
}
