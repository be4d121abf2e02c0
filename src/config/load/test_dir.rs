//! Test helper shared by the object tests: load a directory made of a minimal service file
//! and the given site files, and list its problems as (file name, line, message).

use super::*;

const SERVICE: &str = "[[subscription]]\npattern = \"t/{logger}/json\"\nformat = \"json\"\n";

fn no_env(_: &str) -> Option<String> {
    None
}

/// Load a directory holding the service file and `files`.
pub(super) fn load(files: &[(&str, &str)]) -> Result<Config, Problems> {
    let dir = tempfile::tempdir().expect("tempdir");
    std::fs::write(dir.path().join("seepd.toml"), SERVICE).expect("write service");
    for (name, text) in files {
        std::fs::write(dir.path().join(name), text).expect("write site");
    }
    load_dir_with(dir.path(), &no_env)
}

/// (file name, line, message) of each problem; empty when the directory loads.
pub(super) fn problems(files: &[(&str, &str)]) -> Vec<(String, usize, String)> {
    located(load(files))
}

/// (file name, line, message) of each problem of a load; empty when it loaded.
pub(super) fn located(loaded: Result<Config, Problems>) -> Vec<(String, usize, String)> {
    match loaded {
        Ok(_) => Vec::new(),
        Err(Problems(ps)) => ps
            .into_iter()
            .map(|p| {
                let name = p.file.file_name().map(|n| n.to_string_lossy().into_owned());
                (name.unwrap_or_default(), p.line, p.message)
            })
            .collect(),
    }
}
