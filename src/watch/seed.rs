//! Start-up state from the store: the recent readings of every instrument (for the rate
//! windows, the health checks, completeness and the stage the models read) and the newest fit
//! of every model, so a restart — or a replay into an existing database — loses no trend.
//!
//! Owns which stored readings are read back. Reads the store only.

use crate::config::Config;
use crate::store::{Store, StoreError};

use super::models::from_row;
use super::{Fitted, Watcher, COMPLETENESS_MS};

/// How far back from an instrument's newest stored reading its state needs readings: the
/// longest rate window, the completeness period, the health windows and the longest lag.
fn lookback_ms(cfg: &Config, instrument: &str) -> i64 {
    let Some(i) = cfg.instruments.get(instrument) else {
        return 0;
    };
    let st = cfg.trends.site(&i.site);
    let interval_ms = i.interval_s as i64 * 1000;
    let health = (st.health.spike_window.max(st.health.flatline_count) as i64 + 1) * interval_ms;
    let windows = st
        .rate_windows
        .iter()
        .map(|w| w.span_s * 1000)
        .max()
        .unwrap_or(0);
    let lag = cfg
        .trends
        .stage_responses
        .iter()
        .filter(|r| r.stage_gauge == instrument)
        .map(|r| r.lag_max_s * 1000 + 4 * interval_ms)
        .max()
        .unwrap_or(0);
    windows.max(health).max(lag).max(COMPLETENESS_MS)
}

/// Fill `w` from `store` and mark the start of watching at `now_ms`.
///
/// # Errors
/// Database errors.
pub fn from_store(
    w: &mut Watcher,
    cfg: &Config,
    store: &Store,
    now_ms: i64,
) -> Result<(), StoreError> {
    for span in store.instrument_spans()? {
        if !cfg.instruments.contains_key(&span.instrument) {
            continue;
        }
        w.seed_first(&span.instrument, span.first_ms);
        let since = span.last_ms - lookback_ms(cfg, &span.instrument);
        for r in store.readings_since(&span.instrument, since)? {
            w.seed(
                &span.instrument,
                r.t_ms,
                r.total_head_m,
                r.raw,
                r.temperature_c,
                r.flags,
            );
        }
    }
    for row in store.latest_models()? {
        w.install(Fitted {
            id: row.id.clone(),
            model: from_row(&row),
        });
    }
    w.start_watching(now_ms);
    Ok(())
}
