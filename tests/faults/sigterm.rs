//! SIGTERM in every state, with `shutdown_deadline_s = 3`: the broker down (seepd in its
//! reconnect backoff, at the production maximum of 30 s), mid-commit (the writer held before
//! its commit), mid-email (the mail worker inside an SMTP exchange with a relay that never
//! answers). seepd exits within the deadline each time, and what it had taken but not
//! committed is delivered again and stored after a restart. (The disk-full case is in `disk`.)

use std::net::TcpListener;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::Duration;

use crate::common::*;
use crate::support::*;

const DEADLINE_S: u64 = 3;
/// Process start-up of the SIGTERM, wait and reaping, beyond seepd's own deadline.
const SLACK: Duration = Duration::from_millis(500);

/// The configuration in `cfg` with `shutdown_deadline_s = DEADLINE_S` and the production
/// reconnect backoff (up to 30 s).
fn short_deadline(cfg: &Path) {
    edit(
        cfg,
        "seepd.toml",
        &[
            (
                "shutdown_deadline_s = 10",
                &format!("shutdown_deadline_s = {DEADLINE_S}"),
            ),
            ("reconnect_max_ms = 1000", "reconnect_max_ms = 30000"),
        ],
    );
}

fn within(took: Duration, what: &str, log: &Path) {
    assert!(
        took <= Duration::from_secs(DEADLINE_S) + SLACK,
        "{what}: SIGTERM took {took:?}; log:\n{}",
        std::fs::read_to_string(log).unwrap_or_default()
    );
}

/// The broker goes away; seepd backs off between attempts; SIGTERM comes in the wait.
fn broker_down(dir: &Path) -> (Option<i32>, Duration) {
    let mut broker = Broker::start(dir);
    let cfg = example_config(dir, broker.port);
    short_deadline(&cfg);
    let log = dir.join("seepd-broker-down.log");
    let mut d = Daemon::start(&cfg, &log);
    d.wait_connected(1);
    broker.stop();
    // Several failed attempts: the backoff has grown past the deadline.
    assert!(
        wait_log(&log, "Cannot reach broker", 1, Duration::from_secs(20)),
        "{}",
        std::fs::read_to_string(&log).unwrap_or_default()
    );
    std::thread::sleep(Duration::from_secs(4));
    let (code, took) = d.terminate();
    within(took, "broker down", &log);
    (code, took)
}

/// The writer is held just before its commit (`SEEPD_TEST_PAUSE_AT=before_commit`).
fn mid_commit(dir: &Path) -> (Option<i32>, Duration) {
    let broker = Broker::start(dir);
    // Alerting without group wait, so that the batch that raises also queues its message.
    let cfg = crate::common::smtp::alert_config(dir, broker.port, free_port(), &[]);
    short_deadline(&cfg);
    let log = dir.join("seepd-mid-commit.log");
    let out = std::fs::File::create(&log).unwrap();
    let child = Command::new(seepd_bin())
        .args(["run", "--config"])
        .arg(&cfg)
        .env("SEEPD_LOG", "info")
        .env("SEEPD_TEST_PAUSE_AT", "before_commit")
        .stdout(Stdio::null())
        .stderr(out)
        .spawn()
        .unwrap();
    let mut d = Daemon {
        child,
        log: log.clone(),
    };
    d.wait_connected(1);
    // Two readings beyond the river's "watch" bound: their batch queues a message, and the
    // writer holds before committing it.
    let p = Publisher::connect(broker.port, "pub-mid-commit");
    let t = chrono::Utc::now().timestamp() - 7200;
    for (i, head) in [96.0, 97.0].iter().enumerate() {
        p.send(
            "demo/AB-LOG1/json",
            river_json(t + i as i64 * 3600, head - 90.0),
        );
    }
    assert!(
        wait_log(
            &log,
            "Test pause at before_commit",
            1,
            Duration::from_secs(20)
        ),
        "{}",
        std::fs::read_to_string(&log).unwrap_or_default()
    );
    let committed = count(dir, "readings", "1");
    let (code, took) = d.terminate();
    within(took, "mid-commit", &log);
    // Taken, not committed, not acknowledged: the broker delivers it again.
    let d = Daemon::start(&cfg, &log);
    d.wait_connected(2);
    assert!(committed < 2, "the batch held mid-commit was committed");
    wait_for(Duration::from_secs(20), || {
        (count(dir, "readings", "1") == 2).then_some(())
    })
    .expect("the readings held mid-commit are stored after the restart");
    assert_eq!(count(dir, "alerts", "1"), 1, "the alert raised once");
    drop(d);
    (code, took)
}

/// The mail worker waits on a relay that accepted the connection and never says a word.
fn mid_email(dir: &Path) -> (Option<i32>, Duration) {
    let broker = Broker::start(dir);
    let tarpit = TcpListener::bind("127.0.0.1:0").unwrap();
    let port = tarpit.local_addr().unwrap().port();
    let hold = std::thread::spawn(move || {
        let mut held = Vec::new();
        for s in tarpit.incoming().take(4).flatten() {
            held.push(s);
        }
        std::thread::sleep(Duration::from_secs(60));
    });
    let cfg = crate::common::smtp::alert_config(dir, broker.port, port, &[]);
    short_deadline(&cfg);
    edit(&cfg, "seepd.toml", &[("timeout_s = 5", "timeout_s = 60")]);
    let log = dir.join("seepd-mid-email.log");
    let mut d = Daemon::start(&cfg, &log);
    d.wait_connected(1);
    let p = Publisher::connect(broker.port, "pub-mid-email");
    let t = chrono::Utc::now().timestamp() - 7200;
    for (i, head) in [96.0, 97.0].iter().enumerate() {
        p.send(
            "demo/AB-LOG1/json",
            river_json(t + i as i64 * 3600, head - 90.0),
        );
    }
    wait_for(Duration::from_secs(20), || {
        (count(dir, "outbox", "1") >= 1).then_some(())
    })
    .expect("an alert message queued");
    std::thread::sleep(Duration::from_millis(500));
    let (code, took) = d.terminate();
    within(took, "mid-email", &log);
    drop(hold);
    (code, took)
}

fn show((code, took): (Option<i32>, Duration)) -> String {
    format!(
        "exit {code:?} after {} (shutdown_deadline_s = {DEADLINE_S})",
        secs(took)
    )
}

#[test]
fn sigterm_with_the_broker_down_exits_within_the_deadline() {
    let dir = tempfile::tempdir().unwrap();
    let r = broker_down(dir.path());
    figures(
        "sigterm-broker-down",
        &[("broker down (reconnect backoff up to 30 s)", show(r))],
    );
}

#[test]
fn sigterm_mid_commit_exits_within_the_deadline_and_loses_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let r = mid_commit(dir.path());
    figures(
        "sigterm-mid-commit",
        &[(
            "mid-commit (writer held before its commit)",
            format!("{}; the reading stored after a restart", show(r)),
        )],
    );
}

#[test]
fn sigterm_mid_email_exits_within_the_deadline() {
    let dir = tempfile::tempdir().unwrap();
    let r = mid_email(dir.path());
    figures(
        "sigterm-mid-email",
        &[("mid-email (relay silent, SMTP timeout 60 s)", show(r))],
    );
}
