//! Property tests of the configuration loader (proptest, on stable; the long runs are the
//! fuzz target in `fuzz/`): any text as a site file gives a configuration or problems located
//! inside that file, never a panic; any integer for a duration or count of the service file is
//! either accepted within its bound or refused at its own line.

use proptest::prelude::*;

use super::*;
use crate::config::limits;
use crate::payload::decode::props::cases;

const SERVICE: &str = "[[subscription]]\npattern = \"t/{logger}/json\"\nformat = \"json\"\n";

fn no_env(_: &str) -> Option<String> {
    None
}

/// Load a directory of the minimal service file (plus `service_extra` before it) and one site
/// file `site`.
fn load(service_extra: &str, site: &str) -> (Result<Config, Problems>, tempfile::TempDir) {
    let dir = tempfile::tempdir().expect("tempdir");
    std::fs::write(
        dir.path().join("seepd.toml"),
        format!("{service_extra}{SERVICE}"),
    )
    .expect("write");
    std::fs::write(dir.path().join("s.toml"), site).expect("write");
    (load_dir_with(dir.path(), &no_env), dir)
}

/// Text built from the pieces TOML site files are made of, in any order.
fn tomlish() -> impl Strategy<Value = String> {
    let piece = prop_oneof![
        Just("[site]\n"),
        Just("[[instrument]]\n"),
        Just("[instrument.standpipe]\n"),
        Just("[[nest]]\n"),
        Just("[[rule]]\n"),
        Just("[[rule.level]]\n"),
        Just("[health]\n"),
        Just("id = \"s\"\n"),
        Just("id = \"P1\"\n"),
        Just("kind = \"standpipe\"\n"),
        Just("installed = \"2025-01-01\"\n"),
        Just("interval_s = 3600\n"),
        Just("range = [0.0, 10.0]\n"),
        Just("reference_elevation = 10.0\n"),
        Just("depth_unit = \"m\"\n"),
        Just("object = \"P1\"\n"),
        Just("quantity = \"total_head\"\n"),
        Just("name = \"watch\"\n"),
        Just("above = 5.0\n"),
        Just("piezometers = [\"P1\"]\n"),
        Just("= \n"),
        Just("[\n"),
        Just("\"\n"),
        Just("x = 1e999\n"),
        Just("x = nan\n"),
        Just("x = 9223372036854775807\n"),
        Just("x = { a = [1, \"b\"] }\n"),
    ];
    proptest::collection::vec(piece, 0..40).prop_map(|v| v.concat())
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(cases(128)))]

    #[test]
    fn any_site_text_loads_or_is_located(site in tomlish()) {
        let (got, _dir) = load("", &site);
        let lines = site.lines().count() + 1;
        if let Err(Problems(ps)) = got {
            prop_assert!(!ps.is_empty());
            for p in ps {
                prop_assert!(p.line >= 1 && p.column >= 1 && !p.message.is_empty(), "{p}");
                if p.file.ends_with("s.toml") {
                    prop_assert!(p.line <= lines, "{p} beyond the {lines} lines");
                }
            }
        }
    }

    #[test]
    fn every_duration_is_bounded_or_refused_at_its_line(
        key in prop::sample::select(vec![
            ("service", "commit_max_readings"),
            ("service", "commit_max_ms"),
            ("service", "max_payload_bytes"),
            ("service", "max_future_s"),
            ("service", "clock_skew_s"),
            ("service", "barometer_max_age_s"),
            ("service", "shutdown_deadline_s"),
            ("mqtt", "keep_alive_s"),
            ("mqtt", "max_packet_bytes"),
            ("mqtt", "reconnect_min_ms"),
            ("mqtt", "reconnect_max_ms"),
        ]),
        value in prop_oneof![any::<i64>(), -10i64..100_000],
    ) {
        let (table, name) = key;
        let extra = format!("[{table}]\n{name} = {value}\n");
        let (got, _dir) = load(&extra, "[site]\nid = \"s\"\n");
        match got {
            Ok(cfg) => {
                let s = &cfg.service;
                prop_assert!(s.shutdown_deadline_s <= limits::SHUTDOWN_S as u64);
                prop_assert!(s.max_future_s <= limits::FUTURE_S);
                prop_assert!(s.barometer_max_age_s <= limits::BAROMETER_AGE_S);
                prop_assert!(s.commit_max_ms <= limits::COMMIT_MS as u64);
                prop_assert!(cfg.mqtt.reconnect_max_ms <= limits::BACKOFF_MS as u64);
                prop_assert!(cfg.mqtt.max_packet_bytes <= limits::MQTT_PACKET_BYTES as usize);
            }
            Err(Problems(ps)) => {
                prop_assert_eq!(ps.len(), 1, "{:?}", ps);
                prop_assert_eq!(ps[0].line, 2, "{}", ps[0]);
                prop_assert!(ps[0].message.contains(name), "{}", ps[0]);
            }
        }
    }
}
