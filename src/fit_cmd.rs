//! `seepd fit`: refit the stage-response and HST models now from a database (the configured one,
//! or a replay database) and print one line per model.
//!
//! Owns the output lines and the exit status; fitting is `watch::fit`.

use std::fmt::Write as _;

use chrono::{SecondsFormat, TimeZone, Utc};

use crate::config::Config;
use crate::store::{ModelRow, Store};
use crate::watch::fit::{fit_and_store, model_ids, FitError};

/// A time as RFC 3339 to the second, UTC (the raw number when out of range).
pub fn time(t_ms: i64) -> String {
    Utc.timestamp_millis_opt(t_ms).single().map_or_else(
        || t_ms.to_string(),
        |t| t.to_rfc3339_opts(SecondsFormat::Secs, true),
    )
}

/// One line describing a stored fit.
pub fn describe(m: &ModelRow) -> String {
    let mut s = format!("{}: fitted", m.id);
    if let (Some(a), Some(b), Some(lag)) = (m.a, m.b, m.lag_ms) {
        let _ = write!(
            s,
            " h = a + b·stage(t − lag): b = {b:.4} m/m, a = {a:.3} m, lag = {} h,",
            lag as f64 / 3.6e6
        );
    } else {
        let _ = write!(s, " HST,");
    }
    let _ = write!(
        s,
        " R² = {:.4}, σ = {:.4} m, n = {}, training {} to {}",
        m.r_squared,
        m.sigma,
        m.n,
        time(m.train_start_ms),
        time(m.train_end_ms)
    );
    s
}

/// Fit `id` (or every model) into `store`; returns the exit code: 0, or 1 when `id` was given
/// and could not be fitted. Models that cannot be fitted yet are reported, not errors.
///
/// # Errors
/// Database errors, and an unknown `id`.
pub fn run(cfg: &Config, store: &Store, id: Option<&str>, out: &mut String) -> anyhow::Result<i32> {
    let ids = match id {
        Some(id) if !model_ids(cfg).iter().any(|m| m == id) => anyhow::bail!(
            "no [[stage_response]] or [[hst]] model or [[section]] with id {id:?} (models: {})",
            model_ids(cfg).join(", ")
        ),
        Some(id) => vec![id.to_string()],
        None => model_ids(cfg),
    };
    if ids.is_empty() {
        out.push_str("no [[stage_response]] or [[hst]] models configured\n");
    }
    let now = Utc::now().timestamp_millis();
    let mut failed = false;
    for id in ids {
        match fit_and_store(store, cfg, &id, now) {
            Ok(m) => out.push_str(&(describe(&m) + "\n")),
            Err(FitError::Data(e)) => {
                failed = true;
                let _ = writeln!(out, "{id}: not fitted: {e}");
            }
            Err(FitError::Store(e)) => return Err(e.into()),
        }
    }
    Ok(i32::from(failed && id.is_some()))
}
