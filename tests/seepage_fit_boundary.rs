//! Boundary level offsets in a section calibration, end to end: a real Mosquitto, the real
//! `seepd run`, `seepd fit`, `seepd flownet` and `seepd section`, a real SQLite database.
//!
//! Two instrumented sections of an invented levee share the reservoir gauge. The site file
//! writes the tail water at 199.5 m (it is not gauged); it really stands 0.45 m higher, and at
//! the second section the foundation is also 10^0.4 times less pervious than written. The
//! piezometers read what the flow net says at the truth, solved here with the tail water at
//! 199.95 m (the written model, another level: not the offset code under test).
//! - Section A, tail water and a dry relief ditch: the ditch's offset cannot be determined (no
//!   head depends on it), so the fit is stored with the warning and not applied.
//! - Section A, tail water alone: recovered within 0.01 m, applied.
//! - Section B, foundation and tail water at two times: both recovered (0.01 in log10, 0.01 m).
//! - After a reload the live re-solve of both sections uses the fits (residuals near zero);
//!   `seepd flownet` and the drawing of `seepd section` name the offset.
//! - A calibration row as stored before offsets existed still loads and is used.

mod common;
mod fit_common;

use std::path::Path;
use std::process::Command;
use std::time::Duration;

use common::{db, wait_for, Daemon, Publisher};
use fit_common::{on_section as run, residual_at, site_config, tip_heads as heads, Feed};
use seepd::config::section_model::SeepageSpec;

/// One instrumented section: ids prefixed `prefix`, tips at the same places in both.
fn section(id: &str, prefix: &str, log10_foundation: f64) -> String {
    let k = 2.0e-6 * 10f64.powf(log10_foundation);
    format!(
        r#"
[[section]]
id = "{id}"
ground = [[0.0, 200.0], [40.0, 225.0], [48.0, 225.0], [88.0, 200.0], [120.0, 199.0]]
pool_gauge = "TD-POOL"
tail_level = 199.5
toe_station = 88.0
piezometers = ["{prefix}-1", "{prefix}-2", "{prefix}-3"]
tolerance_s = 5400
[section.model]
outline = [[-30.0, 185.0], [120.0, 185.0], [120.0, 199.0], [104.0, 199.5], [88.0, 200.0],
           [48.0, 225.0], [40.0, 225.0], [0.0, 200.0], [-30.0, 200.0]]
base = {{ kh_m_per_s = 4.0e-7, kv_m_per_s = 1.0e-7 }}
element_size = 4.0
resolve_change = 0.9
resolve_every_s = 86400
[[section.model.zone]]
name = "foundation"
polygon = [[-30.0, 185.0], [120.0, 185.0], [120.0, 199.0], [104.0, 199.5], [88.0, 200.0],
           [0.0, 200.0], [-30.0, 200.0]]
k_m_per_s = {k:e}
[[section.model.boundary]]
name = "reservoir"
kind = "water"
water = "pool"
path = [[40.0, 225.0], [0.0, 200.0], [-30.0, 200.0]]
[[section.model.boundary]]
name = "tail water"
kind = "water"
water = "tail"
path = [[120.0, 199.0], [104.0, 199.5]]
[[section.model.boundary]]
name = "relief ditch"
kind = "water"
water = 198.8
path = [[104.0, 199.5], [88.0, 200.0]]
[[section.model.boundary]]
name = "downstream face"
kind = "seepage_face"
path = [[120.0, 199.0], [104.0, 199.5], [88.0, 200.0], [48.0, 225.0]]
"#
    )
}

fn piezometer(id: &str, station: f64, tip: f64) -> String {
    format!(
        r#"
[[instrument]]
id = "{id}"
kind = "pressure_transducer"
station = {station:.1}
tip_elevation = {tip:.1}
installed = "2025-01-01"
interval_s = 3600
range = [0.0, 40.0]
[instrument.pressure_transducer]
output = "m_water"
barometric_correction = "none"
"#
    )
}

/// Tips: under the downstream slope, near the toe, under the tail water.
const TIPS: [(f64, f64); 3] = [(50.0, 201.0), (84.0, 193.0), (110.0, 194.0)];

/// Written tail-water level, and the offset of the truth's, m.
const TAIL_M: f64 = 199.5;
const TRUTH_OFFSET_M: f64 = 0.45;
/// log10 of section B's true foundation permeability over the written one.
const TRUTH_LOG10: f64 = -0.4;

fn site() -> String {
    let mut s = String::from(
        r#"
[site]
id = "tail-dam"
name = "Tail dam (invented)"
time_zone = "UTC"
length_unit = "m"

[[instrument]]
id = "TD-POOL"
kind = "stage_gauge"
installed = "2025-01-01"
interval_s = 3600
range = [190.0, 240.0]
[instrument.stage_gauge]
water_body = "reservoir"
mode = "elevation"
unit = "m"
"#,
    );
    for prefix in ["TA-PZ", "TB-PZ"] {
        for (i, (x, y)) in TIPS.iter().enumerate() {
            s += &piezometer(&format!("{prefix}-{}", i + 1), *x, *y);
        }
    }
    s += &section("TD-A", "TA-PZ", 0.0);
    s += &section("TD-B", "TB-PZ", 0.0);
    s
}

fn json(out: &str) -> serde_json::Value {
    serde_json::from_str(out).unwrap_or_else(|e| panic!("{e}: {out}"))
}

fn flownet(cfg: &Path, id: &str) -> serde_json::Value {
    let levels = ["--upstream", "214.0", "--downstream", "199.5", "--json"];
    let (code, out, err) = run(cfg, "flownet", id, &levels);
    assert_eq!(code, 0, "{err}");
    json(&out)
}

#[test]
fn boundary_offsets_are_fitted_warned_stored_and_used_live() {
    let dir = tempfile::tempdir().unwrap();
    let broker = common::Broker::start(dir.path());
    let cfg_dir = site_config(dir.path(), broker.port, "tail-dam.toml", &site());
    let cfg = seepd::config::load_dir(&cfg_dir).unwrap_or_else(|p| panic!("{p}"));
    let written: Vec<SeepageSpec> = cfg
        .objects
        .sections
        .iter()
        .map(|s| s.model.clone().expect("model"))
        .collect();
    let mut truth_b = written[1].clone();
    let f = &mut truth_b.model.zones[0];
    assert_eq!(f.name, "foundation");
    f.material = f.material.scaled(10f64.powf(TRUTH_LOG10));
    let truth = [&written[0], &truth_b];
    let tail = TAIL_M + TRUTH_OFFSET_M;

    let log = dir.path().join("seepd.log");
    let daemon = Daemon::start(&cfg_dir, &log);
    daemon.wait_connected(1);
    let publisher = Publisher::connect(broker.port, "seepage-offset-test");
    let t0 = (chrono::Utc::now().timestamp_millis() / 3_600_000 - 30) * 3_600_000;
    let hour = |h: i64| t0 + h * 3_600_000;
    let pool = |h: i64| if h < 3 { 214.0 } else { 216.0 + (h - 3) as f64 };
    let mut feeder = Feed {
        dir: dir.path(),
        publisher: &publisher,
        topic: "demo/TD-LOG/json",
        pool_gauge: "TD-POOL",
        sections: 2,
        sent: 0,
    };
    // Hours 0–2 at pool 214, 3–4 at 216 and 217 (and 6 below); the piezometers of both
    // sections read the truth ten minutes after each pool reading.
    let mut feed = |h: i64, solves: bool| {
        let mut raw = Vec::new();
        for (s, prefix) in ["TA-PZ", "TB-PZ"].iter().enumerate() {
            let want = heads(&cfg, s, truth[s], pool(h), tail);
            for (i, (head, tip)) in want.iter().zip(TIPS).enumerate() {
                raw.push((format!("{prefix}-{}", i + 1), head - tip.1));
            }
        }
        feeder.send(hour(h), pool(h), solves, &raw);
    };
    for h in 0..5 {
        feed(h, h == 0 || h >= 3);
    }
    // The heads feel the tail water: at section A, the truth against the written model.
    let before = residual_at(dir.path(), "TA-PZ-3", hour(4) + 600_000);
    let expected = heads(&cfg, 0, truth[0], pool(4), tail)[2]
        - heads(&cfg, 0, &written[0], pool(4), TAIL_M)[2];
    assert!(expected > 0.2, "truth vs written at TA-PZ-3: {expected} m");
    assert!((before - expected).abs() < 1e-6, "{before} vs {expected}");

    let at = |h: i64| {
        chrono::DateTime::from_timestamp_millis(hour(h) + 1_200_000)
            .unwrap()
            .to_rfc3339()
    };
    let (a2, a4) = (at(2), at(4));

    // Unknown and dry boundaries are refused with the water boundaries listed.
    let (code, _, err) = run(&cfg_dir, "fit", "TD-A", &["--boundary", "ditch"]);
    assert_ne!(code, 0);
    assert!(
        err.contains(
            "no boundary \"ditch\" in the model (water boundaries: reservoir, tail water, relief ditch)"
        ),
        "{err}"
    );
    let (code, _, err) = run(&cfg_dir, "fit", "TD-A", &["--boundary", "downstream face"]);
    assert_ne!(code, 0);
    assert!(err.contains("is not a water boundary"), "{err}");

    // The dry relief ditch beside the tail water: not determined, stored, not applied.
    let (code, out, err) = run(
        &cfg_dir,
        "fit",
        "TD-A",
        &[
            "--at",
            &a2,
            "--boundary",
            "tail water",
            "--boundary",
            "relief ditch",
        ],
    );
    eprintln!("{out}");
    assert_eq!(code, 1, "{out}{err}");
    assert!(
        out.contains(
            "warning: boundary 'relief ditch': no piezometer head depends on it at the fitted \
             value (not determined; a level below the whole stretch leaves it dry)"
        ),
        "{out}"
    );
    assert!(
        out.contains("boundary relief ditch: level offset 0.000 m, not determined"),
        "{out}"
    );
    assert!(
        out.contains("stored, not applied: boundary relief ditch: not determined by the data;"),
        "{out}"
    );
    assert!(out.contains("in use: the model as written"), "{out}");
    // The tail water is still determined beside it.
    assert!(
        out.contains("boundary tail water: level offset +0.450 m ± "),
        "{out}"
    );
    assert!(flownet(&cfg_dir, "TD-A")["calibration"].is_null());

    // The tail water alone: recovered and applied.
    let (code, out, err) = run(
        &cfg_dir,
        "fit",
        "TD-A",
        &["--at", &a2, "--boundary", "tail water", "--json"],
    );
    assert_eq!(code, 0, "{out}{err}");
    let j = json(&out);
    eprintln!("section A: {}", j["boundary_offsets"]);
    assert_eq!(j["factors"].as_array().unwrap().len(), 0, "{j}");
    let o = &j["boundary_offsets"][0];
    assert_eq!(o["boundary"], "tail water");
    let got = o["offset_m"].as_f64().unwrap();
    assert!(
        (got - TRUTH_OFFSET_M).abs() < 0.01,
        "fitted {got} m, truth {TRUTH_OFFSET_M} m"
    );
    assert!(o["std_error_m"].as_f64().is_some() && o["at_bound"] == false);
    assert_eq!(j["applied"], true);
    assert!(j["rms_calibrated_m"].as_f64().unwrap() < 0.01, "{j}");
    assert!(j["warnings"].as_array().unwrap().is_empty(), "{j}");
    let fit_a = j;

    // Section B: the foundation and the tail water together, at two times.
    let (code, out, err) = run(
        &cfg_dir,
        "fit",
        "TD-B",
        &[
            "--at",
            &a2,
            "--at",
            &a4,
            "--zone",
            "foundation",
            "--boundary",
            "tail water",
            "--json",
        ],
    );
    assert_eq!(code, 0, "{out}{err}");
    let j = json(&out);
    eprintln!("section B: {} {}", j["factors"], j["boundary_offsets"]);
    let zone = j["factors"][0]["log10_factor"].as_f64().unwrap();
    let offset = j["boundary_offsets"][0]["offset_m"].as_f64().unwrap();
    assert!(
        (zone - TRUTH_LOG10).abs() < 0.01,
        "fitted {zone}, truth {TRUTH_LOG10}"
    );
    assert!(
        (offset - TRUTH_OFFSET_M).abs() < 0.01,
        "fitted {offset} m, truth {TRUTH_OFFSET_M} m"
    );
    assert_eq!(j["applied"], true, "{j}");
    let stored: i64 = db(dir.path())
        .query_row(
            "SELECT count(*) FROM models WHERE kind = 'seepage' AND params LIKE '%\"boundary_offsets\":[{%'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(stored, 3, "fits with offsets in the model history");

    // After a reload the live re-solve of both sections uses the fits.
    Command::new("kill")
        .arg("-HUP")
        .arg(daemon.child.id().to_string())
        .status()
        .unwrap();
    wait_for(Duration::from_secs(20), || {
        let text = std::fs::read_to_string(&log).unwrap_or_default();
        (text.matches("Seepage calibration in use").count() == 2).then_some(())
    })
    .expect("the calibrations were not taken at the reload");
    feed(6, true);
    for id in ["TA-PZ-1", "TA-PZ-3", "TB-PZ-2", "TB-PZ-3"] {
        let after = residual_at(dir.path(), id, hour(6) + 600_000);
        eprintln!("live residual at {id} after calibration: {after:.4} m");
        assert!(after.abs() < 0.01, "{id} after calibration: {after}");
    }

    // `seepd flownet` solves with the offset and says so.
    let j = flownet(&cfg_dir, "TD-A");
    let c = &j["calibration"];
    assert_eq!(
        c["boundary_offsets"][0]["offset_m"],
        fit_a["boundary_offsets"][0]["offset_m"]
    );
    let m = j["piezometers"][2]["modelled"].as_f64().unwrap();
    let want = heads(&cfg, 0, truth[0], 214.0, tail)[2];
    assert!((m - want).abs() < 0.01, "{m} against the truth's {want}");

    // The drawing names it in its note.
    let (code, svg, err) = run(&cfg_dir, "section", "TD-A", &["--at", &at(6)]);
    assert_eq!(code, 0, "{err}");
    assert!(svg.contains("tail water +0.45 m"), "{svg}");

    // A row stored before offsets existed (its JSON verbatim, newer than the fit above) loads
    // and is the one in use.
    let newest_ms = chrono::Utc::now().timestamp_millis() + 60_000;
    let old = format!(
        r#"{{"section":"TD-B","fitted_ms":{},"times_ms":[{}],"factors":[{{"zone":"foundation","log10_factor":-0.4,"std_error":0.001,"at_bound":false}}],"rms_written_m":0.5,"rms_calibrated_m":0.125,"tips":[],"warnings":[],"not_applied":[],"iterations":3,"solves":9}}"#,
        newest_ms,
        hour(2)
    );
    db(dir.path())
        .execute(
            "INSERT INTO models (id, kind, fitted_ms, train_start_ms, train_end_ms, r_squared,
                 sigma, n, params)
             VALUES ('TD-B', 'seepage', ?1, ?2, ?2, 0.9, 0.125, 3, ?3)",
            rusqlite::params![newest_ms, hour(2), old],
        )
        .unwrap();
    let c = flownet(&cfg_dir, "TD-B")["calibration"].clone();
    assert_eq!(c["rms_m"], 0.125, "{c}");
    assert_eq!(c["factors"][0]["log10_factor"], -0.4);
    assert_eq!(c["boundary_offsets"].as_array().map(Vec::len), Some(0));
    drop(daemon);
}
