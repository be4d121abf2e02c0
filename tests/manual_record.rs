//! `seepd record` with the real binary, Mosquitto and SQLite: beside a running `seepd run` a
//! hand-read river level is stored once, flagged `manual`, reduced like telemetry, and fires the
//! river-stage rule as two logger readings would; the same entry again is reported as already
//! stored; an unknown instrument, a bad value and a time in the future are refused with the
//! reason and nothing is queued; with no service running the entry waits in the inbox and the
//! next start takes it. A vibrating-wire readout entered with its thermistor temperature is
//! corrected for it; one without is stored uncorrected, flagged and the reader told.

mod common;

use std::process::Output;
use std::time::Duration;

use common::*;

/// Manual readings (flag bit 7) of `instrument`.
const MANUAL: i64 = 1 << 7;

fn record(cfg: &std::path::Path, args: &[&str]) -> Output {
    std::process::Command::new(seepd_bin())
        .arg("record")
        .arg("--config")
        .arg(cfg)
        .args(args)
        .output()
        .unwrap()
}

fn text(o: &Output) -> String {
    format!(
        "{}{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    )
}

fn manual_rows(dir: &std::path::Path, instrument: &str) -> i64 {
    count(
        dir,
        "readings",
        &format!("instrument = '{instrument}' AND (flags & {MANUAL}) != 0"),
    )
}

#[test]
fn a_hand_read_level_goes_through_the_running_service_once_and_fires_the_rule() {
    let rig = Rig::start();
    let t1 = (chrono::Utc::now() - chrono::Duration::minutes(20)).to_rfc3339();
    let t2 = (chrono::Utc::now() - chrono::Duration::minutes(10)).to_rfc3339();
    // A river depth of 5.5 m at the gauge is above the rule's watch level; the rule raises
    // after two consecutive readings beyond it.
    let first = record(&rig.cfg, &["AB-RIVER", "5.5", "--time", &t1, "--by", "Kim"]);
    assert!(first.status.success(), "{}", text(&first));
    assert!(text(&first).contains(": stored."), "{}", text(&first));
    assert_eq!(
        count(rig.path(), "alerts", "1"),
        0,
        "one reading is not enough"
    );
    let second = record(&rig.cfg, &["AB-RIVER", "5.5", "--time", &t2, "--by", "Kim"]);
    assert!(text(&second).contains(": stored."), "{}", text(&second));
    assert_eq!(manual_rows(rig.path(), "AB-RIVER"), 2);
    let (raw, head): (f64, f64) = db(rig.path())
        .query_row(
            "SELECT raw, total_head_m FROM readings WHERE instrument = 'AB-RIVER' ORDER BY t_ms",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .unwrap();
    assert_eq!(raw, 5.5);
    assert!(head > 95.0, "reduced like telemetry: head {head}");
    wait_for(Duration::from_secs(10), || {
        (count(
            rig.path(),
            "alerts",
            "rule = 'ash-bend-river-stage' AND level = 'watch'",
        ) == 1)
            .then_some(())
    })
    .expect("the river-stage rule raised its watch level");

    // The same entry again: not stored twice.
    let again = record(&rig.cfg, &["AB-RIVER", "5.5", "--time", &t2, "--by", "Kim"]);
    assert!(text(&again).contains("already stored"), "{}", text(&again));
    assert_eq!(manual_rows(rig.path(), "AB-RIVER"), 2);
    assert_eq!(
        count(
            rig.path(),
            "manual_inbox",
            "done_ms IS NOT NULL AND by = 'Kim'"
        ),
        3
    );
    assert!(rig.log_text().contains("Manual reading taken"));

    // Refused before anything is queued, each with its reason.
    let future = (chrono::Utc::now() + chrono::Duration::hours(2)).to_rfc3339();
    for (args, says) in [
        (vec!["AB-NOPE", "1.0"], "no instrument \"AB-NOPE\""),
        (vec!["AB-RIVER", "deep"], "not a finite number"),
        (vec!["AB-RIVER", "50"], "outside the physical range"),
        (
            vec!["AB-RIVER", "5.0", "--time", future.as_str()],
            "in the future",
        ),
    ] {
        let o = record(&rig.cfg, &args);
        assert!(!o.status.success(), "{args:?} accepted");
        assert!(text(&o).contains(says), "{args:?}: {}", text(&o));
    }
    assert_eq!(count(rig.path(), "manual_inbox", "1"), 3);
}

/// Flag bit of a reading reduced without its temperature.
const TEMP_MISSING: i64 = 1 << 2;

#[test]
fn a_vibrating_wire_readout_takes_its_thermistor_temperature() {
    let rig = Rig::start();
    let t1 = (chrono::Utc::now() - chrono::Duration::minutes(20)).to_rfc3339();
    let t2 = (chrono::Utc::now() - chrono::Duration::minutes(10)).to_rfc3339();
    // AB-PZ-1A: linear calibration, thermal factor K = 0.02 kPa/°C from T0 = 15 °C.
    let with = record(
        &rig.cfg,
        &["AB-PZ-1A", "2450", "--temperature", "25", "--time", &t1],
    );
    assert!(text(&with).contains("(25 °C)"), "{}", text(&with));
    assert!(text(&with).contains(": stored."), "{}", text(&with));
    assert!(!text(&with).contains("temp_missing"), "{}", text(&with));
    let without = record(&rig.cfg, &["AB-PZ-1A", "2450", "--time", &t2]);
    assert!(text(&without).contains(": stored."), "{}", text(&without));
    assert!(
        text(&without).contains("without the thermal correction and flagged temp_missing"),
        "{}",
        text(&without)
    );
    let rows: Vec<(Option<f64>, f64, i64)> = {
        let c = db(rig.path());
        let mut st = c
            .prepare(
                "SELECT temperature_c, pressure_kpa, flags FROM readings
                 WHERE instrument = 'AB-PZ-1A' ORDER BY t_ms",
            )
            .unwrap();
        let r = st
            .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
            .unwrap();
        r.collect::<Result<_, _>>().unwrap()
    };
    assert_eq!(rows.len(), 2, "{rows:?}");
    assert_eq!(rows[0].0, Some(25.0));
    assert_eq!(rows[0].2 & TEMP_MISSING, 0, "{rows:?}");
    assert_eq!(rows[1].0, None);
    assert_ne!(rows[1].2 & TEMP_MISSING, 0, "{rows:?}");
    // The same frequency: the pressures differ by K·(T1 − T0) = 0.02 × (25 − 15) = 0.2 kPa.
    assert!(
        (rows[0].1 - rows[1].1 - 0.2).abs() < 1e-9,
        "thermal correction {} kPa",
        rows[0].1 - rows[1].1
    );
    // A temperature for an instrument whose reduction uses none is refused; nothing queued.
    let o = record(&rig.cfg, &["AB-SP-3", "4.0", "--temperature", "12"]);
    assert!(!o.status.success());
    assert!(
        text(&o).contains("its reduction uses no temperature"),
        "{}",
        text(&o)
    );
    assert_eq!(count(rig.path(), "manual_inbox", "1"), 2);
}

#[test]
fn with_no_service_the_entry_waits_and_the_next_start_takes_it() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let cfg = example_config(dir.path(), broker.port);
    let t = (chrono::Utc::now() - chrono::Duration::minutes(30)).to_rfc3339();
    let o = record(&cfg, &["AB-SP-3", "4.25", "--time", &t, "--by", "Lee"]);
    assert!(o.status.success(), "{}", text(&o));
    assert!(text(&o).contains("is waiting"), "{}", text(&o));
    assert_eq!(count(dir.path(), "readings", "1"), 0);
    let log = dir.path().join("seepd.log");
    let daemon = Daemon::start(&cfg, &log);
    daemon.wait_connected(1);
    wait_for(Duration::from_secs(15), || {
        (manual_rows(dir.path(), "AB-SP-3") == 1).then_some(())
    })
    .expect("taken at start");
    assert_eq!(
        count(
            dir.path(),
            "manual_inbox",
            "done_ms IS NOT NULL AND result = 'stored'"
        ),
        1
    );
    drop(daemon);
}
