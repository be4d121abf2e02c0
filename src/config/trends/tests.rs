//! Tests of the trend, health and model tables: the example settings, the defaults, and every
//! problem reported at its line.

use std::path::Path;

use crate::config::load::{load_dir, load_dir_with, Problems};
use crate::config::model::{HealthSettings, HstSpec, SiteTrends, StageResponseSpec};
use crate::config::Config;

const SERVICE: &str = "[[subscription]]\npattern = \"t/{logger}/json\"\nformat = \"json\"\n";

/// A site with a piezometer and a gauge; `extra` is appended (its first line is line 26).
fn site(extra: &str) -> String {
    format!(
        r#"[site]
id = "a"
length_unit = "ft"

[[instrument]]
id = "PZ"
kind = "pressure_transducer"
tip_elevation = 90.0
installed = "2025-01-01"
interval_s = 3600
range = [0.0, 50.0]
[instrument.pressure_transducer]
output = "kPa"
barometric_correction = "none"

[[instrument]]
id = "G"
kind = "stage_gauge"
installed = "2025-01-01"
interval_s = 3600
range = [0.0, 50.0]
[instrument.stage_gauge]
water_body = "river"
mode = "elevation"
unit = "m"
{extra}"#
    )
}

fn no_env(_: &str) -> Option<String> {
    None
}

fn load(text: &str) -> Result<Config, Problems> {
    let dir = tempfile::tempdir().expect("tempdir");
    std::fs::write(dir.path().join("seepd.toml"), SERVICE).expect("write service");
    std::fs::write(dir.path().join("a.toml"), text).expect("write site");
    load_dir_with(dir.path(), &no_env)
}

/// (line, message) of each problem.
fn problems(text: &str) -> Vec<(usize, String)> {
    match load(text) {
        Ok(_) => Vec::new(),
        Err(Problems(ps)) => ps.into_iter().map(|p| (p.line, p.message)).collect(),
    }
}

#[test]
fn example_settings_load() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    let cfg = load_dir(&dir).unwrap_or_else(|p| panic!("example config:\n{p}"));
    let t = &cfg.trends;
    // Both sites have settings; the written ones equal the defaults.
    assert_eq!(t.sites.len(), 2);
    assert_eq!(t.sites[0], SiteTrends::defaults(&t.sites[0].site));
    assert_eq!(t.sites[1], SiteTrends::defaults(&t.sites[1].site));
    assert_eq!(
        t.stage_responses,
        [StageResponseSpec {
            id: "AB-RESP-1B".into(),
            site: "ash-bend".into(),
            piezometer: "AB-PZ-1B".into(),
            stage_gauge: "AB-RIVER".into(),
            training_s: 30 * 86_400,
            lag_min_s: 0,
            lag_max_s: 48 * 3600,
            lag_step_s: 3600,
            refit_s: 24 * 3600,
        }]
    );
    assert_eq!(
        t.hst,
        [HstSpec {
            id: "TH-HST-1".into(),
            site: "tarn-hollow".into(),
            instrument: "TH-PZ-1".into(),
            reservoir_gauge: "TH-POOL".into(),
            degree: 4,
            refit_s: 168 * 3600,
        }]
    );
}

#[test]
fn written_settings_in_site_units() {
    let text = site(
        "[trends]\nrate_windows = [\"7d\", \"6h\"]\nmax_points = 50\n\
         [health]\nspike_floor = 1.0\nflatline_tolerance = 0.01\nuse_flagged = true\n\
         [[stage_response]]\nid = \"R\"\npiezometer = \"PZ\"\nstage_gauge = \"G\"\nlag_range_h = [2, 12]\nlag_step_h = 0.5\n",
    );
    let cfg = load(&text).unwrap_or_else(|p| panic!("{p}"));
    let s = &cfg.trends.sites[0];
    let spans: Vec<(&str, i64)> = s
        .rate_windows
        .iter()
        .map(|w| (w.label.as_str(), w.span_s))
        .collect();
    assert_eq!(spans, [("6h", 6 * 3600), ("7d", 7 * 86_400)]);
    assert_eq!(s.max_points, 50);
    // Feet to metres: 1 ft = 0.3048 m exactly (NIST SP 811) [pub].
    assert!((s.health.spike_floor_m - 0.3048).abs() < 1e-12);
    // The flatline tolerance is in the raw value's own unit: not converted.
    assert_eq!(s.health.flatline_tolerance_raw, 0.01);
    assert!(s.health.use_flagged);
    assert_eq!(
        s.health.spike_window,
        HealthSettings::default().spike_window
    );
    let r = &cfg.trends.stage_responses[0];
    assert_eq!(
        (r.lag_min_s, r.lag_max_s, r.lag_step_s),
        (7200, 43_200, 1800)
    );
    assert_eq!(r.training_s, 30 * 86_400);
}

#[test]
fn every_problem_is_located() {
    let text = site(concat!(
        "[trends]\n",                         // 26
        "rate_windows = [\"24h\", \"2w\"]\n", // 27
        "[health]\n",                         // 28
        "spike_k = 0\n",                      // 29
        "no_data_factor = 0.5\n",             // 30
        "spike_windw = 5\n",                  // 31
        "[[stage_response]]\n",               // 32
        "id = \"PZ\"\n",                      // 33
        "piezometer = \"G\"\n",               // 34
        "stage_gauge = \"NOPE\"\n",           // 35
        "lag_range_h = [-1, 5]\n",            // 36
        "[[hst]]\n",                          // 37
        "id = \"H\"\n",                       // 38
        "instrument = \"PZ\"\n",              // 39
        "reservoir_gauge = \"G\"\n",          // 40
        "degree = 5\n",                       // 41
    ));
    let got = problems(&text);
    let want: [(usize, &str); 8] = [
        (
            27,
            "element 2 is \"2w\", expected a duration such as \"24h\"",
        ),
        (29, "key \"spike_k\" is 0, expected a number > 0"),
        (30, "key \"no_data_factor\" is 0.5, expected a number >= 1"),
        (
            31,
            "unknown key \"spike_windw\" in [health]; did you mean \"spike_window\"?",
        ),
        (
            33,
            "stage_response id \"PZ\" is already used by an instrument",
        ),
        (34, "key \"piezometer\" names \"G\", a stage_gauge"),
        (
            35,
            "key \"stage_gauge\" names \"NOPE\", which is not an instrument",
        ),
        (36, "key \"lag_range_h\" is [-1, 5]"),
    ];
    for (line, text) in want {
        assert!(
            got.iter().any(|(l, m)| *l == line && m.contains(text)),
            "no problem at line {line} containing {text:?} in {got:#?}"
        );
    }
    assert!(
        got.iter()
            .any(|(l, m)| *l == 41 && m.contains("key \"degree\" is 5, expected between 1 and 4")),
        "{got:#?}"
    );
    assert_eq!(got.len(), 9, "{got:#?}");
}

#[test]
fn durations() {
    use super::duration_s;
    assert_eq!(duration_s("24h"), Some(86_400));
    assert_eq!(duration_s("30d"), Some(30 * 86_400));
    for bad in ["", "h", "0h", "-1d", "1.5d", "7w", "d7"] {
        assert_eq!(duration_s(bad), None, "{bad}");
    }
}
