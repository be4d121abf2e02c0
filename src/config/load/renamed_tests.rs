//! Old names are refused with a located problem that names the new one, never read as an alias:
//! the example configuration with one name written the old way gives exactly that problem, at
//! the line and column where the old name is written.

use std::path::Path;

use super::*;

fn no_env(_: &str) -> Option<String> {
    None
}

/// The example directory with every `new` in `file` written `old`: the problems, and the
/// (line, column) of the first `old` in the edited file.
fn example_with(file: &str, new: &str, old: &str) -> (Vec<Problem>, (usize, usize)) {
    let example = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    let dir = tempfile::tempdir().expect("tempdir");
    for entry in std::fs::read_dir(&example).expect("example dir") {
        let path = entry.expect("entry").path();
        let name = path.file_name().expect("file name").to_owned();
        let text = std::fs::read_to_string(&path).expect("read example");
        let text = if name == file {
            assert!(text.contains(new), "{file} lacks {new}");
            text.replace(new, old)
        } else {
            text
        };
        std::fs::write(dir.path().join(name), text).expect("write");
    }
    let edited = std::fs::read_to_string(dir.path().join(file)).expect("read edited");
    let offset = edited.find(old).expect("old name written");
    let problems = match load_dir_with(dir.path(), &no_env) {
        Ok(_) => Vec::new(),
        Err(Problems(ps)) => ps,
    };
    (problems, super::super::problem::line_col(&edited, offset))
}

/// Exactly one problem, in `file` at the old name's line and column, saying `message`.
fn assert_refused(file: &str, new: &str, old: &str, column_offset: usize, message: &str) {
    let (problems, (line, column)) = example_with(file, new, old);
    let shown: Vec<String> = problems.iter().map(ToString::to_string).collect();
    assert_eq!(problems.len(), 1, "{shown:#?}");
    let p = &problems[0];
    assert_eq!(
        p.file.file_name().and_then(|n| n.to_str()),
        Some(file),
        "{p}"
    );
    assert_eq!((p.line, p.column), (line, column + column_offset), "{p}");
    assert!(p.message.ends_with(message), "{p}");
}

#[test]
fn group_wait_s_is_refused_naming_bundle_window_s() {
    assert_refused(
        "levee-ash-bend.toml",
        "bundle_window_s",
        "group_wait_s",
        0,
        "[alerting]: key \"group_wait_s\" was renamed \"bundle_window_s\"; rename it",
    );
}

#[test]
fn repeat_interval_s_is_refused_naming_remind_every_s() {
    assert_refused(
        "dam-tarn.toml",
        "remind_every_s",
        "repeat_interval_s",
        0,
        "[alerting]: key \"repeat_interval_s\" was renamed \"remind_every_s\"; rename it",
    );
}

#[test]
fn cluster_tables_are_refused_naming_nest() {
    assert_refused(
        "levee-ash-bend.toml",
        "[[nest]]",
        "[[cluster]]",
        2,
        "levee-ash-bend.toml: [[cluster]] tables are now [[nest]]; rename them",
    );
}

#[test]
fn response_tables_are_refused_naming_stage_response() {
    assert_refused(
        "levee-ash-bend.toml",
        "[[stage_response]]",
        "[[response]]",
        2,
        "levee-ash-bend.toml: [[response]] tables are now [[stage_response]]; rename them",
    );
}
