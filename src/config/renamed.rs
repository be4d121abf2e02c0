//! Names the configuration no longer accepts, and the names that replaced them.
//!
//! Owns the list of renamed keys and tables and the wording that refuses each one: an old name
//! is a problem that names the new one, never a silent alias. It does not read tables; `reader`
//! asks it about every key a table does not know.

/// One renamed key or table.
struct Renamed {
    /// The name as it used to be written.
    old: &'static str,
    /// The name that replaced it.
    new: &'static str,
    /// Written as `[[old]]` tables (a site file's root), not as a `key = value`.
    table: bool,
}

/// Every old name still recognised, so that it gets a clear refusal.
const RENAMED: [Renamed; 4] = [
    Renamed {
        old: "group_wait_s",
        new: "bundle_window_s",
        table: false,
    },
    Renamed {
        old: "repeat_interval_s",
        new: "remind_every_s",
        table: false,
    },
    Renamed {
        old: "cluster",
        new: "nest",
        table: true,
    },
    Renamed {
        old: "response",
        new: "stage_response",
        table: true,
    },
];

/// Why `key` is refused, when it is an old name whose replacement `allowed` holds (so it was
/// renamed in this very table); `None` for any other unknown key.
pub(crate) fn refusal(key: &str, allowed: &[&str]) -> Option<String> {
    let r = RENAMED
        .iter()
        .find(|r| r.old == key && allowed.contains(&r.new))?;
    Some(if r.table {
        format!("[[{}]] tables are now [[{}]]; rename them", r.old, r.new)
    } else {
        format!("key \"{}\" was renamed \"{}\"; rename it", r.old, r.new)
    })
}
