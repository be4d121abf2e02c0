//! The operator commands with a broken configuration or none: `alerts`, `ack`, `silence` and
//! `status` run on the database alone (the configuration's problems are a warning), or with
//! `--db`; a database that does not exist is an error, never a new empty file. And `seepd
//! check` bounds every duration (a huge shutdown deadline once passed and panicked at exit).

mod common;

use std::path::{Path, PathBuf};

use ::seepd::store::Store;

use common::seepd_output as seepd;

/// The example configuration in `dir/config` with its database in `dir`, holding one active
/// alert (#1, the river stage) raised by real readings through the evaluator.
fn with_alert(dir: &Path) -> PathBuf {
    let cfg_dir = common::example_config(dir, 1883);
    let cfg = ::seepd::config::load_dir(&cfg_dir).unwrap();
    let mut store = Store::open(&cfg.service.database).unwrap();
    store.sync_instruments(&cfg, chrono::Utc::now()).unwrap();
    common::river_alerts(cfg, &mut store, &[96.0, 97.0, 97.1]);
    cfg_dir
}

/// Break the configuration elsewhere than the database: a syntax error in a site file and a
/// missing secret in the service file.
fn break_config(cfg: &Path) {
    std::fs::write(cfg.join("dam-tarn.toml"), "[site\nid = \"tarn\"\n").unwrap();
    common::edit(
        cfg,
        "seepd.toml",
        &[(
            "# username = \"seepd\"",
            "username = \"seepd\"\npassword_env = \"SEEPD_TEST_UNSET_PASSWORD\"",
        )],
    );
}

#[test]
fn operator_commands_work_with_a_broken_configuration() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = with_alert(dir.path());
    break_config(&cfg);
    let c = cfg.display().to_string();
    let (code, _, err) = seepd(&["check", "--config", &c]);
    assert_eq!(code, 78, "the configuration must really be broken: {err}");

    let (code, out, err) = seepd(&["alerts", "--config", &c]);
    assert_eq!(code, 0, "{out}\n{err}");
    assert!(out.contains("Active alerts (1):"), "{out}");
    assert!(out.contains("#1  "), "{out}");
    assert!(err.contains("dam-tarn.toml:"), "problems listed: {err}");
    assert!(err.contains("warning: 2 configuration problem(s)"), "{err}");
    assert!(err.contains("SEEPD_TEST_UNSET_PASSWORD"), "{err}");

    let (code, out, err) = seepd(&["ack", "1", "--config", &c, "--by", "night shift"]);
    assert_eq!(code, 0, "{out}\n{err}");
    assert!(out.contains("acknowledged by night shift"), "{out}");

    // A silence is checked against what the database knows.
    let silence = |rule: &str| {
        seepd(&[
            "silence", "--config", &c, "--rule", rule, "--until", "+1h", "--reason", "work",
        ])
    };
    let (code, out, err) = silence("ash-bend-river-stage");
    assert_eq!(code, 0, "{out}\n{err}");
    assert!(out.contains("Silence 1"), "{out}");
    let (code, _, err) = silence("no-such-rule");
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("no rule \"no-such-rule\""), "{err}");

    let (code, out, err) = seepd(&["status", "--config", &c]);
    assert_eq!(code, 0, "{out}\n{err}");
    assert!(out.contains("Export: (configuration not loaded)"), "{out}");

    let (_, out, _) = seepd(&["alerts", "--config", &c]);
    assert!(out.contains("acknowledged by night shift"), "{out}");
    assert!(out.contains("Silenced (1):"), "{out}");
}

#[test]
fn operator_commands_work_with_db_alone() {
    let dir = tempfile::tempdir().unwrap();
    with_alert(dir.path());
    let db = dir.path().join("seepd.sqlite").display().to_string();
    let (code, out, err) = seepd(&["alerts", "--db", &db]);
    assert_eq!(code, 0, "{out}\n{err}");
    assert!(out.contains("Active alerts (1):"), "{out}");
    let (code, out, err) = seepd(&["status", "--db", &db]);
    assert_eq!(code, 0, "{out}\n{err}");
    let (code, out, err) = seepd(&[
        "silence",
        "--db",
        &db,
        "--instrument",
        "AB-RIVER",
        "--until",
        "+2h",
        "--reason",
        "test",
    ]);
    assert_eq!(code, 0, "{out}\n{err}");
    let (code, out, err) = seepd(&["ack", "1", "--db", &db]);
    assert_eq!(code, 0, "{out}\n{err}");
    assert!(out.contains("Alert 1 acknowledged"), "{out}");
}

#[test]
fn a_missing_database_is_an_error_and_is_not_created() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("nope.sqlite");
    let (code, _, err) = seepd(&["alerts", "--db", &db.display().to_string()]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("no database at"), "{err}");
    assert!(!db.exists(), "an empty database was created");
    // Neither --config nor --db: a usage error.
    let (code, _, _) = seepd(&["alerts"]);
    assert_eq!(code, 2);
}

#[test]
fn check_refuses_a_shutdown_deadline_that_would_overflow() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = common::example_config(dir.path(), 1883);
    let text = std::fs::read_to_string(cfg.join("seepd.toml")).unwrap();
    let line = text
        .lines()
        .position(|l| l.starts_with("shutdown_deadline_s"))
        .unwrap()
        + 1;
    common::edit(
        &cfg,
        "seepd.toml",
        &[(
            "shutdown_deadline_s = 10",
            "shutdown_deadline_s = 9223372036854775807",
        )],
    );
    let (code, out, err) = seepd(&["check", "--config", &cfg.display().to_string()]);
    assert_eq!(code, 78, "{out}\n{err}");
    assert!(
        err.contains(&format!(
            "seepd.toml:{line}:23: [service]: key \"shutdown_deadline_s\""
        )),
        "{err}"
    );
}
