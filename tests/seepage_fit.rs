//! Calibrating a section to its piezometers end to end: a real Mosquitto, the real `seepd run`
//! and `seepd fit`, a real SQLite database. The site file's foundation permeability is written
//! 10^0.6 (about 4×) too high; the piezometers read what the flow net says at the true value.
//! Before calibration the live residuals are large. A fit of the foundation and a toe zone at
//! one time from two piezometers cannot determine both: it is stored with the warning and not
//! applied. A fit of the foundation alone recovers the truth's factor within 0.02 in log10 and
//! is applied; a second fit at two times adds to the history. After a reload the live re-solve
//! uses the newest applied fit and the residuals fall to near zero; `seepd flownet` names it.

mod common;
mod fit_common;

use std::path::Path;
use std::process::Command;
use std::time::Duration;

use common::{db, seepd_output, wait_for, Daemon, Publisher};
use fit_common::{on_section, residual_at, site_config, tip_heads, Feed};
use seepd::config::section_model::SeepageSpec;

const SITE: &str = r#"
[site]
id = "fit-dam"
name = "Fit dam (invented)"
time_zone = "UTC"
length_unit = "m"

[[instrument]]
id = "FD-POOL"
kind = "stage_gauge"
installed = "2025-01-01"
interval_s = 3600
range = [190.0, 240.0]
[instrument.stage_gauge]
water_body = "reservoir"
mode = "elevation"
unit = "m"

[[instrument]]
id = "FD-PZ-1"
kind = "pressure_transducer"
station = 50.0
tip_elevation = 201.0
installed = "2025-01-01"
interval_s = 3600
range = [0.0, 40.0]
[instrument.pressure_transducer]
output = "m_water"
barometric_correction = "none"

[[instrument]]
id = "FD-PZ-2"
kind = "pressure_transducer"
station = 65.0
tip_elevation = 195.0
installed = "2025-01-01"
interval_s = 3600
range = [0.0, 40.0]
[instrument.pressure_transducer]
output = "m_water"
barometric_correction = "none"

[[section]]
id = "FD-S1"
ground = [[0.0, 200.0], [40.0, 225.0], [48.0, 225.0], [88.0, 200.0], [120.0, 199.0]]
pool_gauge = "FD-POOL"
tail_level = 199.5
toe_station = 88.0
piezometers = ["FD-PZ-1", "FD-PZ-2"]
tolerance_s = 5400
[section.model]
outline = [[-30.0, 185.0], [120.0, 185.0], [120.0, 199.0], [88.0, 200.0], [48.0, 225.0],
           [40.0, 225.0], [0.0, 200.0], [-30.0, 200.0]]
base = { kh_m_per_s = 4.0e-7, kv_m_per_s = 1.0e-7 }
element_size = 4.0
resolve_change = 0.9
resolve_every_s = 86400
[[section.model.zone]]
name = "foundation"
polygon = [[-30.0, 185.0], [120.0, 185.0], [120.0, 199.0], [88.0, 200.0], [0.0, 200.0],
           [-30.0, 200.0]]
k_m_per_s = 2.0e-6
[[section.model.zone]]
name = "toe"
polygon = [[100.0, 190.0], [118.0, 190.0], [118.0, 198.5], [100.0, 198.5]]
k_m_per_s = 2.0e-6
[[section.model.boundary]]
name = "reservoir"
kind = "water"
water = "pool"
path = [[40.0, 225.0], [0.0, 200.0], [-30.0, 200.0]]
[[section.model.boundary]]
name = "tail water"
kind = "water"
water = "tail"
path = [[120.0, 199.0], [88.0, 200.0]]
[[section.model.boundary]]
name = "downstream face"
kind = "seepage_face"
path = [[120.0, 199.0], [88.0, 200.0], [48.0, 225.0]]
"#;

/// log10 of the true foundation permeability over the written one.
const TRUTH_LOG10: f64 = -0.6;

fn heads(cfg: &seepd::config::Config, spec: &SeepageSpec, pool: f64) -> Vec<f64> {
    tip_heads(cfg, 0, spec, pool, 199.5)
}

fn fit(cfg: &Path, extra: &[&str]) -> (i32, String, String) {
    on_section(cfg, "fit", "FD-S1", extra)
}

#[test]
fn a_section_is_calibrated_stored_with_history_and_used_live() {
    let dir = tempfile::tempdir().unwrap();
    let broker = common::Broker::start(dir.path());
    let cfg_dir = site_config(dir.path(), broker.port, "fit-dam.toml", SITE);
    let cfg = seepd::config::load_dir(&cfg_dir).unwrap_or_else(|p| panic!("{p}"));
    let written = cfg.objects.sections[0].model.clone().expect("model");
    let mut truth = written.clone();
    let f = &mut truth.model.zones[0];
    assert_eq!(f.name, "foundation");
    f.material = f.material.scaled(10f64.powf(TRUTH_LOG10));
    let log = dir.path().join("seepd.log");
    let daemon = Daemon::start(&cfg_dir, &log);
    daemon.wait_connected(1);
    let publisher = Publisher::connect(broker.port, "seepage-fit-test");
    let t0 = (chrono::Utc::now().timestamp_millis() / 3_600_000 - 30) * 3_600_000;
    let hour = |h: i64| t0 + h * 3_600_000;
    let pool = |h: i64| if h < 3 { 214.0 } else { 216.0 + (h - 3) as f64 };
    let mut feeder = Feed {
        dir: dir.path(),
        publisher: &publisher,
        topic: "demo/FD-LOG/json",
        pool_gauge: "FD-POOL",
        sections: 1,
        sent: 0,
    };
    // Hours 0–2 at pool 214, hours 3–4 at 216 (hour 5 and later: see below). The piezometers
    // read the truth's flow net ten minutes after each pool reading.
    // A live solve is due when the pool moved more than 0.9 m since the last one (and first).
    let mut feed = |h: i64, solves: bool| {
        let want = heads(&cfg, &truth, pool(h));
        let raw = [
            ("FD-PZ-1".to_string(), want[0] - 201.0),
            ("FD-PZ-2".to_string(), want[1] - 195.0),
        ];
        feeder.send(hour(h), pool(h), solves, &raw);
    };
    for h in 0..5 {
        feed(h, h == 0 || h >= 3);
    }
    // Before calibration: the live residual is the truth's head against the written model's.
    let before = residual_at(dir.path(), "FD-PZ-2", hour(4) + 600_000);
    let expected = heads(&cfg, &truth, pool(4))[1] - heads(&cfg, &written, pool(4))[1];
    assert!(
        expected.abs() > 0.3,
        "written vs truth at FD-PZ-2: {expected} m"
    );
    assert!((before - expected).abs() < 1e-6, "{before} vs {expected}");

    let at = |h: i64| {
        chrono::DateTime::from_timestamp_millis(hour(h) + 1_200_000)
            .unwrap()
            .to_rfc3339()
    };
    // A month after the last readings: refused, saying why each tip was left out.
    let long_after = chrono::DateTime::from_timestamp_millis(hour(4) + 30 * 86_400_000)
        .unwrap()
        .to_rfc3339();
    let (code, out, err) = fit(&cfg_dir, &["--at", &long_after, "--zone", "foundation"]);
    assert_eq!(code, 1, "{out}{err}");
    assert!(
        err.contains("no piezometer head to fit")
            && err.contains("FD-PZ-2: newest reading at")
            && err.contains("older than the section's tolerance; left out"),
        "{err}"
    );
    // Two zones from two heads at one time: not determined, stored but not applied.
    let (code, out, err) = fit(
        &cfg_dir,
        &["--at", &at(2), "--zone", "foundation", "--zone", "toe"],
    );
    eprintln!("{out}");
    assert_eq!(code, 1, "{out}{err}");
    assert!(out.contains("too few piezometers"), "{out}");
    assert!(
        out.contains("stored, not applied") && out.contains("not determined"),
        "{out}"
    );
    assert!(out.contains("in use: the model as written"), "{out}");
    let flownet = || {
        let (code, out, err) = seepd_output(&[
            "flownet",
            "--config",
            cfg_dir.to_str().unwrap(),
            "--id",
            "FD-S1",
            "--upstream",
            "214.0",
            "--downstream",
            "199.5",
            "--json",
        ]);
        assert_eq!(code, 0, "{err}");
        serde_json::from_str::<serde_json::Value>(&out).unwrap()
    };
    assert!(flownet()["calibration"].is_null());

    // The foundation alone at the steady time: recovered and applied.
    let (code, out, err) = fit(
        &cfg_dir,
        &["--at", &at(2), "--zone", "foundation", "--json"],
    );
    assert_eq!(code, 0, "{out}{err}");
    let j: serde_json::Value = serde_json::from_str(&out).unwrap();
    let got = j["factors"][0]["log10_factor"].as_f64().unwrap();
    assert!(
        (got - TRUTH_LOG10).abs() < 0.02,
        "fitted {got}, truth {TRUTH_LOG10}"
    );
    assert!(j["factors"][0]["std_error"].as_f64().is_some());
    assert_eq!(j["applied"], true);
    let rms = j["rms_calibrated_m"].as_f64().unwrap();
    assert!(
        rms < 0.02 && j["rms_written_m"].as_f64().unwrap() > 0.2,
        "{j}"
    );
    assert!(j["warnings"].as_array().unwrap().is_empty(), "{j}");

    // A second fit at two times adds to the history; hour 4 follows a 2 m pool rise.
    let (code, out, err) = fit(
        &cfg_dir,
        &["--at", &at(2), "--at", &at(4), "--zone", "foundation"],
    );
    eprintln!("{out}");
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("conditions may not be steady"), "{out}");
    assert!(out.contains("zone foundation: factor"), "{out}");
    let history: Vec<(i64, String)> = {
        let c = db(dir.path());
        let mut st = c
            .prepare("SELECT fitted_ms, params FROM models WHERE id = 'FD-S1' AND kind = 'seepage' ORDER BY fitted_ms")
            .unwrap();
        st.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
            .unwrap()
            .map(Result::unwrap)
            .collect()
    };
    assert_eq!(history.len(), 3);
    let newest: serde_json::Value = serde_json::from_str(&history[2].1).unwrap();
    assert_eq!(newest["times_ms"].as_array().unwrap().len(), 2);
    let got = newest["factors"][0]["log10_factor"].as_f64().unwrap();
    assert!((got - TRUTH_LOG10).abs() < 0.02, "fitted {got}");

    // After a reload the live re-solve uses the newest applied fit.
    Command::new("kill")
        .arg("-HUP")
        .arg(daemon.child.id().to_string())
        .status()
        .unwrap();
    wait_for(Duration::from_secs(20), || {
        std::fs::read_to_string(&log)
            .unwrap_or_default()
            .contains("Seepage calibration in use")
            .then_some(())
    })
    .expect("the calibration was not taken at the reload");
    feed(6, true);
    let after = residual_at(dir.path(), "FD-PZ-2", hour(6) + 600_000);
    eprintln!("live residual at FD-PZ-2: {before:.4} m before, {after:.4} m after calibration");
    assert!(after.abs() < 0.02, "after calibration: {after}");

    // `seepd flownet` solves with it and says which fit it is.
    let j = flownet();
    let c = &j["calibration"];
    assert!(
        (c["rms_m"].as_f64().unwrap() - newest["rms_calibrated_m"].as_f64().unwrap()).abs() < 1e-12
    );
    let m = j["piezometers"][1]["modelled"].as_f64().unwrap();
    assert!((m - heads(&cfg, &truth, 214.0)[1]).abs() < 0.02, "{m}");
    drop(daemon);
}
