//! Underseepage of a levee (or dam) on a pervious foundation under a semi-pervious top blanket:
//! blanket theory of Bennett (1946) as given in EM 1110-2-1913, Appendix B [pub].
//!
//! Owns: the blanket constant `c`, the effective lengths `x1` (riverside) and `x3` (landside),
//! the residual head at the landside toe `h_o = H·x3/(x1 + L2 + x3)`, the underseepage
//! `Q = k_f·H·d/(x1 + L2 + x3)` per metre of levee, the head landward of the toe, the expected
//! exit gradient `h_o/z_bl`, and the back-calculation of `x3` from a measured `h_o`.
//! Must not: choose soil parameters or decide alert levels. One blanket (permeability and
//! thickness) applies on both sides of the levee.
//!
//! Head landward of the toe, `x` measured from the landside toe: in a pervious foundation under a
//! leaky blanket the head obeys `h'' = c²·h` (the blanket leaks `k_b·h/z_bl` per unit area, the
//! foundation carries `−k_f·d·h'`). With `h(0) = h_o`:
//! - endless blanket: `h = h_o·exp(−c·x)`;
//! - open exit at `L3` (`h(L3) = 0`): `h = h_o·sinh(c·(L3 − x))/sinh(c·L3)`;
//! - seepage block at `L3` (`h'(L3) = 0`): `h = h_o·cosh(c·(L3 − x))/cosh(c·L3)`;
//! - impervious blanket of length `L3` open at its end: no leakage, so `h'' = 0` and
//!   `h = h_o·(1 − x/L3)`.
//!
//! Each gives back its `x3` through `Q = k_f·d·h_o/x3 = −k_f·d·h'(0)`. Beyond `L3` the model says
//! nothing, so the head there is `None`.

use thiserror::Error;

/// Bennett's theory is stated for a foundation at least ten times as pervious as the blanket.
pub const MIN_PERMEABILITY_RATIO: f64 = 10.0;

/// Effective length factor for no riverside blanket: `x1 = 0.43·d` (EM 1110-2-1913 App. B) [pub].
pub const NO_BLANKET_X1_PER_D: f64 = 0.43;

/// What lies riverward of the riverside toe.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Riverside {
    /// Leaky blanket ending at a river or borrow pit (open entrance) at `l1_m` from the
    /// riverside toe: `x1 = tanh(c·L1)/c` [pub].
    OpenEntranceAt {
        /// Distance from the riverside toe to the entrance, m.
        l1_m: f64,
    },
    /// No riverside blanket: `x1 = 0.43·d` [pub].
    NoBlanket,
    /// Impervious riverside blanket of length `l1_m`; water enters the foundation only at its
    /// riverward end, so `x1 = L1` [practice; recalled, not re-checked against the text].
    Impervious {
        /// Length of the impervious blanket from the riverside toe, m.
        l1_m: f64,
    },
}

/// What lies landward of the landside toe.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Landside {
    /// Leaky blanket extending landward without end: `x3 = 1/c` [pub].
    Endless,
    /// Leaky blanket ending at an impervious seepage block at `l3_m`: `x3 = 1/(c·tanh(c·L3))`.
    SeepageBlockAt {
        /// Distance from the landside toe to the block, m.
        l3_m: f64,
    },
    /// Leaky blanket ending at an open exit (ditch, pervious zone) at `l3_m`:
    /// `x3 = tanh(c·L3)/c`.
    OpenExitAt {
        /// Distance from the landside toe to the exit, m.
        l3_m: f64,
    },
    /// Impervious landside blanket of length `l3_m`, open at its end: `x3 = L3` (as check #7
    /// implies) [practice; recalled, not re-checked against the text].
    Impervious {
        /// Length of the impervious blanket from the landside toe, m.
        l3_m: f64,
    },
}

/// Geometry, water levels and permeabilities of one levee cross-section.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BlanketConfig {
    /// `H`: river stage minus the landside level, m (> 0).
    pub net_head_m: f64,
    /// `L2`: base width of the levee, riverside toe to landside toe, m (≥ 0).
    pub base_width_m: f64,
    /// `d`: thickness of the pervious foundation, m (> 0).
    pub foundation_thickness_m: f64,
    /// `k_f`: horizontal permeability of the foundation, m/s (> 0).
    pub k_foundation_m_s: f64,
    /// `k_b`: vertical permeability of the top blanket, m/s (≥ 0; 0 only with impervious
    /// blankets on both sides).
    pub k_blanket_m_s: f64,
    /// `z_bl`: thickness of the top blanket (landside), m (> 0).
    pub blanket_thickness_m: f64,
    /// Riverside condition.
    pub riverside: Riverside,
    /// Landside condition.
    pub landside: Landside,
}

/// The solved blanket model.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BlanketSolution {
    /// `c = sqrt(k_b/(k_f·z_bl·d))`, 1/m (0 for an impervious blanket).
    pub c_per_m: f64,
    /// Effective riverside length `x1`, m.
    pub x1_m: f64,
    /// Effective landside length `x3`, m.
    pub x3_m: f64,
    /// `h_o`: residual head at the landside toe above the landside level, m.
    pub toe_head_m: f64,
    /// `h_o/H`, in [0, 1].
    pub residual_head_ratio: f64,
    /// Expected vertical exit gradient through the landside blanket, `h_o/z_bl`.
    pub exit_gradient: f64,
    /// Underseepage per metre of levee, `Q = k_f·H·d/(x1 + L2 + x3)`, m²/s.
    pub flow_m2_s: f64,
    /// `k_f/k_b < 10`: outside the range the theory is stated for; results are indicative.
    pub outside_validity: bool,
    /// The landside condition, kept for the head profile.
    pub landside: Landside,
}

/// Why the blanket model could not be solved.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum BlanketError {
    /// An input is NaN or infinite.
    #[error("{0} is not a finite number")]
    NonFinite(&'static str),
    /// A quantity that must be > 0 is not.
    #[error("{what} = {value} must be > 0")]
    NotPositive {
        /// Which input.
        what: &'static str,
        /// Its value.
        value: f64,
    },
    /// A quantity that must be ≥ 0 is negative.
    #[error("{what} = {value} must be ≥ 0")]
    Negative {
        /// Which input.
        what: &'static str,
        /// Its value.
        value: f64,
    },
    /// A leaky-blanket case was chosen but the blanket permeability is zero.
    #[error("the {0} condition needs a blanket permeability > 0")]
    NeedsLeakyBlanket(&'static str),
}

/// `c = sqrt(k_b/(k_f·z_bl·d))`, 1/m.
pub fn blanket_constant_per_m(
    k_blanket_m_s: f64,
    k_foundation_m_s: f64,
    blanket_thickness_m: f64,
    foundation_thickness_m: f64,
) -> f64 {
    (k_blanket_m_s / (k_foundation_m_s * blanket_thickness_m * foundation_thickness_m)).sqrt()
}

/// Solve the model for one cross-section.
///
/// # Errors
/// [`BlanketError`] for non-finite or out-of-range inputs, or a leaky case with `k_b = 0`.
pub fn solve(config: &BlanketConfig) -> Result<BlanketSolution, BlanketError> {
    validate(config)?;
    let c = blanket_constant_per_m(
        config.k_blanket_m_s,
        config.k_foundation_m_s,
        config.blanket_thickness_m,
        config.foundation_thickness_m,
    );
    let x1_m = match config.riverside {
        Riverside::OpenEntranceAt { l1_m } => {
            let c = leaky(c, "riverside open entrance")?;
            (c * l1_m).tanh() / c
        }
        Riverside::NoBlanket => NO_BLANKET_X1_PER_D * config.foundation_thickness_m,
        Riverside::Impervious { l1_m } => l1_m,
    };
    let x3_m = match config.landside {
        Landside::Endless => 1.0 / leaky(c, "endless landside blanket")?,
        Landside::SeepageBlockAt { l3_m } => {
            let c = leaky(c, "seepage block")?;
            1.0 / (c * (c * l3_m).tanh())
        }
        Landside::OpenExitAt { l3_m } => {
            let c = leaky(c, "open exit")?;
            (c * l3_m).tanh() / c
        }
        Landside::Impervious { l3_m } => l3_m,
    };
    let total_m = x1_m + config.base_width_m + x3_m;
    let h = config.net_head_m;
    let toe_head_m = h * x3_m / total_m;
    let ratio = config.k_foundation_m_s / config.k_blanket_m_s;
    Ok(BlanketSolution {
        c_per_m: c,
        x1_m,
        x3_m,
        toe_head_m,
        residual_head_ratio: toe_head_m / h,
        exit_gradient: toe_head_m / config.blanket_thickness_m,
        flow_m2_s: config.k_foundation_m_s * h * config.foundation_thickness_m / total_m,
        outside_validity: config.k_blanket_m_s > 0.0 && ratio < MIN_PERMEABILITY_RATIO,
        landside: config.landside,
    })
}

impl BlanketSolution {
    /// Head above the landside level in the foundation at `x_m` landward of the landside toe
    /// (see the module header for each landside case). `None` for `x < 0` or beyond `L3`.
    pub fn head_landward_m(&self, x_m: f64) -> Option<f64> {
        if x_m.is_nan() || x_m < 0.0 {
            return None;
        }
        let (h_o, c) = (self.toe_head_m, self.c_per_m);
        let within = |l3_m: f64| x_m <= l3_m;
        match self.landside {
            Landside::Endless => Some(h_o * (-c * x_m).exp()),
            // sinh(c(L3−x))/sinh(cL3) = e^{−cx}·(1 − e^{−2c(L3−x)})/(1 − e^{−2cL3}), which
            // neither overflows for long blankets nor cancels for short ones.
            Landside::OpenExitAt { l3_m } if within(l3_m) => {
                let num = -(-2.0 * c * (l3_m - x_m)).exp_m1();
                let den = -(-2.0 * c * l3_m).exp_m1();
                Some(h_o * (-c * x_m).exp() * num / den)
            }
            Landside::SeepageBlockAt { l3_m } if within(l3_m) => {
                let num = 1.0 + (-2.0 * c * (l3_m - x_m)).exp();
                let den = 1.0 + (-2.0 * c * l3_m).exp();
                Some(h_o * (-c * x_m).exp() * num / den)
            }
            Landside::Impervious { l3_m } if within(l3_m) => Some(h_o * (1.0 - x_m / l3_m)),
            _ => None,
        }
    }
}

/// Effective landside length from a measured residual head at the toe:
/// `x3 = h_o·(x1 + L2)/(H − h_o)`. `None` when `h_o < 0`, `h_o ≥ H`, or an input is not finite
/// or `x1 + L2 ≤ 0`, since no positive length reproduces such a head.
pub fn back_calculated_x3_m(
    measured_toe_head_m: f64,
    net_head_m: f64,
    x1_m: f64,
    base_width_m: f64,
) -> Option<f64> {
    let upstream_m = x1_m + base_width_m;
    let all_finite = [measured_toe_head_m, net_head_m, upstream_m]
        .iter()
        .all(|v| v.is_finite());
    if !all_finite
        || measured_toe_head_m < 0.0
        || measured_toe_head_m >= net_head_m
        || upstream_m <= 0.0
    {
        return None;
    }
    Some(measured_toe_head_m * upstream_m / (net_head_m - measured_toe_head_m))
}

/// `c` when the blanket leaks; an error naming the case when it does not.
fn leaky(c: f64, case: &'static str) -> Result<f64, BlanketError> {
    if c > 0.0 {
        Ok(c)
    } else {
        Err(BlanketError::NeedsLeakyBlanket(case))
    }
}

fn validate(config: &BlanketConfig) -> Result<(), BlanketError> {
    let positive = [
        ("net head H", config.net_head_m),
        ("foundation thickness d", config.foundation_thickness_m),
        ("foundation permeability k_f", config.k_foundation_m_s),
        ("blanket thickness z_bl", config.blanket_thickness_m),
    ];
    let non_negative = [
        ("base width L2", config.base_width_m),
        ("blanket permeability k_b", config.k_blanket_m_s),
    ];
    let l1 = match config.riverside {
        Riverside::OpenEntranceAt { l1_m } | Riverside::Impervious { l1_m } => Some(l1_m),
        Riverside::NoBlanket => None,
    };
    let l3 = match config.landside {
        Landside::Endless => None,
        Landside::SeepageBlockAt { l3_m }
        | Landside::OpenExitAt { l3_m }
        | Landside::Impervious { l3_m } => Some(l3_m),
    };
    let lengths = [("riverside length L1", l1), ("landside length L3", l3)];
    let lengths = lengths.iter().filter_map(|(w, v)| v.map(|v| (*w, v)));
    for (what, value) in positive.iter().copied().chain(lengths) {
        if !value.is_finite() {
            return Err(BlanketError::NonFinite(what));
        }
        if value <= 0.0 {
            return Err(BlanketError::NotPositive { what, value });
        }
    }
    for (what, value) in non_negative {
        if !value.is_finite() {
            return Err(BlanketError::NonFinite(what));
        }
        if value < 0.0 {
            return Err(BlanketError::Negative { what, value });
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests;
