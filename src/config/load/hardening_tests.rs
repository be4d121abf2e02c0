//! Configurations that used to pass `seepd check` and then misbehaved: durations and counts
//! large enough to overflow at run time, a site file that vanished without a word (a dangling
//! symbolic link, a directory named `*.toml`), an empty service file
//! with no subscription. Each must now be a located problem naming the file.

use std::path::{Path, PathBuf};

use super::*;

fn no_env(_: &str) -> Option<String> {
    None
}

/// The example configuration (`config/`) copied into `dir`, with `(file, find, replace)` edits.
fn example(dir: &Path, edits: &[(&str, &str, &str)]) -> PathBuf {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    for e in std::fs::read_dir(&src).expect("config/") {
        let p = e.expect("entry").path();
        if p.extension().is_some_and(|x| x == "toml") {
            let name = p.file_name().expect("name").to_string_lossy().into_owned();
            let mut text = std::fs::read_to_string(&p).expect("read example");
            for (file, find, replace) in edits {
                if *file == name {
                    assert!(text.contains(find), "{find:?} not in {name}");
                    text = text.replacen(find, replace, 1);
                }
            }
            std::fs::write(dir.join(&name), text).expect("write example");
        }
    }
    dir.to_path_buf()
}

/// (file name, line, message) of every problem.
fn problems_of(dir: &Path) -> Vec<(String, usize, String)> {
    super::test_dir::located(load_dir_with(dir, &no_env))
}

/// The line (1-based) of the first occurrence of `needle` in the example file `file` as edited.
fn line_of(dir: &Path, file: &str, needle: &str) -> usize {
    let text = std::fs::read_to_string(dir.join(file)).expect("read");
    let at = text.find(needle).expect("needle in file");
    text[..at].matches('\n').count() + 1
}

#[test]
fn the_example_loads() {
    let dir = tempfile::tempdir().expect("tempdir");
    assert_eq!(problems_of(&example(dir.path(), &[])), Vec::new());
}

#[test]
fn every_duration_and_count_is_bounded() {
    let huge = "9223372036854775807";
    let service = "seepd.toml";
    let levee = "levee-ash-bend.toml";
    let dam = "dam-tarn.toml";
    // (file, original text, key = huge value written in its place)
    let cases: Vec<(&str, &str, String)> = vec![
        (
            service,
            "shutdown_deadline_s = 10",
            format!("shutdown_deadline_s = {huge}"),
        ),
        (
            service,
            "commit_max_ms = 50",
            format!("commit_max_ms = {huge}"),
        ),
        (
            service,
            "commit_max_readings = 500",
            format!("commit_max_readings = {huge}"),
        ),
        (
            service,
            "max_payload_bytes = 65536",
            format!("max_payload_bytes = {huge}"),
        ),
        (
            service,
            "max_future_s = 600",
            format!("max_future_s = {huge}"),
        ),
        (
            service,
            "barometer_max_age_s = 7200",
            format!("barometer_max_age_s = {huge}"),
        ),
        (
            service,
            "max_packet_bytes = 1048576",
            format!("max_packet_bytes = {huge}"),
        ),
        (
            service,
            "reconnect_max_ms = 30000",
            format!("reconnect_max_ms = {huge}"),
        ),
        (levee, "interval_s = 3600", format!("interval_s = {huge}")),
        (levee, "tolerance_s = 5400", format!("tolerance_s = {huge}")),
        (
            levee,
            "remind_every_s = 14400",
            "remind_every_s = 9223372036854775".into(),
        ),
        (
            levee,
            "escalate_after_s = 3600",
            "escalate_after_s = 9223372036854775".into(),
        ),
        (
            levee,
            "keep_active_s = 7200",
            "keep_active_s = 9223372036854775".into(),
        ),
        (
            levee,
            "persist_s = 0",
            "persist_s = 9223372036854775".into(),
        ),
        (
            levee,
            "no_data_factor = 3.0",
            "no_data_factor = 1e300".into(),
        ),
        (levee, "training_days = 30", "training_days = 1e300".into()),
        (
            levee,
            "lag_range_h = [0, 48]",
            "lag_range_h = [0, 1e300]".into(),
        ),
        (
            levee,
            "refit_interval_h = 24",
            "refit_interval_h = 1e300".into(),
        ),
        (
            dam,
            "refit_interval_h = 168",
            "refit_interval_h = 1e300".into(),
        ),
    ];
    for (file, find, replace) in &cases {
        let dir = tempfile::tempdir().expect("tempdir");
        let cfg = example(dir.path(), &[(file, find, replace)]);
        let key = replace.split(' ').next().expect("key");
        let got = problems_of(&cfg);
        assert_eq!(got.len(), 1, "{replace}: {got:#?}");
        let (f, line, message) = &got[0];
        assert_eq!(f, file, "{message}");
        assert_eq!(*line, line_of(&cfg, file, replace), "{replace}: {message}");
        assert!(message.contains(key), "{message:?} should name {key}");
        assert!(
            message.contains("expected") && message.contains("at most")
                || message.contains("between"),
            "{message:?} should give the bound"
        );
    }
    // Such smtp and export settings are bounded too.
    let dir = tempfile::tempdir().expect("tempdir");
    let cfg = example(dir.path(), &[]);
    let mut text = std::fs::read_to_string(cfg.join(service)).expect("read");
    text.push_str(&format!(
        "\n[smtp]\nhost = \"127.0.0.1\"\nsecurity = \"plain\"\nfrom = \"s@example.invalid\"\n\
         retry_max_s = {huge}\n\n[export]\nurl = \"http://127.0.0.1:1\"\norg = \"o\"\n\
         bucket = \"b\"\ntoken_env = \"T\"\ntimeout_ms = {huge}\n"
    ));
    std::fs::write(cfg.join(service), text).expect("write");
    let got = problems_of(&cfg);
    let named = |k: &str| {
        got.iter()
            .any(|(_, _, m)| m.contains(k) && m.contains("between"))
    };
    assert!(named("retry_max_s"), "{got:#?}");
    assert!(named("timeout_ms"), "{got:#?}");
}

/// A file name and the words the problem must contain.
type Case = (&'static str, &'static str);

fn dangling_link(cfg: &Path) -> Case {
    let target = cfg.join("gone/site.toml");
    std::os::unix::fs::symlink(target, cfg.join("reservoir.toml")).expect("symlink");
    ("reservoir.toml", "symbolic link")
}

fn directory(cfg: &Path) -> Case {
    std::fs::create_dir(cfg.join("spillway.toml")).expect("mkdir");
    ("spillway.toml", "is a directory")
}

#[test]
fn a_site_file_that_cannot_be_read_is_a_problem_naming_it() {
    for make in [dangling_link as fn(&Path) -> Case, directory] {
        let dir = tempfile::tempdir().expect("tempdir");
        let cfg = example(dir.path(), &[]);
        let (name, why) = make(&cfg);
        let got = problems_of(&cfg);
        assert_eq!(got.len(), 1, "{got:#?}");
        assert_eq!(got[0].0, name);
        assert!(got[0].2.contains(why), "{}", got[0].2);
    }
}

#[test]
fn an_empty_service_file_is_a_problem_no_subscription() {
    let dir = tempfile::tempdir().expect("tempdir");
    let cfg = example(dir.path(), &[]);
    std::fs::write(cfg.join("seepd.toml"), "").expect("write");
    let got = problems_of(&cfg);
    assert_eq!(got.len(), 1, "{got:#?}");
    assert_eq!((got[0].0.as_str(), got[0].1), ("seepd.toml", 1));
    assert!(got[0].2.contains("[[subscription]]"), "{}", got[0].2);
}

#[test]
fn a_service_file_that_is_a_directory_says_so() {
    let dir = tempfile::tempdir().expect("tempdir");
    let cfg = example(dir.path(), &[]);
    std::fs::remove_file(cfg.join("seepd.toml")).expect("rm");
    std::fs::create_dir(cfg.join("seepd.toml")).expect("mkdir");
    let got = problems_of(&cfg);
    assert_eq!(got.len(), 1, "{got:#?}");
    assert_eq!(got[0].0, "seepd.toml");
    assert!(got[0].2.contains("is a directory"), "{}", got[0].2);
}
