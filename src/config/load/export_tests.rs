//! Tests of the `[export]` table: defaults, the token secret, and every problem located.

use super::tests::{no_env, problems_of, write, SERVICE};
use super::*;
use crate::check_cmd::summary;

#[test]
fn export_section_with_defaults_and_a_token_file() {
    let dir = tempfile::tempdir().expect("tempdir");
    write(dir.path(), "token", " tok-123\n");
    let service = format!(
        "{SERVICE}[export]\nurl = \"http://127.0.0.1:8086/\"\norg = \"o\"\nbucket = \"b\"\ntoken_file = \"token\"\n"
    );
    write(dir.path(), "seepd.toml", &service);
    let cfg = match load_dir_with(dir.path(), &no_env) {
        Ok(cfg) => cfg,
        Err(p) => panic!("{p}"),
    };
    let e = cfg.export.as_ref().expect("export configured");
    assert_eq!(e.url, "http://127.0.0.1:8086", "trailing slash dropped");
    assert_eq!(e.token.0, "tok-123", "trimmed");
    assert_eq!((e.batch_size, e.flush_interval_ms), (5000, 1000));
    assert!(e.readings && e.derived && e.enabled);
    assert!(!format!("{cfg:?}").contains("tok-123"));
    assert!(summary(&cfg).contains("Export: InfluxDB v2 at http://127.0.0.1:8086"));
}

#[test]
fn export_series_and_token_from_env() {
    let dir = tempfile::tempdir().expect("tempdir");
    let service = format!(
        "{SERVICE}[export]\nurl = \"https://h\"\norg = \"o\"\nbucket = \"b\"\ntoken_env = \"TOK\"\n\
         series = [\"derived\"]\nenabled = false\nbatch_size = 10\n"
    );
    write(dir.path(), "seepd.toml", &service);
    let env = |n: &str| (n == "TOK").then(|| "t".to_string());
    let cfg = match load_dir_with(dir.path(), &env) {
        Ok(cfg) => cfg,
        Err(p) => panic!("{p}"),
    };
    let e = cfg.export.expect("export configured");
    assert!(!e.readings && e.derived && !e.enabled);
    assert_eq!(e.batch_size, 10);
}

#[test]
fn every_export_problem_is_located() {
    let dir = tempfile::tempdir().expect("tempdir");
    let service = format!(
        "{SERVICE}[export]\n\
         url = \"http://h/influx\"\n\
         bucket = \"\"\n\
         token_env = \"A\"\n\
         token_file = \"f\"\n\
         series = [\"readings\", \"alerts\"]\n\
         batch_size = 0\n\
         retry_min_ms = 5000\n\
         retry_max_ms = 10\n\
         ca_file = \"missing.pem\"\n\
         flush = 1\n"
    );
    write(dir.path(), "seepd.toml", &service);
    let got = problems_of(dir.path());
    let lines: Vec<usize> = got.iter().map(|p| p.1).collect();
    let text = format!("{got:#?}");
    // The service file has 3 lines before [export] (line 4).
    for (line, needle) in [
        (4, "missing key \"org\""),
        (5, "without a path"),
        (6, "\"bucket\" is empty"),
        (8, "only one"),
        (9, "\"alerts\""),
        (10, "expected between 1 and 1000000"),
        (11, "expected min <= max"),
        (13, "missing.pem"),
        (14, "unknown key \"flush\""),
    ] {
        assert!(
            got.iter().any(|p| p.1 == line && p.3.contains(needle)),
            "line {line} {needle}: {text}"
        );
    }
    assert!(lines.iter().all(|l| *l >= 4), "{text}");
}
