//! Uplift and heave checks at a toe: the landside toe of a levee or the downstream toe of a dam,
//! where a top blanket of fine soil lies over a pervious foundation.
//!
//! Owns: the critical gradient (Terzaghi: `i_c = (γsat − γw)/γw = (Gs − 1)/(1 + e)`), the excess
//! head `h_o` at the base of the top blanket, the vertical exit gradient `i = h_o/z_t`, the factor
//! of safety `FS = i_c/i` and the allowable head for a target FS (EM 1110-2-1913 App. B, as
//! reproduced in the USACE RMC backward-erosion piping initiation manual, eqs. 6, 9, 10).
//! Must not: choose the target FS (a rule setting), read instruments or raise alerts.

use thiserror::Error;

/// 1 lbf/ft³ in kN/m³ (exact: 4.4482216152605 N / 0.028316846592 m³).
pub const KN_M3_PER_PCF: f64 = 4.448_221_615_260_5 / 0.028_316_846_592 / 1000.0;

/// Why a toe quantity could not be computed.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum ToeError {
    /// An input is NaN or infinite.
    #[error("{0} is not a finite number")]
    NonFinite(&'static str),
    /// The top blanket thickness must be > 0.
    #[error("blanket thickness {0} m must be > 0")]
    NonPositiveThickness(f64),
    /// Saturated unit weight must exceed that of water, or the soil would float.
    #[error("saturated unit weight {gamma_sat} must exceed the unit weight of water {gamma_w}")]
    SoilNotHeavierThanWater {
        /// Saturated unit weight given.
        gamma_sat: f64,
        /// Unit weight of water given.
        gamma_w: f64,
    },
    /// The unit weight of water must be > 0.
    #[error("unit weight of water {0} must be > 0")]
    NonPositiveWater(f64),
    /// Void ratio must be ≥ 0.
    #[error("void ratio {0} must be ≥ 0")]
    NegativeVoidRatio(f64),
    /// Specific gravity of solids must be > 1.
    #[error("specific gravity {0} must be > 1")]
    SpecificGravityNotAboveOne(f64),
    /// A critical gradient given directly must be > 0.
    #[error("critical gradient {0} must be > 0")]
    NonPositiveCriticalGradient(f64),
    /// The target factor of safety must be > 0.
    #[error("target factor of safety {0} must be > 0")]
    NonPositiveTarget(f64),
}

/// Factor of safety against heave at the toe. When the exit gradient is zero or downward the
/// ratio `i_c/i` means nothing, so it is never reported as infinity or NaN.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SafetyFactor {
    /// `FS = i_c/i` for an upward exit gradient `i > 0`.
    Value(f64),
    /// `i ≤ 0`: no upward flow through the blanket, so no heave to guard against.
    NotApplicable,
}

impl SafetyFactor {
    /// The number, when there is one.
    pub fn value(self) -> Option<f64> {
        match self {
            SafetyFactor::Value(fs) => Some(fs),
            SafetyFactor::NotApplicable => None,
        }
    }
}

/// Inputs of a toe check. Elevations share one datum.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ToeInput {
    /// Total head at the base of the top blanket (from a piezometer in the pervious layer), m.
    pub blanket_base_head_m: f64,
    /// Ground surface at the toe (top of the blanket), m.
    pub ground_elevation_m: f64,
    /// Ponded water on the landside or tail water at a dam toe, m, if any.
    pub water_level_m: Option<f64>,
    /// Thickness of the top blanket at the toe, `z_t`, m.
    pub blanket_thickness_m: f64,
    /// Critical gradient of the blanket soil, `i_c`.
    pub critical_gradient: f64,
}

/// Result of a toe check.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ToeCheck {
    /// The higher of the ground and the ponded/tail water, m: what the head is measured from.
    pub reference_level_m: f64,
    /// `h_o` = head at the blanket base − reference level, m; negative when below it.
    pub excess_head_m: f64,
    /// Head at the blanket base − ground surface, m (ignores ponded water).
    pub head_above_ground_m: f64,
    /// Vertical exit gradient `i = h_o/z_t`; positive = upward.
    pub exit_gradient: f64,
    /// Critical gradient used, `i_c`.
    pub critical_gradient: f64,
    /// `FS = i_c/i`, or not applicable when `i ≤ 0`.
    pub factor_of_safety: SafetyFactor,
}

/// Critical gradient from unit weights, `i_c = (γsat − γw)/γw`. Both in kN/m³.
///
/// # Errors
/// [`ToeError::NonFinite`], [`ToeError::NonPositiveWater`], [`ToeError::SoilNotHeavierThanWater`].
pub fn critical_gradient_from_unit_weights(
    gamma_sat_kn_m3: f64,
    gamma_w_kn_m3: f64,
) -> Result<f64, ToeError> {
    finite(gamma_sat_kn_m3, "saturated unit weight")?;
    finite(gamma_w_kn_m3, "unit weight of water")?;
    if gamma_w_kn_m3 <= 0.0 {
        return Err(ToeError::NonPositiveWater(gamma_w_kn_m3));
    }
    if gamma_sat_kn_m3 <= gamma_w_kn_m3 {
        return Err(ToeError::SoilNotHeavierThanWater {
            gamma_sat: gamma_sat_kn_m3,
            gamma_w: gamma_w_kn_m3,
        });
    }
    Ok((gamma_sat_kn_m3 - gamma_w_kn_m3) / gamma_w_kn_m3)
}

/// Unit weight in lbf/ft³ (pcf) to kN/m³.
pub fn pcf_to_kn_m3(pcf: f64) -> f64 {
    pcf * KN_M3_PER_PCF
}

/// Critical gradient from specific gravity of solids and void ratio, `i_c = (Gs − 1)/(1 + e)`.
///
/// # Errors
/// [`ToeError::NonFinite`], [`ToeError::SpecificGravityNotAboveOne`],
/// [`ToeError::NegativeVoidRatio`].
pub fn critical_gradient_from_gs_e(
    specific_gravity: f64,
    void_ratio: f64,
) -> Result<f64, ToeError> {
    finite(specific_gravity, "specific gravity")?;
    finite(void_ratio, "void ratio")?;
    if specific_gravity <= 1.0 {
        return Err(ToeError::SpecificGravityNotAboveOne(specific_gravity));
    }
    if void_ratio < 0.0 {
        return Err(ToeError::NegativeVoidRatio(void_ratio));
    }
    Ok((specific_gravity - 1.0) / (1.0 + void_ratio))
}

/// `FS = i_c/i` for `i > 0`; [`SafetyFactor::NotApplicable`] otherwise (and for NaN `i`).
pub fn factor_of_safety(critical_gradient: f64, exit_gradient: f64) -> SafetyFactor {
    if exit_gradient > 0.0 {
        SafetyFactor::Value(critical_gradient / exit_gradient)
    } else {
        SafetyFactor::NotApplicable
    }
}

/// The toe check: `h_o`, `i = h_o/z_t` and `FS = i_c/i`.
///
/// # Errors
/// [`ToeError::NonFinite`], [`ToeError::NonPositiveThickness`],
/// [`ToeError::NonPositiveCriticalGradient`].
pub fn toe_check(input: &ToeInput) -> Result<ToeCheck, ToeError> {
    finite(input.blanket_base_head_m, "head at blanket base")?;
    finite(input.ground_elevation_m, "ground elevation")?;
    if let Some(w) = input.water_level_m {
        finite(w, "water level")?;
    }
    thickness(input.blanket_thickness_m)?;
    critical(input.critical_gradient)?;
    let reference_level_m = reference_level_m(input.ground_elevation_m, input.water_level_m);
    let excess_head_m = input.blanket_base_head_m - reference_level_m;
    let exit_gradient = excess_head_m / input.blanket_thickness_m;
    Ok(ToeCheck {
        reference_level_m,
        excess_head_m,
        head_above_ground_m: input.blanket_base_head_m - input.ground_elevation_m,
        exit_gradient,
        critical_gradient: input.critical_gradient,
        factor_of_safety: factor_of_safety(input.critical_gradient, exit_gradient),
    })
}

/// Highest head at the blanket base that keeps `FS ≥ fs_target`:
/// `reference level + i_c·z_t/FS_target`, m.
///
/// # Errors
/// [`ToeError::NonFinite`], [`ToeError::NonPositiveThickness`],
/// [`ToeError::NonPositiveCriticalGradient`], [`ToeError::NonPositiveTarget`].
pub fn allowable_blanket_base_head_m(
    ground_elevation_m: f64,
    water_level_m: Option<f64>,
    blanket_thickness_m: f64,
    critical_gradient: f64,
    fs_target: f64,
) -> Result<f64, ToeError> {
    finite(ground_elevation_m, "ground elevation")?;
    if let Some(w) = water_level_m {
        finite(w, "water level")?;
    }
    thickness(blanket_thickness_m)?;
    critical(critical_gradient)?;
    finite(fs_target, "target factor of safety")?;
    if fs_target <= 0.0 {
        return Err(ToeError::NonPositiveTarget(fs_target));
    }
    Ok(reference_level_m(ground_elevation_m, water_level_m)
        + critical_gradient * blanket_thickness_m / fs_target)
}

/// The higher of ground and water.
fn reference_level_m(ground_elevation_m: f64, water_level_m: Option<f64>) -> f64 {
    water_level_m.map_or(ground_elevation_m, |w| w.max(ground_elevation_m))
}

fn finite(v: f64, what: &'static str) -> Result<(), ToeError> {
    if v.is_finite() {
        Ok(())
    } else {
        Err(ToeError::NonFinite(what))
    }
}

fn thickness(z_t_m: f64) -> Result<(), ToeError> {
    finite(z_t_m, "blanket thickness")?;
    if z_t_m > 0.0 {
        Ok(())
    } else {
        Err(ToeError::NonPositiveThickness(z_t_m))
    }
}

fn critical(i_c: f64) -> Result<(), ToeError> {
    finite(i_c, "critical gradient")?;
    if i_c > 0.0 {
        Ok(())
    } else {
        Err(ToeError::NonPositiveCriticalGradient(i_c))
    }
}

#[cfg(test)]
mod tests;
