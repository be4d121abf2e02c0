//! Ingest counters and quarantine logging without flooding: the first quarantined input of each
//! reason in a window is logged in full, the rest are counted and summarised when it ends.

use std::collections::BTreeMap;
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::{Duration, Instant};

use crate::quality::Reason;
use crate::store::{BatchStats, QuarantineRow};

/// Running totals since start (shared with the status output and the demo).
#[derive(Debug, Default)]
pub struct Counters {
    pub messages: AtomicU64,
    pub stored: AtomicU64,
    pub duplicates: AtomicU64,
    pub quarantined: AtomicU64,
}

impl Counters {
    /// Add one committed batch.
    pub fn add(&self, messages: usize, s: &BatchStats) {
        self.messages.fetch_add(messages as u64, Ordering::Relaxed);
        self.stored.fetch_add(s.inserted as u64, Ordering::Relaxed);
        self.duplicates
            .fetch_add(s.duplicates as u64, Ordering::Relaxed);
        self.quarantined
            .fetch_add(s.quarantined as u64, Ordering::Relaxed);
    }

    /// (messages, stored, duplicates, quarantined).
    pub fn snapshot(&self) -> (u64, u64, u64, u64) {
        (
            self.messages.load(Ordering::Relaxed),
            self.stored.load(Ordering::Relaxed),
            self.duplicates.load(Ordering::Relaxed),
            self.quarantined.load(Ordering::Relaxed),
        )
    }
}

/// Rate-limited quarantine log.
pub struct QuarantineLog {
    window: Duration,
    started: Instant,
    /// Per reason: inputs seen in the current window.
    seen: BTreeMap<Reason, u64>,
}

impl QuarantineLog {
    pub fn new(window: Duration) -> Self {
        QuarantineLog {
            window,
            started: Instant::now(),
            seen: BTreeMap::new(),
        }
    }

    /// Note one quarantined input; logs it if it is the first of its reason in the window.
    pub fn note(&mut self, q: &QuarantineRow) {
        if self.started.elapsed() >= self.window {
            self.flush();
        }
        let n = self.seen.entry(q.reason).or_insert(0);
        *n += 1;
        if *n == 1 {
            tracing::warn!(
                reason = q.reason.code(),
                topic = %q.topic,
                detail = %q.detail,
                "Input quarantined (further ones of this reason are summarised)"
            );
        }
    }

    /// Log the summary of the window and start a new one.
    pub fn flush(&mut self) {
        for (reason, n) in &self.seen {
            if *n > 1 {
                tracing::warn!(
                    reason = reason.code(),
                    count = n,
                    "Inputs quarantined in the last window"
                );
            }
        }
        self.seen.clear();
        self.started = Instant::now();
    }
}
