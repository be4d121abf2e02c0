//! Response of a piezometer to reservoir or river stage: the lagged linear model
//! `h(t) = a + b·stage(t − lag)`, its fit over a training period, and the prediction and
//! residual used to screen new readings.
//!
//! Owns the lag search, the interpolation of the stage series and the fit. Pure: the caller
//! hands in both series (times in ms since the epoch) and the training period; no clock.
//!
//! The lag is the one, among `min..=max` in steps, whose Pearson correlation between the head
//! and the lagged stage is largest (heads rise with stage, so the most positive, not the largest
//! magnitude; ties go to the shorter lag). Every lag is judged on the same head readings: those
//! for which the stage can be interpolated at every lag in the search. Then `a` and `b` are
//! fitted by least squares at that lag. `b` is the response ratio (metres of head per metre
//! of stage).

use thiserror::Error;

use crate::domain::lsq::{least_squares, LsqError};

/// Why a stage series or a response model could not be built.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum ResponseError {
    /// Stage times are not strictly increasing, or a value is NaN or infinite.
    #[error("stage series must be finite and strictly increasing in time (index {index})")]
    BadStageSeries { index: usize },
    /// The lag range is empty or its step is not positive.
    #[error("lag search needs 0 ≤ min ≤ max and a positive step")]
    BadLagSearch,
    /// Too few head readings in the training period with stage at every lag.
    #[error("{n} usable readings in the training period, at least {min} needed")]
    TooFewReadings { n: usize, min: usize },
    /// Head or stage does not vary over the usable readings, so no correlation exists.
    #[error("head or stage is constant over the training period")]
    NoVariation,
    /// The final fit failed.
    #[error("response fit failed: {0}")]
    Fit(#[from] LsqError),
}

/// Fewest usable readings for a fit: two coefficients and a meaningful correlation.
pub const MIN_READINGS: usize = 10;

/// A stage record, validated, with linear interpolation in time.
#[derive(Debug, Clone)]
pub struct StageSeries {
    /// (time ms, water-surface elevation m), strictly increasing in time.
    points: Vec<(i64, f64)>,
    /// Longest gap between stage readings that is bridged by interpolation; across a longer
    /// gap the stage is unknown.
    max_gap_ms: i64,
}

impl StageSeries {
    /// Validate `points` (time ms, stage m).
    ///
    /// # Errors
    /// `BadStageSeries` if times are not strictly increasing or a value is not finite.
    pub fn new(points: Vec<(i64, f64)>, max_gap_ms: i64) -> Result<Self, ResponseError> {
        for (i, p) in points.iter().enumerate() {
            if !p.1.is_finite() || (i > 0 && points[i - 1].0 >= p.0) {
                return Err(ResponseError::BadStageSeries { index: i });
            }
        }
        Ok(StageSeries { points, max_gap_ms })
    }

    /// Stage at `t_ms`, interpolated linearly between the readings either side; `None` outside
    /// the record or inside a gap longer than `max_gap_ms`.
    pub fn at(&self, t_ms: i64) -> Option<f64> {
        match self.points.binary_search_by_key(&t_ms, |p| p.0) {
            Ok(i) => Some(self.points[i].1),
            Err(0) => None,
            Err(i) if i == self.points.len() => None,
            Err(i) => {
                let (t0, s0) = self.points[i - 1];
                let (t1, s1) = self.points[i];
                if t1 - t0 > self.max_gap_ms {
                    return None;
                }
                let f = (t_ms - t0) as f64 / (t1 - t0) as f64;
                Some(s0 + f * (s1 - s0))
            }
        }
    }
}

/// The lags tried: `min_ms, min_ms + step_ms, …` up to and including `max_ms`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct LagSearch {
    pub min_ms: i64,
    pub max_ms: i64,
    pub step_ms: i64,
}

impl LagSearch {
    fn lags(self) -> Result<Vec<i64>, ResponseError> {
        if self.min_ms < 0 || self.max_ms < self.min_ms || self.step_ms <= 0 {
            return Err(ResponseError::BadLagSearch);
        }
        let count = (self.max_ms - self.min_ms) / self.step_ms + 1;
        Ok((0..count).map(|k| self.min_ms + k * self.step_ms).collect())
    }
}

/// A fitted stage-response model.
#[derive(Debug, Clone, PartialEq)]
pub struct StageResponse {
    /// `a`: head (m) when the lagged stage is zero elevation.
    pub intercept_m: f64,
    /// `b`: response ratio, m of head per m of stage.
    pub ratio: f64,
    /// Lag between a stage change and the head's response.
    pub lag_ms: i64,
    /// Pearson correlation at the chosen lag.
    pub correlation: f64,
    /// R² of the fit.
    pub r_squared: f64,
    /// Residual standard deviation of the fit, m.
    pub sigma_m: f64,
    /// Readings the fit used.
    pub n: usize,
}

impl StageResponse {
    /// Predicted head (m) given the stage (m) at `t − lag`.
    pub fn predict(&self, stage_at_lag_m: f64) -> f64 {
        self.intercept_m + self.ratio * stage_at_lag_m
    }

    /// Predicted head at `t_ms`, interpolating `stage` at `t_ms − lag`; `None` where the stage
    /// is unknown.
    pub fn predict_at(&self, stage: &StageSeries, t_ms: i64) -> Option<f64> {
        stage.at(t_ms - self.lag_ms).map(|s| self.predict(s))
    }
}

/// Measured minus predicted; positive means the head is higher than the model expects.
pub fn residual(measured_m: f64, predicted_m: f64) -> f64 {
    measured_m - predicted_m
}

/// Pearson correlation of paired samples; `None` if either has zero variance.
fn pearson(x: &[f64], y: &[f64]) -> Option<f64> {
    let n = x.len() as f64;
    let mx = x.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in x.iter().zip(y) {
        sxy += (a - mx) * (b - my);
        sxx += (a - mx) * (a - mx);
        syy += (b - my) * (b - my);
    }
    (sxx > 0.0 && syy > 0.0).then(|| sxy / (sxx * syy).sqrt())
}

/// Fit the lagged model to the head readings `heads` (time ms, total head m) that fall in the
/// training period `[train_start_ms, train_end_ms)`. Non-finite heads are skipped.
///
/// Cost: one stage interpolation (O(log m)) per reading per lag, then one correlation per lag.
///
/// # Errors
/// `BadLagSearch`, `TooFewReadings` (fewer than [`MIN_READINGS`] usable), `NoVariation`, or
/// `Fit`.
pub fn fit_response(
    heads: &[(i64, f64)],
    stage: &StageSeries,
    train_start_ms: i64,
    train_end_ms: i64,
    search: LagSearch,
) -> Result<StageResponse, ResponseError> {
    let lags = search.lags()?;
    // Rows: one per usable head reading, with the lagged stage at every lag.
    let mut h = Vec::new();
    let mut lagged: Vec<Vec<f64>> = vec![Vec::new(); lags.len()];
    let mut row = Vec::with_capacity(lags.len());
    for &(t, v) in heads {
        if t < train_start_ms || t >= train_end_ms || !v.is_finite() {
            continue;
        }
        row.clear();
        row.extend(lags.iter().map_while(|lag| stage.at(t - lag)));
        if row.len() == lags.len() {
            h.push(v);
            lagged
                .iter_mut()
                .zip(&row)
                .for_each(|(col, s)| col.push(*s));
        }
    }
    if h.len() < MIN_READINGS {
        return Err(ResponseError::TooFewReadings {
            n: h.len(),
            min: MIN_READINGS,
        });
    }
    let mut best: Option<(usize, f64)> = None;
    for (k, col) in lagged.iter().enumerate() {
        if let Some(r) = pearson(&h, col) {
            if best.is_none_or(|(_, b)| r > b) {
                best = Some((k, r));
            }
        }
    }
    let (k, correlation) = best.ok_or(ResponseError::NoVariation)?;
    let rows: Vec<Vec<f64>> = lagged[k].iter().map(|&s| vec![1.0, s]).collect();
    let fit = least_squares(&rows, &h)?;
    Ok(StageResponse {
        intercept_m: fit.coefficients[0],
        ratio: fit.coefficients[1],
        lag_ms: lags[k],
        correlation,
        r_squared: fit.r_squared,
        sigma_m: fit.sigma,
        n: fit.n,
    })
}

#[cfg(test)]
mod tests;
