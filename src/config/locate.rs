//! The database path alone, from a service file that may have problems elsewhere.
//!
//! The operator commands (`alerts`, `ack`, `silence`, `status`) need only the database: an
//! operator must be able to see and acknowledge alerts while a broken site file (or a missing
//! secret) keeps the full configuration from loading. This reads `[service] database` and
//! nothing else; it must not validate anything the full loader does.

use std::path::{Path, PathBuf};

use toml_edit::ImDocument;

use super::load::SERVICE_FILE;
use super::problem::whole_file;
use super::service::resolve;
use super::Problems;

/// The database `[service] database` of `dir/seepd.toml` names (resolved against `dir`), or
/// the default `seepd.sqlite` beside it.
///
/// # Errors
/// The service file cannot be read or parsed, or its `database` is not a non-empty string.
pub fn database_path(dir: &Path) -> Result<PathBuf, Problems> {
    let path = dir.join(SERVICE_FILE);
    let fail = |message: String| Problems(vec![whole_file(&path, message)]);
    let abs = dir
        .canonicalize()
        .map_err(|e| fail(format!("cannot open the configuration directory: {e}")))?;
    let text = std::fs::read_to_string(&path).map_err(|e| fail(format!("cannot read: {e}")))?;
    let doc = ImDocument::parse(text.as_str()).map_err(|e| {
        fail(format!(
            "TOML syntax error: {}",
            e.message().trim().replace('\n', "; ")
        ))
    })?;
    let item = doc.as_item().get("service").and_then(|s| s.get("database"));
    match item {
        None => Ok(abs.join("seepd.sqlite")),
        Some(v) => match v.as_str().map(str::trim).filter(|s| !s.is_empty()) {
            Some(s) => Ok(resolve(&abs, s)),
            None => Err(fail(
                "[service] database is not a file name; expected e.g. database = \"seepd.sqlite\""
                    .into(),
            )),
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_database_is_found_despite_problems_elsewhere() {
        let dir = tempfile::tempdir().expect("tempdir");
        let d = dir.path();
        std::fs::write(
            d.join("seepd.toml"),
            "[service]\ndatabase = \"data/x.sqlite\"\nshutdown_deadline_s = -4\n[mqtt]\nport = 0\n",
        )
        .expect("write");
        std::fs::write(d.join("site.toml"), "[site\n").expect("write");
        assert!(super::super::load_dir(d).is_err());
        let abs = d.canonicalize().expect("canonical");
        assert_eq!(database_path(d), Ok(abs.join("data/x.sqlite")));
        std::fs::write(d.join("seepd.toml"), "[mqtt]\nport = 0\n").expect("write");
        assert_eq!(database_path(d), Ok(abs.join("seepd.sqlite")));
        std::fs::write(d.join("seepd.toml"), "[service]\ndatabase = 3\n").expect("write");
        assert!(database_path(d).is_err());
        std::fs::write(d.join("seepd.toml"), "[service\n").expect("write");
        assert!(database_path(d).is_err());
    }
}
