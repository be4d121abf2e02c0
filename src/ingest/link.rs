//! The broker link as people see it: connected or not, since when, how many attempts, the last
//! error in words. Logs one line per change of state and, while the broker stays unreachable,
//! one summary line every `SUMMARY_EVERY`; computes the reconnect backoff.
//!
//! Owns the wording and the shared `LinkState` snapshot (read by the writer thread, which
//! records it for `seepd status`). Does no I/O itself.

use std::sync::{Arc, Mutex};
use std::time::Duration;

use chrono::{DateTime, Utc};
use serde::{Deserialize, Serialize};

use crate::config::Mqtt;

/// While the broker stays unreachable, a summary line this often (besides the change lines).
pub const SUMMARY_EVERY: Duration = Duration::from_secs(600);

/// A snapshot of the broker link, shared between the network task and the writer.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct LinkState {
    /// `host:port` of the broker.
    pub broker: String,
    pub connected: bool,
    /// Whether the link has been up at least once since start (a link down before its first
    /// connection is not a reconnect in progress).
    pub ever_connected: bool,
    /// When the link last changed between connected and not (ms since the epoch).
    pub since_ms: i64,
    /// Failed connection attempts since the link was last up.
    pub attempts: u32,
    /// Reconnections since the service started.
    pub reconnects: u32,
    /// The last error in words (kept after reconnecting, for the record).
    pub last_error: Option<String>,
}

/// Shared handle to the link snapshot.
pub type SharedLink = Arc<Mutex<LinkState>>;

/// Says what kind of failure an error is, in words an operator can act on.
pub fn describe(e: &rumqttc::ConnectionError) -> String {
    let text = e.to_string();
    let lower = text.to_ascii_lowercase();
    if lower.contains("certificate") || lower.contains("unknownissuer") || lower.contains("tls") {
        format!("TLS certificate problem (check [mqtt.tls] ca_file and the broker's certificate): {text}")
    } else if let rumqttc::ConnectionError::ConnectionRefused(code) = e {
        format!("broker refused the connection ({code:?}): check credentials and client id")
    } else {
        text
    }
}

/// Connection bookkeeping of the network task: state changes, logging and backoff.
pub struct Link {
    shared: SharedLink,
    backoff: crate::backoff::Backoff,
    /// When the last summary line was written during an outage.
    last_summary: Option<tokio::time::Instant>,
    /// ConnAcks seen since start (the first is a connection, the rest reconnections).
    connects: u32,
}

impl LinkState {
    /// Not yet connected to the broker of `m`, as of `now`.
    pub fn shared(m: &Mqtt, now: DateTime<Utc>) -> SharedLink {
        Arc::new(Mutex::new(LinkState {
            broker: format!("{}:{}", m.host, m.port),
            connected: false,
            ever_connected: false,
            since_ms: now.timestamp_millis(),
            attempts: 0,
            reconnects: 0,
            last_error: None,
        }))
    }
}

impl Link {
    /// Bookkeeping for the broker of `m`, publishing its state in `shared`.
    pub fn new(m: &Mqtt, shared: SharedLink) -> Link {
        Link {
            shared,
            backoff: crate::backoff::Backoff::new(
                Duration::from_millis(m.reconnect_min_ms.max(1)),
                Duration::from_millis(m.reconnect_max_ms),
            ),
            last_summary: None,
            connects: 0,
        }
    }

    /// The shared snapshot (for the writer thread and the status page).
    pub fn shared(&self) -> SharedLink {
        Arc::clone(&self.shared)
    }

    pub fn connected(&self) -> bool {
        self.snapshot().connected
    }

    pub fn snapshot(&self) -> LinkState {
        match self.shared.lock() {
            Ok(g) => g.clone(),
            Err(p) => p.into_inner().clone(),
        }
    }

    fn update(&self, f: impl FnOnce(&mut LinkState)) {
        match self.shared.lock() {
            Ok(mut g) => f(&mut g),
            Err(p) => f(&mut p.into_inner()),
        }
    }

    /// A ConnAck arrived: log the change with how long the outage lasted.
    pub fn up(&mut self, session_present: bool, now: DateTime<Utc>) {
        let before = self.snapshot();
        let down_s = (now.timestamp_millis() - before.since_ms).max(0) as f64 / 1000.0;
        self.connects = self.connects.saturating_add(1);
        let reconnects = self.connects - 1;
        self.update(|s| {
            s.connected = true;
            s.ever_connected = true;
            s.since_ms = now.timestamp_millis();
            s.attempts = 0;
            s.reconnects = reconnects;
        });
        self.last_summary = None;
        tracing::info!(
            broker = %before.broker,
            session_present,
            down_s,
            failed_attempts = before.attempts,
            "Connected to broker"
        );
    }

    /// The event loop failed: log a change of state (or a periodic summary) and return how long
    /// to wait before the next attempt.
    pub fn down(&mut self, e: &rumqttc::ConnectionError, now: DateTime<Utc>) -> Duration {
        let before = self.snapshot();
        let what = describe(e);
        self.update(|s| {
            if s.connected {
                s.since_ms = now.timestamp_millis();
            }
            s.connected = false;
            s.attempts = s.attempts.saturating_add(1);
            s.last_error = Some(what.clone());
        });
        let after = self.snapshot();
        let at = tokio::time::Instant::now();
        if before.connected {
            tracing::warn!(broker = %after.broker, error = %what, "Disconnected from broker; reconnecting");
        } else if before.attempts == 0 || before.last_error.as_deref() != Some(what.as_str()) {
            tracing::warn!(broker = %after.broker, error = %what, attempts = after.attempts, "Cannot reach broker; retrying");
            self.last_summary = Some(at);
        } else if self
            .last_summary
            .is_none_or(|t| at.duration_since(t) >= SUMMARY_EVERY)
        {
            let down_s = (now.timestamp_millis() - after.since_ms).max(0) / 1000;
            tracing::warn!(broker = %after.broker, error = %what, attempts = after.attempts, down_s, "Broker still unreachable; retrying");
            self.last_summary = Some(at);
        }
        self.backoff.delay(after.attempts)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn mqtt() -> Mqtt {
        Mqtt {
            host: "127.0.0.1".into(),
            port: 1,
            client_id: "t".into(),
            username: None,
            password: None,
            tls: None,
            persistent_session: true,
            keep_alive_s: 30,
            max_packet_bytes: 1 << 20,
            reconnect_min_ms: 100,
            reconnect_max_ms: 1000,
        }
    }

    #[tokio::test]
    async fn backoff_doubles_to_the_cap_and_resets_on_connect() {
        let t = Utc::now();
        let mut l = Link::new(&mqtt(), LinkState::shared(&mqtt(), t));
        let e = || rumqttc::ConnectionError::NetworkTimeout;
        let waits: Vec<u64> = (0..6).map(|_| l.down(&e(), t).as_millis() as u64).collect();
        assert_eq!(waits, vec![100, 200, 400, 800, 1000, 1000]);
        assert_eq!(l.snapshot().attempts, 6);
        l.up(false, t);
        let s = l.snapshot();
        assert!(s.connected);
        assert_eq!(s.attempts, 0);
        assert_eq!(l.down(&e(), t).as_millis(), 100);
    }

    #[tokio::test]
    async fn state_change_times_are_recorded() {
        let t0 = Utc::now();
        let mut l = Link::new(&mqtt(), LinkState::shared(&mqtt(), t0));
        let t1 = t0 + chrono::Duration::seconds(5);
        l.up(true, t1);
        assert_eq!(l.snapshot().since_ms, t1.timestamp_millis());
        let t2 = t1 + chrono::Duration::seconds(60);
        let io = || rumqttc::ConnectionError::Io(std::io::Error::other("reset"));
        l.down(&io(), t2);
        let t3 = t2 + chrono::Duration::seconds(1);
        l.down(&io(), t3);
        let s = l.snapshot();
        assert!(!s.connected);
        assert_eq!(
            s.since_ms,
            t2.timestamp_millis(),
            "outage starts at the first failure"
        );
        assert_eq!(s.last_error.as_deref(), Some("I/O: reset"));
    }

    #[test]
    fn certificate_failures_are_named() {
        let e = rumqttc::ConnectionError::Io(std::io::Error::other(
            "invalid peer certificate: UnknownIssuer",
        ));
        assert!(
            describe(&e).starts_with("TLS certificate problem"),
            "{}",
            describe(&e)
        );
    }
}
