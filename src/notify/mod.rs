//! The outbox worker: a thread with its own database connection that sends the outbox's due
//! messages through the SMTP relay, oldest first.
//!
//! Delivery guarantee: at least once per recipient. Each recipient is judged on its own: the
//! message goes to every recipient the relay accepts, a recipient refused with a 5xx is
//! dead-lettered with the server's reply (listed by `seepd alerts`) without holding up the
//! others, and connection failures and 4xx replies are retried with capped exponential backoff
//! for the recipients not yet served. A recipient is marked served only after the relay
//! accepted the data; a crash between acceptance and marking resends the message (to those
//! recipients only) with the same Message-ID, so the duplicate is recognisable. Must not decide
//! what to send: that is `alerts`' job.

pub mod smtp;

use std::path::Path;
use std::time::Duration;

use chrono::Utc;

pub use crate::background::Waker;
use crate::background::{Background, Signals};
use crate::config::Smtp;
use crate::shutdown::Shutdown;
use crate::store::Store;

pub use smtp::{Delivery, Mailer, SendError};

use crate::store::outbox::RcptOutcome;

/// The worker looks at the outbox at least this often, even without a wake-up.
const POLL: Duration = Duration::from_secs(1);

/// What one pass did, counted in messages (a message can be sent to some recipients and
/// refused for others).
#[derive(Debug, Default, Clone, Copy, PartialEq, Eq)]
pub struct Pass {
    /// Accepted by the relay for at least one recipient.
    pub sent: usize,
    /// Left for another attempt (for every recipient, or for some).
    pub retried: usize,
    /// Now undeliverable to every recipient left.
    pub dead: usize,
    /// Recipients refused for good (5xx) in this pass.
    pub refused: usize,
}

/// Backoff before attempt `attempts + 1`: min · 2^(attempts − 1), capped at max (seconds).
pub fn backoff_s(smtp: &Smtp, attempts: i64) -> u64 {
    crate::backoff::Backoff::new(
        Duration::from_secs(smtp.retry_min_s),
        Duration::from_secs(smtp.retry_max_s),
    )
    .delay(u32::try_from(attempts.max(0)).unwrap_or(u32::MAX))
    .as_secs()
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
        let to = store.pending_recipients(&m)?;
        let wait = backoff_s(smtp, m.attempts + 1);
        let retry_ms = Utc::now().timestamp_millis() + (wait as i64) * 1000;
        let delivery: Delivery = match mailer.send(&m, &to) {
            Ok(d) => d,
            Err(SendError::Permanent(reply)) => to
                .iter()
                .map(|r| (r.clone(), RcptOutcome::Refused(reply.clone())))
                .collect(),
            Err(SendError::Transient(e)) => {
                store.mark_retry(m.id, retry_ms, &e)?;
                if m.attempts == 0 || (m.attempts + 1).count_ones() == 1 {
                    tracing::warn!(message_id = %m.message_id, attempts = m.attempts + 1, retry_in_s = wait, error = %e, "Cannot deliver alert message; will retry");
                }
                pass.retried += 1;
                // The relay is down or refusing everything for now: the rest would fail alike.
                break;
            }
        };
        let accepted: Vec<&str> = delivery
            .iter()
            .filter(|(_, o)| *o == RcptOutcome::Accepted)
            .map(|(r, _)| r.as_str())
            .collect();
        if !accepted.is_empty() {
            crate::testpoint::pause_point("after_send");
            tracing::info!(message_id = %m.message_id, to = %accepted.join(","), "Alert message accepted by the mail relay");
            pass.sent += 1;
        }
        for (r, o) in &delivery {
            match o {
                RcptOutcome::Refused(reply) => {
                    tracing::error!(message_id = %m.message_id, to = %r, error = %reply, "Mail relay refused a recipient permanently; dead-lettered for that recipient (see `seepd alerts`)");
                    pass.refused += 1;
                }
                RcptOutcome::Deferred(reply) => {
                    tracing::warn!(message_id = %m.message_id, to = %r, retry_in_s = wait, error = %reply, "Mail relay deferred a recipient; will retry");
                }
                RcptOutcome::Accepted => {}
            }
        }
        match store.record_delivery(&m, &delivery, Utc::now().timestamp_millis(), retry_ms)? {
            "pending" => pass.retried += 1,
            "dead" => pass.dead += 1,
            _ => {}
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
    pub fn spawn(db: &Path, smtp: Smtp, shutdown: &Shutdown) -> std::io::Result<Worker> {
        let db = db.to_path_buf();
        Background::spawn("seepd-mail", shutdown, move |signals| {
            run(&db, &smtp, signals)
        })
        .map(Worker)
    }

    /// A handle for waking the worker from another thread.
    pub fn waker(&self) -> Waker {
        self.0.waker()
    }

    /// Wait for the worker to stop, until the shutdown's end (a send in progress is bounded by
    /// the SMTP timeout; an interrupted send is retried at the next start).
    /// True when it stopped in time.
    pub fn join(self) -> bool {
        self.0.join()
    }
}
