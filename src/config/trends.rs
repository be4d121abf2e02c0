//! Reading a site file's trend, health and model tables — `[trends]`, `[health]`,
//! `[[stage_response]]` and `[[hst]]` — into the `model` settings (durations in seconds, lengths
//! in metres).
//!
//! Owns those keys, their defaults and ranges. Like `objects`, it must not decide what a
//! reference names: a model table is read as an object table is (`objects::entry`), its
//! instrument references settled by `objects::resolve` once every site file is read, and `load`
//! checks that model ids are unique among instruments and objects.

use serde::Deserialize;

use super::de::{self, Int, Num, Text, Within};
use super::limits;
use super::model::{HealthSettings, HstSpec, RateSpan, SiteTrends, StageResponseSpec};
use super::objects::{entry, Entry, Read, Reader, Settle, Want};
use super::problem::Cx;
use super::reader::Tbl;

/// The tables of a site file read here, as written.
pub(crate) const TABLES: [&str; 4] = ["trends", "health", "stage_response", "hst"];

/// `[trends]` as written; `rate_windows` is read element by element (with positions) by
/// `rate_windows`.
#[derive(Deserialize)]
struct RawTrends {
    #[serde(rename = "rate_windows")]
    _rate_windows: Option<de::Nested>,
    max_points: Option<Int<2, 5000>>,
}

/// `[[stage_response]]` as written.
#[derive(Deserialize, Default)]
struct RawStageResponse {
    id: Option<Text>,
    piezometer: Option<Text>,
    stage_gauge: Option<Text>,
    training_days: Option<Within<0, { limits::TRAINING_DAYS as i64 }>>,
    lag_range_h: Option<de::Pair>,
    lag_step_h: Option<Hours>,
    refit_interval_h: Option<Hours>,
}

/// `[[hst]]` as written.
#[derive(Deserialize, Default)]
struct RawHst {
    id: Option<Text>,
    instrument: Option<Text>,
    reservoir_gauge: Option<Text>,
    degree: Option<Int<1, 4>>,
    refit_interval_h: Option<Hours>,
}

/// Hours, more than 0 and at most a year.
type Hours = Within<0, { limits::YEAR_S / 3600 }>;

/// Defaults of a `[[stage_response]]` table.
const DEFAULT_TRAINING_DAYS: f64 = 30.0;
const DEFAULT_LAG_RANGE_H: (f64, f64) = (0.0, 48.0);
const DEFAULT_LAG_STEP_H: f64 = 1.0;
const DEFAULT_STAGE_RESPONSE_REFIT_H: f64 = 24.0;
/// Defaults of an `[[hst]]` table.
const DEFAULT_HST_DEGREE: i64 = 4;
const DEFAULT_HST_REFIT_H: f64 = 168.0;
/// Most lags one search may try (each costs a pass over the training readings).
const MAX_LAGS: f64 = 2000.0;

/// A validated model table.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Model {
    StageResponse(StageResponseSpec),
    Hst(HstSpec),
}

impl Settle for Model {
    fn settle(self, _: Option<i64>) -> Option<Self> {
        Some(self)
    }
}

/// What `load` needs of one `[[stage_response]]` or `[[hst]]` table.
pub(crate) type ModelEntry = Entry<Model>;

/// The trend tables of one site file.
pub(crate) struct SiteTrendsEntry {
    /// The site's settings; `None` after a problem (already reported).
    pub settings: Option<SiteTrends>,
    pub models: Vec<ModelEntry>,
}

/// Read the trend tables of a site file's root. `m_per_unit` converts the site's length unit.
pub(crate) fn read(
    cx: &mut Cx<'_>,
    root: &Tbl<'_>,
    site: &str,
    m_per_unit: f64,
) -> SiteTrendsEntry {
    let before = cx.problems.len();
    let mut s = SiteTrends::defaults(site);
    if let Some(t) = root.part(cx, "trends", "[trends]") {
        if let Some(r) = de::table::<RawTrends>(cx, &t) {
            if let Some(w) = rate_windows(cx, &t) {
                s.rate_windows = w;
            }
            s.max_points = r.max_points.map_or(96, |n| n.0 as usize);
        }
    }
    if let Some(t) = root.part(cx, "health", "[health]") {
        if let Some(h) = de::table::<HealthSettings>(cx, &t) {
            let written = t.has("spike_floor");
            let floor_m = h.spike_floor_m * if written { m_per_unit } else { 1.0 };
            s.health = HealthSettings {
                spike_floor_m: floor_m,
                ..h
            };
        }
    }
    let settings = Some(s).filter(|_| cx.problems.len() == before);
    let mut models = Vec::new();
    for table in ["stage_response", "hst"] {
        for t in root.tables(cx, table) {
            models.push(entry(cx, t, table, 1.0, |cx, r| model(cx, r, site)));
        }
    }
    SiteTrendsEntry { settings, models }
}

/// `rate_windows`: durations written `<n>h` or `<n>d`, distinct, shortest first.
fn rate_windows(cx: &mut Cx<'_>, t: &Tbl<'_>) -> Option<Vec<RateSpan>> {
    let items = t.array(
        cx,
        "rate_windows",
        false,
        (
            "an array of durations",
            "a duration such as \"24h\" or \"7d\"",
        ),
        |v| {
            let text = v.as_str()?;
            let span_s = duration_s(text)?;
            Some(RateSpan {
                label: text.to_string(),
                span_s,
            })
        },
    )?;
    let mut spans: Vec<RateSpan> = Vec::new();
    for (span, pos) in items {
        if spans.iter().any(|s| s.span_s == span.span_s) {
            cx.at(
                pos.or_else(|| t.value_span("rate_windows")),
                format!(
                    "[trends]: key \"rate_windows\" lists {:?} twice (as the same duration); expected distinct windows",
                    span.label
                ),
            );
            return None;
        }
        spans.push(span);
    }
    if spans.is_empty() {
        t.problem_at(
            cx,
            "rate_windows",
            "key \"rate_windows\" is empty; expected at least one duration such as \"24h\"",
        );
        return None;
    }
    spans.sort_by_key(|s| s.span_s);
    Some(spans)
}

/// `24h` → 86 400, `7d` → 604 800; a positive whole number of hours or days.
pub(crate) fn duration_s(text: &str) -> Option<i64> {
    let (n, unit) = text.split_at(text.len().checked_sub(1)?);
    let per = match unit {
        "h" => 3600,
        "d" => 86_400,
        _ => return None,
    };
    let n: i64 = n.parse().ok().filter(|n| *n > 0 && *n <= 3660)?;
    Some(n * per)
}

/// `no_data_factor`: a multiple of the instrument's interval, 1 to `limits::NO_DATA_FACTOR`.
pub(crate) fn no_data_factor<'de, D: serde::Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
    let Num(v) = Num::deserialize(d)?;
    if (1.0..=limits::NO_DATA_FACTOR).contains(&v) {
        return Ok(v);
    }
    Err(serde::de::Error::custom(format!(
        "is {v}, expected a number >= 1 and at most {} (a multiple of the instrument's interval_s)",
        limits::NO_DATA_FACTOR
    )))
}

/// Hours (a number, as written) to whole seconds.
fn hours_s(h: f64) -> i64 {
    (h * 3600.0).round() as i64
}

/// One `[[stage_response]]` or `[[hst]]` table (`r.t.header` tells which).
fn model(cx: &mut Cx<'_>, r: &mut Reader<'_>, site: &str) -> Read<Model> {
    let name = r.t.peek_str("id").unwrap_or_default().to_string();
    let (id, object) = if r.t.header == "[[stage_response]]" {
        let raw: RawStageResponse = de::table(cx, &r.t).unwrap_or_default();
        let piezometer = r.reference(cx, "piezometer", raw.piezometer, true, Want::Piezometer);
        let gauge = r.reference(cx, "stage_gauge", raw.stage_gauge, true, Want::StageGauge);
        let t = &r.t;
        let training = raw.training_days.map_or(DEFAULT_TRAINING_DAYS, |d| d.0);
        let (lo, hi) = raw.lag_range_h.map_or(DEFAULT_LAG_RANGE_H, |p| (p.0, p.1));
        if lo < 0.0 || hi > limits::YEAR_H {
            t.problem_at(
                cx,
                "lag_range_h",
                format!(
                    "key \"lag_range_h\" is [{lo}, {hi}], expected [low, high] hours with low >= 0 and high at most {}",
                    limits::YEAR_H
                ),
            );
        }
        let step = raw.lag_step_h.map_or(DEFAULT_LAG_STEP_H, |h| h.0);
        let range_ok = lo >= 0.0 && hi <= limits::YEAR_H;
        if range_ok && (hi - lo) / step > MAX_LAGS {
            t.problem_at(cx, "lag_step_h", format!("key \"lag_step_h\" is {step}: {:.0} lags over lag_range_h, expected at most {MAX_LAGS}", (hi - lo) / step));
        }
        let refit = raw
            .refit_interval_h
            .map_or(DEFAULT_STAGE_RESPONSE_REFIT_H, |h| h.0);
        let model = match (piezometer, gauge) {
            (Some(piezometer), Some(stage_gauge)) => {
                Some(Model::StageResponse(StageResponseSpec {
                    id: name,
                    site: site.into(),
                    piezometer,
                    stage_gauge,
                    training_s: (training * 86_400.0).round() as i64,
                    lag_min_s: hours_s(lo),
                    lag_max_s: hours_s(hi),
                    lag_step_s: hours_s(step).max(1),
                    refit_s: hours_s(refit).max(1),
                }))
            }
            _ => None,
        };
        (raw.id, model)
    } else {
        let raw: RawHst = de::table(cx, &r.t).unwrap_or_default();
        let instrument = r.reference(cx, "instrument", raw.instrument, true, Want::Piezometer);
        let gauge = r.reference(
            cx,
            "reservoir_gauge",
            raw.reservoir_gauge,
            true,
            Want::StageGauge,
        );
        let degree = raw.degree.map_or(DEFAULT_HST_DEGREE, |d| d.0) as usize;
        let refit = raw.refit_interval_h.map_or(DEFAULT_HST_REFIT_H, |h| h.0);
        let model = match (instrument, gauge) {
            (Some(instrument), Some(reservoir_gauge)) => Some(Model::Hst(HstSpec {
                id: name,
                site: site.into(),
                instrument,
                reservoir_gauge,
                degree,
                refit_s: hours_s(refit).max(1),
            })),
            _ => None,
        };
        (raw.id, model)
    };
    Read {
        id,
        tolerance_s: None,
        object,
    }
}

#[cfg(test)]
mod tests;
