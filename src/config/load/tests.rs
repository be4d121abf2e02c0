//! Tests of directory loading: the example configuration, unit conversion, located problems
//! across files, syntax errors and secrets.

use std::path::{Path, PathBuf};

use super::*;
use crate::check_cmd::summary;
use crate::config::model::{BaroCorrection, Kind, StageMode, VwCalibration, VwSign};

/// Write `text` to `dir/name`.
pub(super) fn write(dir: &Path, name: &str, text: &str) {
    std::fs::write(dir.join(name), text).expect("write test file");
}

/// A minimal valid service file.
pub(super) const SERVICE: &str =
    "[[subscription]]\npattern = \"t/{logger}/json\"\nformat = \"json\"\n";

pub(super) fn no_env(_: &str) -> Option<String> {
    None
}

/// Load and expect failure; (file name, line, column, message) of each problem.
pub(super) fn problems_of(dir: &Path) -> Vec<(String, usize, usize, String)> {
    match load_dir_with(dir, &no_env) {
        Ok(_) => panic!("expected problems in {}", dir.display()),
        Err(Problems(ps)) => ps
            .into_iter()
            .map(|p| {
                let name = p
                    .file
                    .file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default();
                (name, p.line, p.column, p.message)
            })
            .collect(),
    }
}

fn example_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("config")
}

#[test]
fn example_directory_loads_without_problems() {
    let cfg = match load_dir(&example_dir()) {
        Ok(cfg) => cfg,
        Err(p) => panic!("example config has problems:\n{p}"),
    };
    assert_eq!(cfg.sites.len(), 2);
    // Sites in file-name order: dam-tarn.toml before levee-ash-bend.toml.
    assert_eq!(cfg.sites[0].id, "tarn-hollow");
    assert_eq!(cfg.sites[1].id, "ash-bend");
    assert_eq!(cfg.instruments.len(), 12);
    let per_site = |s: &str| cfg.instruments.values().filter(|i| i.site == s).count();
    assert_eq!(per_site("ash-bend"), 7);
    assert_eq!(per_site("tarn-hollow"), 5);
    assert!(cfg.service.database.is_absolute());
    assert!(cfg.service.database.ends_with("config/seepd.sqlite"));
    assert_eq!(cfg.mqtt.client_id, "seepd-demo");
    let filters: Vec<&str> = cfg
        .subscriptions
        .iter()
        .map(|s| s.filter.as_str())
        .collect();
    assert_eq!(filters, ["demo/+/json", "demo/+/senml", "demo/+/csv"]);

    let pz = &cfg.instruments["AB-PZ-1A"];
    assert_eq!(pz.tip_elevation_m, Some(95.0));
    assert_eq!(pz.installed.to_rfc3339(), "2025-03-01T00:00:00+00:00");
    assert_eq!(pz.raw_range, (1800.0, 3200.0));
    let Kind::VibratingWire(vw) = &pz.kind else {
        panic!("AB-PZ-1A should be vibrating wire: {:?}", pz.kind)
    };
    assert_eq!(
        vw.calibration,
        VwCalibration::Linear {
            gauge_factor: 0.025,
            zero_reading_digits: 8900.0,
            sign: VwSign::ZeroMinusCurrent
        }
    );
    assert_eq!(
        vw.baro,
        BaroCorrection::Sealed {
            barometer: "AB-BARO".into(),
            zero_kpa: 101.0
        }
    );
    assert_eq!(vw.thermal_factor, 0.02);
    let s = summary(&cfg);
    assert!(s.contains("ash-bend"), "{s}");
    assert!(s.contains("vibrating_wire: 2"), "{s}");
    assert!(s.contains("demo/+/senml  (senml, qos 1"), "{s}");
}

#[test]
fn feet_site_is_converted_to_metres() {
    let dir = tempfile::tempdir().expect("tempdir");
    write(dir.path(), "seepd.toml", SERVICE);
    write(
        dir.path(),
        "ft.toml",
        r#"[site]
id = "ft"
length_unit = "ft"
unit_weight_water_kn_m3 = 9.802258
display_units = "us"

[[instrument]]
id = "FT-PZ"
kind = "pressure_transducer"
station = 1000.0
offset = -25
tip_elevation = 100.0
installed = "2025-03-01T06:30:00-05:00"
interval_s = 900
range = [0.0, 50.0]
[instrument.pressure_transducer]
output = "psi"

[[instrument]]
id = "FT-POND"
kind = "stage_gauge"
installed = 2025-03-01
interval_s = 900
range = [0.0, 20.0]
[instrument.stage_gauge]
water_body = "pond"
mode = "depth_above_datum"
datum_elevation = 50.0
unit = "ft"

[[instrument]]
id = "FT-SP"
kind = "standpipe"
installed = "2025-03-01"
interval_s = 900
range = [0.0, 30.0]
[instrument.standpipe]
reference_elevation = 10.0
depth_unit = "ft"
"#,
    );
    let cfg = match load_dir_with(dir.path(), &no_env) {
        Ok(cfg) => cfg,
        Err(p) => panic!("{p}"),
    };
    let close = |a: f64, b: f64| (a - b).abs() < 1e-9;
    let pz = &cfg.instruments["FT-PZ"];
    assert!(close(pz.tip_elevation_m.unwrap_or(f64::NAN), 30.48));
    assert!(close(pz.location.station_m.unwrap_or(f64::NAN), 304.8));
    assert!(close(pz.location.offset_m.unwrap_or(f64::NAN), -7.62));
    assert_eq!(pz.installed.to_rfc3339(), "2025-03-01T11:30:00+00:00");
    // Raw ranges stay in the raw unit.
    assert_eq!(pz.raw_range, (0.0, 50.0));
    let Kind::StageGauge(g) = &cfg.instruments["FT-POND"].kind else {
        panic!("FT-POND should be a stage gauge")
    };
    match g.mode {
        StageMode::DepthAboveDatum { datum_m, .. } => assert!(close(datum_m, 15.24)),
        ref other => panic!("unexpected mode {other:?}"),
    }
    let Kind::Standpipe(sp) = &cfg.instruments["FT-SP"].kind else {
        panic!("FT-SP should be a standpipe")
    };
    assert!(close(sp.reference_elevation_m, 3.048));
    assert!(close(
        cfg.sites[0].gamma_w_kn_m3,
        crate::domain::units::GAMMA_W_62_4_PCF_KN_M3
    ));
    // Defaults of the service file.
    assert_eq!(cfg.service.commit_max_readings, 500);
    assert_eq!(cfg.mqtt.port, 1883);
    assert_eq!(cfg.mqtt.client_id, "seepd");
    assert_eq!(cfg.subscriptions[0].qos, 1);
}

const SITE_A: &str = r#"[site]
id = "a"
length_unit = "m"

[[instrument]]
id = "A-BARO"
kind = "barometer"
installed = "2025-01-01"
interval_s = 60
range = [80.0, 110.0]
colour = "red"
[instrument.barometer]
unit = "kPa"

[[instrument]]
id = "A-PZ"
kind = "vibrating_wire"
installed = "2025-01-01"
interval_s = "60"
range = [1000.0, 3000.0]
[instrument.vibrating_wire]
reading = "digits"
calibration = "linear"
gauge_factor = 0.02
zero_reading = 9000.0
sign = "minus"
calibration_unit = "kPa"
barometric_correction = "absolute"
barometer = "A-STAGE"

[[instrument]]
id = "A-STAGE"
kind = "stage_gauge"
installed = "2025-01-01"
interval_s = 60
range = [0.0, 5.0]
[instrument.stage_gauge]
water_body = "river"
mode = "elevation"
unit = "m"
"#;

const SITE_B: &str = r#"[site]
id = "b"

[[instrument]]
id = "A-PZ"
kind = "standpipe"
installed = "2025-01-01"
interval_s = 60
range = [0.0, 5.0]
[instrument.standpipe]
reference_elevation = 10.0
depth_unit = "m"
"#;

#[test]
fn every_problem_in_every_file_is_reported_with_its_line() {
    let dir = tempfile::tempdir().expect("tempdir");
    write(
        dir.path(),
        "seepd.toml",
        "[[subscription]]\npattern = \"x/{loger}/json\"\nformat = \"json\"\n",
    );
    write(dir.path(), "a-site.toml", SITE_A);
    write(dir.path(), "b-site.toml", SITE_B);
    let got = problems_of(dir.path());
    let located: Vec<(&str, usize)> = got.iter().map(|(f, l, _, _)| (f.as_str(), *l)).collect();
    assert_eq!(
        located,
        [
            ("seepd.toml", 2),   // placeholder {loger}
            ("a-site.toml", 11), // unknown key colour
            ("a-site.toml", 15), // missing tip_elevation (at the [[instrument]] header)
            ("a-site.toml", 19), // interval_s is a string
            ("a-site.toml", 26), // sign = "minus"
            ("a-site.toml", 29), // barometer is a stage gauge
            ("b-site.toml", 5),  // duplicate id
        ],
        "{got:#?}"
    );
    let msg = |i: usize| got[i].3.as_str();
    assert!(
        msg(0).contains("{loger}") && msg(0).contains("{logger}"),
        "{}",
        msg(0)
    );
    assert!(msg(1).contains("unknown key \"colour\""), "{}", msg(1));
    assert!(msg(2).contains("tip_elevation"), "{}", msg(2));
    assert_eq!(
        msg(3),
        "instrument \"A-PZ\": key \"interval_s\" is \"60\", expected an integer"
    );
    assert_eq!(
        msg(4),
        "instrument \"A-PZ\": key \"sign\" is \"minus\", expected one of: zero_minus_current, current_minus_zero"
    );
    assert!(
        msg(5).contains("\"A-STAGE\" is a stage_gauge"),
        "{}",
        msg(5)
    );
    assert!(msg(6).contains("a-site.toml:16"), "{}", msg(6));
    // Columns: unknown key at the key, wrong type at the value.
    assert_eq!(got[1].2, 1);
    assert_eq!(got[3].2, 14);
    // Display is one `file:line:column: message` line per problem.
    let shown = load_dir_with(dir.path(), &no_env)
        .err()
        .map(|p| p.to_string())
        .unwrap_or_default();
    assert_eq!(shown.lines().count(), 7);
    assert!(
        shown.contains("b-site.toml:5:6: instrument id \"A-PZ\" is already used"),
        "{shown}"
    );
}

#[test]
fn syntax_error_is_located_and_other_files_still_checked() {
    let dir = tempfile::tempdir().expect("tempdir");
    write(dir.path(), "seepd.toml", SERVICE);
    write(dir.path(), "a.toml", "[site]\nname = \"A\"\nid = \"a\n");
    write(
        dir.path(),
        "b.toml",
        "[site]\nid = \"b\"\n\ntime_zon = \"UTC\"\n",
    );
    let got = problems_of(dir.path());
    assert_eq!(got.len(), 2, "{got:#?}");
    assert_eq!((got[0].0.as_str(), got[0].1), ("a.toml", 3), "{got:#?}");
    assert!(got[0].3.starts_with("TOML syntax error"), "{got:#?}");
    assert_eq!((got[1].0.as_str(), got[1].1), ("b.toml", 4), "{got:#?}");
    assert!(got[1].3.contains("did you mean \"time_zone\""), "{got:#?}");
}

#[test]
fn missing_directory_and_service_file_are_problems() {
    let dir = tempfile::tempdir().expect("tempdir");
    let got = problems_of(dir.path());
    assert_eq!(got.len(), 1);
    assert_eq!(got[0].0, "seepd.toml");
    assert!(load_dir(&dir.path().join("nope")).is_err());
}

#[test]
fn password_from_env_is_kept_secret() {
    let dir = tempfile::tempdir().expect("tempdir");
    let service = format!("[mqtt]\nusername = \"u\"\npassword_env = \"SEEPD_PW\"\n{SERVICE}");
    write(dir.path(), "seepd.toml", &service);
    let env = |name: &str| (name == "SEEPD_PW").then(|| "s3cret-env".to_string());
    let cfg = match load_dir_with(dir.path(), &env) {
        Ok(cfg) => cfg,
        Err(p) => panic!("{p}"),
    };
    assert_eq!(
        cfg.mqtt.password.as_ref().map(|s| s.0.as_str()),
        Some("s3cret-env")
    );
    let debug = format!("{cfg:?}");
    assert!(!debug.contains("s3cret-env"), "{debug}");
    // Unset (or empty) variable: a located problem.
    let got = problems_of(dir.path());
    assert_eq!((got.len(), got[0].1), (1, 3), "{got:#?}");
    assert!(got[0].3.contains("SEEPD_PW"), "{got:#?}");
}

#[test]
fn password_from_file_is_trimmed_and_secret() {
    let dir = tempfile::tempdir().expect("tempdir");
    write(dir.path(), "pw.txt", "  hunter2-file \n");
    let service = format!("[mqtt]\nusername = \"u\"\npassword_file = \"pw.txt\"\n{SERVICE}");
    write(dir.path(), "seepd.toml", &service);
    let cfg = match load_dir_with(dir.path(), &no_env) {
        Ok(cfg) => cfg,
        Err(p) => panic!("{p}"),
    };
    assert_eq!(
        cfg.mqtt.password.as_ref().map(|s| s.0.as_str()),
        Some("hunter2-file")
    );
    assert!(!format!("{cfg:?}").contains("hunter2"));

    write(dir.path(), "pw.txt", " \n");
    let got = problems_of(dir.path());
    assert!(got[0].3.contains("is empty"), "{got:#?}");

    let both = format!(
        "[mqtt]\nusername = \"u\"\npassword_file = \"pw.txt\"\npassword_env = \"X\"\n{SERVICE}"
    );
    write(dir.path(), "seepd.toml", &both);
    let got = problems_of(dir.path());
    assert!(got.iter().any(|p| p.3.contains("only one")), "{got:#?}");
}
