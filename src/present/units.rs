//! Display units: what a quantity measures (`Measure`, from its identifier and stored SI unit)
//! and its value and unit label in the site's display system (SI or US customary). Exact
//! factors only (1 ft = 0.3048 m, 1 psi = 6.894757293168 kPa).

use crate::config::DisplayUnits;
use crate::domain::units::{KPA_PER_PSI, M_PER_FT};

/// What a number measures: decides its display unit and its digits.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Measure {
    /// Heads, elevations, stations, offsets, distances (stored m).
    Length,
    /// Pressures (stored kPa).
    Pressure,
    /// Hydraulic gradients (dimensionless, positive upward where signed).
    Gradient,
    /// Factors of safety (dimensionless).
    FactorOfSafety,
    /// Other dimensionless ratios.
    Ratio,
    /// Seepage per unit length of levee (stored m²/s, i.e. m³/s per m).
    FlowPerLength,
    /// A length changing with time (stored m/day).
    LengthPerDay,
    /// Temperature (stored °C).
    Temperature,
    /// A percentage.
    Percent,
    /// Stations, offsets and distances along the ground (stored m), to 0.1 m or 0.1 ft.
    Position,
    /// A duration (stored s), shown in words.
    Duration,
    /// Anything else: shown in its stored unit.
    Other,
}

/// The measure of a quantity from its identifier and its stored (SI) unit.
pub fn measure_of(quantity: &str, unit_si: &str) -> Measure {
    match unit_si {
        "m" => Measure::Length,
        "kPa" => Measure::Pressure,
        "m2/s" => Measure::FlowPerLength,
        "m/day" => Measure::LengthPerDay,
        "degC" | "°C" => Measure::Temperature,
        "%" => Measure::Percent,
        "s" => Measure::Duration,
        "-" | "" if quantity.contains("factor_of_safety") => Measure::FactorOfSafety,
        "-" | "" if quantity.contains("gradient") => Measure::Gradient,
        "-" | "" => Measure::Ratio,
        _ => Measure::Other,
    }
}

/// A stored SI value in the display system.
pub fn convert(v_si: f64, m: Measure, u: DisplayUnits) -> f64 {
    match (u, m) {
        (DisplayUnits::Si, _) => v_si,
        (DisplayUnits::Us, Measure::Length | Measure::Position | Measure::LengthPerDay) => {
            v_si / M_PER_FT
        }
        (DisplayUnits::Us, Measure::Pressure) => v_si / KPA_PER_PSI,
        (DisplayUnits::Us, Measure::FlowPerLength) => v_si / (M_PER_FT * M_PER_FT),
        (DisplayUnits::Us, Measure::Temperature) => v_si * 9.0 / 5.0 + 32.0,
        (DisplayUnits::Us, _) => v_si,
    }
}

/// A difference of stored SI values in the display system (no temperature offset).
pub fn convert_difference(dv_si: f64, m: Measure, u: DisplayUnits) -> f64 {
    match (u, m) {
        (DisplayUnits::Us, Measure::Temperature) => dv_si * 9.0 / 5.0,
        _ => convert(dv_si, m, u),
    }
}

/// The unit label shown beside a value; `stored` is used for `Measure::Other`.
pub fn unit_label(m: Measure, u: DisplayUnits, stored: &str) -> &str {
    let si = u == DisplayUnits::Si;
    match m {
        Measure::Length | Measure::Position => pick(si, "m", "ft"),
        Measure::Pressure => pick(si, "kPa", "psi"),
        Measure::FlowPerLength => pick(si, "m³/s per m", "ft³/s per ft"),
        Measure::LengthPerDay => pick(si, "m/day", "ft/day"),
        Measure::Temperature => pick(si, "°C", "°F"),
        Measure::Percent => "%",
        Measure::Gradient | Measure::FactorOfSafety | Measure::Ratio | Measure::Duration => "",
        Measure::Other => stored,
    }
}

fn pick(si: bool, a: &'static str, b: &'static str) -> &'static str {
    if si {
        a
    } else {
        b
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn us_conversions_use_the_exact_factors() {
        // 1 ft = 0.3048 m and 1 psi = 6.894757 kPa (exact definitions, NIST SP 811 App. B).
        let us = DisplayUnits::Us;
        assert!((convert(0.3048, Measure::Length, us) - 1.0).abs() < 1e-15);
        assert!((convert(30.48, Measure::Length, us) - 100.0).abs() < 1e-12);
        assert!((convert(6.894757, Measure::Pressure, us) - 1.0).abs() < 1e-7);
        assert!((convert(68.94757293168, Measure::Pressure, us) - 10.0).abs() < 1e-12);
        // 1 ft²/s = 0.09290304 m²/s (0.3048²).
        assert!((convert(0.09290304, Measure::FlowPerLength, us) - 1.0).abs() < 1e-12);
        assert_eq!(convert(100.0, Measure::Temperature, us), 212.0);
        assert_eq!(convert_difference(10.0, Measure::Temperature, us), 18.0);
        // Dimensionless values and SI display are untouched.
        assert_eq!(convert(1.234, Measure::FactorOfSafety, us), 1.234);
        assert_eq!(convert(97.5, Measure::Length, DisplayUnits::Si), 97.5);
    }

    #[test]
    fn measures_come_from_the_stored_unit_and_name() {
        assert_eq!(measure_of("total_head", "m"), Measure::Length);
        assert_eq!(measure_of("factor_of_safety", "-"), Measure::FactorOfSafety);
        assert_eq!(measure_of("exit_gradient", "-"), Measure::Gradient);
        assert_eq!(measure_of("expected_residual_ratio", "-"), Measure::Ratio);
        assert_eq!(measure_of("expected_flow", "m2/s"), Measure::FlowPerLength);
        assert_eq!(measure_of("rate_7d", "m/day"), Measure::LengthPerDay);
        assert_eq!(measure_of("pressure", "kPa"), Measure::Pressure);
        assert_eq!(
            unit_label(Measure::FlowPerLength, DisplayUnits::Us, ""),
            "ft³/s per ft"
        );
        assert_eq!(unit_label(Measure::Other, DisplayUnits::Us, "Hz"), "Hz");
    }
}
