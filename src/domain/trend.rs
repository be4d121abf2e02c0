//! Robust trend of a reading series: the Theil–Sen slope of a window of (time, value) points,
//! expressed as a rate per day, and a `RateWindow` that keeps the last span of readings.
//!
//! Owns the estimator and the window bookkeeping only. It reads no clock: every time is an
//! `i64` of milliseconds since the Unix epoch handed in by the caller. Deciding whether a rate
//! is alarming belongs to the rules.
//!
//! Method (Theil 1950; Sen 1968): the slope is the median of the slopes of all pairs of points
//! with distinct x; the intercept is `median(y) − slope·median(x)`. This is also what
//! `scipy.stats.theilslopes` returns with its default `method="separate"`, and the tests
//! compare against it.
//!
//! Cost: all pairs are formed, so one rate costs O(n²) time and memory for n points (plus a
//! sort of the n(n−1)/2 slopes). For hourly data that is 24 points a day, 168 a week, 720 in
//! 30 days (≈ 260 000 slopes): fine on demand. `RateWindow::max_points` bounds the cost for
//! denser data by thinning before the pairs are formed.

use std::collections::VecDeque;

use thiserror::Error;

/// Milliseconds in a day, to turn millisecond timestamps into days.
pub const MS_PER_DAY: f64 = 86_400_000.0;

/// Why a trend could not be computed.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum TrendError {
    /// Fewer than two points, or no two points with distinct x.
    #[error("a trend needs at least two points at distinct times, got {distinct} distinct of {n}")]
    TooFewPoints { n: usize, distinct: usize },
    /// An x or y is NaN or infinite.
    #[error("a trend point is NaN or infinite")]
    NonFinite,
    /// A window was configured with a span ≤ 0 or a point cap < 2.
    #[error("a rate window needs a positive span and a point cap of at least 2")]
    BadWindow,
    /// A pushed reading is older than the window keeps.
    #[error("reading at {t_ms} ms is older than the window start {start_ms} ms")]
    TooOld { t_ms: i64, start_ms: i64 },
}

/// A fitted straight line `y = intercept + slope·x`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Line {
    pub slope: f64,
    pub intercept: f64,
}

/// A trend of a reading series in time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rate {
    /// Theil–Sen slope in the value's unit per day.
    pub per_day: f64,
    /// Intercept of the fitted line at `origin_ms` (the value's unit), so the line is
    /// `value(t) = value_at_origin + per_day·(t − origin_ms)/MS_PER_DAY`.
    pub value_at_origin: f64,
    /// Time the intercept refers to: the first point used.
    pub origin_ms: i64,
    /// Number of points the rate was computed from (after thinning).
    pub n: usize,
}

/// Median of a slice, reordering it. The mean of the two middle values for an even count, as
/// numpy's `median`. `None` when empty.
pub(crate) fn median_in_place(v: &mut [f64]) -> Option<f64> {
    let n = v.len();
    if n == 0 {
        return None;
    }
    let (_, upper, _) = v.select_nth_unstable_by(n / 2, f64::total_cmp);
    let upper = *upper;
    if n % 2 == 1 {
        return Some(upper);
    }
    // The lower middle value is the largest of the part left of n/2.
    let lower = v[..n / 2].iter().copied().fold(f64::NEG_INFINITY, f64::max);
    Some((lower + upper) / 2.0)
}

/// Theil–Sen line through `points` given as (x, y).
///
/// # Errors
/// `NonFinite` if any coordinate is NaN or infinite; `TooFewPoints` if no two points have
/// distinct x.
pub fn theil_sen(points: &[(f64, f64)]) -> Result<Line, TrendError> {
    if points.iter().any(|(x, y)| !x.is_finite() || !y.is_finite()) {
        return Err(TrendError::NonFinite);
    }
    let n = points.len();
    let mut slopes = Vec::with_capacity(n.saturating_sub(1) * n / 2);
    for (i, &(xi, yi)) in points.iter().enumerate() {
        for &(xj, yj) in &points[i + 1..] {
            if xj != xi {
                slopes.push((yj - yi) / (xj - xi));
            }
        }
    }
    let Some(slope) = median_in_place(&mut slopes) else {
        let mut xs: Vec<f64> = points.iter().map(|p| p.0).collect();
        xs.sort_by(f64::total_cmp);
        xs.dedup();
        return Err(TrendError::TooFewPoints {
            n,
            distinct: xs.len(),
        });
    };
    let mut xs: Vec<f64> = points.iter().map(|p| p.0).collect();
    let mut ys: Vec<f64> = points.iter().map(|p| p.1).collect();
    // Both medians exist: a pairwise slope exists, so n ≥ 2.
    let mx = median_in_place(&mut xs).unwrap_or(0.0);
    let my = median_in_place(&mut ys).unwrap_or(0.0);
    Ok(Line {
        slope,
        intercept: my - slope * mx,
    })
}

/// Theil–Sen rate per day of readings given as (time in ms, value).
///
/// # Errors
/// As [`theil_sen`].
pub fn rate_per_day(points: &[(i64, f64)]) -> Result<Rate, TrendError> {
    let origin_ms = points.iter().map(|p| p.0).min().unwrap_or(0);
    let days: Vec<(f64, f64)> = points
        .iter()
        .map(|&(t, v)| ((t - origin_ms) as f64 / MS_PER_DAY, v))
        .collect();
    let line = theil_sen(&days)?;
    Ok(Rate {
        per_day: line.slope,
        value_at_origin: line.intercept,
        origin_ms,
        n: points.len(),
    })
}

/// Keep at most `max` points by taking every k-th, k = ⌈n/max⌉, counted back from the newest
/// so the latest reading is always used. Returns the points in time order.
pub fn thin(points: &[(i64, f64)], max: usize) -> Vec<(i64, f64)> {
    let n = points.len();
    if max == 0 || n <= max {
        return points.to_vec();
    }
    let k = n.div_ceil(max);
    let mut out: Vec<(i64, f64)> = points.iter().rev().step_by(k).copied().collect();
    out.reverse();
    out
}

/// The readings of one series within a trailing span of time, for a rate on demand.
#[derive(Debug, Clone)]
pub struct RateWindow {
    /// How far back from the newest reading points are kept, e.g. 24 h, 7 d or 30 d.
    span_ms: i64,
    /// Upper bound on the points a rate is computed from, to bound the O(n²) cost.
    max_points: usize,
    /// The points kept, sorted by time, one per timestamp.
    points: VecDeque<(i64, f64)>,
}

impl RateWindow {
    /// A window of `span_ms` milliseconds whose rate uses at most `max_points` points.
    ///
    /// # Errors
    /// `BadWindow` if `span_ms ≤ 0` or `max_points < 2`.
    pub fn new(span_ms: i64, max_points: usize) -> Result<Self, TrendError> {
        if span_ms <= 0 || max_points < 2 {
            return Err(TrendError::BadWindow);
        }
        Ok(RateWindow {
            span_ms,
            max_points,
            points: VecDeque::new(),
        })
    }

    /// The configured span in milliseconds.
    pub fn span_ms(&self) -> i64 {
        self.span_ms
    }

    /// Number of points held.
    pub fn len(&self) -> usize {
        self.points.len()
    }

    /// True when no point is held.
    pub fn is_empty(&self) -> bool {
        self.points.is_empty()
    }

    /// The points held, in time order.
    pub fn points(&self) -> impl Iterator<Item = &(i64, f64)> {
        self.points.iter()
    }

    /// Add a reading and drop those older than `span_ms` before the newest. A reading at a
    /// time already held replaces it (redelivery); a late reading is inserted in order.
    ///
    /// # Errors
    /// `NonFinite` for a NaN or infinite value; `TooOld` if the reading falls before the start
    /// of the window. The window is unchanged on error.
    pub fn push(&mut self, t_ms: i64, value: f64) -> Result<(), TrendError> {
        if !value.is_finite() {
            return Err(TrendError::NonFinite);
        }
        if let Some(&(newest, _)) = self.points.back() {
            let start_ms = newest - self.span_ms;
            if t_ms < start_ms {
                return Err(TrendError::TooOld { t_ms, start_ms });
            }
        }
        match self.points.binary_search_by_key(&t_ms, |p| p.0) {
            Ok(i) => self.points[i].1 = value,
            Err(i) => self.points.insert(i, (t_ms, value)),
        }
        if let Some(&(newest, _)) = self.points.back() {
            self.evict(newest);
        }
        Ok(())
    }

    /// Remove the point at `t_ms` (a reading rejected after it was taken). True if it was held.
    pub fn remove(&mut self, t_ms: i64) -> bool {
        match self.points.binary_search_by_key(&t_ms, |p| p.0) {
            Ok(i) => self.points.remove(i).is_some(),
            Err(_) => false,
        }
    }

    /// Drop the points older than `span_ms` before `now_ms`, e.g. when no reading has come in
    /// for a while. Returns how many were dropped.
    pub fn evict(&mut self, now_ms: i64) -> usize {
        let start_ms = now_ms - self.span_ms;
        let mut dropped = 0;
        while self.points.front().is_some_and(|p| p.0 < start_ms) {
            self.points.pop_front();
            dropped += 1;
        }
        dropped
    }

    /// Theil–Sen rate per day over the window, thinned to at most `max_points` points.
    ///
    /// # Errors
    /// `TooFewPoints` with fewer than two readings.
    pub fn rate(&self) -> Result<Rate, TrendError> {
        let (a, b) = self.points.as_slices();
        let all: Vec<(i64, f64)> = a.iter().chain(b).copied().collect();
        rate_per_day(&thin(&all, self.max_points))
    }
}

#[cfg(test)]
mod tests;
