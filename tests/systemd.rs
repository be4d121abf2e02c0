//! Under systemd with `Type=notify` and `WatchdogSec=`: the real binary says `READY=1` once
//! started, feeds the watchdog from its writer loop (`WATCHDOG=1`, at half the interval) and says
//! `STOPPING=1` at SIGTERM — read from a notification socket of the test's own.

mod common;

use std::os::unix::net::UnixDatagram;
use std::time::{Duration, Instant};

use common::*;

#[test]
fn ready_watchdog_and_stopping_are_sent_to_the_notification_socket() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let cfg = example_config(dir.path(), broker.port);
    let log = dir.path().join("seepd.log");
    let sock_path = dir.path().join("notify.sock");
    let sock = UnixDatagram::bind(&sock_path).unwrap();
    sock.set_read_timeout(Some(Duration::from_millis(200)))
        .unwrap();
    let mut d = Daemon::start_env(
        &cfg,
        &log,
        &[
            ("NOTIFY_SOCKET", sock_path.to_str().unwrap()),
            // 0.4 s: pings expected every 0.2 s or so (the writer loop turns every second when
            // idle, so at least one a second).
            ("WATCHDOG_USEC", "400000"),
        ],
    );
    let mut seen: Vec<String> = Vec::new();
    let mut buf = [0u8; 256];
    let until = Instant::now() + Duration::from_secs(20);
    while Instant::now() < until && seen.iter().filter(|s| *s == "WATCHDOG=1").count() < 3 {
        if let Ok(n) = sock.recv(&mut buf) {
            seen.push(String::from_utf8_lossy(&buf[..n]).into_owned());
        }
    }
    assert_eq!(
        seen.first().map(String::as_str),
        Some("READY=1"),
        "{seen:?}"
    );
    assert!(
        seen.iter().filter(|s| *s == "WATCHDOG=1").count() >= 3,
        "{seen:?}\n{}",
        std::fs::read_to_string(&log).unwrap_or_default()
    );
    let (code, _) = d.terminate();
    assert_eq!(code, Some(0));
    let mut after = Vec::new();
    while let Ok(n) = sock.recv(&mut buf) {
        after.push(String::from_utf8_lossy(&buf[..n]).into_owned());
    }
    assert!(after.iter().any(|s| s == "STOPPING=1"), "{after:?}");
}

#[test]
fn without_a_notification_socket_nothing_is_sent_and_nothing_fails() {
    // A watchdog interval but no NOTIFY_SOCKET (not under systemd): it starts, connects and
    // stops cleanly.
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let cfg = example_config(dir.path(), broker.port);
    let log = dir.path().join("seepd.log");
    let mut d = Daemon::start_env(&cfg, &log, &[("WATCHDOG_USEC", "400000")]);
    d.wait_connected(1);
    let (code, _) = d.terminate();
    assert_eq!(code, Some(0));
}
