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
use std::time::Duration;

use chrono::Utc;

pub use crate::background::Waker;
use crate::background::{Background, Signals};
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
pub fn run(db: &Path, smtp: &Smtp, signals: &Signals) {
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
                if signals.wait(Duration::from_secs(5)) {
                    return;
                }
            }
        }
    };
    while !signals.stopping() {
        if let Err(e) = deliver_due(&store, &mailer, smtp) {
            tracing::error!(error = %e, "Mail worker database error");
        }
        let now_ms = Utc::now().timestamp_millis();
        let next = store.next_due_ms().ok().flatten().map_or(POLL, |t| {
            Duration::from_millis((t - now_ms).clamp(0, POLL.as_millis() as i64) as u64)
        });
        if signals.wait(next) {
            return;
        }
    }
}

/// The running mail worker: wake it after committing messages; stop it at shutdown.
pub struct Worker(Background);

impl Worker {
    /// Start the worker thread on the database at `db`.
    ///
    /// # Errors
    /// The thread cannot be spawned.
    pub fn spawn(db: &Path, smtp: Smtp) -> std::io::Result<Worker> {
        let db = db.to_path_buf();
        Background::spawn("seepd-mail", move |signals| run(&db, &smtp, signals)).map(Worker)
    }

    /// A handle for waking the worker from another thread.
    pub fn waker(&self) -> Waker {
        self.0.waker()
    }

    /// Ask the worker to stop and wait up to `deadline` for it (a send in progress is bounded by
    /// the SMTP timeout; an interrupted send is retried at the next start).
    /// True when it stopped in time.
    pub fn stop(self, deadline: Duration) -> bool {
        self.0.stop(deadline)
    }
}
