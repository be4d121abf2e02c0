//! Sensor health: flags that say a reading (or an instrument's silence) looks like an
//! instrument problem rather than a change in the embankment. Out of physical range, spike,
//! flatline, no data, completeness of a period, and thermistor anomaly for vibrating-wire
//! sensors; plus a small per-instrument `HealthTracker` that keeps the trailing window.
//!
//! Owns the checks and their bounded state. Pure: times are ms since the epoch handed in by
//! the caller (`now` included); no clock, no I/O. Deciding what a flag leads to (alert,
//! exclusion from a rule) belongs to the rules.
//!
//! Spike: an isolated excursion that does not persist [practice]. Each new head is compared
//! with the trend of the readings before it: the median rate of change over the trailing
//! `window` readings (so a river rising 0.25 m/h predicts the next reading 0.25 m higher), with
//! a robust spread σ̂ = 1.4826·MAD of those rates scaled to the time step. A head further than
//! `max(k·σ̂·Δt, floor)` from the prediction is only a *candidate*. The **next** reading decides:
//! the candidate is a spike when it stands off the straight line between its two neighbours by
//! more than that threshold *and* by more than the neighbours differ from each other, and the
//! next reading is nearer the one before than the candidate was — the excursion went out and
//! came back. A rise that persists (a flood shared by the river and every
//! piezometer that follows it, a step after a repair, the turn at a crest) is never a spike.
//! The delay is one reading: the verdict on reading n comes with reading n + 1. A confirmed
//! spike leaves the window so it cannot bend the trend.
//!
//! Flatline: a stuck sensor. The last `count` **raw** values, as the logger sent them, span no
//! more than `tolerance` (the raw value's unit; 0 = identical). A steady head read by a working
//! sensor still moves in its last digits, so a steady pool is not a flatline.

use std::collections::VecDeque;

use thiserror::Error;

use crate::domain::trend::median_in_place;

/// Scale from the MAD to a standard deviation for normally distributed data.
pub const MAD_TO_SIGMA: f64 = 1.4826;

/// Health flags of a reading or an instrument (a bit set).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Hash)]
pub struct HealthFlags(pub u8);

impl HealthFlags {
    /// Value NaN, infinite, or outside the physical range.
    pub const OUT_OF_RANGE: HealthFlags = HealthFlags(1);
    /// An isolated excursion from the trend, confirmed by the next reading.
    pub const SPIKE: HealthFlags = HealthFlags(1 << 1);
    /// The last `count` raw values are identical within the tolerance (a stuck sensor).
    pub const FLATLINE: HealthFlags = HealthFlags(1 << 2);
    /// No reading for longer than the allowed multiple of the interval (set by `no_data`).
    pub const NO_DATA: HealthFlags = HealthFlags(1 << 3);
    /// Thermistor temperature implausible, or jumped between consecutive readings.
    pub const THERMISTOR: HealthFlags = HealthFlags(1 << 4);

    /// Names of the flags, for output and docs.
    pub const NAMES: [(HealthFlags, &'static str); 5] = [
        (HealthFlags::OUT_OF_RANGE, "out_of_range"),
        (HealthFlags::SPIKE, "spike"),
        (HealthFlags::FLATLINE, "flatline"),
        (HealthFlags::NO_DATA, "no_data"),
        (HealthFlags::THERMISTOR, "thermistor"),
    ];

    pub fn empty() -> Self {
        HealthFlags(0)
    }
    pub fn is_empty(self) -> bool {
        self.0 == 0
    }
    pub fn contains(self, other: HealthFlags) -> bool {
        self.0 & other.0 == other.0
    }
    pub fn insert(&mut self, other: HealthFlags) {
        self.0 |= other.0;
    }
    /// The names of the flags set, in `NAMES` order.
    pub fn names(self) -> Vec<&'static str> {
        Self::NAMES
            .iter()
            .filter(|(f, _)| self.contains(*f))
            .map(|(_, n)| *n)
            .collect()
    }
}

/// Spike check settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SpikeConfig {
    /// Trailing readings the trend (median rate) and its spread are taken over; no spike check
    /// until half of them (at least 3) are there.
    pub window: usize,
    /// Multiple of σ̂ = 1.4826·MAD of the rates (times the time step) beyond which a reading
    /// departs from the trend.
    pub k: f64,
    /// Smallest departure from the trend that can count as a spike, in the value's unit.
    pub floor: f64,
}

/// Flatline check settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FlatlineConfig {
    /// Consecutive readings (including the new one) whose raw values must be identical.
    pub count: usize,
    /// Largest max − min of those raw values that still counts as identical (raw unit).
    pub tolerance: f64,
}

/// Thermistor check settings for vibrating-wire sensors.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ThermistorConfig {
    /// Lowest plausible temperature, °C.
    pub min_c: f64,
    /// Highest plausible temperature, °C.
    pub max_c: f64,
    /// Largest plausible change between consecutive readings, °C.
    pub max_jump_c: f64,
}

impl Default for ThermistorConfig {
    /// −30..60 °C and 5 °C between readings: wide for a sensor in the ground.
    fn default() -> Self {
        ThermistorConfig {
            min_c: -30.0,
            max_c: 60.0,
            max_jump_c: 5.0,
        }
    }
}

/// Health settings of one instrument.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HealthConfig {
    /// Physical range of the value (min, max), in the value's unit.
    pub range: (f64, f64),
    pub spike: SpikeConfig,
    pub flatline: FlatlineConfig,
    /// Expected interval between readings, ms.
    pub interval_ms: i64,
    /// No data when the silence exceeds this multiple of `interval_ms`.
    pub no_data_factor: f64,
    /// Thermistor checks; `None` for sensors without a thermistor.
    pub thermistor: Option<ThermistorConfig>,
}

/// A health setting that cannot work.
#[derive(Debug, Clone, PartialEq, Eq, Error)]
#[error("health setting `{field}` must be {expected}")]
pub struct HealthError {
    pub field: &'static str,
    pub expected: &'static str,
}

impl HealthConfig {
    /// Check every setting.
    ///
    /// # Errors
    /// All problems found, not only the first.
    pub fn validate(&self) -> Result<(), Vec<HealthError>> {
        let mut errs = Vec::new();
        let mut need = |ok: bool, field, expected| {
            if !ok {
                errs.push(HealthError { field, expected });
            }
        };
        need(
            self.range.0 < self.range.1,
            "range",
            "(min, max) with min < max",
        );
        need(self.spike.window >= 3, "spike.window", "at least 3");
        need(self.spike.k > 0.0, "spike.k", "positive");
        need(self.spike.floor >= 0.0, "spike.floor", "zero or positive");
        need(self.flatline.count >= 2, "flatline.count", "at least 2");
        need(
            self.flatline.tolerance >= 0.0,
            "flatline.tolerance",
            "zero or positive",
        );
        need(self.interval_ms > 0, "interval_ms", "positive");
        need(self.no_data_factor >= 1.0, "no_data_factor", "at least 1");
        if let Some(t) = self.thermistor {
            need(
                t.min_c < t.max_c,
                "thermistor.min_c",
                "below thermistor.max_c",
            );
            need(t.max_jump_c > 0.0, "thermistor.max_jump_c", "positive");
        }
        if errs.is_empty() {
            Ok(())
        } else {
            Err(errs)
        }
    }
}

/// True when `value` is NaN, infinite or outside `[min, max]`.
pub fn out_of_range(value: f64, (min, max): (f64, f64)) -> bool {
    !(value >= min && value <= max)
}

/// Median and MAD of `values`, using `scratch` as working space. `None` when empty.
fn median_mad(values: impl Iterator<Item = f64>, scratch: &mut Vec<f64>) -> Option<(f64, f64)> {
    scratch.clear();
    scratch.extend(values);
    let med = median_in_place(scratch)?;
    scratch.iter_mut().for_each(|v| *v = (*v - med).abs());
    Some((med, median_in_place(scratch)?))
}

/// True when `recent` holds at least `count` readings and the last `count` of them span no
/// more than `tolerance` (max − min).
pub fn is_flatline(recent: &[f64], count: usize, tolerance: f64) -> bool {
    flat_with(recent.iter().rev().copied(), count, tolerance)
}

/// `newest_first` yields the readings from the newest back.
fn flat_with(newest_first: impl Iterator<Item = f64>, count: usize, tolerance: f64) -> bool {
    let (mut n, mut lo, mut hi) = (0, f64::INFINITY, f64::NEG_INFINITY);
    for v in newest_first.take(count) {
        n += 1;
        lo = lo.min(v);
        hi = hi.max(v);
    }
    count > 0 && n == count && hi - lo <= tolerance
}

/// True when the silence since `last_ms` at `now_ms` exceeds `factor` expected intervals.
pub fn no_data(last_ms: i64, now_ms: i64, interval_ms: i64, factor: f64) -> bool {
    (now_ms - last_ms) as f64 > factor * interval_ms as f64
}

/// Percentage of the readings expected in `[start_ms, end_ms)` at one per `interval_ms` that
/// are present in `times` (distinct timestamps in the period), capped at 100. `None` when the
/// period holds no whole interval.
pub fn completeness_pct(
    times: &[i64],
    start_ms: i64,
    end_ms: i64,
    interval_ms: i64,
) -> Option<f64> {
    if interval_ms <= 0 || end_ms <= start_ms {
        return None;
    }
    let expected = (end_ms - start_ms) / interval_ms;
    if expected == 0 {
        return None;
    }
    let mut inside: Vec<i64> = times
        .iter()
        .copied()
        .filter(|t| (start_ms..end_ms).contains(t))
        .collect();
    inside.sort_unstable();
    inside.dedup();
    Some((100.0 * inside.len() as f64 / expected as f64).min(100.0))
}

/// Thermistor temperature outside the plausible range (or not finite), or a change from the
/// previous reading's temperature larger than `max_jump_c`.
pub fn thermistor_anomaly(temp_c: f64, previous_c: Option<f64>, cfg: &ThermistorConfig) -> bool {
    let implausible = !(temp_c >= cfg.min_c && temp_c <= cfg.max_c);
    let jumped = previous_c.is_some_and(|p| (temp_c - p).abs() > cfg.max_jump_c);
    implausible || jumped
}

/// A reading that left the trend, waiting for the next reading's verdict.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Candidate {
    t_ms: i64,
    head: f64,
    /// The threshold it crossed.
    threshold: f64,
    /// The reading before it.
    base: (i64, f64),
}

/// What one new reading tells about the sensor.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Verdict {
    /// Flags of this reading (out of range, flatline, thermistor).
    pub flags: HealthFlags,
    /// The previous reading, at this time, is now confirmed an isolated spike.
    pub spike_at: Option<i64>,
}

/// The health state of one instrument: a bounded window of recent in-range heads and raw values.
///
/// Readings are expected once each (not redeliveries) and in time order; a late reading is
/// checked against the current window and does not move the time of the last reading back.
/// Cost per update: O(window) (a copy and two selections for the median and MAD of the rates).
#[derive(Debug, Clone)]
pub struct HealthTracker {
    config: HealthConfig,
    /// The last `spike.window` in-range (time, head), oldest first (confirmed spikes removed).
    recent: VecDeque<(i64, f64)>,
    /// The last `flatline.count − 1` raw values, oldest first.
    raws: VecDeque<f64>,
    /// The newest reading, if it left the trend: judged by the next one.
    candidate: Option<Candidate>,
    /// Working space for the median, kept to avoid an allocation per reading.
    scratch: Vec<f64>,
    /// Time of the newest reading seen, for the no-data check.
    last_ms: Option<i64>,
    /// Thermistor temperature of the previous reading that had one, for the jump check.
    last_temp_c: Option<f64>,
    /// When watching began; the silence before the first reading counts from here.
    watch_start_ms: i64,
}

impl HealthTracker {
    /// A tracker that starts watching at `watch_start_ms`.
    ///
    /// # Errors
    /// Every problem with `config`.
    pub fn new(config: HealthConfig, watch_start_ms: i64) -> Result<Self, Vec<HealthError>> {
        config.validate()?;
        Ok(HealthTracker {
            config,
            recent: VecDeque::with_capacity(config.spike.window + 1),
            raws: VecDeque::with_capacity(config.flatline.count),
            candidate: None,
            scratch: Vec::with_capacity(config.spike.window),
            last_ms: None,
            last_temp_c: None,
            watch_start_ms,
        })
    }

    /// Time of the newest reading seen.
    pub fn last_reading_ms(&self) -> Option<i64> {
        self.last_ms
    }

    /// Readings needed in the window before heads are judged against the trend.
    fn min_history(&self) -> usize {
        (self.config.spike.window / 2).max(3)
    }

    /// The candidate a head at `t_ms` would be: its departure from the trend of the window.
    fn departure(&mut self, t_ms: i64, value: f64) -> Option<Candidate> {
        if self.recent.len() < self.min_history() {
            return None;
        }
        let &(bt, bh) = self.recent.back()?;
        let dt = t_ms - bt;
        if dt <= 0 {
            return None;
        }
        let rates = self
            .recent
            .iter()
            .zip(self.recent.iter().skip(1))
            .filter(|(a, b)| b.0 > a.0)
            .map(|(a, b)| (b.1 - a.1) / (b.0 - a.0) as f64);
        let (rate, mad) = median_mad(rates, &mut self.scratch)?;
        let s = self.config.spike;
        let threshold = (s.k * MAD_TO_SIGMA * mad * dt as f64).max(s.floor);
        let excursion = value - (bh + rate * dt as f64);
        (excursion.abs() > threshold).then_some(Candidate {
            t_ms,
            head: value,
            threshold,
            base: (bt, bh),
        })
    }

    /// Check a new reading — its head (`value`), the raw value the logger sent, and the
    /// thermistor temperature if the sensor has one — and take it into the window. Never sets
    /// `NO_DATA`; see [`HealthTracker::no_data`].
    pub fn update(
        &mut self,
        t_ms: i64,
        value: f64,
        raw: f64,
        temperature_c: Option<f64>,
    ) -> Verdict {
        let c = self.config;
        let mut v = Verdict::default();
        self.last_ms = Some(self.last_ms.map_or(t_ms, |l| l.max(t_ms)));
        if let (Some(cfg), Some(temp)) = (c.thermistor, temperature_c) {
            if thermistor_anomaly(temp, self.last_temp_c, &cfg) {
                v.flags.insert(HealthFlags::THERMISTOR);
            }
            // An implausible temperature is no reference for the next jump check.
            if (cfg.min_c..=cfg.max_c).contains(&temp) {
                self.last_temp_c = Some(temp);
            }
        }
        if out_of_range(value, c.range) {
            v.flags.insert(HealthFlags::OUT_OF_RANGE);
            return v;
        }
        // The verdict on the previous reading: off the line between its neighbours by more than
        // the threshold and more than they differ — it went out and came back: a spike.
        if let Some(p) = self.candidate.take().filter(|p| t_ms > p.t_ms) {
            let (bt, bh) = p.base;
            let along = (p.t_ms - bt) as f64 / (t_ms - bt) as f64;
            let off_line = p.head - (bh + (value - bh) * along);
            let came_back = (value - bh).abs() < (p.head - bh).abs();
            if came_back && off_line.abs() > p.threshold.max((value - bh).abs()) {
                v.spike_at = Some(p.t_ms);
                if self.recent.back().is_some_and(|r| r.0 == p.t_ms) {
                    self.recent.pop_back();
                }
            }
        }
        self.candidate = self.departure(t_ms, value);
        let newest_first = std::iter::once(raw).chain(self.raws.iter().rev().copied());
        if flat_with(newest_first, c.flatline.count, c.flatline.tolerance) {
            v.flags.insert(HealthFlags::FLATLINE);
        }
        self.recent.push_back((t_ms, value));
        while self.recent.len() > c.spike.window {
            self.recent.pop_front();
        }
        self.raws.push_back(raw);
        while self.raws.len() > c.flatline.count.saturating_sub(1) {
            self.raws.pop_front();
        }
        v
    }

    /// True when no reading has arrived for more than `no_data_factor` intervals at `now_ms`
    /// (counting from the start of watching if none has arrived yet).
    pub fn no_data(&self, now_ms: i64) -> bool {
        let since = self.last_ms.unwrap_or(self.watch_start_ms);
        no_data(
            since,
            now_ms,
            self.config.interval_ms,
            self.config.no_data_factor,
        )
    }
}

#[cfg(test)]
mod tests;
