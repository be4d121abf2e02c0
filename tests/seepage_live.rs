//! Live seepage models end to end: a real Mosquitto, the real `seepd run`, a section with a
//! `[section.model]`. A pool rise of 0.5 m/h for a day drives the live re-solve (every 0.9 m of
//! pool change, so every second hour); the model quantities appear in the store at the hours
//! an engineer expects, rising with the pool; the piezometers read what the flow net says until
//! one is driven 2.5 m above it, and the residual rule on it fires at its second such reading.
//! `seepd flownet --json` is checked against the core solve of the same configuration, and a
//! broken model is refused by `seepd check` with file:line.

mod common;

use std::path::{Path, PathBuf};
use std::time::Duration;

use common::{count, db, example_config, seepd_output, wait_for, Daemon, Publisher};
use seepd::derive::flownet::{solve_section, tips};

const SITE: &str = r#"
[site]
id = "test-dam"
name = "Test dam (invented)"
time_zone = "UTC"
length_unit = "m"

[[instrument]]
id = "DM-POOL"
kind = "stage_gauge"
installed = "2025-01-01"
interval_s = 3600
range = [190.0, 240.0]
[instrument.stage_gauge]
water_body = "reservoir"
mode = "elevation"
unit = "m"

[[instrument]]
id = "DM-PZ-1"
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
id = "DM-PZ-2"
kind = "pressure_transducer"
station = 65.0
tip_elevation = 200.5
installed = "2025-01-01"
interval_s = 3600
range = [0.0, 40.0]
[instrument.pressure_transducer]
output = "m_water"
barometric_correction = "none"

[[section]]
id = "DM-S1"
ground = [[0.0, 200.0], [40.0, 225.0], [48.0, 225.0], [88.0, 200.0], [120.0, 199.0]]
pool_gauge = "DM-POOL"
tail_level = 199.5
toe_station = 88.0
piezometers = ["DM-PZ-1", "DM-PZ-2"]
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

[alerting]
bundle_window_s = 1

[[contacts]]
name = "on-call"
emails = ["on-call@example.invalid"]

[[rule]]
id = "dm-pz-2-model"
object = "DM-PZ-2"
quantity = "model_residual"
persist_readings = 2
[[rule.level]]
name = "watch"
above = 1.0
response = "Check DM-PZ-2 in the field: reading well above the flow net (clogged drain, new path, failed sensor)."
"#;

/// The example service file with only the test site.
fn test_config(dir: &Path, port: u16) -> PathBuf {
    let cfg = example_config(dir, port);
    for e in std::fs::read_dir(&cfg).unwrap() {
        let p = e.unwrap().path();
        if p.file_name().is_some_and(|n| n != "seepd.toml") {
            std::fs::remove_file(p).unwrap();
        }
    }
    std::fs::write(cfg.join("dam-test.toml"), SITE).unwrap();
    cfg
}

fn pool_at(h: i64) -> f64 {
    205.0 + 0.5 * h as f64
}

fn message(t_ms: i64, id: &str, value: f64) -> String {
    format!(r#"{{"time": {t_ms}, "instrument": "{id}", "value": {value}}}"#)
}

/// (t_ms, value) of a derived quantity, in time order.
fn derived(dir: &Path, object: &str, quantity: &str) -> Vec<(i64, Option<f64>)> {
    let c = db(dir);
    let mut st = c
        .prepare(
            "SELECT t_ms, value FROM derived WHERE object = ?1 AND quantity = ?2 ORDER BY t_ms",
        )
        .unwrap();
    st.query_map([object, quantity], |r| Ok((r.get(0)?, r.get(1)?)))
        .unwrap()
        .map(Result::unwrap)
        .collect()
}

#[test]
fn a_flood_rise_drives_the_live_model_and_a_residual_rule_catches_a_piezometer() {
    let dir = tempfile::tempdir().unwrap();
    let broker = common::Broker::start(dir.path());
    let cfg_dir = test_config(dir.path(), broker.port);
    let cfg = seepd::config::load_dir(&cfg_dir).unwrap_or_else(|p| panic!("{p}"));
    let section = &cfg.objects.sections[0];
    let spec = section.model.as_ref().expect("model");
    let tip_list = tips(&cfg, section);
    let modelled = |pool: f64| -> Vec<f64> {
        let pz: Vec<_> = tip_list
            .iter()
            .map(|(id, p)| (id.clone(), *p, None))
            .collect();
        let net = solve_section(spec, pool, Some(199.5), &pz).unwrap();
        net.piezometers
            .iter()
            .map(|p| p.modelled_m.unwrap())
            .collect()
    };
    let log = dir.path().join("seepd.log");
    let daemon = Daemon::start(&cfg_dir, &log);
    daemon.wait_connected(1);
    let publisher = Publisher::connect(broker.port, "seepage-live-test");
    let t0 = (chrono::Utc::now().timestamp_millis() / 3_600_000 - 30) * 3_600_000;
    let hour = |h: i64| t0 + h * 3_600_000;
    let mut sent = 0;
    for h in 0..24 {
        publisher.send("demo/DM-LOG/json", message(hour(h), "DM-POOL", pool_at(h)));
        sent += 1;
        // The re-solve is due every second hour (0.9 m of pool change at 0.5 m/h): its answer
        // comes back from the solver thread and is committed without waiting for a reading.
        if h % 2 == 0 {
            wait_for(Duration::from_secs(60), || {
                (count(
                    dir.path(),
                    "derived",
                    &format!(
                        "object = 'DM-S1' AND quantity = 'model_flow' AND t_ms = {}",
                        hour(h)
                    ),
                ) == 1)
                    .then_some(())
            })
            .unwrap_or_else(|| panic!("no live solve at hour {h}"));
        }
        // The piezometers read the flow net at this hour's pool; DM-PZ-2 is 2.5 m above it
        // from hour 18 (a new seepage path, say).
        let heads = modelled(pool_at(h));
        let fault = if h >= 18 { 2.5 } else { 0.0 };
        let t = hour(h) + 600_000;
        publisher.send("demo/DM-LOG/json", message(t, "DM-PZ-1", heads[0] - 201.0));
        publisher.send(
            "demo/DM-LOG/json",
            message(t, "DM-PZ-2", heads[1] + fault - 200.5),
        );
        sent += 2;
        publisher.wait_acked(sent, Duration::from_secs(30));
        wait_for(Duration::from_secs(30), || {
            (count(dir.path(), "readings", &format!("t_ms = {t}")) == 2).then_some(())
        })
        .unwrap_or_else(|| panic!("readings of hour {h} not stored"));
    }

    // Solves at the hours the pool had moved more than 0.9 m, and at no other time.
    let flow = derived(dir.path(), "DM-S1", "model_flow");
    let hours: Vec<i64> = flow.iter().map(|(t, _)| (t - t0) / 3_600_000).collect();
    assert_eq!(hours, (0..24).step_by(2).collect::<Vec<_>>());
    // Flow grows with the pool; the exit point climbs the downstream face.
    let q: Vec<f64> = flow.iter().map(|(_, v)| v.unwrap()).collect();
    assert!(q.windows(2).all(|w| w[1] > w[0]), "flow {q:?}");
    let exit = derived(dir.path(), "DM-S1", "model_exit_elevation");
    let z: Vec<f64> = exit.iter().map(|(_, v)| v.unwrap()).collect();
    assert!(z.windows(2).all(|w| w[1] >= w[0] - 1e-9), "exit {z:?}");
    assert!(z[z.len() - 1] > z[0] + 0.5, "exit {z:?}");
    // The stored modelled heads are the core solve's at the same levels.
    let heads = derived(dir.path(), "DM-PZ-1", "model_head");
    for (t, v) in &heads {
        if (t - t0) % 3_600_000 != 0 {
            continue;
        }
        let h = (t - t0) / 3_600_000;
        let want = modelled(pool_at(h))[0];
        assert!(
            (v.unwrap() - want).abs() < 1e-9,
            "hour {h}: {v:?} vs {want}"
        );
    }
    // Residuals: small while the piezometers follow the flow net (at most the head change of
    // one hour of pool rise since the last solve), 2.5 m above it once DM-PZ-2 departs.
    for (t, v) in derived(dir.path(), "DM-PZ-2", "model_residual") {
        let h = (t - t0) / 3_600_000;
        // The first solve comes before the piezometer's first reading: no residual yet.
        let Some(r) = v else {
            assert_eq!(t, hour(0));
            continue;
        };
        if t == hour(h) + 600_000 && h >= 18 {
            assert!(r > 2.0, "hour {h}: residual {r}");
        } else if h < 18 {
            assert!(r.abs() < 0.5, "hour {h}: residual {r}");
        }
    }
    // The rule fires at DM-PZ-2's second reading far from the model (hour 19), not before.
    let raised = wait_for(Duration::from_secs(20), || {
        db(dir.path())
            .query_row(
                "SELECT raised_ms FROM alerts WHERE rule = 'dm-pz-2-model' AND level = 'watch'",
                [],
                |r| r.get::<_, i64>(0),
            )
            .ok()
    })
    .expect("the residual rule did not fire");
    assert_eq!(raised, hour(19) + 600_000);

    // `seepd flownet --json` at given levels is the core solve of the same configuration.
    let (code, out, err) = seepd_output(&[
        "flownet",
        "--config",
        cfg_dir.to_str().unwrap(),
        "--id",
        "DM-S1",
        "--upstream",
        "214.0",
        "--downstream",
        "199.5",
        "--json",
    ]);
    assert_eq!(code, 0, "{err}");
    let j: serde_json::Value = serde_json::from_str(&out).unwrap();
    let pz: Vec<_> = tip_list
        .iter()
        .map(|(id, p)| (id.clone(), *p, None))
        .collect();
    let net = solve_section(spec, 214.0, Some(199.5), &pz).unwrap();
    let close = |j: &serde_json::Value, key: &str, want: f64| {
        let got = j[key].as_f64().unwrap_or(f64::NAN);
        assert!(
            (got - want).abs() <= 1e-9 * want.abs().max(1.0),
            "{key}: {got} vs {want}"
        );
    };
    close(&j, "flow_m2_per_s", net.flow_m2_per_s);
    close(&j, "exit_station", net.exit.as_ref().unwrap().exit.x);
    close(&j, "exit_elevation", net.exit.as_ref().unwrap().exit.y);
    close(
        &j,
        "seepage_face_height",
        net.exit.as_ref().unwrap().face_height_m,
    );
    close(&j, "max_exit_gradient", net.max_exit_gradient());
    assert_eq!(j["nodes"].as_u64(), Some(net.mesh.nodes.len() as u64));
    assert_eq!(
        j["elements"].as_u64(),
        Some(net.mesh.triangles.len() as u64)
    );
    assert_eq!(
        j["iterations"].as_u64(),
        Some(net.solution.iterations as u64)
    );
    assert_eq!(j["phreatic"].as_array().unwrap().len(), net.phreatic.len());
    assert_eq!(
        j["exit_gradients"].as_array().unwrap().len(),
        net.exit_gradients.len()
    );
    for key in ["solve_ms", "converged", "piezometers"] {
        assert!(!j[key].is_null(), "{key} missing");
    }
    assert_eq!(j["piezometers"][1]["id"], "DM-PZ-2");
    let m = j["piezometers"][1]["modelled"].as_f64().unwrap();
    assert!((m - net.piezometers[1].modelled_m.unwrap()).abs() < 1e-9);
    assert!(j["piezometers"][1]["measured"].is_null());

    // At a stored time: the measured heads and the residuals beside the modelled ones.
    let at = chrono::DateTime::from_timestamp_millis(hour(20) + 600_000)
        .unwrap()
        .to_rfc3339();
    let (code, out, err) = seepd_output(&[
        "flownet",
        "--config",
        cfg_dir.to_str().unwrap(),
        "--id",
        "DM-S1",
        "--at",
        &at,
        "--json",
        "--out",
        dir.path().join("net.svg").to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    let j: serde_json::Value = serde_json::from_str(&out).unwrap();
    close(&j, "pool_m", pool_at(20));
    let r = j["piezometers"][1]["residual"].as_f64().unwrap();
    assert!((r - 2.5).abs() < 1e-3, "residual at hour 20: {r}");
    let svg = std::fs::read_to_string(dir.path().join("net.svg")).unwrap();
    common::well_formed(&svg);
    for class in [
        "equipotentials",
        "flow-lines",
        "phreatic",
        "seepage-face",
        "modelled",
    ] {
        assert!(svg.contains(&format!("class=\"{class}\"")), "{class}");
    }
    drop(daemon);
}

#[test]
fn a_broken_model_is_refused_with_file_and_line() {
    let dir = tempfile::tempdir().unwrap();
    let cfg_dir = test_config(dir.path(), 1);
    let broken = SITE
        .replace("k_m_per_s = 2.0e-6", "k_m_per_s = 2.0e-6\nporosity = 0.3")
        .replace(
            "path = [[120.0, 199.0], [88.0, 200.0]]\n[[section.model.boundary]]",
            "path = [[120.0, 199.0], [70.0, 190.0]]\n[[section.model.boundary]]",
        );
    std::fs::write(cfg_dir.join("dam-test.toml"), &broken).unwrap();
    let (code, _, err) = seepd_output(&["check", "--config", cfg_dir.to_str().unwrap()]);
    assert_eq!(code, 78, "{err}");
    assert!(err.contains("dam-test.toml:"), "{err}");
    assert!(err.contains("unknown field `porosity`"), "{err}");
    // A model that does not read is not validated further; with the key fixed, the boundary
    // off the outline is reported on its own table's line.
    std::fs::write(
        cfg_dir.join("dam-test.toml"),
        broken.replace("\nporosity = 0.3", ""),
    )
    .unwrap();
    let (code, _, err) = seepd_output(&["check", "--config", cfg_dir.to_str().unwrap()]);
    assert_eq!(code, 78, "{err}");
    let line = SITE
        .lines()
        .position(|l| l == "name = \"tail water\"")
        .unwrap();
    // The boundary's table header is the line before its name (1-based: `line`).
    assert!(
        err.contains(&format!("dam-test.toml:{line}:")) && err.contains("boundary #2"),
        "{err}"
    );
}
