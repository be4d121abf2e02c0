//! seepd's heartbeat with the real binary, Mosquitto (and its `mosquitto_sub` client) and an
//! aiosmtpd relay: a retained "running" message on the heartbeat topic while seepd runs; when
//! seepd is killed (SIGKILL, no goodbye) the broker publishes the retained last will "gone";
//! after a restart "running" again, and a clean stop leaves "stopped". The daily "seepd is
//! running" email arrives once, and a restart the same day does not send it again. A wrong
//! `[heartbeat]` table is refused with its line.

mod common;

use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::Duration;

use common::*;

const TOPIC: &str = "seepd/test/alive";

fn add_heartbeat(cfg: &Path, table: &str) {
    let p = cfg.join("seepd.toml");
    let mut text = std::fs::read_to_string(&p).unwrap();
    text.push_str(&format!("\n[heartbeat]\n{table}\n"));
    std::fs::write(&p, text).unwrap();
}

/// `mosquitto_sub` on the heartbeat topic, printing each message's payload to `out`.
fn watch(port: u16, out: &Path) -> Child {
    Command::new("mosquitto_sub")
        .args([
            "-h",
            "127.0.0.1",
            "-p",
            &port.to_string(),
            "-q",
            "1",
            "-t",
            TOPIC,
        ])
        .stdout(std::fs::File::create(out).unwrap())
        .stderr(Stdio::null())
        .spawn()
        .unwrap()
}

/// The states seen so far, in order.
fn states(out: &Path) -> Vec<String> {
    std::fs::read_to_string(out)
        .unwrap_or_default()
        .lines()
        .filter_map(|l| serde_json::from_str::<serde_json::Value>(l).ok())
        .filter_map(|v| v["state"].as_str().map(str::to_string))
        .collect()
}

fn wait_state(out: &Path, n: usize, state: &str) {
    wait_for(Duration::from_secs(20), || {
        let s = states(out);
        (s.len() >= n && s[n - 1] == state).then_some(())
    })
    .unwrap_or_else(|| panic!("state #{n} {state:?} not seen; seen {:?}", states(out)));
}

/// The retained message on the topic now (a fresh subscriber gets it at once).
fn retained(port: u16) -> String {
    let o = Command::new("mosquitto_sub")
        .args([
            "-h",
            "127.0.0.1",
            "-p",
            &port.to_string(),
            "-t",
            TOPIC,
            "-C",
            "1",
            "-W",
            "5",
        ])
        .output()
        .unwrap();
    String::from_utf8_lossy(&o.stdout).to_string()
}

#[test]
fn the_broker_announces_a_killed_seepd_and_a_clean_stop_says_stopped() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let cfg = example_config(dir.path(), broker.port);
    add_heartbeat(&cfg, &format!("topic = \"{TOPIC}\"\nevery_s = 5"));
    let out = dir.path().join("heartbeat.txt");
    let mut sub = watch(broker.port, &out);
    let log = dir.path().join("seepd.log");

    let mut daemon = Daemon::start(&cfg, &log);
    daemon.wait_connected(1);
    wait_state(&out, 1, "running");
    // The beat at connect and the first of the periodic ones.
    wait_state(&out, 2, "running");
    let first: serde_json::Value = serde_json::from_str(
        std::fs::read_to_string(&out)
            .unwrap()
            .lines()
            .next()
            .unwrap(),
    )
    .unwrap();
    assert!(first["time"].as_str().is_some() && first["client_id"].as_str().is_some());

    let before = states(&out).len();
    assert!(!states(&out).contains(&"gone".to_string()));
    daemon.kill9();
    wait_for(Duration::from_secs(20), || {
        (states(&out).last().map(String::as_str) == Some("gone")).then_some(())
    })
    .unwrap_or_else(|| panic!("no will after SIGKILL: {:?}", states(&out)));
    assert!(states(&out).len() > before);
    assert!(
        retained(broker.port).contains("\"gone\""),
        "the will is retained"
    );

    let mut daemon = Daemon::start(&cfg, &log);
    daemon.wait_connected(2);
    let n = states(&out).len();
    wait_for(Duration::from_secs(20), || {
        states(&out)[n - 1..]
            .iter()
            .any(|s| s == "running")
            .then_some(())
    })
    .expect("running again after the restart");
    let (code, _) = daemon.terminate();
    assert_eq!(code, Some(0));
    wait_for(Duration::from_secs(10), || {
        (states(&out).last().map(String::as_str) == Some("stopped")).then_some(())
    })
    .unwrap_or_else(|| panic!("no stopped after a clean stop: {:?}", states(&out)));
    std::thread::sleep(Duration::from_millis(500));
    assert_eq!(
        states(&out).last().map(String::as_str),
        Some("stopped"),
        "no will after a clean stop"
    );
    assert!(retained(broker.port).contains("\"stopped\""));
    let _ = sub.kill();
    let _ = sub.wait();
}

#[test]
fn the_daily_email_comes_once_a_day() {
    use common::smtp::{alert_config, Opts, SmtpServer};
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let smtp = SmtpServer::start(dir.path(), Opts::default());
    let cfg = alert_config(dir.path(), broker.port, smtp.port, &[]);
    add_heartbeat(
        &cfg,
        "email_to = [\"oncall@example.invalid\"]\nemail_at = \"00:00\"",
    );
    let log = dir.path().join("seepd.log");
    let mut daemon = Daemon::start(&cfg, &log);
    daemon.wait_connected(1);
    let msgs = smtp.wait_messages(1, Duration::from_secs(20));
    let hb: Vec<&String> = msgs
        .iter()
        .filter(|m| m.contains("Subject: seepd is running"))
        .collect();
    assert_eq!(hb.len(), 1, "{msgs:?}");
    assert!(hb[0].contains("Ash Bend levee"), "{}", hb[0]);
    assert!(hb[0].contains("oncall@example.invalid"));
    daemon.terminate();
    // A restart the same day sends nothing more.
    let mut daemon = Daemon::start(&cfg, &log);
    daemon.wait_connected(2);
    std::thread::sleep(Duration::from_secs(3));
    let again = smtp
        .messages()
        .iter()
        .filter(|m| m.contains("Subject: seepd is running"))
        .count();
    assert_eq!(again, 1);
    daemon.terminate();
}

#[test]
fn a_wrong_heartbeat_table_is_refused_with_its_line() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = example_config(dir.path(), 1883);
    add_heartbeat(&cfg, "topic = \"seepd/#\"\nevery_s = 5\nbeat = 3");
    let o = Command::new(seepd_bin())
        .args(["check", "--config"])
        .arg(&cfg)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stderr).to_string() + &String::from_utf8_lossy(&o.stdout);
    assert!(!o.status.success());
    // Both problems at once, each at its line.
    let line_of = |what: &str| {
        text.lines()
            .find(|l| l.contains(what))
            .and_then(|l| l.split("seepd.toml:").nth(1))
            .and_then(|r| r.split(':').next())
            .and_then(|n| n.parse::<usize>().ok())
    };
    let (topic, beat) = (line_of("no wildcards"), line_of("unknown key \"beat\""));
    assert!(topic.is_some() && beat == topic.map(|t| t + 2), "{text}");
    // Without the unknown key, the wildcard topic and the missing mail relay are both named.
    let p = cfg.join("seepd.toml");
    let t = std::fs::read_to_string(&p)
        .unwrap()
        .replace("beat = 3\n", "email_to = [\"a@b.example\"]\n");
    std::fs::write(&p, t).unwrap();
    let o = Command::new(seepd_bin())
        .args(["check", "--config"])
        .arg(&cfg)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stderr).to_string() + &String::from_utf8_lossy(&o.stdout);
    assert!(!o.status.success());
    assert!(
        text.contains("no wildcards") && text.contains("needs a valid [smtp]"),
        "{text}"
    );
}
