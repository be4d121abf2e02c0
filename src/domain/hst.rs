//! HST (hydrostatic–season–time) model of a piezometer reading against reservoir level, season
//! and elapsed time, fitted by least squares over a training record, with prediction and
//! residual for screening new readings.
//!
//! Owns the model terms, the normalisation and the fit. Pure: times are ms since the epoch,
//! handed in; no clock.
//!
//! The model, in one common form (the HST family is published; this exact choice of terms,
//! especially the time terms, is common practice [practice]):
//!
//! ```text
//! h = a0 + a1·z + a2·z² + a3·z³ + a4·z⁴            hydrostatic (degree 1..=4, configurable)
//!       + b1·sin s + b2·cos s + b3·sin 2s + b4·cos 2s   seasonal
//!       + c1·θ + c2·ln(1 + θ)                          irreversible (time)
//! ```
//!
//! - `z = (H_max − H)/(H_max − H_min)`, H the reservoir level, with H_max and H_min taken over
//!   the training record (so z is 0 at the highest level and 1 at the lowest; the model
//!   extrapolates outside that range).
//! - `s = 2π·d/365.25`, d the day of the year counted from 1 January 00:00 UTC (fractional,
//!   0 ≤ d < 366).
//! - `θ = (t − t_first)/100 days`, t_first the first training reading. Days/100 rather than
//!   years keeps `ln(1 + θ)` visibly curved over the first years of record, so the two time
//!   terms stay distinguishable in the fit. The model is not defined before t_first.
//!
//! At least 365 days of record are required so that the seasonal terms are not confused with
//! the hydrostatic and time terms.

use thiserror::Error;

use crate::domain::lsq::{least_squares, LsqError};

const DAY_MS: i64 = 86_400_000;

/// Shortest training record, in days.
pub const MIN_RECORD_DAYS: f64 = 365.0;

/// Why an HST model could not be fitted.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum HstError {
    /// The hydrostatic polynomial degree is not in 1..=4.
    #[error("HST polynomial degree must be 1 to 4, got {degree}")]
    Degree { degree: usize },
    /// The record spans less than [`MIN_RECORD_DAYS`].
    #[error("HST needs at least 365 days of record, got {days:.1}")]
    TooShort { days: f64 },
    /// A level or reading is NaN or infinite.
    #[error("HST observation with NaN or infinite value at index {index}")]
    NonFinite { index: usize },
    /// The reservoir level does not vary over the record, so z is undefined.
    #[error("reservoir level is constant over the training record")]
    ConstantReservoir,
    /// The least-squares fit failed (e.g. level and season move together exactly).
    #[error("HST fit failed: {0}")]
    Fit(#[from] LsqError),
}

/// One training reading.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HstObservation {
    /// Time of the reading, ms since the epoch.
    pub t_ms: i64,
    /// Reservoir (or river) level at that time, m.
    pub reservoir_m: f64,
    /// The modelled quantity, e.g. total head in m.
    pub value: f64,
}

/// The three parts of a prediction; their sum is the prediction.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HstParts {
    /// `a0 + Σ a_i·zⁱ`.
    pub hydrostatic: f64,
    /// `b1·sin s + b2·cos s + b3·sin 2s + b4·cos 2s`.
    pub seasonal: f64,
    /// `c1·θ + c2·ln(1 + θ)`.
    pub time: f64,
}

/// A fitted HST model.
#[derive(Debug, Clone, PartialEq)]
pub struct HstModel {
    /// `a0..=a_degree`.
    pub hydrostatic: Vec<f64>,
    /// `[b1, b2, b3, b4]`.
    pub seasonal: [f64; 4],
    /// `[c1, c2]`.
    pub time: [f64; 2],
    /// Highest reservoir level in training, m (z = 0).
    pub reservoir_max_m: f64,
    /// Lowest reservoir level in training, m (z = 1).
    pub reservoir_min_m: f64,
    /// First training reading; θ = 0 here.
    pub origin_ms: i64,
    /// R² of the fit.
    pub r_squared: f64,
    /// Residual standard deviation, in the unit of the value.
    pub sigma: f64,
    /// Readings the fit used.
    pub n: usize,
}

/// Days since 1970-01-01 for a proleptic Gregorian date (H. Hinnant's civil-date algorithm).
fn days_from_civil(year: i64, month: i64, day: i64) -> i64 {
    let y = if month <= 2 { year - 1 } else { year };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = if month > 2 { month - 3 } else { month + 9 };
    let doy = (153 * mp + 2) / 5 + day - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146_097 + doe - 719_468
}

/// Calendar year containing the day `days` since 1970-01-01 (inverse of the above).
fn year_of_days(days: i64) -> i64 {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    yoe + era * 400 + i64::from(mp >= 10)
}

/// Fractional day of the year in UTC, 0 at 1 January 00:00.
pub fn day_of_year(t_ms: i64) -> f64 {
    let days = t_ms.div_euclid(DAY_MS);
    let jan1 = days_from_civil(year_of_days(days), 1, 1);
    (days - jan1) as f64 + t_ms.rem_euclid(DAY_MS) as f64 / DAY_MS as f64
}

/// The regressors (without the constant) for z, the time and the origin.
fn terms(degree: usize, z: f64, t_ms: i64, origin_ms: i64) -> (Vec<f64>, [f64; 4], [f64; 2]) {
    let powers = (1..=degree).map(|i| z.powi(i as i32)).collect();
    let s = std::f64::consts::TAU * day_of_year(t_ms) / 365.25;
    let theta = (t_ms - origin_ms) as f64 / (100 * DAY_MS) as f64;
    (
        powers,
        [s.sin(), s.cos(), (2.0 * s).sin(), (2.0 * s).cos()],
        [theta, theta.ln_1p()],
    )
}

/// Fit the HST model of the given hydrostatic `degree` (1..=4) to `obs`.
///
/// # Errors
/// `Degree`, `NonFinite`, `TooShort` (under 365 days from first to last reading),
/// `ConstantReservoir`, or `Fit` (e.g. rank deficiency).
pub fn fit_hst(obs: &[HstObservation], degree: usize) -> Result<HstModel, HstError> {
    if !(1..=4).contains(&degree) {
        return Err(HstError::Degree { degree });
    }
    if let Some(index) = obs
        .iter()
        .position(|o| !o.reservoir_m.is_finite() || !o.value.is_finite())
    {
        return Err(HstError::NonFinite { index });
    }
    let origin_ms = obs.iter().map(|o| o.t_ms).min().unwrap_or(0);
    let last_ms = obs.iter().map(|o| o.t_ms).max().unwrap_or(0);
    let days = (last_ms - origin_ms) as f64 / DAY_MS as f64;
    if days < MIN_RECORD_DAYS {
        return Err(HstError::TooShort { days });
    }
    let hmax = obs.iter().map(|o| o.reservoir_m).fold(f64::MIN, f64::max);
    let hmin = obs.iter().map(|o| o.reservoir_m).fold(f64::MAX, f64::min);
    if hmax <= hmin {
        return Err(HstError::ConstantReservoir);
    }
    let rows: Vec<Vec<f64>> = obs
        .iter()
        .map(|o| {
            let z = (hmax - o.reservoir_m) / (hmax - hmin);
            let (p, s, t) = terms(degree, z, o.t_ms, origin_ms);
            let mut row = Vec::with_capacity(degree + 7);
            row.push(1.0);
            row.extend(p);
            row.extend(s);
            row.extend(t);
            row
        })
        .collect();
    let y: Vec<f64> = obs.iter().map(|o| o.value).collect();
    let fit = least_squares(&rows, &y)?;
    let c = &fit.coefficients;
    Ok(HstModel {
        hydrostatic: c[..=degree].to_vec(),
        seasonal: [c[degree + 1], c[degree + 2], c[degree + 3], c[degree + 4]],
        time: [c[degree + 5], c[degree + 6]],
        reservoir_max_m: hmax,
        reservoir_min_m: hmin,
        origin_ms,
        r_squared: fit.r_squared,
        sigma: fit.sigma,
        n: fit.n,
    })
}

impl HstModel {
    /// Polynomial degree of the hydrostatic part.
    pub fn degree(&self) -> usize {
        self.hydrostatic.len() - 1
    }

    /// The normalised level z for a reservoir level (m).
    pub fn z(&self, reservoir_m: f64) -> f64 {
        (self.reservoir_max_m - reservoir_m) / (self.reservoir_max_m - self.reservoir_min_m)
    }

    /// The hydrostatic, seasonal and time parts at `t_ms` with the reservoir at
    /// `reservoir_m`; `None` before the model's origin.
    pub fn parts(&self, t_ms: i64, reservoir_m: f64) -> Option<HstParts> {
        if t_ms < self.origin_ms {
            return None;
        }
        let (p, s, t) = terms(self.degree(), self.z(reservoir_m), t_ms, self.origin_ms);
        let dot = |a: &[f64], b: &[f64]| a.iter().zip(b).map(|(x, y)| x * y).sum::<f64>();
        Some(HstParts {
            hydrostatic: self.hydrostatic[0] + dot(&self.hydrostatic[1..], &p),
            seasonal: dot(&self.seasonal, &s),
            time: dot(&self.time, &t),
        })
    }

    /// Predicted value; `None` before the model's origin.
    pub fn predict(&self, t_ms: i64, reservoir_m: f64) -> Option<f64> {
        self.parts(t_ms, reservoir_m)
            .map(|p| p.hydrostatic + p.seasonal + p.time)
    }

    /// Measured minus predicted; `None` before the model's origin.
    pub fn residual(&self, t_ms: i64, reservoir_m: f64, measured: f64) -> Option<f64> {
        self.predict(t_ms, reservoir_m).map(|p| measured - p)
    }
}

#[cfg(test)]
mod tests;
