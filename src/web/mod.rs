//! The on-call web surface served by `seepd run` when `[http]` is configured: health and
//! readiness for load balancers and systemd, `/metrics` in the Prometheus text format, the
//! status pages (overview, alert, instrument, quarantine), sign-in, and acknowledgement from
//! the link in an alert email.
//!
//! Owns the server's life (bind, serve on the service's tokio runtime, stop on the service's
//! shutdown signal) and the routes. Each request reads the database on its own short-lived
//! connection on the blocking pool; acknowledgements and silences are written through the same
//! functions as `seepd ack` and `seepd silence`, so the service applies them within a second.
//! Submodules: `config` (`[http]`), `token` (signed links, web key), `auth` (users, sessions,
//! CSRF), `health` (`/healthz`, `/readyz`, `/metrics`), `html` and `words`
//! (frame and wording), `overview`, `alert`, `instrument`, `section`, `quarantine` (pages), `chart` (their
//! plots), `manual` (the manual-reading form), `ack` (the email link), `user_cmd` (`seepd user`).

// Checks return the refusal page itself as their error; one response per request, so
// boxing it would buy nothing.
#![allow(clippy::result_large_err)]

pub mod ack;
pub mod alert;
pub mod auth;
pub mod chart;
pub mod health;
pub mod html;
pub mod instrument;
pub mod manual;
pub mod overview;
pub mod quarantine;
pub mod section;
pub mod user_cmd;
pub mod words;

use std::future::Future;
use std::sync::atomic::{AtomicI64, AtomicU64, Ordering};
use std::sync::Arc;
use std::time::Duration;

use axum::routing::{get, post};
use axum::Router;
use chrono::Utc;

use crate::config::Config;
use crate::ingest::link::SharedLink;
use crate::ingest::progress::Counters;

/// Everything a request handler can see.
pub struct Web {
    pub cfg: Arc<Config>,
    /// `cfg.http`, unpacked (the server runs only when it is set).
    pub http: crate::config::http::Http,
    /// Signs acknowledgement links and checks them.
    pub key: crate::ack_token::Key,
    /// The broker link as the network task sees it.
    pub link: SharedLink,
    /// Ingest totals since start.
    pub counters: Arc<Counters>,
    /// When the message count last grew (ms since the epoch; 0: no commit since start) — the
    /// writer counts after each commit, so this is the last commit time to within the poll.
    pub last_commit_ms: AtomicI64,
    /// The message count when `last_commit_ms` was set.
    seen_messages: AtomicU64,
    pub sessions: auth::Sessions,
}

/// The handlers' state.
pub type Shared = Arc<Web>;

/// What the service hands the web server.
pub struct Parts {
    pub cfg: Arc<Config>,
    pub link: SharedLink,
    pub counters: Arc<Counters>,
}

/// How often the commit watcher looks at the counters.
const COMMIT_POLL: Duration = Duration::from_millis(200);

/// Bind `[http] bind` and serve until `shutdown` resolves; `None` when `[http]` is not
/// configured. Installs the acknowledgement-link maker for alert emails while it runs.
///
/// # Errors
/// The web key cannot be read or made, or the address cannot be bound.
pub fn start(
    parts: Parts,
    shutdown: impl Future<Output = ()> + Send + 'static,
) -> anyhow::Result<Option<tokio::task::JoinHandle<()>>> {
    let Some(http) = parts.cfg.http.clone() else {
        return Ok(None);
    };
    let key = crate::ack_token::Key::load_or_create(&parts.cfg.service.database)?;
    let listener = std::net::TcpListener::bind(http.bind)
        .map_err(|e| anyhow::anyhow!("[http] bind {}: {e}", http.bind))?;
    listener.set_nonblocking(true)?;
    let local = listener.local_addr()?;
    let listener = tokio::net::TcpListener::from_std(listener)?;
    crate::ack_token::install_links(&http.public_base_url, key.clone(), http.ack_link_valid_h);
    let parts_messages = parts.counters.snapshot().0;
    let web = Arc::new(Web {
        cfg: parts.cfg,
        http,
        key,
        link: parts.link,
        counters: parts.counters,
        last_commit_ms: AtomicI64::new(0),
        seen_messages: AtomicU64::new(parts_messages),
        sessions: auth::Sessions::default(),
    });
    if !local.ip().is_loopback() {
        tracing::warn!(address = %local, "The web pages listen beyond loopback; put them behind an HTTPS reverse proxy (see README)");
    }
    tracing::info!(address = %local, url = %web.http.public_base_url, anonymous = web.http.allow_anonymous, "Web pages listening");
    let watcher = tokio::spawn(watch_commits(Arc::clone(&web)));
    let app = routes(web);
    Ok(Some(tokio::spawn(async move {
        let served = axum::serve(listener, app.into_make_service())
            .with_graceful_shutdown(shutdown)
            .await;
        watcher.abort();
        crate::ack_token::remove_links();
        match served {
            Ok(()) => tracing::info!("Web pages stopped"),
            Err(e) => tracing::error!(error = %e, "Web server failed"),
        }
    })))
}

/// Every route.
pub fn routes(web: Shared) -> Router {
    Router::new()
        .route("/healthz", get(health::healthz))
        .route("/readyz", get(health::readyz))
        .route("/metrics", get(health::metrics))
        .route("/", get(overview::page))
        .route("/alerts/:id", get(alert::page))
        .route("/alerts/:id/ack", post(alert::ack))
        .route("/alerts/:id/silence", post(alert::silence))
        .route("/instruments/:id", get(instrument::page))
        .route("/instruments/:id/manual", post(manual::post))
        .route("/quarantine", get(quarantine::page))
        .route("/section/:id", get(section::page))
        .route("/ack/:token", get(ack::confirm).post(ack::acknowledge))
        .route("/login", get(auth::login_form).post(auth::login))
        .route("/logout", post(auth::logout))
        .with_state(web)
}

/// Note when the committed message count grows (also noted on every question, so that an
/// answer right after a commit is exact).
async fn watch_commits(web: Shared) {
    loop {
        tokio::time::sleep(COMMIT_POLL).await;
        web.note_commits(Utc::now().timestamp_millis());
    }
}

impl Web {
    fn note_commits(&self, now_ms: i64) {
        let now = self.counters.snapshot().0;
        if self.seen_messages.swap(now, Ordering::Relaxed) != now {
            self.last_commit_ms.store(now_ms, Ordering::Relaxed);
        }
    }

    /// Seconds since the last commit, if there was one since start.
    pub fn commit_age_s(&self, now_ms: i64) -> Option<f64> {
        self.note_commits(now_ms);
        let t = self.last_commit_ms.load(Ordering::Relaxed);
        (t > 0).then(|| (now_ms - t).max(0) as f64 / 1000.0)
    }

    /// The broker link snapshot.
    pub fn link_state(&self) -> crate::ingest::link::LinkState {
        match self.link.lock() {
            Ok(g) => g.clone(),
            Err(p) => p.into_inner().clone(),
        }
    }

    /// The site `id`'s time zone (UTC when unknown).
    pub fn tz(&self, site: &str) -> chrono_tz::Tz {
        self.cfg
            .sites
            .iter()
            .find(|s| s.id == site)
            .and_then(|s| s.time_zone.parse().ok())
            .unwrap_or(chrono_tz::UTC)
    }

    /// The site `id`'s display units.
    pub fn units(&self, site: &str) -> crate::config::DisplayUnits {
        self.cfg
            .sites
            .iter()
            .find(|s| s.id == site)
            .map_or(crate::config::DisplayUnits::Si, |s| s.display_units)
    }

    /// The site of an instrument or derived object.
    pub fn site_of(&self, object: &str) -> Option<String> {
        self.cfg.site_of_object(object).map(|s| s.id.clone())
    }

    /// A quantity of `object` in words (a stage gauge's total head is its water level).
    pub fn quantity_name(&self, object: &str, quantity: &str) -> String {
        let kind = self.cfg.instruments.get(object).map(|i| i.kind.name());
        crate::present::labels::quantity_name(quantity, kind)
    }

    /// Whether `level` is the most severe level of rule `rule`.
    pub fn top_level(&self, rule: &str, level: &str) -> bool {
        self.cfg
            .alerting
            .rules
            .iter()
            .find(|r| r.id == rule)
            .and_then(|r| r.spec.levels.last())
            .is_some_and(|l| l.name == level)
    }

    /// Run database work on the blocking pool with a fresh connection.
    ///
    /// # Errors
    /// The work's error, or a panic in it.
    pub async fn read<T: Send + 'static>(
        &self,
        f: impl FnOnce(&crate::store::Store) -> anyhow::Result<T> + Send + 'static,
    ) -> anyhow::Result<T> {
        let db = self.cfg.service.database.clone();
        tokio::task::spawn_blocking(move || {
            let store = crate::store::Store::open(&db)?;
            f(&store)
        })
        .await
        .map_err(|e| anyhow::anyhow!("database task failed: {e}"))?
    }
}

/// The answer to a request whose database read failed.
pub fn failed(e: &anyhow::Error, frame: &html::Frame<'_>) -> axum::response::Response {
    tracing::error!(error = %format!("{e:#}"), "Web page failed");
    html::message(
        axum::http::StatusCode::SERVICE_UNAVAILABLE,
        "Database not readable",
        &format!("The page could not be made: {e:#}"),
        frame,
    )
}
