//! Alerting inside the running service's writer thread: the evaluator, the periodic tick
//! (timers, acknowledgements and silences from the operator commands) and the wake-up of the
//! mail worker after a commit that queued messages.
//!
//! Runs on the writer's connection, so a tick's rows are committed by the only writer.

use std::time::{Duration, Instant};

use chrono::Utc;

use crate::notify::Waker;
use crate::store::{AlertWrites, Store};
pub use crate::testpoint::pause_point;

use super::{Evaluator, Observation};

/// How often rules are stepped without an observation.
pub const TICK: Duration = Duration::from_secs(1);

/// The writer thread's alerting.
pub struct Live {
    pub evaluator: Evaluator,
    /// Wakes the mail worker (none when `[smtp]` is not configured).
    pub waker: Option<Waker>,
    last_tick: Instant,
    /// Configurations checked by a reload (SIGHUP), waiting for the writer thread.
    reloads: Option<crate::config::reloads::Reloads>,
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
    pub fn with_reloads(mut self, r: crate::config::reloads::Reloads) -> Live {
        self.reloads = Some(r);
        self
    }

    /// A reloaded configuration waiting to be applied by the writer thread, if any.
    pub fn take_reload(&self) -> Option<std::sync::Arc<crate::config::Config>> {
        self.reloads
            .as_ref()
            .and_then(crate::config::reloads::Reloads::take)
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
        let mut backoff = crate::backoff::Backoff::commit();
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
