//! The validated settings of trends, stage-response and HST models, and sensor health: per site
//! `[trends]` and `[health]`, and the `[[stage_response]]` and `[[hst]]` model tables.
//!
//! Already checked and in SI units (durations in seconds, heads in metres); read by `watch`.
//! Nothing here parses or does I/O (that is `config::trends`).

use crate::config::de::{self, Above, AtLeast, Int, Pair};

/// One trailing window a rate is computed over, e.g. `24h`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RateSpan {
    /// The duration as written (`24h`, `7d`), which names the quantity `rate_<label>`.
    pub label: String,
    /// The window's length in seconds.
    pub span_s: i64,
}

/// Sensor-health settings of a site (`[health]`, read straight into this; `spike_floor` then
/// converted from the site's length unit).
#[derive(Debug, Clone, PartialEq, serde::Deserialize)]
#[serde(default)]
pub struct HealthSettings {
    /// Trailing readings the spike median and MAD are taken over.
    #[serde(deserialize_with = "de::via::<Int<3, 10_000>, _, _>")]
    pub spike_window: usize,
    /// Multiple of 1.4826·MAD beyond which a reading is a spike.
    #[serde(deserialize_with = "de::via::<Above<0>, _, _>")]
    pub spike_k: f64,
    /// Smallest departure from the median that can be a spike, metres of head.
    #[serde(rename = "spike_floor")]
    #[serde(deserialize_with = "de::via::<AtLeast<0>, _, _>")]
    pub spike_floor_m: f64,
    /// Consecutive readings whose raw values must be identical for a flatline.
    #[serde(deserialize_with = "de::via::<Int<2, 10_000>, _, _>")]
    pub flatline_count: usize,
    /// Largest spread of raw values (max − min) that still counts as identical, in the raw
    /// value's own unit (Hz, digits, mA, kPa, m...).
    #[serde(rename = "flatline_tolerance")]
    #[serde(deserialize_with = "de::via::<AtLeast<0>, _, _>")]
    pub flatline_tolerance_raw: f64,
    /// An instrument is silent after this many expected intervals without a reading.
    #[serde(deserialize_with = "crate::config::trends::no_data_factor")]
    pub no_data_factor: f64,
    /// Plausible thermistor temperatures of vibrating-wire sensors, °C.
    #[serde(rename = "thermistor_range")]
    #[serde(deserialize_with = "de::via::<Pair, _, _>")]
    pub thermistor_range_c: (f64, f64),
    /// Largest plausible thermistor change between consecutive readings, °C.
    #[serde(rename = "thermistor_max_jump")]
    #[serde(deserialize_with = "de::via::<Above<0>, _, _>")]
    pub thermistor_max_jump_c: f64,
    /// Use rejected readings (confirmed spikes) in derived quantities anyway (default false).
    pub use_flagged: bool,
}

impl Default for HealthSettings {
    fn default() -> Self {
        HealthSettings {
            spike_window: 24,
            spike_k: 4.0,
            spike_floor_m: 0.5,
            flatline_count: 24,
            flatline_tolerance_raw: 0.0,
            no_data_factor: 3.0,
            thermistor_range_c: (-30.0, 60.0),
            thermistor_max_jump_c: 5.0,
            use_flagged: false,
        }
    }
}

/// Trend and health settings of one site.
#[derive(Debug, Clone, PartialEq)]
pub struct SiteTrends {
    pub site: String,
    /// Windows of the `rate_*` quantities, shortest first.
    pub rate_windows: Vec<RateSpan>,
    /// Cap on the points a rate is computed from (the pairwise slopes grow as its square).
    pub max_points: usize,
    pub health: HealthSettings,
}

impl SiteTrends {
    /// The defaults: rates over 24 h, 7 d and 30 d from at most 96 points; default health.
    pub fn defaults(site: &str) -> SiteTrends {
        let span = |label: &str, span_s| RateSpan {
            label: label.into(),
            span_s,
        };
        SiteTrends {
            site: site.into(),
            rate_windows: vec![
                span("24h", 86_400),
                span("7d", 7 * 86_400),
                span("30d", 30 * 86_400),
            ],
            max_points: 96,
            health: HealthSettings::default(),
        }
    }
}

/// A lagged stage-response model `h = a + b·stage(t − lag)` of one piezometer
/// (`[[stage_response]]`).
#[derive(Debug, Clone, PartialEq)]
pub struct StageResponseSpec {
    /// Model id (unique among instruments, objects and models).
    pub id: String,
    pub site: String,
    pub piezometer: String,
    pub stage_gauge: String,
    /// The training period: this long back from the piezometer's latest reading, s.
    pub training_s: i64,
    /// Lags tried: `lag_min_s, lag_min_s + lag_step_s, …, lag_max_s`.
    pub lag_min_s: i64,
    pub lag_max_s: i64,
    pub lag_step_s: i64,
    /// Scheduled refit interval in `seepd run`, s.
    pub refit_s: i64,
}

/// An HST model of one instrument against a reservoir gauge (`[[hst]]`).
#[derive(Debug, Clone, PartialEq)]
pub struct HstSpec {
    pub id: String,
    pub site: String,
    pub instrument: String,
    pub reservoir_gauge: String,
    /// Degree of the hydrostatic polynomial, 1..=4.
    pub degree: usize,
    /// Scheduled refit interval in `seepd run`, s.
    pub refit_s: i64,
}

/// Trend, model and health settings of the whole configuration.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Trends {
    /// One entry per site (defaults when the site file has no `[trends]`/`[health]`).
    pub sites: Vec<SiteTrends>,
    pub stage_responses: Vec<StageResponseSpec>,
    pub hst: Vec<HstSpec>,
}

impl Trends {
    /// The settings of `site` (the defaults when the site is unknown).
    pub fn site(&self, site: &str) -> std::borrow::Cow<'_, SiteTrends> {
        match self.sites.iter().find(|s| s.site == site) {
            Some(s) => std::borrow::Cow::Borrowed(s),
            None => std::borrow::Cow::Owned(SiteTrends::defaults(site)),
        }
    }
}
