//! Alerting inside the running service's writer thread: the evaluator, the periodic tick
//! (timers, acknowledgements and silences from the operator commands) and the wake-up of the
//! mail worker after a commit that queued messages.
//!
//! Runs on the writer's connection, so a tick's rows are committed by the only writer.

use std::time::{Duration, Instant};

use chrono::Utc;

use crate::notify::Waker;
use crate::store::{AlertWrites, Store};

use super::{Evaluator, Observation};

/// Crash-test hook: when the environment variable `SEEPD_TEST_PAUSE_AT` names `step`, log
/// "Test pause at STEP" and stop here for good (the test then kills the process with SIGKILL).
/// Steps: `before_commit`, `after_commit` (a commit that queued messages), `after_send` (the
/// relay accepted a message, not yet marked sent), `writer_batch` (the writer took a batch of
/// messages, nothing processed yet). Unset in production: one env lookup.
pub fn pause_point(step: &str) {
    static AT: std::sync::OnceLock<Option<String>> = std::sync::OnceLock::new();
    let at = AT.get_or_init(|| std::env::var("SEEPD_TEST_PAUSE_AT").ok());
    if at.as_deref() == Some(step) {
        tracing::warn!(step, "Test pause at {step}");
        loop {
            std::thread::sleep(Duration::from_secs(3600));
        }
    }
}

/// How often rules are stepped without an observation.
pub const TICK: Duration = Duration::from_secs(1);

/// The writer thread's alerting.
pub struct Live {
    pub evaluator: Evaluator,
    /// Wakes the mail worker (none when `[smtp]` is not configured).
    pub waker: Option<Waker>,
    last_tick: Instant,
    /// Configurations checked by a reload (SIGHUP), waiting for the writer thread.
    reloads: Option<crate::reload::Reloads>,
}

impl Live {
    pub fn new(evaluator: Evaluator, waker: Option<Waker>) -> Live {
        Live {
            evaluator,
            waker,
            last_tick: Instant::now(),
            reloads: None,
        }
    }

    /// Receive reloaded configurations on `r` (see `take_reload`).
    pub fn with_reloads(mut self, r: crate::reload::Reloads) -> Live {
        self.reloads = Some(r);
        self
    }

    /// A reloaded configuration waiting to be applied by the writer thread, if any.
    pub fn take_reload(&self) -> Option<std::sync::Arc<crate::config::Config>> {
        self.reloads.as_ref().and_then(crate::reload::Reloads::take)
    }

    /// Evaluate a batch's observations at the current time (to commit with the batch).
    pub fn evaluate(&mut self, obs: &[Observation]) -> AlertWrites {
        let w = self.evaluator.evaluate(obs, Utc::now().timestamp_millis());
        self.log_transitions();
        w
    }

    /// Evaluate what a batch produced: only the observations some rule watches are built.
    pub fn evaluate_outcome(&mut self, out: &crate::engine::Outcome) -> AlertWrites {
        let obs = self.evaluator.observations(out);
        let w = self.evaluator.evaluate(&obs, Utc::now().timestamp_millis());
        self.log_transitions();
        w
    }

    fn log_transitions(&mut self) {
        for t in self.evaluator.take_transitions() {
            tracing::info!(
                rule = %t.rule,
                alert = t.alert,
                action = t.action.name(),
                level = %t.level,
                object = %t.object,
                quantity = %t.quantity,
                value = ?t.value,
                "Alert transition"
            );
        }
    }

    /// Before committing a batch whose evaluation queued messages (crash tests).
    pub fn before_commit(&self, w: &AlertWrites) {
        if !w.messages.is_empty() {
            pause_point("before_commit");
        }
    }

    /// After a commit: wake the mail worker if messages were queued.
    pub fn committed(&self, w: &AlertWrites) {
        if !w.messages.is_empty() {
            pause_point("after_commit");
            if let Some(k) = &self.waker {
                k.wake();
            }
        }
    }

    /// Whether a tick is due.
    pub fn tick_due(&self) -> bool {
        self.last_tick.elapsed() >= TICK
    }

    /// Apply acknowledgements and silences, step every rule's timers, commit (retrying until
    /// the commit succeeds, like a batch, or the shutdown: the timers are stepped again at the
    /// next start), wake the mail worker.
    pub fn tick(&mut self, store: &mut Store, shutdown: &crate::shutdown::Shutdown) {
        self.last_tick = Instant::now();
        if self.evaluator.is_empty() {
            return;
        }
        let now_ms = Utc::now().timestamp_millis();
        match (store.unapplied_acks(), store.active_silences(now_ms)) {
            (Ok(acks), Ok(silences)) => {
                self.evaluator.apply_acks(&acks);
                self.evaluator.set_silences(silences);
            }
            (Err(e), _) | (_, Err(e)) => {
                tracing::warn!(error = %e, "Cannot read acknowledgements and silences; trying again next tick");
            }
        }
        let w = self.evaluator.evaluate(&[], now_ms);
        self.log_transitions();
        if w.is_empty() {
            return;
        }
        self.before_commit(&w);
        let mut backoff = crate::ingest::writer::commit_backoff();
        while let Err(e) = store.write_alerts(&w) {
            tracing::error!(error = %e, "Commit of alert state failed; retrying");
            if shutdown.sleep_blocking(backoff.fail()) {
                tracing::warn!("Shutdown: the rules' timers are stepped again at the next start");
                return;
            }
        }
        self.committed(&w);
    }
}
