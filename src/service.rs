//! `seepd run`: load configuration, open the store, and run live ingestion until a signal.
//!
//! Owns start-up order and the shutdown signal; the work itself is in `ingest::mqtt`.

use std::future::Future;
use std::sync::Arc;

use anyhow::Context as _;
use chrono::Utc;

use crate::config::Config;
use crate::engine::Engine;
use crate::ingest::progress::Counters;
use crate::store::Store;

/// Open the store for `cfg`, record the instruments and build an engine with its barometer
/// memory seeded from the stored readings.
///
/// # Errors
/// Database errors.
pub fn open(cfg: &Arc<Config>) -> anyhow::Result<(Store, Engine)> {
    let mut store = Store::open(&cfg.service.database)
        .with_context(|| format!("opening database {}", cfg.service.database.display()))?;
    let now = Utc::now();
    store.sync_instruments(cfg, now)?;
    let mut engine = Engine::new(Arc::clone(cfg));
    let since = now.timestamp_millis() - cfg.service.barometer_max_age_s * 1000 * 2;
    for b in engine.barometers() {
        for (t, p) in store.barometer_since(&b, since)? {
            engine.remember_barometer(&b, t, p);
        }
    }
    for l in store.latest_all()? {
        if let Some(head_m) = l.total_head_m {
            let head = crate::derive::Head {
                t_ms: l.t_ms,
                head_m,
                flags: l.flags,
            };
            engine.seed_head(&l.instrument, head);
        }
    }
    crate::watch::seed::from_store(engine.watch_mut(), cfg, &store, now.timestamp_millis())?;
    Ok((store, engine))
}

/// Run the service until `shutdown` resolves.
///
/// # Errors
/// Database or TLS set-up errors.
pub async fn run(
    cfg: Arc<Config>,
    counters: Arc<Counters>,
    shutdown: impl Future<Output = ()>,
) -> anyhow::Result<()> {
    let (store, mut engine) = open(&cfg)?;
    let (fits_tx, fits_rx) = std::sync::mpsc::channel();
    engine.watch_mut().receive_fits(fits_rx);
    let refits = tokio::spawn(crate::watch::schedule::run(Arc::clone(&cfg), fits_tx));
    tracing::info!(
        database = %cfg.service.database.display(),
        instruments = cfg.instruments.len(),
        subscriptions = cfg.subscriptions.len(),
        "seepd starting"
    );
    let result = crate::ingest::mqtt::run(cfg, store, engine, counters, shutdown).await;
    refits.abort();
    result
}

/// Resolves on SIGINT or SIGTERM.
pub async fn signal() {
    #[cfg(unix)]
    {
        use tokio::signal::unix::{signal, SignalKind};
        match signal(SignalKind::terminate()) {
            Ok(mut term) => {
                tokio::select! {
                    _ = tokio::signal::ctrl_c() => {}
                    _ = term.recv() => {}
                }
            }
            Err(_) => {
                let _ = tokio::signal::ctrl_c().await;
            }
        }
    }
    #[cfg(not(unix))]
    {
        let _ = tokio::signal::ctrl_c().await;
    }
}
