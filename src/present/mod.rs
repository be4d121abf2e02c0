//! How numbers, units and names are shown to people: one table and one rule used by reports,
//! alert emails, CLI tables and pages alike. `units` converts stored SI values to the site's
//! display system, `format` chooses the digits, `labels` turns identifiers into words.
//!
//! Must not: change stored values (they stay SI) or appear in machine output (CSV, NDJSON keep
//! identifiers and SI).

pub mod format;
pub mod labels;
pub mod units;

pub use format::{shown, shown_bare, FS_DISPLAY_CAP};
pub use labels::{kind_name, quantity_name};
pub use units::{measure_of, Measure};
