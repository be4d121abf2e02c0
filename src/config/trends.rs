//! Reading a site file's trend, health and model tables — `[trends]`, `[health]`,
//! `[[stage_response]]` and `[[hst]]` — into the `model` settings (durations in seconds, lengths
//! in metres).
//!
//! Owns those keys, their defaults and ranges. Like `objects`, it must not decide what a
//! reference names: each model's instrument references are recorded and settled by `resolve`
//! once every site file is read (through `objects`' reference checks), and `load` checks that
//! model ids are unique among instruments and objects.

use std::collections::BTreeMap;

use serde::Deserialize;

use super::de::{self, Int, Num, Text};
use super::limits;
use super::model::{HealthSettings, HstSpec, RateSpan, SiteTrends, StageResponseSpec};
use super::objects::{reference_problem, Known, Ref, Want};
use super::problem::Cx;
use super::reader::Tbl;
use super::site::Pos;

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

/// `[health]` as written; defaults are `HealthSettings::default()`, checks in `health`.
#[derive(Deserialize)]
struct RawHealth {
    spike_window: Option<Int<3, 10_000>>,
    spike_k: Option<Num>,
    spike_floor: Option<Num>,
    flatline_count: Option<Int<2, 10_000>>,
    flatline_tolerance: Option<Num>,
    no_data_factor: Option<Num>,
    thermistor_range: Option<de::Pair>,
    thermistor_max_jump: Option<Num>,
    use_flagged: Option<bool>,
}

/// `[[stage_response]]` as written.
#[derive(Deserialize, Default)]
struct RawStageResponse {
    #[serde(rename = "id")]
    _id: Option<Text>,
    piezometer: Option<Text>,
    stage_gauge: Option<Text>,
    training_days: Option<Num>,
    lag_range_h: Option<de::Pair>,
    lag_step_h: Option<Num>,
    refit_interval_h: Option<Num>,
}

/// `[[hst]]` as written.
#[derive(Deserialize, Default)]
struct RawHst {
    #[serde(rename = "id")]
    _id: Option<Text>,
    instrument: Option<Text>,
    reservoir_gauge: Option<Text>,
    degree: Option<Int<1, 4>>,
    refit_interval_h: Option<Num>,
}

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

/// What `load` needs of one `[[stage_response]]` or `[[hst]]` table.
pub(crate) struct ModelEntry {
    /// `stage_response` or `hst`.
    pub table: &'static str,
    /// How messages name it, e.g. `stage_response "AB-RESP-1B"`.
    pub what: String,
    pub id: Option<(String, Pos)>,
    pub refs: Vec<Ref>,
    /// The model, if its own table had no problems (already reported).
    pub model: Option<Model>,
}

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
    if let Some(mut t) = root.sub(cx, "trends", "[trends]") {
        t.what = "[trends]".into();
        if let Some(r) = de::table::<RawTrends>(cx, &t) {
            if let Some(w) = rate_windows(cx, &t) {
                s.rate_windows = w;
            }
            s.max_points = r.max_points.map_or(96, |n| n.0 as usize);
        }
    }
    if let Some(mut t) = root.sub(cx, "health", "[health]") {
        t.what = "[health]".into();
        if let Some(r) = de::table::<RawHealth>(cx, &t) {
            s.health = health(cx, &t, r, m_per_unit);
        }
    }
    let settings = Some(s).filter(|_| cx.problems.len() == before);
    let mut models = Vec::new();
    for table in ["stage_response", "hst"] {
        for t in root.tables(cx, table) {
            models.push(model(cx, t, table, site));
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

/// A number > `lo` and <= `hi` under `key`, or `default`.
fn within(
    cx: &mut Cx<'_>,
    t: &Tbl<'_>,
    (key, v): (&str, Option<Num>),
    lo: f64,
    hi: f64,
    default: f64,
) -> f64 {
    let expected = format!("a number > {lo} and at most {hi}");
    checked(cx, t, key, v, (|v| v > lo && v <= hi, &expected)).unwrap_or(default)
}

/// The number under `key` when `ok` accepts it; a problem naming what is `expected` otherwise.
fn checked(
    cx: &mut Cx<'_>,
    t: &Tbl<'_>,
    key: &str,
    v: Option<Num>,
    (ok, expected): (impl Fn(f64) -> bool, &str),
) -> Option<f64> {
    let Num(v) = v?;
    if ok(v) {
        return Some(v);
    }
    t.problem_at(
        cx,
        key,
        format!("key \"{key}\" is {v}, expected {expected}"),
    );
    None
}

fn health(cx: &mut Cx<'_>, t: &Tbl<'_>, r: RawHealth, m: f64) -> HealthSettings {
    let d = HealthSettings::default();
    let nonneg = (|v: f64| v >= 0.0, "a number >= 0");
    let positive = (|v: f64| v > 0.0, "a number > 0");
    let factor = format!(
        "a number >= 1 and at most {} (a multiple of the instrument's interval_s)",
        limits::NO_DATA_FACTOR
    );
    let factor_ok = |v: f64| (1.0..=limits::NO_DATA_FACTOR).contains(&v);
    let spike_floor = checked(cx, t, "spike_floor", r.spike_floor, nonneg);
    let max_jump = checked(
        cx,
        t,
        "thermistor_max_jump",
        r.thermistor_max_jump,
        positive,
    );
    HealthSettings {
        spike_window: r.spike_window.map_or(d.spike_window, |n| n.0 as usize),
        spike_k: checked(cx, t, "spike_k", r.spike_k, positive).unwrap_or(d.spike_k),
        spike_floor_m: spike_floor.map_or(d.spike_floor_m, |v| v * m),
        flatline_count: r.flatline_count.map_or(d.flatline_count, |n| n.0 as usize),
        // In the raw value's own unit (it differs by instrument), so no length conversion.
        flatline_tolerance_raw: checked(cx, t, "flatline_tolerance", r.flatline_tolerance, nonneg)
            .unwrap_or(d.flatline_tolerance_raw),
        no_data_factor: checked(
            cx,
            t,
            "no_data_factor",
            r.no_data_factor,
            (factor_ok, &factor),
        )
        .unwrap_or(d.no_data_factor),
        thermistor_range_c: r
            .thermistor_range
            .map_or(d.thermistor_range_c, |p| (p.0, p.1)),
        thermistor_max_jump_c: max_jump.unwrap_or(d.thermistor_max_jump_c),
        use_flagged: r.use_flagged.unwrap_or(d.use_flagged),
    }
}

/// `refit_interval_h`: hours, more than 0 and at most a year.
fn refit_h(cx: &mut Cx<'_>, t: &Tbl<'_>, v: Option<Num>, default: f64) -> f64 {
    within(cx, t, ("refit_interval_h", v), 0.0, limits::YEAR_H, default)
}

/// Hours (a number, as written) to whole seconds.
fn hours_s(h: f64) -> i64 {
    (h * 3600.0).round() as i64
}

fn model(cx: &mut Cx<'_>, mut t: Tbl<'_>, table: &'static str, site: &str) -> ModelEntry {
    let before = cx.problems.len();
    let id = t
        .peek_str("id")
        .filter(|id| !id.trim().is_empty())
        .map(String::from);
    if let Some(id) = &id {
        t.what = format!("{table} {id:?}");
    }
    let id_pos = cx.pos(t.value_span("id"));
    let mut refs = Vec::new();
    let mut reference = |cx: &mut Cx<'_>, t: &Tbl<'_>, key: &'static str, v: Option<Text>, want| {
        let found = t.need(cx, key, v)?.0;
        let pos = cx.pos(t.value_span(key));
        refs.push(Ref {
            key,
            id: found.clone(),
            pos,
            want,
        });
        Some(found)
    };
    let name = id.clone().unwrap_or_default();
    let model = if table == "stage_response" {
        let r: RawStageResponse = de::table(cx, &t).unwrap_or_default();
        let _ = t.need(cx, "id", id.as_ref());
        let piezometer = reference(cx, &t, "piezometer", r.piezometer, Want::Piezometer);
        let gauge = reference(cx, &t, "stage_gauge", r.stage_gauge, Want::StageGauge);
        let training = within(
            cx,
            &t,
            ("training_days", r.training_days),
            0.0,
            limits::TRAINING_DAYS,
            DEFAULT_TRAINING_DAYS,
        );
        let (lo, hi) = r.lag_range_h.map_or(DEFAULT_LAG_RANGE_H, |p| (p.0, p.1));
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
        let step = within(
            cx,
            &t,
            ("lag_step_h", r.lag_step_h),
            0.0,
            limits::YEAR_H,
            DEFAULT_LAG_STEP_H,
        );
        let range_ok = lo >= 0.0 && hi <= limits::YEAR_H;
        if range_ok && (hi - lo) / step > MAX_LAGS {
            t.problem_at(cx, "lag_step_h", format!("key \"lag_step_h\" is {step}: {:.0} lags over lag_range_h, expected at most {MAX_LAGS}", (hi - lo) / step));
        }
        let refit = refit_h(cx, &t, r.refit_interval_h, DEFAULT_STAGE_RESPONSE_REFIT_H);
        match (piezometer, gauge) {
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
        }
    } else {
        let r: RawHst = de::table(cx, &t).unwrap_or_default();
        let _ = t.need(cx, "id", id.as_ref());
        let instrument = reference(cx, &t, "instrument", r.instrument, Want::Piezometer);
        let gauge = reference(
            cx,
            &t,
            "reservoir_gauge",
            r.reservoir_gauge,
            Want::StageGauge,
        );
        let degree = r.degree.map_or(DEFAULT_HST_DEGREE, |d| d.0) as usize;
        let refit = refit_h(cx, &t, r.refit_interval_h, DEFAULT_HST_REFIT_H);
        match (instrument, gauge) {
            (Some(instrument), Some(reservoir_gauge)) => Some(Model::Hst(HstSpec {
                id: name,
                site: site.into(),
                instrument,
                reservoir_gauge,
                degree,
                refit_s: hours_s(refit).max(1),
            })),
            _ => None,
        }
    };
    let ok = id.is_some() && cx.problems.len() == before;
    ModelEntry {
        table,
        what: t.what.clone(),
        id: id.map(|s| (s, id_pos)),
        refs,
        model: model.filter(|_| ok),
    }
}

/// Check a model's references against every known id (`site`: the model's site). Returns the
/// problems (position, message) and the model when there were none.
pub(crate) fn resolve(
    e: &ModelEntry,
    site: &str,
    ids: &BTreeMap<&str, Known<'_>>,
) -> (Vec<(Pos, String)>, Option<Model>) {
    let problems: Vec<(Pos, String)> = e
        .refs
        .iter()
        .filter_map(|r| {
            reference_problem(&e.what, site, r, ids.get(r.id.as_str())).map(|m| (r.pos, m))
        })
        .collect();
    let model = e.model.clone().filter(|_| problems.is_empty());
    (problems, model)
}

#[cfg(test)]
mod tests;
