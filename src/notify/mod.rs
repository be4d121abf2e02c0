//! The outbox worker: a thread with its own database connection that sends the outbox's due
//! messages through the SMTP relay, oldest first.
//!
//! Delivery guarantee: at least once. A message is marked sent only after the relay accepted
//! it; connection failures and 4xx replies are retried with capped exponential backoff; a 5xx
//! reply dead-letters the message with the server's reply (listed by `seepd alerts`). A crash
//! between acceptance and marking resends the message with the same Message-ID, so the
//! duplicate is recognisable. Must not decide what to send: that is `alerts`' job.

pub mod smtp;

use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, RecvTimeoutError};
use std::sync::Arc;
use std::time::Duration;

use chrono::Utc;

use crate::config::Smtp;
use crate::store::Store;

pub use smtp::{Mailer, SendError};

/// The worker looks at the outbox at least this often, even without a wake-up.
const POLL: Duration = Duration::from_secs(1);

/// What one pass did.
#[derive(Debug, Default, Clone, Copy, PartialEq, Eq)]
pub struct Pass {
    pub sent: usize,
    pub retried: usize,
    pub dead: usize,
}

/// Backoff before attempt `attempts + 1`: min · 2^(attempts − 1), capped at max (seconds).
pub fn backoff_s(smtp: &Smtp, attempts: i64) -> u64 {
    let exp = (attempts.max(1) - 1).min(20) as u32;
    smtp.retry_min_s
        .saturating_mul(1 << exp)
        .min(smtp.retry_max_s)
}

/// Send every due message once. Stops early (returns) at the first connection failure, since
/// the rest would fail the same way.
///
/// # Errors
/// Database errors.
pub fn deliver_due(
    store: &Store,
    mailer: &Mailer,
    smtp: &Smtp,
) -> Result<Pass, crate::store::StoreError> {
    let mut pass = Pass::default();
    let now_ms = Utc::now().timestamp_millis();
    for m in store.due_messages(now_ms, 100)? {
        match mailer.send(&m) {
            Ok(()) => {
                crate::alerts::live::pause_point("after_send");
                store.mark_sent(m.id, Utc::now().timestamp_millis())?;
                tracing::info!(message_id = %m.message_id, to = %m.recipients.join(","), "Alert message accepted by the mail relay");
                pass.sent += 1;
            }
            Err(SendError::Permanent(reply)) => {
                store.mark_dead(m.id, &reply)?;
                tracing::error!(message_id = %m.message_id, error = %reply, "Mail relay refused the message permanently; dead-lettered (see `seepd alerts`)");
                pass.dead += 1;
            }
            Err(SendError::Transient(e)) => {
                let wait = backoff_s(smtp, m.attempts + 1);
                let next = Utc::now().timestamp_millis() + (wait as i64) * 1000;
                store.mark_retry(m.id, next, &e)?;
                if m.attempts == 0 || (m.attempts + 1).count_ones() == 1 {
                    tracing::warn!(message_id = %m.message_id, attempts = m.attempts + 1, retry_in_s = wait, error = %e, "Cannot deliver alert message; will retry");
                }
                pass.retried += 1;
                break;
            }
        }
    }
    Ok(pass)
}

/// Run the worker until `stop` is set: deliver, then wait for a wake-up, the next due time or
/// the poll interval.
pub fn run(db: &Path, smtp: &Smtp, wake: &Receiver<()>, stop: &AtomicBool) {
    let mailer = match Mailer::new(smtp) {
        Ok(m) => m,
        Err(e) => {
            tracing::error!(error = %e, "Cannot set up the mail relay; alert messages stay in the outbox");
            return;
        }
    };
    let store = loop {
        match Store::open(db) {
            Ok(s) => break s,
            Err(e) => {
                tracing::error!(error = %e, "Mail worker cannot open the database; retrying");
                if wait(wake, stop, Duration::from_secs(5)) {
                    return;
                }
            }
        }
    };
    while !stop.load(Ordering::SeqCst) {
        if let Err(e) = deliver_due(&store, &mailer, smtp) {
            tracing::error!(error = %e, "Mail worker database error");
        }
        let now_ms = Utc::now().timestamp_millis();
        let next = store.next_due_ms().ok().flatten().map_or(POLL, |t| {
            Duration::from_millis((t - now_ms).clamp(0, POLL.as_millis() as i64) as u64)
        });
        if wait(wake, stop, next) {
            return;
        }
    }
}

/// Wait for a wake-up or `d`; true when the worker must stop.
fn wait(wake: &Receiver<()>, stop: &AtomicBool, d: Duration) -> bool {
    match wake.recv_timeout(d) {
        Ok(()) | Err(RecvTimeoutError::Timeout) => {}
        Err(RecvTimeoutError::Disconnected) => return true,
    }
    stop.load(Ordering::SeqCst)
}

/// A running worker: wake it after committing messages; stop it at shutdown.
pub struct Worker {
    wake: std::sync::mpsc::SyncSender<()>,
    stop: Arc<AtomicBool>,
    thread: Option<std::thread::JoinHandle<()>>,
}

impl Worker {
    /// Start the worker thread on the database at `db`.
    ///
    /// # Errors
    /// The thread cannot be spawned.
    pub fn spawn(db: &Path, smtp: Smtp) -> std::io::Result<Worker> {
        let (wake, rx) = std::sync::mpsc::sync_channel(1);
        let stop = Arc::new(AtomicBool::new(false));
        let db = db.to_path_buf();
        let s = Arc::clone(&stop);
        let thread = std::thread::Builder::new()
            .name("seepd-mail".into())
            .spawn(move || run(&db, &smtp, &rx, &s))?;
        Ok(Worker {
            wake,
            stop,
            thread: Some(thread),
        })
    }

    /// A handle for waking the worker from another thread.
    pub fn waker(&self) -> Waker {
        Waker(self.wake.clone())
    }

    /// Ask the worker to stop and wait up to `deadline` for it (a send in progress is bounded by
    /// the SMTP timeout; an interrupted send is retried at the next start).
    pub fn stop(mut self, deadline: Duration) {
        self.stop.store(true, Ordering::SeqCst);
        let _ = self.wake.try_send(());
        if let Some(t) = self.thread.take() {
            let end = std::time::Instant::now() + deadline;
            while !t.is_finished() && std::time::Instant::now() < end {
                std::thread::sleep(Duration::from_millis(20));
            }
            if t.is_finished() {
                let _ = t.join();
            }
        }
    }
}

/// Wakes the mail worker (coalescing: one pending wake-up is enough).
#[derive(Clone)]
pub struct Waker(std::sync::mpsc::SyncSender<()>);

impl Waker {
    pub fn wake(&self) {
        let _ = self.0.try_send(());
    }
}
