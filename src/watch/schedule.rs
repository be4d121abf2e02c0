//! The refit schedule of `seepd run`: a tokio task that refits each model every
//! `refit_interval_h` (and at start when it has never been fitted), stores the fit in the model
//! history, and hands the result to the engine through a channel.
//!
//! Why a task of its own with its own SQLite connection, not the writer: a fit reads up to a
//! year or more of readings and runs a lag search or a QR, which must not hold up the commit
//! and acknowledgement of incoming readings. WAL mode lets this connection read while the
//! writer writes; its one insert per fit waits on the busy timeout like any writer. The engine
//! installs a new model before its next reading (`Watcher::receive_fits`), so the writer never
//! blocks on a fit. Owns the timing only; fitting is `fit`.

use std::sync::mpsc::Sender;
use std::sync::Arc;
use std::time::Duration;

use chrono::Utc;

use crate::config::Config;
use crate::store::Store;

use super::fit::{model_ids, refit};
use super::Fitted;

/// After a database error, try again this much later.
const RETRY_MS: i64 = 60_000;

/// Each model's refit interval, ms.
fn interval_ms(cfg: &Config, id: &str) -> i64 {
    let r = cfg
        .trends
        .stage_responses
        .iter()
        .find(|r| r.id == id)
        .map(|r| r.refit_s);
    let h = cfg
        .trends
        .hst
        .iter()
        .find(|h| h.id == id)
        .map(|h| h.refit_s);
    r.or(h).unwrap_or(86_400) * 1000
}

/// When each model is next due: its newest fit + its interval, or now if never fitted.
fn first_due(cfg: &Config, now_ms: i64) -> Vec<(String, i64)> {
    let latest = Store::open(&cfg.service.database)
        .and_then(|s| s.latest_models())
        .unwrap_or_else(|e| {
            tracing::error!(error = %e, "Cannot read the model history; refitting every model now");
            Vec::new()
        });
    model_ids(cfg)
        .into_iter()
        .map(|id| {
            let last = latest.iter().find(|m| m.id == id).map(|m| m.fitted_ms);
            let due = last.map_or(now_ms, |t| t + interval_ms(cfg, &id));
            (id, due)
        })
        .collect()
}

/// Refit the models on schedule, sending each outcome to `tx`, until the receiver is gone (or
/// the task is aborted at shutdown).
pub async fn run(cfg: Arc<Config>, tx: Sender<Fitted>) {
    if model_ids(&cfg).is_empty() {
        return;
    }
    let c = Arc::clone(&cfg);
    let now = Utc::now().timestamp_millis();
    let Ok(mut due) = tokio::task::spawn_blocking(move || first_due(&c, now)).await else {
        return;
    };
    loop {
        let next = due.iter().map(|d| d.1).min().unwrap_or(i64::MAX);
        let wait_ms = (next - Utc::now().timestamp_millis()).clamp(0, 86_400_000);
        tokio::time::sleep(Duration::from_millis(wait_ms as u64)).await;
        let now = Utc::now().timestamp_millis();
        let ids: Vec<String> = due
            .iter()
            .filter(|d| d.1 <= now)
            .map(|d| d.0.clone())
            .collect();
        if ids.is_empty() {
            continue;
        }
        let c = Arc::clone(&cfg);
        let run = ids.clone();
        let outcome = tokio::task::spawn_blocking(move || {
            let store = Store::open(&c.service.database)?;
            run.iter()
                .map(|id| refit(&store, &c, id, now))
                .collect::<Result<Vec<Fitted>, _>>()
        })
        .await;
        let fits = match outcome {
            Ok(Ok(fits)) => fits,
            Ok(Err(e)) => {
                tracing::error!(error = %e, "Model refit failed on the database; retrying in a minute");
                due.iter_mut()
                    .filter(|d| ids.contains(&d.0))
                    .for_each(|d| d.1 = now + RETRY_MS);
                continue;
            }
            Err(_) => return,
        };
        for f in fits {
            match &f.model {
                Ok(_) => tracing::info!(model = %f.id, "Model refitted"),
                Err(e) => tracing::warn!(model = %f.id, reason = %e, "Model not fitted"),
            }
            if let Some(d) = due.iter_mut().find(|d| d.0 == f.id) {
                d.1 = now + interval_ms(&cfg, &f.id);
            }
            if tx.send(f).is_err() {
                return;
            }
        }
    }
}
