//! One test per published check: a valid base file with one line changed must give exactly
//! the expected problem, on the expected line.

use std::path::Path;

use super::*;

const SERVICE: &str = "[[subscription]]\npattern = \"t/{logger}/json\"\nformat = \"json\"\n";

/// A valid site file; each case changes one line (1-based) or appends lines.
const SITE: [&str; 25] = [
    "[site]",                               // 1
    "id = \"s\"",                           // 2
    "[[instrument]]",                       // 3
    "id = \"P1\"",                          // 4
    "kind = \"vibrating_wire\"",            // 5
    "tip_elevation = 10.0",                 // 6
    "installed = \"2025-01-01\"",           // 7
    "interval_s = 60",                      // 8
    "range = [1000.0, 3000.0]",             // 9
    "logger = \"L\"",                       // 10
    "channel = \"1\"",                      // 11
    "[instrument.vibrating_wire]",          // 12
    "reading = \"digits\"",                 // 13
    "calibration = \"linear\"",             // 14
    "gauge_factor = 0.02",                  // 15
    "zero_reading = 9000.0",                // 16
    "sign = \"zero_minus_current\"",        // 17
    "calibration_unit = \"kPa\"",           // 18
    "[[instrument]]",                       // 19
    "id = \"B1\"",                          // 20
    "kind = \"barometer\"",                 // 21
    "installed = \"2025-01-01T00:00:00Z\"", // 22
    "interval_s = 60",                      // 23
    "range = [80.0, 110.0]",                // 24
    "barometer = { unit = \"kPa\" }",       // 25
];

fn write(dir: &Path, name: &str, text: &str) {
    std::fs::write(dir.join(name), text).expect("write test file");
}

fn no_env(_: &str) -> Option<String> {
    None
}

/// Problems (file name, line, message) for a service file and a site file.
fn run(service: &str, site: &str) -> Vec<(String, usize, String)> {
    let dir = tempfile::tempdir().expect("tempdir");
    write(dir.path(), "seepd.toml", service);
    write(dir.path(), "s.toml", site);
    super::test_dir::located(load_dir_with(dir.path(), &no_env))
}

/// The base site with line `n` replaced by `text` (which may hold several lines).
fn site_with(n: usize, text: &str) -> String {
    site_edit(&[(n, text)])
}

/// The base site with several lines replaced (`#` comments a line out).
fn site_edit(edits: &[(usize, &str)]) -> String {
    let mut lines: Vec<String> = SITE.iter().map(|s| s.to_string()).collect();
    for (n, text) in edits {
        lines[n - 1] = text.to_string();
    }
    lines.join("\n") + "\n"
}

fn expect_one(got: &[(String, usize, String)], file: &str, line: usize, needle: &str) {
    assert_eq!(
        got.len(),
        1,
        "expected one problem with {needle:?}, got {got:#?}"
    );
    let (f, l, m) = &got[0];
    assert_eq!((f.as_str(), *l), (file, line), "{m}");
    assert!(m.contains(needle), "{m:?} should contain {needle:?}");
}

#[test]
fn base_files_are_valid() {
    assert_eq!(run(SERVICE, &site_with(1, "[site]")), Vec::new());
}

#[test]
fn site_checks() {
    let cases: &[(usize, &str, usize, &str)] = &[
        (2, "id = \"\"", 2, "key \"id\" is empty"),
        (2, "id = \"s\"\nunit_weight_water_kn_m3 = 9.7", 3, "expected one of: 9.81, 9.80665, 9.802258 (62.4 pcf)"),
        (2, "id = \"s\"\ndisplay_units = \"metric\"", 3, "expected one of: si, us"),
        (2, "id = \"s\"\nlength_unit = \"yd\"", 3, "expected one of: m, ft"),
        (4, "id = \"  \"", 4, "is empty"),
        (5, "kind = \"standpipe\"", 12, "but the settings table is [instrument.vibrating_wire]"),
        (5, "kind = \"piezo\"", 5, "expected one of: vibrating_wire, pressure_transducer"),
        (6, "tip_elevation = nan", 6, "expected a finite number"),
        (7, "installed = \"2025-13-01\"", 7, "expected an RFC 3339 date"),
        (7, "installed = 2025-01-01T00:00:00", 7, "expected an RFC 3339 date"),
        (7, "installed = \"2025-01-01\"\ncalibrated = \"last spring\"", 8, "key \"calibrated\" is \"last spring\", expected the date of the last calibration"),
        (8, "interval_s = 0", 8, "expected between 1 and"),
        (9, "range = [3000.0, 1000.0]", 9, "low < high"),
        (9, "range = [1.0]", 9, "expected [low, high]"),
        (11, "#", 3, "both \"logger\" and \"channel\""),
        (11, "channel = \"1\"\n[instrument.standpipe]\nreference_elevation = 1.0\ndepth_unit = \"m\"", 12, "does not match kind = \"vibrating_wire\""),
        (13, "reading = \"hz\"", 13, "frequency_hz, period_s, period_us, digits"),
        (15, "#", 12, "missing key \"gauge_factor\""),
        (15, "gauge_factor = 0.02\npoly_a = 1.0", 16, "does not apply to calibration = \"linear\""),
        (18, "calibration_unit = \"KPA\"", 18, "expected one of: kPa, psi, bar, MPa, hPa, m_water, ft_water"),
        (18, "calibration_unit = \"kPa\"\nbarometric_correction = \"sealed\"\nbarometer = \"B1\"", 12, "missing key \"zero_barometric_kpa\""),
        (18, "calibration_unit = \"kPa\"\nbarometric_correction = \"absolute\"", 12, "missing key \"barometer\""),
        (18, "calibration_unit = \"kPa\"\nbarometric_correction = \"absolute\"\nbarometer = \"NOPE\"", 20, "not an instrument in any site file"),
        (18, "calibration_unit = \"kPa\"\nbarometer = \"B1\"", 19, "barometric_correction is \"none\""),
        (20, "id = \"P1\"", 20, "already used at"),
        (20, "id = \"B1\"\nlogger = \"L\"\nchannel = \"1\"", 22, "already mapped to instrument \"P1\""),
        (25, "barometer = { unit = \"kPa\", extra = 1 }", 25, "unknown key \"extra\""),
    ];
    for (n, text, line, needle) in cases {
        expect_one(&run(SERVICE, &site_with(*n, text)), "s.toml", *line, needle);
    }
    let poly = [
        (14, "calibration = \"polynomial\""),
        (15, "poly_a = 1.0"),
        (16, "poly_b = 1.0"),
    ];
    expect_one(
        &run(SERVICE, &site_edit(&[poly[0], poly[1], poly[2], (17, "#")])),
        "s.toml",
        12,
        "missing key \"poly_c\"",
    );
    let sign_left = site_edit(&[
        poly[0],
        poly[1],
        poly[2],
        (17, "poly_c = 2.0\nsign = \"zero_minus_current\""),
    ]);
    expect_one(
        &run(SERVICE, &sign_left),
        "s.toml",
        18,
        "\"sign\" does not apply to calibration = \"polynomial\"",
    );
    // A misspelt settings table: the hint at the table, and the missing table at the instrument.
    let got = run(SERVICE, &site_with(12, "[instrument.vibrating_wir]"));
    assert_eq!(got.len(), 2, "{got:#?}");
    assert_eq!(got[0].1, 3, "{got:#?}");
    assert!(
        got[1].2.contains("did you mean \"vibrating_wire\""),
        "{got:#?}"
    );
}

#[test]
fn transducer_and_stage_checks() {
    let pt = |extra: &str| {
        site_with(
            25,
            &format!(
                "barometer = {{ unit = \"kPa\" }}\n[[instrument]]\nid = \"T1\"\nkind = \"pressure_transducer\"\n\
                 tip_elevation = 1.0\ninstalled = \"2025-01-01\"\ninterval_s = 60\nrange = [4.0, 20.0]\n\
                 [instrument.pressure_transducer]\n{extra}"
            ),
        )
    };
    // The transducer's sub-table header is on line 33; its first key on line 34.
    assert_eq!(run(SERVICE, &pt("output = \"psi\"\n")), Vec::new());
    let ma_ok = "output = \"mA\"\ncurrent_range_ma = [4.0, 20.0]\npressure_span = [0.0, 100.0]\nspan_unit = \"kPa\"\n";
    assert_eq!(run(SERVICE, &pt(ma_ok)), Vec::new());
    let cases: &[(&str, usize, &str)] = &[
        ("output = \"mA\"\ncurrent_range_ma = [4.0, 20.0]\npressure_span = [0.0, 100.0]\n", 33, "missing key \"span_unit\""),
        ("output = \"mA\"\ncurrent_range_ma = [4.0, 20.0]\npressure_span = [100.0, 100.0]\nspan_unit = \"kPa\"\n", 36, "low < high"),
        ("output = \"psi\"\nspan_unit = \"kPa\"\n", 35, "applies only to output = \"mA\""),
        ("output = \"volts\"\n", 34, "m_water, ft_water, mA"),
        ("output = \"psi\"\nbarometric_correction = \"absolute\"\nbarometer = \"P1\"\n", 36, "is a vibrating_wire"),
    ];
    for (extra, line, needle) in cases {
        expect_one(&run(SERVICE, &pt(extra)), "s.toml", *line, needle);
    }
    let stage = |body: &str| {
        site_with(
            25,
            &format!(
                "barometer = {{ unit = \"kPa\" }}\n[[instrument]]\nid = \"G1\"\nkind = \"stage_gauge\"\n\
                 installed = \"2025-01-01\"\ninterval_s = 60\nrange = [0.0, 5.0]\n[instrument.stage_gauge]\n{body}"
            ),
        )
    };
    let ok = "water_body = \"pond\"\nmode = \"elevation\"\nunit = \"m\"\n";
    assert_eq!(run(SERVICE, &stage(ok)), Vec::new());
    let no_datum = "water_body = \"pond\"\nmode = \"depth_above_datum\"\nunit = \"m\"\n";
    expect_one(
        &run(SERVICE, &stage(no_datum)),
        "s.toml",
        32,
        "missing key \"datum_elevation\"",
    );
    let lake = "water_body = \"lake\"\nmode = \"elevation\"\nunit = \"m\"\n";
    expect_one(
        &run(SERVICE, &stage(lake)),
        "s.toml",
        33,
        "reservoir, river, tailwater, pond",
    );
}

#[test]
fn service_checks() {
    let site = site_with(1, "[site]");
    let sub = |pattern: &str, rest: &str| {
        format!("[[subscription]]\npattern = \"{pattern}\"\nformat = \"json\"\n{rest}")
    };
    let cases: Vec<(String, usize, &str)> = vec![
        (
            format!("[mqtt]\nport = 70000\n{SERVICE}"),
            2,
            "between 1 and 65535",
        ),
        (
            format!("[mqtt]\nport = 0\n{SERVICE}"),
            2,
            "between 1 and 65535",
        ),
        (
            format!("[mqtt]\nreconnect_min_ms = 5000\nreconnect_max_ms = 100\n{SERVICE}"),
            2,
            "expected min <= max",
        ),
        (
            format!("[mqtt]\nmax_packet_bytes = 0\n{SERVICE}"),
            2,
            "expected between 1 and",
        ),
        (
            format!("[mqtt]\npersistent_session = \"yes\"\n{SERVICE}"),
            2,
            "expected true or false",
        ),
        (
            format!("[mqtt]\npassword_file = \"nope.txt\"\nusername = \"u\"\n{SERVICE}"),
            2,
            "cannot be read",
        ),
        (
            format!(
                "[mqtt]\nusername = \"u\"\npassword_env = \"SEEPD_SURELY_UNSET_VAR\"\n{SERVICE}"
            ),
            3,
            "unset or empty",
        ),
        (
            format!("[mqtt.tls]\nca_file = \"missing-ca.pem\"\n{SERVICE}"),
            2,
            "does not exist",
        ),
        (
            format!("[mqtt.tls]\n{SERVICE}"),
            1,
            "missing key \"ca_file\"",
        ),
        (
            format!("[service]\ncommit_max_readings = 0\n{SERVICE}"),
            2,
            "expected between 1 and",
        ),
        (
            format!("[service]\ndatabse = \"x.sqlite\"\n{SERVICE}"),
            2,
            "did you mean \"database\"",
        ),
        (sub("t/{logger}/json", "qos = 2\n"), 4, "between 0 and 1"),
        (
            sub("t/{logger}/json", "epoch_unit = \"us\"\n"),
            4,
            "expected one of: auto, s, ms",
        ),
        (sub("t/#", ""), 2, "MQTT wildcard"),
        (sub("t/+/x", ""), 2, "MQTT wildcard"),
        (sub("t/{logger}/{logger}", ""), 2, "twice"),
        (sub("t/x{logger}/json", ""), 2, "not a placeholder"),
        (
            sub("t/{logger}/csv", "[subscription.json]\nvalue = \"v\"\n")
                .replace("\"json\"\n[", "\"csv\"\n["),
            4,
            "only with format = \"json\"",
        ),
        (
            format!("{SERVICE}{}", sub("t/{site}/json", "")),
            5,
            "the same filter",
        ),
        (
            "[[subscription]]\npattern = \"t/{logger}\"\n".to_string(),
            1,
            "missing key \"format\"",
        ),
        (
            "[mqtt]\nport = 1883\n[mqtt]\nhost = \"x\"\n".to_string(),
            3,
            "TOML syntax error",
        ),
    ];
    for (service, line, needle) in &cases {
        expect_one(&run(service, &site), "seepd.toml", *line, needle);
    }
}

#[test]
fn pattern_filter_replaces_placeholders() {
    use crate::config::service::pattern_filter;
    assert_eq!(
        pattern_filter("a/{site}/{logger}/json").as_deref(),
        Ok("a/+/+/json")
    );
    assert_eq!(pattern_filter("{instrument}").as_deref(), Ok("+"));
    assert_eq!(
        pattern_filter("a/{channel}/b/{logger}").as_deref(),
        Ok("a/+/b/+")
    );
    assert!(pattern_filter("").is_err());
    assert!(pattern_filter("a/{site}x").is_err());
    assert!(pattern_filter("a/{nope}").is_err());
}

#[test]
fn instrument_values_are_described_in_our_words() {
    let cases: &[(usize, &str, &str)] = &[
        (5, "kind = 3", "key \"kind\" is 3, expected a string"),
        (
            9,
            "range = \"x\"",
            "key \"range\" is \"x\", expected [low, high] (two numbers)",
        ),
        (
            9,
            "range = [1.0, \"a\"]",
            "key \"range\" is an array, expected [low, high] (two numbers)",
        ),
        (
            9,
            "range = [1.0, 2.0, 3.0]",
            "key \"range\" is an array, expected [low, high]",
        ),
        (
            9,
            "range = [1, inf]",
            "key \"range\" is [1, inf], expected finite [low, high] with low < high",
        ),
        (
            11,
            "channel = 1.5",
            "key \"channel\" is 1.5, expected a string or an integer",
        ),
        (
            8,
            "interval_s = \"x\"",
            "key \"interval_s\" is \"x\", expected an integer",
        ),
        (13, "reading = 3", "key \"reading\" is 3, expected a string"),
    ];
    for (n, text, needle) in cases {
        expect_one(&run(SERVICE, &site_with(*n, text)), "s.toml", *n, needle);
    }
    // A channel written as an integer and a TOML date are accepted as written.
    let edits = [(11, "channel = 3"), (7, "installed = 2025-01-01")];
    assert_eq!(run(SERVICE, &site_edit(&edits)), Vec::new());
}
