//! The stage-response and HST models in use, the recent stage of the gauges they read, and
//! their live residuals; plus the JSON the store keeps of a fitted model.
//!
//! Owns the "no value" reasons of the residuals (no model yet, why a fit failed, a year of data
//! still missing, stage unknown at t − lag). Pure: no I/O, no clock.

use std::collections::{BTreeMap, HashMap};
use std::sync::Arc;

use serde_json::{json, Value};

use crate::config::{Config, HstSpec, StageResponseSpec};
use crate::domain::hst::{HstModel, MIN_RECORD_DAYS};
use crate::domain::response::{StageResponse, StageSeries};
use crate::model::{DerivedRow, ReadingRow};
use crate::quality::Flags;
use crate::store::ModelRow;

/// Gaps between stage readings up to this many gauge intervals are bridged by interpolation.
pub const STAGE_GAP_INTERVALS: i64 = 2;

const DAY_MS: f64 = 86_400_000.0;

/// A fitted model ready to predict.
#[derive(Debug, Clone, PartialEq)]
pub enum LiveModel {
    Response(StageResponse),
    Hst(HstModel),
}

/// The outcome of a fit for model `id`: the model, or why there is none.
#[derive(Debug, Clone, PartialEq)]
pub struct Fitted {
    pub id: String,
    pub model: Result<LiveModel, String>,
}

/// Recent stage readings of one gauge (time ms → elevation m), bounded in time.
#[derive(Debug, Clone, Default)]
pub struct StageMemory {
    points: BTreeMap<i64, f64>,
    /// Kept this far back from the newest reading, ms.
    keep_ms: i64,
    /// Largest gap bridged by interpolation (or held after the last reading), ms.
    max_gap_ms: i64,
}

impl StageMemory {
    /// Forget the reading at `t_ms` (rejected after it was taken).
    pub fn remove(&mut self, t_ms: i64) {
        self.points.remove(&t_ms);
    }

    pub fn push(&mut self, t_ms: i64, m: f64) {
        self.points.insert(t_ms, m);
        if let Some((&newest, _)) = self.points.last_key_value() {
            while self
                .points
                .first_key_value()
                .is_some_and(|(&t, _)| t < newest - self.keep_ms)
            {
                self.points.pop_first();
            }
        }
    }

    /// Stage at `t_ms`: interpolated between the readings either side within the gap, else the
    /// last reading before it if no older than the gap.
    pub fn at(&self, t_ms: i64) -> Option<f64> {
        let before = self
            .points
            .range(..=t_ms)
            .next_back()
            .map(|(&t, &v)| (t, v));
        let after = self.points.range(t_ms..).next().map(|(&t, &v)| (t, v));
        match (before, after) {
            (Some(b), Some(a)) if b.0 == a.0 => Some(b.1),
            (Some(b), Some(a)) => StageSeries::new(vec![b, a], self.max_gap_ms).ok()?.at(t_ms),
            (Some(b), None) if t_ms - b.0 <= self.max_gap_ms => Some(b.1),
            _ => None,
        }
    }
}

/// The models configured, each with the model in use or the reason there is none.
pub struct ModelSlots {
    responses: Vec<(StageResponseSpec, Result<StageResponse, String>)>,
    hst: Vec<(HstSpec, Result<HstModel, String>)>,
    /// Modelled instrument → indices into `responses` and `hst` (so a reading costs a lookup,
    /// not a scan of every model).
    by_instrument: HashMap<String, (Vec<usize>, Vec<usize>)>,
    /// Model id → (is HST, index).
    by_id: HashMap<String, (bool, usize)>,
}

fn not_fitted(id: &str) -> String {
    format!(
        "no model {id} fitted yet (run `seepd fit --id {id}`; `seepd run` refits on its schedule)"
    )
}

impl ModelSlots {
    pub fn new(cfg: &Arc<Config>) -> ModelSlots {
        let t = &cfg.trends;
        let mut by_instrument: HashMap<String, (Vec<usize>, Vec<usize>)> = HashMap::new();
        let mut by_id = HashMap::new();
        for (k, r) in t.stage_responses.iter().enumerate() {
            by_instrument
                .entry(r.piezometer.clone())
                .or_default()
                .0
                .push(k);
            by_id.insert(r.id.clone(), (false, k));
        }
        for (k, h) in t.hst.iter().enumerate() {
            by_instrument
                .entry(h.instrument.clone())
                .or_default()
                .1
                .push(k);
            by_id.insert(h.id.clone(), (true, k));
        }
        ModelSlots {
            by_instrument,
            by_id,
            responses: cfg
                .trends
                .stage_responses
                .iter()
                .map(|r| (r.clone(), Err(not_fitted(&r.id))))
                .collect(),
            hst: cfg
                .trends
                .hst
                .iter()
                .map(|h| (h.clone(), Err(not_fitted(&h.id))))
                .collect(),
        }
    }

    /// A stage memory for every gauge a model reads, long enough for the longest lag.
    pub fn stage_memories(&self, cfg: &Config) -> HashMap<String, StageMemory> {
        let gap = |g: &str| {
            cfg.instruments
                .get(g)
                .map_or(3_600_000, |i| i.interval_s as i64 * 1000)
                * STAGE_GAP_INTERVALS
        };
        let mut out: HashMap<String, StageMemory> = HashMap::new();
        let uses = self
            .responses
            .iter()
            .map(|(r, _)| (&r.stage_gauge, r.lag_max_s * 1000))
            .chain(self.hst.iter().map(|(h, _)| (&h.reservoir_gauge, 0)));
        for (g, lag_ms) in uses {
            let m = out.entry(g.clone()).or_default();
            m.max_gap_ms = gap(g);
            m.keep_ms = m.keep_ms.max(lag_ms + 2 * m.max_gap_ms);
        }
        out
    }

    pub fn install(&mut self, f: Fitted) {
        let wrong = |kind: &str| format!("model {} is not {kind} model", f.id);
        let failed = |e: &String| format!("model {} not fitted: {e}", f.id);
        match self.by_id.get(&f.id) {
            Some(&(false, k)) => {
                self.responses[k].1 = match &f.model {
                    Ok(LiveModel::Response(m)) => Ok(m.clone()),
                    Ok(_) => Err(wrong("a stage-response")),
                    Err(e) => Err(failed(e)),
                }
            }
            Some(&(true, k)) => {
                self.hst[k].1 = match &f.model {
                    Ok(LiveModel::Hst(m)) => Ok(m.clone()),
                    Ok(_) => Err(wrong("an HST")),
                    Err(e) => Err(failed(e)),
                }
            }
            None => {}
        }
    }

    /// The residual rows of the models `row`'s instrument feeds. `excluded`: the reading's
    /// flags that keep it out; `first_ms`: the instrument's first reading.
    pub fn residuals(
        &self,
        row: &ReadingRow,
        excluded: Flags,
        first_ms: Option<i64>,
        stages: &HashMap<String, StageMemory>,
    ) -> Vec<DerivedRow> {
        let mut out = Vec::new();
        let Some(head) = row.total_head_m else {
            return out;
        };
        let t = row.t_ms;
        let flagged = (!excluded.is_empty())
            .then(|| format!("reading flagged {}: left out", excluded.names().join(",")));
        let Some((resp, hst)) = self.by_instrument.get(&row.instrument) else {
            return out;
        };
        for (spec, slot) in resp.iter().map(|&k| &self.responses[k]) {
            let residual = flagged.clone().map_or(Ok(()), Err).and_then(|()| {
                let m = slot.as_ref().map_err(Clone::clone)?;
                let at = t - m.lag_ms;
                let stage = stages
                    .get(&spec.stage_gauge)
                    .and_then(|s| s.at(at))
                    .ok_or_else(|| {
                        format!(
                            "stage of {} at t − lag ({} h earlier) is not known",
                            spec.stage_gauge,
                            m.lag_ms as f64 / 3.6e6
                        )
                    })?;
                Ok((head - m.predict(stage), m.sigma_m))
            });
            let inputs = [spec.piezometer.as_str(), spec.stage_gauge.as_str()];
            push_pair(
                &mut out,
                &spec.id,
                ["stage_residual", "stage_residual_sigma"],
                t,
                residual,
                &inputs,
            );
        }
        for (spec, slot) in hst.iter().map(|&k| &self.hst[k]) {
            let residual = flagged.clone().map_or(Ok(()), Err).and_then(|()| {
                let m = slot.as_ref().map_err(|e| {
                    let days = first_ms.map_or(0.0, |f| (t - f) as f64 / DAY_MS);
                    if days < MIN_RECORD_DAYS && !e.contains("needs a year of data") {
                        format!("needs a year of data ({days:.1} days of record so far); {e}")
                    } else {
                        e.clone()
                    }
                })?;
                let level = stages
                    .get(&spec.reservoir_gauge)
                    .and_then(|s| s.at(t))
                    .ok_or_else(|| {
                        format!(
                            "reservoir level of {} at this time is not known",
                            spec.reservoir_gauge
                        )
                    })?;
                let r = m
                    .residual(t, level, head)
                    .ok_or_else(|| "before the model's first training reading".to_string())?;
                Ok((r, m.sigma))
            });
            let inputs = [spec.instrument.as_str(), spec.reservoir_gauge.as_str()];
            push_pair(
                &mut out,
                &spec.id,
                ["hst_residual", "hst_residual_sigma"],
                t,
                residual,
                &inputs,
            );
        }
        out
    }
}

/// A residual (m) and its ratio to σ as two rows.
fn push_pair(
    out: &mut Vec<DerivedRow>,
    object: &str,
    names: [&str; 2],
    t_ms: i64,
    residual: Result<(f64, f64), String>,
    inputs: &[&str],
) {
    let ratio = residual.clone().and_then(|(r, s)| {
        if s > 0.0 {
            Ok(r / s)
        } else {
            Err("the model's residual σ is 0 (an exact fit): no ratio".into())
        }
    });
    out.push(super::row(
        object,
        names[0].into(),
        t_ms,
        residual.map(|(r, _)| r),
        "m",
        inputs,
    ));
    out.push(super::row(
        object,
        names[1].into(),
        t_ms,
        ratio,
        "-",
        inputs,
    ));
}

/// The JSON kept in `models.params` for a model.
pub fn params_json(m: &LiveModel) -> String {
    match m {
        LiveModel::Response(r) => json!({
            "intercept_m": r.intercept_m, "ratio": r.ratio, "lag_ms": r.lag_ms,
            "correlation": r.correlation, "r_squared": r.r_squared, "sigma_m": r.sigma_m, "n": r.n,
        }),
        LiveModel::Hst(h) => json!({
            "hydrostatic": h.hydrostatic, "seasonal": h.seasonal, "time": h.time,
            "reservoir_max_m": h.reservoir_max_m, "reservoir_min_m": h.reservoir_min_m,
            "origin_ms": h.origin_ms, "r_squared": h.r_squared, "sigma": h.sigma, "n": h.n,
        }),
    }
    .to_string()
}

/// A stored model back into a live one.
///
/// # Errors
/// A description of what is missing or malformed in the stored JSON.
pub fn from_row(r: &ModelRow) -> Result<LiveModel, String> {
    let v: Value = serde_json::from_str(&r.params)
        .map_err(|e| format!("model {}: bad params JSON: {e}", r.id))?;
    let f = |k: &str| {
        v[k].as_f64()
            .ok_or_else(|| format!("model {}: params lack {k}", r.id))
    };
    let i = |k: &str| {
        v[k].as_i64()
            .ok_or_else(|| format!("model {}: params lack {k}", r.id))
    };
    let list = |k: &str| -> Result<Vec<f64>, String> {
        v[k].as_array()
            .and_then(|a| a.iter().map(Value::as_f64).collect())
            .ok_or_else(|| format!("model {}: params lack {k}", r.id))
    };
    match r.kind.as_str() {
        "response" => Ok(LiveModel::Response(StageResponse {
            intercept_m: f("intercept_m")?,
            ratio: f("ratio")?,
            lag_ms: i("lag_ms")?,
            correlation: f("correlation")?,
            r_squared: f("r_squared")?,
            sigma_m: f("sigma_m")?,
            n: i("n")? as usize,
        })),
        "hst" => {
            let hydrostatic = list("hydrostatic")?;
            let (s, t) = (list("seasonal")?, list("time")?);
            if !(2..=5).contains(&hydrostatic.len()) || s.len() != 4 || t.len() != 2 {
                return Err(format!(
                    "model {}: params have the wrong number of terms",
                    r.id
                ));
            }
            Ok(LiveModel::Hst(HstModel {
                hydrostatic,
                seasonal: [s[0], s[1], s[2], s[3]],
                time: [t[0], t[1]],
                reservoir_max_m: f("reservoir_max_m")?,
                reservoir_min_m: f("reservoir_min_m")?,
                origin_ms: i("origin_ms")?,
                r_squared: f("r_squared")?,
                sigma: f("sigma")?,
                n: i("n")? as usize,
            }))
        }
        other => Err(format!("model {}: unknown kind {other:?}", r.id)),
    }
}
