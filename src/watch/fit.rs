//! Fitting the configured stage-response and HST models from the stored readings, and keeping
//! every fit in the model history. Used by `seepd fit` and by the refit schedule of `seepd run`.
//!
//! Owns the training data: the training period ends at the modelled instrument's latest
//! reading (so a replay database fits as well as a live one), flagged readings are left out as
//! in derived quantities, and stage is interpolated across gaps up to
//! `STAGE_GAP_INTERVALS` gauge intervals. The fitting itself is `domain::{response, hst}`.

use crate::config::{Config, HstSpec, StageResponseSpec};
use crate::derive::excluding_flags;
use crate::domain::hst::{fit_hst, HstObservation, MIN_RECORD_DAYS};
use crate::domain::response::{fit_response, LagSearch, StageSeries};
use crate::store::{ModelRow, Store, StoreError};

use super::models::{params_json, LiveModel, STAGE_GAP_INTERVALS};
use super::Fitted;

/// Why a model could not be fitted: the database failed, or the data do not allow it yet.
#[derive(Debug, thiserror::Error)]
pub enum FitError {
    #[error(transparent)]
    Store(#[from] StoreError),
    #[error("{0}")]
    Data(String),
}

/// Every configured model id, response models first, in configuration order.
pub fn model_ids(cfg: &Config) -> Vec<String> {
    let r = cfg.trends.stage_responses.iter().map(|r| r.id.clone());
    r.chain(cfg.trends.hst.iter().map(|h| h.id.clone()))
        .collect()
}

fn gap_ms(cfg: &Config, gauge: &str) -> i64 {
    let interval_ms = cfg
        .instruments
        .get(gauge)
        .map_or(3_600_000, |i| i.interval_s as i64 * 1000);
    interval_ms * STAGE_GAP_INTERVALS
}

/// The stored stage of `gauge` from `start_ms` (unflagged), as a series.
fn stage(
    store: &Store,
    cfg: &Config,
    gauge: &str,
    start_ms: i64,
    end_ms: i64,
) -> Result<StageSeries, FitError> {
    let points = store.heads_between(gauge, start_ms, end_ms, excluding_flags(cfg, gauge))?;
    StageSeries::new(points, gap_ms(cfg, gauge)).map_err(|e| FitError::Data(e.to_string()))
}

fn last_reading(store: &Store, id: &str) -> Result<i64, FitError> {
    store
        .last_head_ms(id)?
        .ok_or_else(|| FitError::Data(format!("no readings of {id} stored")))
}

fn response(
    store: &Store,
    cfg: &Config,
    r: &StageResponseSpec,
    fitted_ms: i64,
) -> Result<(ModelRow, LiveModel), FitError> {
    let end = last_reading(store, &r.piezometer)? + 1;
    let start = end - r.training_s * 1000;
    let heads = store.heads_between(
        &r.piezometer,
        start,
        end,
        excluding_flags(cfg, &r.piezometer),
    )?;
    let lag_max_ms = r.lag_max_s * 1000;
    let series = stage(
        store,
        cfg,
        &r.stage_gauge,
        start - lag_max_ms - gap_ms(cfg, &r.stage_gauge),
        end,
    )?;
    let search = LagSearch {
        min_ms: r.lag_min_s * 1000,
        max_ms: lag_max_ms,
        step_ms: r.lag_step_s * 1000,
    };
    let m = fit_response(&heads, &series, start, end, search)
        .map_err(|e| FitError::Data(e.to_string()))?;
    let live = LiveModel::Response(m.clone());
    let row = ModelRow {
        id: r.id.clone(),
        kind: "response".into(),
        fitted_ms,
        train_start_ms: start,
        train_end_ms: end,
        a: Some(m.intercept_m),
        b: Some(m.ratio),
        lag_ms: Some(m.lag_ms),
        r_squared: m.r_squared,
        sigma: m.sigma_m,
        n: m.n as i64,
        params: params_json(&live),
    };
    Ok((row, live))
}

fn hst(
    store: &Store,
    cfg: &Config,
    h: &HstSpec,
    fitted_ms: i64,
) -> Result<(ModelRow, LiveModel), FitError> {
    let end = last_reading(store, &h.instrument)? + 1;
    let heads = store.heads_between(
        &h.instrument,
        i64::MIN,
        end,
        excluding_flags(cfg, &h.instrument),
    )?;
    let (first, last) = match (heads.first(), heads.last()) {
        (Some(f), Some(l)) => (f.0, l.0),
        _ => {
            return Err(FitError::Data(format!(
                "no usable readings of {} stored",
                h.instrument
            )))
        }
    };
    let days = (last - first) as f64 / 86_400_000.0;
    if days < MIN_RECORD_DAYS {
        return Err(FitError::Data(format!(
            "needs a year of data: {days:.1} days of record of {}",
            h.instrument
        )));
    }
    let series = stage(
        store,
        cfg,
        &h.reservoir_gauge,
        first - gap_ms(cfg, &h.reservoir_gauge),
        end,
    )?;
    let obs: Vec<HstObservation> = heads
        .iter()
        .filter_map(|&(t_ms, value)| {
            series.at(t_ms).map(|reservoir_m| HstObservation {
                t_ms,
                reservoir_m,
                value,
            })
        })
        .collect();
    let m = fit_hst(&obs, h.degree).map_err(|e| FitError::Data(e.to_string()))?;
    let live = LiveModel::Hst(m.clone());
    let row = ModelRow {
        id: h.id.clone(),
        kind: "hst".into(),
        fitted_ms,
        train_start_ms: first,
        train_end_ms: end,
        a: None,
        b: None,
        lag_ms: None,
        r_squared: m.r_squared,
        sigma: m.sigma,
        n: m.n as i64,
        params: params_json(&live),
    };
    Ok((row, live))
}

/// Fit model `id` from the stored readings and append it to the model history.
///
/// # Errors
/// `Data` when the model is unknown or the data do not allow a fit (too few readings, under a
/// year for HST, no variation...); `Store` for database errors.
pub fn fit_and_store(
    store: &Store,
    cfg: &Config,
    id: &str,
    fitted_ms: i64,
) -> Result<ModelRow, FitError> {
    let fitted = if let Some(r) = cfg.trends.stage_responses.iter().find(|r| r.id == id) {
        response(store, cfg, r, fitted_ms)?
    } else if let Some(h) = cfg.trends.hst.iter().find(|h| h.id == id) {
        hst(store, cfg, h, fitted_ms)?
    } else {
        return Err(FitError::Data(format!(
            "no [[stage_response]] or [[hst]] model with id {id:?} (configured: {})",
            model_ids(cfg).join(", ")
        )));
    };
    store.insert_model(&fitted.0)?;
    Ok(fitted.0)
}

/// [`fit_and_store`] as the outcome the engine installs.
///
/// # Errors
/// Database errors only; a failed fit is an `Err` inside the returned `Fitted`.
pub fn refit(store: &Store, cfg: &Config, id: &str, fitted_ms: i64) -> Result<Fitted, StoreError> {
    let model = match fit_and_store(store, cfg, id, fitted_ms) {
        Ok(row) => super::models::from_row(&row),
        Err(FitError::Data(e)) => Err(e),
        Err(FitError::Store(e)) => return Err(e),
    };
    Ok(Fitted {
        id: id.to_string(),
        model,
    })
}
