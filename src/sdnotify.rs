//! systemd's service notifications (the `sd_notify` datagram protocol, written here in a few
//! lines rather than pulled in as a library): `READY=1` once the service has started,
//! `WATCHDOG=1` from the writer thread's loop — so a writer that stops turning makes systemd
//! restart the service (`WatchdogSec=` in the unit) — and `STOPPING=1` at shutdown. Without
//! `$NOTIFY_SOCKET` (not under systemd, or `Type=` other than `notify`) everything here does
//! nothing.

use std::time::{Duration, Instant};

/// Send one notification; false when there is no notification socket or the send failed.
pub fn notify(state: &str) -> bool {
    #[cfg(unix)]
    {
        let Some(path) = std::env::var_os("NOTIFY_SOCKET") else {
            return false;
        };
        let Ok(sock) = std::os::unix::net::UnixDatagram::unbound() else {
            return false;
        };
        let bytes = path.as_encoded_bytes();
        #[cfg(target_os = "linux")]
        if let Some(name) = bytes.strip_prefix(b"@") {
            use std::os::linux::net::SocketAddrExt as _;
            return std::os::unix::net::SocketAddr::from_abstract_name(name)
                .and_then(|a| sock.send_to_addr(state.as_bytes(), &a))
                .is_ok();
        }
        let _ = bytes;
        sock.send_to(state.as_bytes(), &path).is_ok()
    }
    #[cfg(not(unix))]
    {
        let _ = state;
        false
    }
}

/// The watchdog interval systemd asks for (`$WATCHDOG_USEC`, for this process when
/// `$WATCHDOG_PID` is set), if any.
#[must_use]
pub fn watchdog_interval() -> Option<Duration> {
    if let Ok(pid) = std::env::var("WATCHDOG_PID") {
        if pid.trim() != std::process::id().to_string() {
            return None;
        }
    }
    let usec: u64 = std::env::var("WATCHDOG_USEC").ok()?.trim().parse().ok()?;
    (usec > 0).then(|| Duration::from_micros(usec))
}

/// Keep-alive pings for the watchdog, at most one per half interval.
#[derive(Debug)]
pub struct Watchdog {
    every: Option<Duration>,
    last: Option<Instant>,
}

impl Watchdog {
    /// From the environment (no-op without a watchdog interval).
    #[must_use]
    pub fn from_env() -> Watchdog {
        Watchdog {
            every: watchdog_interval().map(|d| d / 2),
            last: None,
        }
    }

    /// Tell systemd this loop is still turning (rate-limited).
    pub fn ping(&mut self) {
        let Some(every) = self.every else {
            return;
        };
        if self.last.is_none_or(|t| t.elapsed() >= every) {
            notify("WATCHDOG=1");
            self.last = Some(Instant::now());
        }
    }
}
