//! Configuration reload of a running service (SIGHUP, `systemctl reload`): read the directory
//! again with the same checks as `seepd check`; refuse a configuration with problems (each one
//! logged at file:line:column) and keep the running one; otherwise hand the new one to the
//! writer thread, which rebuilds its engine (seeded from the database, like a start) and its
//! rule evaluator (rule states, acknowledgements and silences carry over by rule id, since they
//! live in the database; alerts of removed rules are closed).
//!
//! What a running process cannot change — `[service]`, `[mqtt]`, the subscriptions, `[smtp]`,
//! `[export]`, `[http]`, `[heartbeat]` — stays as started; a reload that changes them says so (a restart applies them).
//! Owns the check and the swap; the signal is `service`'s, the writer loop `ingest::mqtt`'s.

use std::path::Path;

use std::sync::Arc;

use crate::alerts::live::Live;
use crate::alerts::Evaluator;
pub use crate::config::reloads::{channel, Reloads};
use crate::config::{load_dir, Config, Problems};
use crate::engine::Engine;
use crate::store::Store;

/// Sections only a restart applies, as (name, whether they differ).
fn restart_only(running: &Config, new: &Config) -> Vec<&'static str> {
    let differs =
        |a: &dyn std::fmt::Debug, b: &dyn std::fmt::Debug| format!("{a:?}") != format!("{b:?}");
    let mut out = Vec::new();
    if differs(&running.service, &new.service) {
        out.push("[service]");
    }
    if differs(&running.mqtt, &new.mqtt) {
        out.push("[mqtt]");
    }
    if differs(&running.subscriptions, &new.subscriptions) {
        out.push("[[subscription]]");
    }
    if differs(&running.alerting.smtp, &new.alerting.smtp) {
        out.push("[smtp]");
    }
    if differs(&running.export, &new.export) {
        out.push("[export]");
    }
    if differs(&running.http, &new.http) {
        out.push("[http]");
    }
    if differs(&running.heartbeat, &new.heartbeat) {
        out.push("[heartbeat]");
    }
    out
}

/// Read `dir` again for a service running `running`: the new configuration with the
/// restart-only sections kept as running, and the names of those that changed.
///
/// # Errors
/// Every problem of the directory, as `seepd check` reports them.
pub fn check(dir: &Path, running: &Config) -> Result<(Config, Vec<&'static str>), Problems> {
    let mut new = load_dir(dir)?;
    let kept = restart_only(running, &new);
    new.service = running.service.clone();
    new.mqtt = running.mqtt.clone();
    new.subscriptions = running.subscriptions.clone();
    new.alerting.smtp = running.alerting.smtp.clone();
    new.export = running.export.clone();
    new.http = running.http.clone();
    new.heartbeat = running.heartbeat.clone();
    Ok((new, kept))
}

/// Swap the writer's engine and rule evaluator for `cfg` (in the writer thread, between
/// batches). The engine is rebuilt from the database like at a start (latest heads, barometer,
/// trend and health windows, models); the model refits keep their channel. On a database error
/// the running engine and rules stay and the error is logged.
pub fn apply(cfg: Arc<Config>, store: &mut Store, engine: &mut Engine, alerts: &mut Live) {
    let rebuilt = (|| -> anyhow::Result<(Engine, Evaluator)> {
        store.sync_instruments(&cfg, chrono::Utc::now())?;
        let mut e = Engine::seeded(&cfg, store)?;
        let ev = Evaluator::load(Arc::clone(&cfg), store)?;
        // Only once nothing can fail any more: the refit and re-solve channels move to the new
        // engine (moved before a failure, they would be lost to the engine that stays).
        if let Some(fits) = engine.watch_mut().take_fits() {
            e.watch_mut().receive_fits(fits);
        }
        if let Some((tx, rx)) = engine.live_models().take_link() {
            e.live_models().connect(tx, rx);
        }
        Ok((e, ev))
    })();
    match rebuilt {
        Ok((e, mut ev)) => {
            *engine = e;
            ev.set_silences(alerts.evaluator.silences().to_vec());
            alerts.evaluator = ev;
            tracing::info!(
                instruments = cfg.instruments.len(),
                rules = cfg.alerting.rules.len(),
                "Configuration reloaded"
            );
        }
        Err(e) => {
            tracing::error!(error = %format!("{e:#}"), "Reload failed; the running configuration stays");
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn http_and_heartbeat_changes_wait_for_a_restart() {
        let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
        let dir = tempfile::tempdir().unwrap();
        for e in std::fs::read_dir(&src).unwrap() {
            let p = e.unwrap().path();
            if p.extension().is_some_and(|x| x == "toml") {
                std::fs::copy(&p, dir.path().join(p.file_name().unwrap())).unwrap();
            }
        }
        let running = load_dir(dir.path()).unwrap();
        let service = dir.path().join("seepd.toml");
        let mut text = std::fs::read_to_string(&service).unwrap();
        text.push_str(
            "\n[http]\nbind = \"127.0.0.1:18480\"\n\n[heartbeat]\ntopic = \"seepd/alive\"\n",
        );
        std::fs::write(&service, text).unwrap();
        let (new, kept) = check(dir.path(), &running).unwrap();
        assert_eq!(kept, vec!["[http]", "[heartbeat]"]);
        assert!(
            new.http.is_none() && new.heartbeat.is_none(),
            "kept as running"
        );
        let (_, kept) = check(dir.path(), &load_dir(dir.path()).unwrap()).unwrap();
        assert!(kept.is_empty(), "no change, nothing to report");
    }
}
