//! `seepd run`: load configuration, open the store, and run live ingestion, the mail worker, the
//! report scheduler and the export worker until a signal.
//!
//! Owns start-up order (store, rule states, mail worker, report scheduler, export worker,
//! ingestion) and the order of stopping; the work itself is in `ingest::mqtt`, `alerts`,
//! `notify`, `report::scheduler` and `export`.

use std::sync::Arc;

use anyhow::Context as _;
use chrono::Utc;

use std::time::Duration;

use crate::alerts::live::Live;
use crate::alerts::Evaluator;
use crate::config::Config;
use crate::engine::Engine;
use crate::ingest::link::LinkState;
use crate::ingest::progress::Counters;
use crate::notify::Worker;
use crate::report::scheduler::Scheduler;
use crate::shutdown::Shutdown;
use crate::store::export::QueueMode;
use crate::store::Store;

/// Open the store for `cfg`, record the instruments and build an engine with its barometer
/// memory seeded from the stored readings.
///
/// # Errors
/// Database errors.
pub fn open(cfg: &Arc<Config>) -> anyhow::Result<(Store, Engine)> {
    let mut store = Store::open(&cfg.service.database)
        .with_context(|| format!("opening database {}", cfg.service.database.display()))?;
    store.sync_instruments(cfg, Utc::now())?;
    if let Some(e) = cfg.export.as_ref().filter(|e| e.enabled) {
        store.set_export_queue(QueueMode {
            readings: e.readings,
            derived: e.derived,
        });
    }
    let engine = Engine::seeded(cfg, &store)?;
    Ok((store, engine))
}

/// The service's shutdown, with the configured deadline.
#[must_use]
pub fn shutdown_for(cfg: &Config) -> Shutdown {
    Shutdown::new(Duration::from_secs(cfg.service.shutdown_deadline_s))
}

/// `seepd run`: the service on its own runtime until SIGINT/SIGTERM.
///
/// # Errors
/// As `run`.
pub fn run_until_signal(cfg: Config) -> anyhow::Result<()> {
    let cfg = Arc::new(cfg);
    let rt = tokio::runtime::Runtime::new()?;
    let shutdown = shutdown_for(&cfg);
    let result = rt.block_on(async {
        shutdown.request_on_signal();
        run(cfg, Arc::new(Counters::default()), shutdown.clone()).await
    });
    // A task stuck past the shutdown deadline must not hold the exit.
    rt.shutdown_timeout(Duration::from_millis(500));
    result
}

/// Run the service until `shutdown` is requested; every part stops within its deadline.
///
/// # Errors
/// Database or TLS set-up errors; a part that did not stop in time (`DeadlinePassed`).
pub async fn run(
    cfg: Arc<Config>,
    counters: Arc<Counters>,
    shutdown: Shutdown,
) -> anyhow::Result<()> {
    survive_file_size_limit();
    let (store, mut engine) = open(&cfg)?;
    let (fits_tx, fits_rx) = std::sync::mpsc::channel();
    engine.watch_mut().receive_fits(fits_rx);
    // Always started (idle without models), so a reload that adds a model solves it live.
    let (solve_tx, solve_rx) = crate::seepage_worker::spawn()?;
    engine.live_models().connect(solve_tx, solve_rx);
    let refits = tokio::spawn(crate::watch::schedule::run(Arc::clone(&cfg), fits_tx));
    tracing::info!(
        database = %cfg.service.database.display(),
        instruments = cfg.instruments.len(),
        subscriptions = cfg.subscriptions.len(),
        rules = cfg.alerting.rules.len(),
        "seepd starting"
    );
    let evaluator = Evaluator::load(Arc::clone(&cfg), &store)?;
    let worker = match &cfg.alerting.smtp {
        Some(smtp) => Some(Worker::spawn(
            &cfg.service.database,
            smtp.clone(),
            &shutdown,
        )?),
        None => {
            if !cfg.alerting.rules.is_empty() {
                tracing::warn!("Rules are configured but [smtp] is not: alert messages stay in the outbox (see `seepd alerts`)");
            }
            None
        }
    };
    let reports = if cfg.reports.is_empty() {
        None
    } else {
        Some(Scheduler::spawn(
            Arc::clone(&cfg),
            worker.as_ref().map(Worker::waker),
            &shutdown,
        )?)
    };
    let (reload_tx, reloads) = crate::reload::channel();
    let live = Live::new(evaluator, worker.as_ref().map(Worker::waker)).with_reloads(reloads);
    let hangups = tokio::spawn(on_hangup(Arc::clone(&cfg), reload_tx));
    let exporter = start_export(&cfg, &shutdown);
    let link = LinkState::shared(&cfg.mqtt, Utc::now());
    let web = crate::web::start(
        crate::web::Parts {
            cfg: Arc::clone(&cfg),
            link: Arc::clone(&link),
            counters: Arc::clone(&counters),
        },
        {
            let stop = shutdown.clone();
            async move { stop.wait().await }
        },
    )?;
    // Under systemd (Type=notify): started; and say so when stopping.
    crate::sdnotify::notify("READY=1");
    shutdown.on_request(|| {
        crate::sdnotify::notify("STOPPING=1");
    });
    let result = crate::ingest::mqtt::run(
        Arc::clone(&cfg),
        store,
        engine,
        live,
        counters,
        link,
        shutdown.clone(),
    )
    .await;
    // Ingestion ended (stopped, or failed): everything else stops too, within the one
    // deadline counted from the request.
    shutdown.request();
    refits.abort();
    hangups.abort();
    let mut late = false;
    if let Some(r) = reports {
        late |= !r.join();
    }
    if let Some(w) = worker {
        late |= !w.join();
    }
    if let Some(task) = exporter {
        let end = tokio::time::Instant::from_std(shutdown.end());
        match tokio::time::timeout_at(end, task).await {
            Ok(Ok(Ok(()))) => {}
            Ok(Ok(Err(e))) => tracing::error!(error = %format!("{e:#}"), "Export worker failed"),
            Ok(Err(e)) => tracing::error!(error = %e, "Export worker panicked"),
            Err(_) => {
                late = true;
                tracing::error!("Export worker did not stop before the shutdown deadline; unsent points stay queued");
            }
        }
    }
    if let Some(task) = web {
        let end = tokio::time::Instant::from_std(shutdown.end());
        if tokio::time::timeout_at(end, task).await.is_err() {
            late = true;
            tracing::error!("Web pages did not stop before the shutdown deadline");
        }
    }
    result?;
    if late {
        return Err(crate::ingest::mqtt::DeadlinePassed(shutdown.deadline().as_secs()).into());
    }
    Ok(())
}

/// A file-size limit (RLIMIT_FSIZE, e.g. systemd's `LimitFSIZE`) sends SIGXFSZ, which by
/// default kills the process: take the signal instead, so that the write fails like a full
/// disk — the commit is retried, nothing is acknowledged, and the service stays up.
fn survive_file_size_limit() {
    #[cfg(unix)]
    {
        use tokio::signal::unix::{signal, SignalKind};
        // Tokio keeps a signal's handler installed for the life of the process.
        if let Err(e) = signal(SignalKind::from_raw(libc::SIGXFSZ)) {
            tracing::warn!(error = %e, "Cannot take SIGXFSZ; a file-size limit would stop the service");
        }
    }
}

/// Spawn the export worker when `[export]` is configured and enabled.
fn start_export(
    cfg: &Arc<Config>,
    stop: &Shutdown,
) -> Option<tokio::task::JoinHandle<anyhow::Result<()>>> {
    cfg.export.as_ref().filter(|e| e.enabled)?;
    #[cfg(feature = "influx")]
    {
        Some(tokio::spawn(crate::export::run(
            Arc::clone(cfg),
            stop.clone(),
        )))
    }
    #[cfg(not(feature = "influx"))]
    {
        let _ = stop;
        tracing::warn!("[export] is configured but this build has no InfluxDB client (feature `influx`); points are queued, not sent");
        None
    }
}

/// On every SIGHUP, read the configuration directory again and hand a clean one to the writer
/// thread (see `reload`); a configuration with problems is refused and the running one stays.
async fn on_hangup(started: Arc<Config>, tx: std::sync::mpsc::Sender<Arc<Config>>) {
    #[cfg(unix)]
    {
        use tokio::signal::unix::{signal, SignalKind};
        let Ok(mut hup) = signal(SignalKind::hangup()) else {
            tracing::warn!("Cannot watch for SIGHUP; reload by restarting");
            return;
        };
        let mut running = started;
        while hup.recv().await.is_some() {
            tracing::info!(dir = %running.dir.display(), "SIGHUP: reloading the configuration");
            let dir = running.dir.clone();
            let current = Arc::clone(&running);
            let tx2 = tx.clone();
            let checked = tokio::task::spawn_blocking(move || {
                crate::reload::check(&dir, &current).map(|(c, kept)| (Arc::new(c), kept))
            })
            .await;
            match checked {
                Ok(Ok((cfg, kept))) => {
                    if !kept.is_empty() {
                        tracing::warn!(
                            sections = %kept.join(", "),
                            "Reload: these sections changed but apply only at a restart; running as started"
                        );
                    }
                    for w in cfg.alerting.warnings() {
                        tracing::warn!(warning = %w, "Configuration warning");
                    }
                    running = Arc::clone(&cfg);
                    let _ = tx2.send(cfg);
                }
                Ok(Err(problems)) => {
                    for p in &problems.0 {
                        tracing::error!(problem = %p, "Configuration problem");
                    }
                    tracing::error!(
                        problems = problems.0.len(),
                        "Reload refused: the configuration has problems; the running configuration stays"
                    );
                }
                Err(e) => tracing::error!(error = %e, "Reload check failed"),
            }
        }
    }
    #[cfg(not(unix))]
    {
        let _ = (started, tx);
    }
}
