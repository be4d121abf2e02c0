//! Vertical gradient between nested piezometers at one location (a nest of tips in one
//! borehole or closely spaced boreholes).
//!
//! Owns: `i_v = (h_lower − h_upper)/(z_upper − z_lower)` with tip elevations (positive = upward
//! flow) [practice], the adjacent and overall gradients of a nest, and the direction of flow
//! with a deadband. Must not: read instruments, store results or decide alert levels.

use thiserror::Error;

/// Tips closer than this in elevation are treated as coincident (no gradient can be formed).
pub const MIN_TIP_SEPARATION_M: f64 = 1e-3;

/// One piezometer tip with its total head (piezometric elevation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tip {
    /// Elevation of the tip (sensing point), m.
    pub tip_elevation_m: f64,
    /// Total head at the tip, m (same datum as the elevation).
    pub head_m: f64,
}

/// Direction of vertical flow implied by a gradient.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Direction {
    /// Head rises with depth: water flows up (the sense that leads to heave at a toe).
    Upward,
    /// Head falls with depth: water flows down.
    Downward,
    /// |i| within the deadband: no meaningful vertical flow.
    None,
}

/// Why a gradient could not be formed.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum GradientError {
    /// A nest needs at least two tips.
    #[error("a vertical gradient needs at least 2 tips, got {count}")]
    TooFewTips {
        /// Number of tips supplied.
        count: usize,
    },
    /// Two tips at (nearly) the same elevation: the gradient is undefined.
    #[error("tips at {upper_m} m and {lower_m} m coincide (closer than {MIN_TIP_SEPARATION_M} m)")]
    CoincidentTips {
        /// Elevation of the higher of the two tips, m.
        upper_m: f64,
        /// Elevation of the lower of the two tips, m.
        lower_m: f64,
    },
    /// A tip elevation or head is NaN or infinite.
    #[error("tip elevation or head is not a finite number")]
    NonFinite,
    /// The deadband must be a finite number ≥ 0.
    #[error("deadband {0} must be finite and ≥ 0")]
    BadDeadband(f64),
}

/// A gradient between two tips, with the tips it was formed from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TipPair {
    /// The deeper tip.
    pub lower: Tip,
    /// The shallower tip.
    pub upper: Tip,
    /// `i_v`, dimensionless; positive = upward flow.
    pub gradient: f64,
    /// Direction of flow after the deadband.
    pub direction: Direction,
}

/// The gradients of a nest of piezometer tips.
#[derive(Debug, Clone, PartialEq)]
pub struct NestGradients {
    /// Gradients between adjacent tips, deepest pair first.
    pub adjacent: Vec<TipPair>,
    /// Gradient from the deepest to the shallowest tip.
    pub overall: TipPair,
}

/// Vertical gradient between two tips, `i_v = (h_lower − h_upper)/(z_upper − z_lower)`;
/// positive = upward flow. The order of the arguments does not matter.
///
/// # Errors
/// [`GradientError::NonFinite`] for NaN/infinite inputs; [`GradientError::CoincidentTips`] when
/// the tips are closer than [`MIN_TIP_SEPARATION_M`] in elevation.
pub fn vertical_gradient(a: Tip, b: Tip) -> Result<f64, GradientError> {
    let (upper, lower) = order(a, b)?;
    Ok((lower.head_m - upper.head_m) / (upper.tip_elevation_m - lower.tip_elevation_m))
}

/// Direction of flow for gradient `i`: `None` when `|i| ≤ deadband`.
pub fn direction(i: f64, deadband: f64) -> Direction {
    if i.abs() <= deadband {
        Direction::None
    } else if i > 0.0 {
        Direction::Upward
    } else {
        Direction::Downward
    }
}

/// Adjacent and overall gradients of a nest of ≥ 2 tips at one location, sorted by tip
/// elevation. `deadband` (≥ 0) sets when a gradient counts as no flow.
///
/// # Errors
/// [`GradientError::TooFewTips`], [`GradientError::CoincidentTips`] (any two adjacent tips),
/// [`GradientError::NonFinite`], [`GradientError::BadDeadband`].
pub fn nest_gradients(tips: &[Tip], deadband: f64) -> Result<NestGradients, GradientError> {
    if !deadband.is_finite() || deadband < 0.0 {
        return Err(GradientError::BadDeadband(deadband));
    }
    if tips.len() < 2 {
        return Err(GradientError::TooFewTips { count: tips.len() });
    }
    if tips
        .iter()
        .any(|t| !t.tip_elevation_m.is_finite() || !t.head_m.is_finite())
    {
        return Err(GradientError::NonFinite);
    }
    let mut sorted = tips.to_vec();
    sorted.sort_by(|a, b| a.tip_elevation_m.total_cmp(&b.tip_elevation_m));
    let pair = |lower: Tip, upper: Tip| -> Result<TipPair, GradientError> {
        let gradient = vertical_gradient(lower, upper)?;
        Ok(TipPair {
            lower,
            upper,
            gradient,
            direction: direction(gradient, deadband),
        })
    };
    let adjacent = sorted
        .windows(2)
        .map(|w| pair(w[0], w[1]))
        .collect::<Result<Vec<_>, _>>()?;
    let overall = pair(sorted[0], sorted[sorted.len() - 1])?;
    Ok(NestGradients { adjacent, overall })
}

/// The two tips as (upper, lower), checked.
fn order(a: Tip, b: Tip) -> Result<(Tip, Tip), GradientError> {
    let finite = |t: Tip| t.tip_elevation_m.is_finite() && t.head_m.is_finite();
    if !finite(a) || !finite(b) {
        return Err(GradientError::NonFinite);
    }
    let (upper, lower) = if a.tip_elevation_m >= b.tip_elevation_m {
        (a, b)
    } else {
        (b, a)
    };
    if upper.tip_elevation_m - lower.tip_elevation_m < MIN_TIP_SEPARATION_M {
        return Err(GradientError::CoincidentTips {
            upper_m: upper.tip_elevation_m,
            lower_m: lower.tip_elevation_m,
        });
    }
    Ok((upper, lower))
}

#[cfg(test)]
mod tests;
