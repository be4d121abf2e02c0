//! Alerting across crashes, with the real seepd binary, a real Mosquitto and a real aiosmtpd:
//! kill -9 at each step of the notification path loses no message and duplicates one only with
//! the same Message-ID; a restart with an alert active sends nothing new; a resolve around a
//! restart is still sent; a pending timer resumes; acknowledgements and silences survive.

mod common;

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Duration;

use common::smtp::{alert_config, header, Opts, SmtpServer};
use common::*;

const TOPIC: &str = "demo/AB-LOG1/json";

/// Start seepd, optionally paused at a step of the notification path (see
/// `alerts::live::pause_point`).
fn daemon(config: &Path, log: &Path, pause_at: Option<&str>) -> Daemon {
    let out = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(log)
        .unwrap();
    let mut cmd = Command::new(seepd_bin());
    cmd.args(["run", "--config"])
        .arg(config)
        .env("SEEPD_LOG", "info")
        .env_remove("SEEPD_TEST_PAUSE_AT")
        .stdout(Stdio::null())
        .stderr(out);
    if let Some(step) = pause_at {
        cmd.env("SEEPD_TEST_PAUSE_AT", step);
    }
    Daemon {
        child: cmd.spawn().unwrap(),
        log: log.to_path_buf(),
    }
}

fn wait_log(log: &Path, text: &str) {
    wait_for(Duration::from_secs(30), || {
        std::fs::read_to_string(log)
            .unwrap_or_default()
            .contains(text)
            .then_some(())
    })
    .unwrap_or_else(|| {
        panic!(
            "log never said {text:?}:\n{}",
            std::fs::read_to_string(log).unwrap_or_default()
        )
    });
}

/// Publish river readings (depth above the 90.0 m datum) one second apart, stamped now.
fn river(p: &Publisher, depths: &[f64]) {
    let t0 = chrono::Utc::now().timestamp() - depths.len() as i64;
    for (i, d) in depths.iter().enumerate() {
        p.send(TOPIC, river_json(t0 + i as i64, *d));
    }
}

struct Rig {
    dir: tempfile::TempDir,
    broker: Broker,
    smtp: SmtpServer,
    cfg: PathBuf,
    log: PathBuf,
}

/// Broker, relay and configuration; quiet policy (no reminders, no escalation) plus `edits`.
fn rig(edits: &[(&str, &str)]) -> Rig {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let smtp = SmtpServer::start(dir.path(), Opts::default());
    let mut all = vec![
        ("remind_every_s = 14400", "remind_every_s = 0"),
        ("escalate_after_s = 3600", "escalate_after_s = 0"),
    ];
    all.extend_from_slice(edits);
    let cfg = alert_config(dir.path(), broker.port, smtp.port, &all);
    let log = dir.path().join("seepd.log");
    Rig {
        dir,
        broker,
        smtp,
        cfg,
        log,
    }
}

fn seepd_cmd(args: &[&str], cfg: &Path) -> String {
    let out = Command::new(seepd_bin())
        .args(args)
        .arg("--config")
        .arg(cfg)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "seepd {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stdout).into_owned()
}

/// Nothing more arrives for `d` (a bounded look for the absence of mail).
fn no_more_mail(smtp: &SmtpServer, n: usize, d: Duration) {
    let more = wait_for(d, || (smtp.messages().len() > n).then_some(()));
    assert!(
        more.is_none(),
        "unexpected message(s): {:?}",
        smtp.message_ids()
    );
}

#[test]
fn kill9_at_each_step_of_the_notification_path_loses_nothing() {
    for step in ["before_commit", "after_commit", "after_send"] {
        let r = rig(&[]);
        let mut d = daemon(&r.cfg, &r.log, Some(step));
        d.wait_connected(1);
        let p = Publisher::connect(r.broker.port, &format!("pub-{step}"));
        river(&p, &[8.0, 8.1]);
        wait_log(&r.log, &format!("Test pause at {step}"));
        d.kill9();
        let d2 = daemon(&r.cfg, &r.log, None);
        // Accepted by the relay but not marked sent: sent again after the restart, with the
        // same Message-ID. Otherwise exactly once.
        let expected = if step == "after_send" { 2 } else { 1 };
        let msgs = r.smtp.wait_messages(expected, Duration::from_secs(30));
        no_more_mail(&r.smtp, expected, Duration::from_secs(3));
        let ids = r.smtp.message_ids();
        let distinct: BTreeSet<&String> = ids.iter().collect();
        assert_eq!(distinct.len(), 1, "step {step}: {ids:?}");
        assert_eq!(ids.len(), expected, "step {step}: {ids:?}");
        let subject = header(&msgs[0], "Subject").unwrap_or_default();
        assert!(subject.contains("ACT"), "{subject}");
        assert_eq!(count(r.dir.path(), "outbox", "status = 'sent'"), 1);
        assert_eq!(count(r.dir.path(), "alerts", "1"), 1, "step {step}");
        drop(d2);
    }
}

#[test]
fn restart_mid_alert_sends_nothing_new_and_a_resolve_around_a_restart_is_sent() {
    let r = rig(&[("keep_active_s = 7200", "keep_active_s = 0")]);
    let mut d = daemon(&r.cfg, &r.log, None);
    d.wait_connected(1);
    let p = Publisher::connect(r.broker.port, "pub-mid");
    river(&p, &[8.0, 8.1]);
    r.smtp.wait_messages(1, Duration::from_secs(30));
    d.kill9();
    // Restarted with the alert active: nothing new.
    let mut d = daemon(&r.cfg, &r.log, None);
    d.wait_connected(2);
    no_more_mail(&r.smtp, 1, Duration::from_secs(3));
    d.kill9();
    // The resolve is committed with its message, then the process dies before sending.
    let mut d = daemon(&r.cfg, &r.log, Some("after_commit"));
    d.wait_connected(3);
    river(&p, &[2.0]);
    wait_log(&r.log, "Test pause at after_commit");
    d.kill9();
    let d = daemon(&r.cfg, &r.log, None);
    let msgs = r.smtp.wait_messages(2, Duration::from_secs(30));
    let subjects: Vec<String> = msgs.iter().filter_map(|m| header(m, "Subject")).collect();
    assert!(
        subjects.iter().any(|s| s.contains("All clear (was ACT)")),
        "{subjects:?}"
    );
    no_more_mail(&r.smtp, 2, Duration::from_secs(2));
    assert!(seepd_cmd(&["alerts"], &r.cfg).contains("Active alerts (0):"));
    drop(d);
}

#[test]
fn a_pending_persistence_timer_resumes_after_kill9() {
    let r = rig(&[(
        "persist_readings = 2\npersist_s = 0",
        "persist_readings = 1\npersist_s = 5",
    )]);
    let mut d = daemon(&r.cfg, &r.log, None);
    d.wait_connected(1);
    let p = Publisher::connect(r.broker.port, "pub-pending");
    river(&p, &[8.0]);
    wait_for(Duration::from_secs(20), || {
        (count(r.dir.path(), "rule_states", "state LIKE '%\"pending\"%'") == 1).then_some(())
    })
    .expect("the rule went pending");
    assert!(seepd_cmd(&["alerts"], &r.cfg).contains("Pending (1):"));
    d.kill9();
    assert!(r.smtp.messages().is_empty());
    let d = daemon(&r.cfg, &r.log, None);
    let msgs = r.smtp.wait_messages(1, Duration::from_secs(30));
    assert!(header(&msgs[0], "Subject")
        .unwrap_or_default()
        .contains("ACT"));
    drop(d);
}

#[test]
fn acknowledgements_and_silences_survive_kill9() {
    let r = rig(&[("remind_every_s = 0", "remind_every_s = 3")]);
    let mut d = daemon(&r.cfg, &r.log, None);
    d.wait_connected(1);
    let p = Publisher::connect(r.broker.port, "pub-ack");
    // 95.5 m: the "watch" level.
    river(&p, &[5.5, 5.6]);
    r.smtp.wait_messages(1, Duration::from_secs(30));
    let out = seepd_cmd(
        &["ack", "1", "--by", "tester", "--note", "patrol sent"],
        &r.cfg,
    );
    assert!(out.contains("acknowledged by tester"), "{out}");
    let out = seepd_cmd(
        &[
            "silence",
            "--rule",
            "ash-bend-river-stage",
            "--until",
            "+1h",
            "--reason",
            "gauge maintenance",
        ],
        &r.cfg,
    );
    assert!(out.contains("Silence 1"), "{out}");
    let ack_ms = chrono::Utc::now().timestamp_millis();
    d.kill9();

    let mut d = daemon(&r.cfg, &r.log, None);
    d.wait_connected(2);
    // The acknowledgement reached the rule state: no reminders (every 3 s otherwise).
    wait_for(Duration::from_secs(20), || {
        (count(r.dir.path(), "acks", "applied_ms IS NOT NULL") == 1).then_some(())
    })
    .expect("ack applied after the restart");
    no_more_mail(&r.smtp, r.smtp.messages().len(), Duration::from_secs(7));
    let late = format!("created_ms > {}", ack_ms + 1500);
    assert_eq!(count(r.dir.path(), "outbox", &late), 0);
    let report = seepd_cmd(&["alerts"], &r.cfg);
    assert!(report.contains("acknowledged by tester"), "{report}");
    assert!(
        report.contains("Silenced (1):") && report.contains("gauge maintenance"),
        "{report}"
    );

    // Silenced: escalating to "concern" changes the alert but sends nothing.
    river(&p, &[7.0, 7.1]);
    wait_for(Duration::from_secs(20), || {
        (count(
            r.dir.path(),
            "notices",
            "kind = 'escalate' AND status = 'silenced'",
        ) == 1)
            .then_some(())
    })
    .expect("a silenced escalation notice");
    assert_eq!(count(r.dir.path(), "outbox", &late), 0);
    d.kill9();
}
