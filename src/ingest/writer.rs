//! The writer thread of `seepd run`: batch the messages the network task hands over, run the
//! engine, evaluate the alert rules, commit readings and alert rows in one transaction, then
//! acknowledge — without ever waiting on the network task.
//!
//! Owns the commit-then-acknowledge order and the flow control towards the broker: committed
//! messages wait in `Acks` and are handed to the MQTT client with non-blocking `try_ack` in
//! arrival order; while more than `PAUSE_AT` messages wait for the writer, acknowledgements are
//! held back (the broker then stops sending once its in-flight window is used up), and they
//! resume below `RESUME_AT`. The network task keeps reading the socket and answering keep-alives
//! all along, so a backlog can never stop the link.

use std::collections::VecDeque;
use std::sync::atomic::{AtomicBool, AtomicU64, AtomicUsize, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use chrono::{DateTime, Utc};
use rumqttc::{AsyncClient, Publish, QoS};
use tokio::sync::mpsc;

use crate::alerts::live::{Live, TICK};
use crate::config::Config;
use crate::engine::{Engine, Message, Outcome};
use crate::ingest::link::SharedLink;
use crate::ingest::progress::{Counters, QuarantineLog};
use crate::shutdown::Shutdown;
use crate::store::Store;

/// Messages waiting for the writer at which acknowledgements are held back.
pub const PAUSE_AT: usize = 20_000;
/// Messages waiting for the writer at which held acknowledgements are released again.
pub const RESUME_AT: usize = 5_000;
/// QoS 0 messages (which the broker never redelivers and cannot be slowed by acknowledgements)
/// are dropped, counted and logged beyond this many waiting messages, to bound memory.
pub const QOS0_DROP_AT: usize = 200_000;

/// A message on its way to the writer: the publish, when it arrived and on which connection.
pub struct Arrived {
    pub publish: Publish,
    pub arrival: DateTime<Utc>,
    /// The connection it came on (an acknowledgement is only valid on that connection).
    pub generation: u64,
}

/// State shared by the network task and the writer thread.
#[derive(Debug, Default)]
pub struct Flow {
    /// Messages handed to the writer and not yet taken into a batch.
    pub queued: AtomicUsize,
    /// Number of the current connection (incremented at each ConnAck; 0 before the first).
    pub generation: AtomicU64,
    /// The link is up (a ConnAck arrived and no error since).
    pub connected: AtomicBool,
    /// QoS 0 messages dropped because too many were waiting.
    pub dropped_qos0: AtomicU64,
}

/// What an acknowledgement needs: the packet id, on which connection.
#[derive(Debug, Clone, Copy)]
struct Ticket {
    pkid: u16,
    generation: u64,
}

/// Committed messages whose acknowledgements have not yet been handed to the client.
#[derive(Debug, Default)]
struct Acks {
    held: VecDeque<Ticket>,
    paused: bool,
    /// Logged once per pause.
    logged_pause: bool,
}

impl Acks {
    fn push(&mut self, a: &Arrived) {
        if a.publish.qos != QoS::AtMostOnce {
            self.held.push_back(Ticket {
                pkid: a.publish.pkid,
                generation: a.generation,
            });
        }
    }

    fn is_empty(&self) -> bool {
        self.held.is_empty()
    }

    /// Hand as many held acknowledgements to the client as its request queue takes, in order,
    /// unless paused (`force` ignores the pause, at shutdown). Tickets of an earlier connection
    /// are dropped: the broker redelivers those messages and the inserts are idempotent.
    fn flush(&mut self, client: &AsyncClient, flow: &Flow, force: bool) {
        let queued = flow.queued.load(Ordering::Relaxed);
        if !self.paused && queued >= PAUSE_AT {
            self.paused = true;
            if !self.logged_pause {
                tracing::warn!(
                    waiting = queued,
                    "Writer is behind: holding acknowledgements so the broker slows down"
                );
                self.logged_pause = true;
            }
        } else if self.paused && queued <= RESUME_AT {
            self.paused = false;
            self.logged_pause = false;
            tracing::info!(waiting = queued, "Writer caught up: acknowledging again");
        }
        if self.paused && !force {
            return;
        }
        let current = flow.generation.load(Ordering::Acquire);
        let connected = flow.connected.load(Ordering::Acquire);
        while let Some(t) = self.held.front().copied() {
            if t.generation != current {
                self.held.pop_front();
                continue;
            }
            if !connected {
                return;
            }
            let mut p = Publish::new("", QoS::AtLeastOnce, Vec::new());
            p.pkid = t.pkid;
            match client.try_ack(&p) {
                Ok(()) => {
                    self.held.pop_front();
                }
                Err(_) => return, // request queue full: the network task is draining it
            }
        }
    }
}

/// Everything the writer thread owns.
pub struct Writer {
    pub store: Store,
    pub engine: Engine,
    pub alerts: Live,
    pub cfg: Arc<Config>,
    pub counters: Arc<Counters>,
    pub client: AsyncClient,
    pub flow: Arc<Flow>,
    pub link: SharedLink,
    /// The service's shutdown: finish the current batch, acknowledge it, and stop.
    pub shutdown: Shutdown,
    /// systemd's watchdog, pinged from this loop (a writer that stops turning is restarted).
    pub watchdog: crate::sdnotify::Watchdog,
}

impl Writer {
    /// Run until the network task closes the channel or asks to stop. Between batches (and at
    /// least every `TICK` during a stream) it ticks the rules' timers and records the link state.
    pub fn run(mut self, mut rx: mpsc::UnboundedReceiver<Arrived>, rt: &tokio::runtime::Handle) {
        let max_n = self.cfg.service.commit_max_readings.max(1);
        let max_t = Duration::from_millis(self.cfg.service.commit_max_ms);
        let mut qlog = QuarantineLog::new(Duration::from_secs(60));
        let mut acks = Acks::default();
        let mut recorded_link = None;
        loop {
            if self.shutdown.is_requested() {
                break;
            }
            // A configuration reloaded by SIGHUP is swapped in between batches.
            if let Some(new) = self.alerts.take_reload() {
                crate::reload::apply(new, &mut self.store, &mut self.engine, &mut self.alerts);
            }
            // Held acknowledgements are retried soon; otherwise wake for the rule timers.
            let wait = if acks.is_empty() {
                TICK
            } else {
                Duration::from_millis(5)
            };
            // The timer must be created inside the runtime: build it in the async block.
            let first = match rt.block_on(async { tokio::time::timeout(wait, rx.recv()).await }) {
                Ok(Some(a)) => a,
                Ok(None) => break,
                Err(_) => {
                    acks.flush(&self.client, &self.flow, false);
                    // Answers of the seepage solver thread are committed without waiting for
                    // the next reading.
                    if self.engine.live_models().answers_waiting() {
                        self.commit(&[], &mut qlog);
                    }
                    self.idle(&mut recorded_link);
                    continue;
                }
            };
            let started = Instant::now();
            let mut batch = vec![first];
            while batch.len() < max_n && started.elapsed() < max_t {
                match rx.try_recv() {
                    Ok(a) => batch.push(a),
                    Err(_) => break,
                }
            }
            self.flow.queued.fetch_sub(batch.len(), Ordering::Relaxed);
            if self.commit(&batch, &mut qlog) {
                for a in &batch {
                    acks.push(a);
                }
            }
            acks.flush(&self.client, &self.flow, false);
            if self.alerts.tick_due() {
                self.idle(&mut recorded_link);
            }
        }
        // Stopping: what was committed is acknowledged while the link is up; the rest of the
        // queue is left unacknowledged for the broker to redeliver.
        while !acks.is_empty() && self.flow.connected.load(Ordering::Acquire) {
            acks.flush(&self.client, &self.flow, true);
            if !acks.is_empty() {
                std::thread::sleep(Duration::from_millis(2));
            }
        }
        qlog.flush();
    }

    /// Process one batch and commit it, retrying the commit until it succeeds (nothing is
    /// acknowledged meanwhile). False when shutdown came first and nothing was committed.
    fn commit(&mut self, batch: &[Arrived], qlog: &mut QuarantineLog) -> bool {
        crate::testpoint::pause_point("writer_batch");
        let mut out = Outcome::default();
        // Rates once per instrument per batch (a catch-up brings many readings of each).
        self.engine.set_batched(true);
        for a in batch {
            let msg = Message {
                topic: a.publish.topic.clone(),
                payload: a.publish.payload.to_vec(),
                arrival: a.arrival,
                redelivered: a.publish.dup,
            };
            out.append(self.engine.process(&msg));
        }
        out.append(self.engine.end_batch());
        let aw = self.alerts.evaluate_outcome(&out);
        let Outcome {
            readings,
            derived,
            quarantined,
            flag_updates,
        } = out;
        self.alerts.before_commit(&aw);
        let mut backoff = crate::backoff::Backoff::commit();
        let stats = loop {
            match self.store.write_batch_flagged(
                &readings,
                &derived,
                &quarantined,
                &flag_updates,
                &aw,
            ) {
                Ok(s) => break s,
                Err(e) => {
                    tracing::error!(error = %e, messages = batch.len(), "Commit failed; retrying (nothing acknowledged)");
                    // Retrying is work, not a hang: keep systemd's watchdog fed.
                    self.watchdog.ping();
                    if self.shutdown.sleep_blocking(backoff.fail()) {
                        // Nothing of this batch is acknowledged; the broker redelivers it.
                        return false;
                    }
                }
            }
        };
        self.alerts.committed(&aw);
        self.counters.add(batch.len(), &stats);
        for q in &quarantined {
            qlog.note(q);
        }
        true
    }

    /// Take the manual readings waiting in the inbox through the engine and the rules, each
    /// committed with its mark (so it is taken once) and its result in words. A commit is
    /// retried like a batch's; at shutdown the rest stay waiting for the next start.
    fn take_manual(&mut self) {
        let waiting = match self.store.waiting_manual() {
            Ok(w) => w,
            Err(e) => {
                tracing::warn!(error = %e, "Cannot read the manual-reading inbox");
                return;
            }
        };
        for m in waiting {
            let now = Utc::now();
            let time = DateTime::from_timestamp_millis(m.t_ms).unwrap_or(now);
            let entered = DateTime::from_timestamp_millis(m.entered_ms).unwrap_or(now);
            let mut out = self.engine.process_manual(&hand(&m), time, entered);
            // The writer's engine is in batch mode: close this one-entry batch (its rates).
            out.append(self.engine.end_batch());
            let aw = self.alerts.evaluate_outcome(&out);
            self.alerts.before_commit(&aw);
            let quarantined = out
                .quarantined
                .first()
                .map(|q| format!("{}: {}", q.reason.code(), q.detail));
            let mut backoff = crate::backoff::Backoff::commit();
            let stats = loop {
                match self.store.write_manual(
                    &out.readings,
                    &out.derived,
                    &out.quarantined,
                    &out.flag_updates,
                    &aw,
                    m.id,
                    quarantined.as_deref(),
                    now.timestamp_millis(),
                ) {
                    Ok(s) => break s,
                    Err(e) => {
                        tracing::error!(error = %e, "Commit of a manual reading failed; retrying");
                        self.watchdog.ping();
                        if self.shutdown.sleep_blocking(backoff.fail()) {
                            return;
                        }
                    }
                }
            };
            self.alerts.committed(&aw);
            self.counters.add(0, &stats);
            tracing::info!(instrument = %m.instrument, value = m.value, by = %m.by, new = stats.inserted, duplicate = stats.duplicates, quarantined = stats.quarantined, "Manual reading taken");
        }
    }

    /// Between batches: the rules' timers, and the link state for `seepd status` when it changed.
    fn idle(&mut self, recorded: &mut Option<crate::ingest::link::LinkState>) {
        self.watchdog.ping();
        self.take_manual();
        if let Err(e) = crate::heartbeat::daily_email(&self.cfg, &mut self.store, Utc::now()) {
            tracing::warn!(error = %e, "Cannot queue the daily heartbeat email");
        }
        self.alerts.tick(&mut self.store, &self.shutdown);
        let now = match self.link.lock() {
            Ok(g) => g.clone(),
            Err(p) => p.into_inner().clone(),
        };
        if recorded.as_ref() != Some(&now) {
            match self.store.put_service_state("broker_link", &now) {
                Ok(()) => *recorded = Some(now),
                Err(e) => tracing::warn!(error = %e, "Cannot record the broker link state"),
            }
        }
    }
}

/// The engine's view of a manual reading from the inbox.
fn hand(m: &crate::store::pages::ManualReading) -> crate::engine::HandReading<'_> {
    crate::engine::HandReading {
        instrument: &m.instrument,
        value: m.value,
        temperature_c: m.temperature_c,
        by: &m.by,
    }
}
