//! The mail relay down while a flood raises, escalates and clears the river-stage alert, then
//! back up refusing one of the on-call addresses at RCPT TO: every message reaches every
//! accepted recipient exactly once (Message-IDs counted per recipient in the relay's Maildir),
//! the refused address is dead-lettered with the relay's reply, and nothing stays queued.

use std::time::{Duration, Instant};

use crate::common::smtp::{alert_config, Opts, SmtpServer};
use crate::common::*;
use crate::support::*;

const GONE: &str = "gone@example.invalid";

#[test]
fn relay_down_then_back_refusing_one_recipient() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let smtp_port = free_port();
    let cfg = alert_config(
        dir.path(),
        broker.port,
        smtp_port,
        &[(
            "emails = [\"levee-oncall@example.invalid\"]",
            "emails = [\"levee-oncall@example.invalid\", \"gone@example.invalid\"]",
        )],
    );
    let log = dir.path().join("seepd.log");
    let d = Daemon::start(&cfg, &log);
    d.wait_connected(1);
    let p = Publisher::connect(broker.port, "pub-relay");
    // A flood peak read hourly: the river rises through every level and falls back.
    let t0 = chrono::Utc::now().timestamp() - 7 * 86_400;
    let heads = [
        94.0, 96.0, 97.0, 97.9, 98.2, 98.0, 97.0, 95.5, 94.0, 93.0, 92.5, 92.0, 91.5,
    ];
    // One at a time, as a logger sends them (each reading is its own batch).
    for (h, head) in heads.iter().enumerate() {
        p.send(
            "demo/AB-LOG1/json",
            river_json(t0 + h as i64 * 3600, head - 90.0),
        );
        wait_for(Duration::from_secs(20), || {
            (count(dir.path(), "readings", "1") > h as i64).then_some(())
        })
        .expect("reading stored");
    }
    // The relay is down: messages wait and are retried.
    assert!(
        wait_log(
            &log,
            "Cannot deliver alert message",
            1,
            Duration::from_secs(30)
        ),
        "{}",
        std::fs::read_to_string(&log).unwrap_or_default()
    );
    let first_failure = Instant::now();
    std::thread::sleep(Duration::from_secs(3));
    let queued = count(dir.path(), "outbox", "status = 'pending'");
    assert!(queued >= 3, "several messages wait for the relay: {queued}");
    let tried = count(dir.path(), "outbox", "attempts >= 1");
    let server = SmtpServer::start_on(
        dir.path(),
        smtp_port,
        Opts {
            refuse: vec![GONE.into()],
            ..Opts::default()
        },
    );
    let up = Instant::now();
    let outage = up - first_failure;
    let drained = wait_for(Duration::from_secs(60), || {
        (count(dir.path(), "outbox", "status = 'pending'") == 0).then_some(())
    });
    let drain_time = up.elapsed();
    assert!(
        drained.is_some(),
        "{}",
        std::fs::read_to_string(&log).unwrap_or_default()
    );
    // Settle: no further sends may come.
    std::thread::sleep(Duration::from_secs(2));
    let conn = db(dir.path());
    let mut want: Vec<(String, String)> = Vec::new();
    let mut to_gone: i64 = 0;
    let mut st = conn
        .prepare("SELECT message_id, recipients FROM outbox")
        .unwrap();
    let rows = st
        .query_map([], |r| Ok((r.get::<_, String>(0)?, r.get::<_, String>(1)?)))
        .unwrap();
    for row in rows {
        let (id, recipients) = row.unwrap();
        for r in recipients.split(',').filter(|r| !r.is_empty()) {
            if r == GONE {
                to_gone += 1;
            } else {
                want.push((id.clone(), r.to_string()));
            }
        }
    }
    want.sort();
    let got = server.deliveries();
    assert_eq!(got, want, "each message once to each accepted recipient");
    assert!(to_gone >= 3, "the refused address was on several messages");
    assert_eq!(
        count(
            dir.path(),
            "outbox_recipients",
            &format!("address = '{GONE}' AND status = 'dead'")
        ),
        to_gone
    );
    let (code, alerts, err) = seepd_output(&["alerts", "--config", &cfg.display().to_string()]);
    assert_eq!(code, 0, "{err}");
    assert!(
        alerts.contains(&format!("not delivered to {GONE}; server reply:")),
        "{alerts}"
    );
    assert!(alerts.contains("550"), "{alerts}");
    drop(d);
    figures(
        "relay",
        &[
            ("alert messages", format!("{} (to {} recipient addresses in all)", count(dir.path(), "outbox", "1"), want.len() as i64 + to_gone)),
            ("relay down", format!("{queued} messages waited, {tried} tried at least once; relay down {} after the first failure", secs(outage))),
            ("relay back, one address refused (550 at RCPT TO)", format!("{} deliveries = every (Message-ID, accepted recipient) once; {to_gone} refusals dead-lettered with the reply", got.len())),
            ("drained after the relay came back", secs(drain_time)),
        ],
    );
}
