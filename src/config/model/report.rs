//! The validated report schedules of the sites (`[[report]]` in a site file): when a report is
//! due, in the site's local time, and who receives it. Nothing here parses or does I/O (that is
//! `config::reports`); `report::schedule` computes due times and periods from these.

use std::path::PathBuf;

use chrono::{NaiveTime, Weekday};

/// How often a scheduled report is due.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Every {
    /// Every local day; the report covers the previous local day.
    Daily,
    /// On this weekday; the report covers the previous 7 local days.
    Weekly(Weekday),
    /// On this day of the month (1–28); the report covers the previous calendar month.
    Monthly(u32),
}

/// One `[[report]]` table.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportSchedule {
    /// Unique across sites; recorded with each generated period so none is sent twice.
    pub id: String,
    pub site: String,
    pub every: Every,
    /// Local time of day (site `time_zone`) the report is due.
    pub at: NaiveTime,
    /// Addresses written directly in the table.
    pub recipients: Vec<String>,
    /// Names of the site's `[[contacts]]` lists whose addresses also receive the report.
    pub contacts: Vec<String>,
    /// Also keep the files here (relative paths resolved against the configuration directory).
    pub out_dir: Option<PathBuf>,
}
