//! The report's alerts table and rule level lines: a replay (with `--send-email`, the replay
//! path that stores alert rows, against a real aiosmtpd) raises an alert on a piezometer rule;
//! `seepd ack` and `seepd silence` add an acknowledgement and a silence; `seepd report` lists all
//! three and draws the rule's level on the piezometer's chart.

mod common;

use std::path::Path;
use std::process::Command;

use common::smtp::{alert_config, Opts, SmtpServer};

const RULE: &str = "[[rule]]\nid = \"ash-bend-pz2b-head\"\nobject = \"AB-PZ-2B\"\n\
    quantity = \"total_head\"\npersist_readings = 2\n[[rule.level]]\nname = \"watch\"\n\
    above = 95.5\nresponse = \"Read AB-PZ-2B by hand.\"\n\n[[rule]]";

fn seepd(args: &[&str]) -> String {
    let o = Command::new(common::seepd_bin())
        .args(args)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "seepd {args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// 30 hours of readings: AB-PZ-2B rises from 95.0 to 96.0 m with the river (still above 95.5
/// at the end, so the alert is open and can be acknowledged).
fn scenario(dir: &Path) -> std::path::PathBuf {
    let mut text = String::new();
    for h in 0..30 {
        let t = format!("2026-04-{:02}T{:02}:00:00Z", 1 + h / 24, h % 24);
        let river = 3.0 + 2.5 * (h as f64 / 47.0 * std::f64::consts::PI).sin();
        let head_b = 95.0 + 0.4 * (river - 3.0);
        let psi = (head_b - 86.3) * 9.81 / 6.894_757_293_168;
        text += &format!("{{\"time\":\"{t}\",\"instrument\":\"AB-RIVER\",\"value\":{river}}}\n");
        text += &format!("{{\"time\":\"{t}\",\"instrument\":\"AB-PZ-2B\",\"value\":{psi}}}\n");
    }
    let input = dir.join("in.ndjson");
    std::fs::write(&input, text).unwrap();
    input
}

#[test]
fn alerts_acknowledgements_silences_and_rule_levels_appear_in_the_report() {
    let dir = tempfile::tempdir().unwrap();
    let smtp = SmtpServer::start(dir.path(), Opts::default());
    let cfg = alert_config(dir.path(), 1883, smtp.port, &[("[[rule]]", RULE)]);
    let c = cfg.to_str().unwrap();
    let db = dir.path().join("seepd.sqlite");
    let input = scenario(dir.path());
    seepd(&[
        "replay",
        "--config",
        c,
        "--input",
        input.to_str().unwrap(),
        "--db",
        db.to_str().unwrap(),
        "--output",
        "/dev/null",
        "--send-email",
    ]);
    let conn = rusqlite::Connection::open(&db).unwrap();
    let id: i64 = conn
        .query_row(
            "SELECT id FROM alerts WHERE rule = 'ash-bend-pz2b-head'",
            [],
            |r| r.get(0),
        )
        .expect("the replay raised the piezometer rule");
    seepd(&[
        "ack",
        &id.to_string(),
        "--config",
        c,
        "--by",
        "tester",
        "--note",
        "read by hand",
    ]);
    seepd(&[
        "silence",
        "--config",
        c,
        "--rule",
        "ash-bend-pz2b-head",
        "--until",
        "+2h",
        "--reason",
        "logger work",
        "--by",
        "tester",
    ]);
    let out = dir.path().join("out");
    let to = (chrono::Utc::now() + chrono::Duration::days(1))
        .format("%Y-%m-%d")
        .to_string();
    seepd(&[
        "report",
        "--config",
        c,
        "--site",
        "ash-bend",
        "--from",
        "2026-04-01",
        "--to",
        &to,
        "--out",
        out.to_str().unwrap(),
        "--db",
        db.to_str().unwrap(),
    ]);
    let html_path = std::fs::read_dir(&out)
        .unwrap()
        .flatten()
        .map(|e| e.path())
        .find(|p| p.extension().is_some_and(|x| x == "html"))
        .unwrap();
    let html = std::fs::read_to_string(html_path).unwrap();
    common::well_formed(&html);
    let section = html
        .split("<h2>Alerts, acknowledgements and silences</h2>")
        .nth(1)
        .and_then(|s| s.split("<h2>").next())
        .unwrap();
    let row = |event: &str| {
        section
            .split("<tr>")
            .find(|r| r.contains(&format!(">{event}<")) && r.contains("ash-bend-pz2b-head"))
            .unwrap_or_else(|| panic!("no {event} row for the rule in:\n{section}"))
            .to_string()
    };
    let raised = row("raised");
    assert!(raised.contains("AB-PZ-2B / ash-bend-pz2b-head"), "{raised}");
    assert!(raised.contains(">watch<"), "{raised}");
    assert!(raised.contains(&format!("alert #{id}")), "{raised}");
    let acked = row("acknowledged");
    assert!(acked.contains("by tester: read by hand"), "{acked}");
    let silenced = row("silenced");
    assert!(silenced.contains("logger work"), "{silenced}");
    // The rule's level is drawn on the chart that plots AB-PZ-2B, at its bound.
    assert!(
        html.contains(">ash-bend-pz2b-head: watch</text>"),
        "no level line label"
    );
}
