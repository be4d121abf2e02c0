//! Unit conversions to and from SI (kPa, m). Exact definitions only.

/// A pressure unit accepted in configuration and payloads (serde: the spellings a file uses).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Deserialize)]
pub enum PressureUnit {
    #[serde(rename = "kPa")]
    Kpa,
    #[serde(rename = "psi")]
    Psi,
    #[serde(rename = "bar")]
    Bar,
    #[serde(rename = "MPa")]
    Mpa,
    #[serde(rename = "hPa")]
    Hpa,
    /// Metres of water column (converted with the site's γw).
    #[serde(rename = "m_water")]
    MWater,
    /// Feet of water column (converted with the site's γw).
    #[serde(rename = "ft_water")]
    FtWater,
}

/// A length unit accepted in configuration and payloads.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum LengthUnit {
    M,
    Ft,
}

/// 1 psi in kPa (exact: 0.45359237 kg·9.80665 m/s² / (0.0254 m)²).
pub const KPA_PER_PSI: f64 = 6.894_757_293_168;
/// 1 ft in m (exact, international foot).
pub const M_PER_FT: f64 = 0.3048;
/// Standard gravity γw choices (kN/m³) accepted for water: 9.81 (common practice),
/// 9.80665 (standard gravity, ρw = 1000 kg/m³), 9.802258 (62.4 pcf).
pub const GAMMA_W_DEFAULT_KN_M3: f64 = 9.81;
/// 62.4 pcf in kN/m³ (62.4 lbf/ft³ = 62.4 · 4.4482216152605 N / 0.028316846592 m³).
pub const GAMMA_W_62_4_PCF_KN_M3: f64 = 62.4 * 4.448_221_615_260_5 / 0.028_316_846_592 / 1000.0;

/// Convert a pressure in `unit` to kPa. Water-column units use `gamma_w_kn_m3`.
pub fn pressure_to_kpa(value: f64, unit: PressureUnit, gamma_w_kn_m3: f64) -> f64 {
    match unit {
        PressureUnit::Kpa => value,
        PressureUnit::Psi => value * KPA_PER_PSI,
        PressureUnit::Bar => value * 100.0,
        PressureUnit::Mpa => value * 1000.0,
        PressureUnit::Hpa => value * 0.1,
        PressureUnit::MWater => value * gamma_w_kn_m3,
        PressureUnit::FtWater => value * M_PER_FT * gamma_w_kn_m3,
    }
}

/// Convert a pressure in kPa to `unit` (inverse of [`pressure_to_kpa`]).
pub fn kpa_to_pressure(kpa: f64, unit: PressureUnit, gamma_w_kn_m3: f64) -> f64 {
    match unit {
        PressureUnit::Kpa => kpa,
        PressureUnit::Psi => kpa / KPA_PER_PSI,
        PressureUnit::Bar => kpa / 100.0,
        PressureUnit::Mpa => kpa / 1000.0,
        PressureUnit::Hpa => kpa / 0.1,
        PressureUnit::MWater => kpa / gamma_w_kn_m3,
        PressureUnit::FtWater => kpa / gamma_w_kn_m3 / M_PER_FT,
    }
}

/// Convert a length in `unit` to metres.
pub fn length_to_m(value: f64, unit: LengthUnit) -> f64 {
    match unit {
        LengthUnit::M => value,
        LengthUnit::Ft => value * M_PER_FT,
    }
}

/// Convert metres to `unit`.
pub fn m_to_length(m: f64, unit: LengthUnit) -> f64 {
    match unit {
        LengthUnit::M => m,
        LengthUnit::Ft => m / M_PER_FT,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Source: 1 psi = 6.894757293168 kPa and 1 ft = 0.3048 m are exact definitions
    // (NIST SP 811, Appendix B) [pub].
    #[test]
    fn psi_to_kpa_and_back() {
        assert!((pressure_to_kpa(1.0, PressureUnit::Psi, 9.81) - 6.894_757_293_168).abs() < 1e-12);
        assert!((pressure_to_kpa(14.5, PressureUnit::Psi, 9.81) - 99.973_980_750_936).abs() < 1e-9);
        assert!((kpa_to_pressure(6.894_757_293_168, PressureUnit::Psi, 9.81) - 1.0).abs() < 1e-12);
        for v in [-3.0, 0.0, 0.1, 250.0] {
            let back = kpa_to_pressure(
                pressure_to_kpa(v, PressureUnit::Psi, 9.81),
                PressureUnit::Psi,
                9.81,
            );
            assert!((back - v).abs() < 1e-12, "{v} -> {back}");
        }
    }

    #[test]
    fn feet_to_metres_and_back() {
        assert_eq!(length_to_m(1.0, LengthUnit::Ft), 0.3048);
        assert!((length_to_m(100.0, LengthUnit::Ft) - 30.48).abs() < 1e-12);
        assert!((m_to_length(30.48, LengthUnit::Ft) - 100.0).abs() < 1e-12);
        assert_eq!(m_to_length(5.0, LengthUnit::M), 5.0);
    }

    #[test]
    fn water_column_units_use_gamma_w() {
        // 1 m of water at γw 9.81 kN/m³ is 9.81 kPa; 1 ft at 9.80665 is 0.3048·9.80665 kPa.
        assert!((pressure_to_kpa(1.0, PressureUnit::MWater, 9.81) - 9.81).abs() < 1e-12);
        assert!((pressure_to_kpa(1.0, PressureUnit::FtWater, 9.80665) - 2.989_066_92).abs() < 1e-8);
        let v = kpa_to_pressure(
            pressure_to_kpa(7.5, PressureUnit::FtWater, 9.81),
            PressureUnit::FtWater,
            9.81,
        );
        assert!((v - 7.5).abs() < 1e-12);
    }

    #[test]
    fn metric_pressure_units() {
        assert_eq!(pressure_to_kpa(1.0, PressureUnit::Bar, 9.81), 100.0);
        assert_eq!(pressure_to_kpa(1.0, PressureUnit::Mpa, 9.81), 1000.0);
        assert!((pressure_to_kpa(1013.25, PressureUnit::Hpa, 9.81) - 101.325).abs() < 1e-12);
    }

    // 62.4 lbf/ft³ with 1 lbf = 4.4482216152605 N and 1 ft³ = 0.028316846592 m³ (exact) [derived].
    #[test]
    fn gamma_w_62_4_pcf() {
        assert!(
            (GAMMA_W_62_4_PCF_KN_M3 - 9.802_257_744).abs() < 1e-8,
            "{GAMMA_W_62_4_PCF_KN_M3}"
        );
    }
}
