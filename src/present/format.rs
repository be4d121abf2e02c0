//! The one number-formatting rule for people: a fixed number of decimals per measure and
//! display system (heads to the millimetre or 0.01 ft, gradients and factors of safety to 0.01,
//! pressures to 0.1 kPa or 0.01 psi, rates per day), never float noise, never "-0"; factors of
//! safety above a display cap shown as "> 10"; axis ticks on 1-2-5 steps with labels as exact
//! as their step.

use super::units::{convert, convert_difference, measure_of, unit_label, Measure};
use crate::config::DisplayUnits;

/// Factors of safety above this are shown as "> 10": beyond it the number carries no meaning
/// for screening (an exit gradient near zero gives an unbounded factor).
pub const FS_DISPLAY_CAP: f64 = 10.0;

/// The sentence that states the cap where capped values are shown.
pub const FS_CAP_RULE: &str =
    "Factors of safety above 10 are shown as \"> 10\" (a gradient near zero makes the factor unbounded).";

/// Digits a measure is shown with.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Digits {
    /// This many decimals.
    Decimals(usize),
    /// This many significant figures (small flows).
    Significant(usize),
}

/// The digits of a measure in a display system.
pub fn digits(m: Measure, u: DisplayUnits) -> Digits {
    let si = u == DisplayUnits::Si;
    Digits::Decimals(match m {
        // Millimetre, or a hundredth of a foot (3 mm).
        Measure::Length | Measure::LengthPerDay => {
            if si {
                3
            } else {
                2
            }
        }
        Measure::Pressure => {
            if si {
                1
            } else {
                2
            }
        }
        Measure::Gradient | Measure::FactorOfSafety | Measure::Ratio => 2,
        Measure::Temperature | Measure::Percent | Measure::Position => 1,
        Measure::Duration => 0,
        Measure::FlowPerLength => return Digits::Significant(3),
        // A readout's own unit (digits, Hz, mA): its resolution, not a rounded figure.
        Measure::Other => return Digits::Significant(6),
    })
}

/// `v` with `decimals` decimals; "-0.00" becomes "0.00".
pub fn fixed(v: f64, decimals: usize) -> String {
    if !v.is_finite() {
        return "—".into();
    }
    let s = format!("{v:.decimals$}");
    match s.strip_prefix('-') {
        Some(rest) if rest.bytes().all(|b| b == b'0' || b == b'.') => rest.to_string(),
        _ => s,
    }
}

/// `v` with `n` significant figures, trailing zeros kept: in plain decimal notation down to
/// 0.0001, in E notation below it ("2.35e-5": a run of zeros is easy to misread, and a table
/// cell would cut it).
pub fn significant(v: f64, n: usize) -> String {
    if v == 0.0 || !v.is_finite() {
        return fixed(v, 0);
    }
    let magnitude = v.abs().log10().floor() as i64;
    if magnitude < -4 {
        return format!("{v:.prec$e}", prec = n.saturating_sub(1));
    }
    let decimals = (n as i64 - 1 - magnitude).clamp(0, 15) as usize;
    fixed(v, decimals)
}

/// A display-system value with `d` digits.
pub fn with_digits(v: f64, d: Digits) -> String {
    match d {
        Digits::Decimals(n) => fixed(v, n),
        Digits::Significant(n) => significant(v, n),
    }
}

/// A stored SI value of measure `m` as a bare number in system `u` (no unit), capped for
/// factors of safety.
pub fn shown_bare(v_si: f64, m: Measure, u: DisplayUnits) -> String {
    if m == Measure::FactorOfSafety && v_si > FS_DISPLAY_CAP {
        return format!("> {}", fixed(FS_DISPLAY_CAP, 0));
    }
    if m == Measure::Duration && v_si.is_finite() {
        return duration(v_si.round() as i64);
    }
    with_digits(convert(v_si, m, u), digits(m, u))
}

/// A stored SI value of `quantity` (stored unit `unit_si`) with its display unit:
/// "97.427 m", "319.64 ft", "1.23", "> 10".
pub fn shown(v_si: f64, quantity: &str, unit_si: &str, u: DisplayUnits) -> String {
    let m = measure_of(quantity, unit_si);
    join(shown_bare(v_si, m, u), unit_label(m, u, unit_si))
}

/// A change (difference) of a stored SI value, with its unit and an explicit sign.
pub fn shown_change(dv_si: f64, quantity: &str, unit_si: &str, u: DisplayUnits) -> String {
    let m = measure_of(quantity, unit_si);
    let s = with_digits(convert_difference(dv_si, m, u), digits(m, u));
    let s = if s.starts_with('-') || s.bytes().all(|b| b == b'0' || b == b'.') {
        s
    } else {
        format!("+{s}")
    };
    join(s, unit_label(m, u, unit_si))
}

/// A rate of a stored SI quantity given per second, shown per day with the display unit:
/// "0.250 m per day".
pub fn shown_rate_per_day(per_s_si: f64, quantity: &str, unit_si: &str, u: DisplayUnits) -> String {
    let m = measure_of(quantity, unit_si);
    let v = convert_difference(per_s_si * 86_400.0, m, u);
    let d = digits(m, u);
    let unit = unit_label(m, u, unit_si);
    if unit.is_empty() {
        format!("{} per day", with_digits(v, d))
    } else {
        format!("{} {unit} per day", with_digits(v, d))
    }
}

/// `v` rounded to 12 significant figures, for machine output read by people (replay NDJSON):
/// arithmetic noise in the last bits (`97.42699999999999`) goes, every meaningful digit stays.
pub fn clean(v: f64) -> f64 {
    if v == 0.0 || !v.is_finite() {
        return v;
    }
    let e = 11 - v.abs().log10().floor() as i32;
    if !(-290..=290).contains(&e) {
        return v;
    }
    if e >= 0 {
        let k = 10f64.powi(e);
        (v * k).round() / k
    } else {
        let k = 10f64.powi(-e);
        (v / k).round() * k
    }
}

/// A time as RFC 3339 to the second in UTC (the raw milliseconds when out of range): the
/// command-line outputs' and the CSV tables' times.
pub fn utc(t_ms: i64) -> String {
    chrono::DateTime::<chrono::Utc>::from_timestamp_millis(t_ms).map_or_else(
        || t_ms.to_string(),
        |t| t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true),
    )
}

/// A duration in words: seconds, minutes, hours or days ("40 min", "5.0 h", "3.2 days").
pub fn duration(s: i64) -> String {
    match s {
        s if s < 120 => format!("{s} s"),
        s if s < 7_200 => format!("{} min", s / 60),
        s if s < 172_800 => format!("{:.1} h", s as f64 / 3600.0),
        s => format!("{:.1} days", s as f64 / 86_400.0),
    }
}

fn join(v: String, unit: &str) -> String {
    if unit.is_empty() || v == "—" {
        v
    } else {
        format!("{v} {unit}")
    }
}

/// A "nice" tick step (1, 2 or 5 × 10ⁿ) giving about `target` intervals over `span`.
pub fn tick_step(span: f64, target: f64) -> f64 {
    let raw = (span / target.max(1.0)).max(1e-12);
    let magnitude = 10f64.powf(raw.log10().floor());
    let fraction = raw / magnitude;
    let nice = if fraction <= 1.0 {
        1.0
    } else if fraction <= 2.0 {
        2.0
    } else if fraction <= 5.0 {
        5.0
    } else {
        10.0
    };
    nice * magnitude
}

/// Round-number axis ticks: the 1-2-5 step for about `target` intervals, the axis extended
/// outward to whole steps (so the first and last ticks sit on the frame and nothing is
/// clipped), and each tick's label with exactly the decimals its step needs.
#[derive(Debug, Clone, PartialEq)]
pub struct Ticks {
    /// The axis range, extended to whole steps.
    pub lo: f64,
    pub hi: f64,
    pub step: f64,
    /// (value, label)
    pub marks: Vec<(f64, String)>,
}

/// Ticks covering [lo, hi] (extended to whole steps).
pub fn ticks(lo: f64, hi: f64, target: f64) -> Ticks {
    let (lo, hi) = if hi > lo {
        (lo, hi)
    } else {
        (lo - 0.5, lo + 0.5)
    };
    let step = tick_step(hi - lo, target);
    // Within a hair of a whole step counts as on it (no extra empty step).
    let k0 = (lo / step + 1e-9).floor() as i64;
    let k1 = (hi / step - 1e-9).ceil() as i64;
    marks(k0, k1, step)
}

/// Ticks inside [lo, hi] without extending it (for axes whose range is fixed).
pub fn ticks_within(lo: f64, hi: f64, target: f64) -> Ticks {
    let (lo, hi) = if hi > lo {
        (lo, hi)
    } else {
        (lo - 0.5, lo + 0.5)
    };
    let step = tick_step(hi - lo, target);
    let k0 = (lo / step - 1e-9).ceil() as i64;
    let k1 = (hi / step + 1e-9).floor() as i64;
    let mut t = marks(k0, k1, step);
    t.lo = lo;
    t.hi = hi;
    t
}

fn marks(k0: i64, k1: i64, step: f64) -> Ticks {
    let decimals = (-step.log10().floor()).max(0.0) as usize;
    let k1 = k1.min(k0 + 200);
    let marks = (k0..=k1)
        .map(|k| {
            let v = k as f64 * step;
            (v, fixed(v, decimals))
        })
        .collect();
    Ticks {
        lo: k0 as f64 * step,
        hi: k1 as f64 * step,
        step,
        marks,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const SI: DisplayUnits = DisplayUnits::Si;
    const US: DisplayUnits = DisplayUnits::Us;

    #[test]
    fn no_float_noise_and_no_negative_zero() {
        assert_eq!(shown(97.42699999999999, "total_head", "m", SI), "97.427 m");
        assert_eq!(shown(0.9144000000000001, "net_head", "m", SI), "0.914 m");
        assert_eq!(shown(-0.0001, "vertical_gradient", "-", SI), "0.00");
        assert_eq!(fixed(-0.0004, 3), "0.000");
        assert_eq!(fixed(-0.5, 1), "-0.5");
        assert_eq!(shown(f64::NAN, "total_head", "m", SI), "—");
    }

    #[test]
    fn digits_per_measure() {
        // Heads to the millimetre or to 0.01 ft.
        assert_eq!(shown(30.48, "total_head", "m", US), "100.00 ft");
        assert_eq!(shown(1.0, "total_head", "m", US), "3.28 ft");
        // Gradients and factors of safety to 0.01.
        assert_eq!(shown(0.456, "exit_gradient", "-", SI), "0.46");
        assert_eq!(shown(1.5049, "factor_of_safety", "-", US), "1.50");
        // Pressures to 0.1 kPa or 0.01 psi (6.894757 kPa = 1 psi).
        assert_eq!(shown(101.325, "pressure", "kPa", SI), "101.3 kPa");
        assert_eq!(shown(68.94757, "pressure", "kPa", US), "10.00 psi");
        // Small flows by significant figures.
        assert_eq!(
            shown(2.3456e-5, "expected_flow", "m2/s", SI),
            "2.35e-5 m³/s per m"
        );
        assert_eq!(
            shown(2.2449e-4, "expected_flow", "m2/s", SI),
            "0.000224 m³/s per m"
        );
        assert_eq!(significant(-2.0e-8, 3), "-2.00e-8");
        // A readout's own unit keeps its resolution (no float noise).
        assert_eq!(
            shown(4694.138227216, "engineering_value", "digits", SI),
            "4694.14 digits"
        );
        // Rates per day.
        assert_eq!(
            shown_rate_per_day(0.25 / 3600.0, "total_head", "m", SI),
            "6.000 m per day"
        );
        assert_eq!(shown_change(0.1, "total_head", "m", SI), "+0.100 m");
        // Durations in words; stations to 0.1.
        assert_eq!(shown(14_400.0, "no_data", "s", SI), "4.0 h");
        assert_eq!(shown_bare(1250.0, Measure::Position, SI), "1250.0");
        assert_eq!(shown_bare(30.48, Measure::Position, US), "100.0");
        assert_eq!(shown_change(-0.3048, "total_head", "m", US), "-1.00 ft");
    }

    #[test]
    fn clean_drops_arithmetic_noise_only() {
        assert_eq!(clean(97.42699999999999).to_string(), "97.427");
        assert_eq!(clean(0.9144000000000001).to_string(), "0.9144");
        assert_eq!(clean(7.039999999999999).to_string(), "7.04");
        assert_eq!(clean(2.345_678_901_23e-5), 2.345_678_901_23e-5);
        assert_eq!(clean(123_456.789_012_3), 123_456.789_012);
        assert_eq!(clean(-1.0000000000000002), -1.0);
        assert!(clean(f64::NAN).is_nan());
    }

    #[test]
    fn factors_of_safety_are_capped_for_display() {
        assert_eq!(shown(326.97, "factor_of_safety", "-", SI), "> 10");
        assert_eq!(shown(10.0, "factor_of_safety", "-", SI), "10.00");
        assert_eq!(shown(9.999, "factor_of_safety", "-", SI), "10.00");
    }

    fn is_round(v: f64, step: f64) -> bool {
        let m = step / 10f64.powf(step.log10().floor());
        let k = v / step;
        [1.0, 2.0, 5.0, 10.0].iter().any(|n| (m - n).abs() < 1e-9) && (k - k.round()).abs() < 1e-6
    }

    #[test]
    fn ticks_are_round_numbers_on_1_2_5_steps_and_cover_the_range() {
        for (lo, hi) in [
            (94.80000000000001, 97.3),
            (7.039999999999999, 7.1),
            (-0.37, 0.52),
            (0.0, 1234.5),
            (1e-6, 3e-6),
            (99.9, 99.9),
        ] {
            let t = ticks(lo, hi, 6.0);
            let hair = t.step * 1e-6;
            assert!(t.lo <= lo + hair && t.hi >= hi - hair, "{lo}..{hi}: {t:?}");
            assert!(t.marks.len() >= 2 && t.marks.len() <= 13, "{t:?}");
            for (v, label) in &t.marks {
                assert!(is_round(*v, t.step), "{v} step {}", t.step);
                assert!(label.len() <= 12, "{label}");
                let back: f64 = label.parse().unwrap();
                assert!((back - v).abs() < t.step * 1e-6, "{label} vs {v}");
                assert!(
                    !label.contains("000000") || label.starts_with("0.000000"),
                    "{label}"
                );
            }
        }
        let t = ticks(94.80000000000001, 97.3, 6.0);
        let labels: Vec<&str> = t.marks.iter().map(|m| m.1.as_str()).collect();
        assert_eq!(
            labels,
            ["94.5", "95.0", "95.5", "96.0", "96.5", "97.0", "97.5"]
        );
        // A range ending on a whole step ends there.
        let t = ticks(0.8, 10.0, 6.0);
        assert_eq!((t.lo, t.hi), (0.0, 10.0));
        let w = ticks_within(0.0, 3.0, 6.0);
        assert_eq!(w.lo, 0.0);
        assert_eq!(w.hi, 3.0);
    }
}
