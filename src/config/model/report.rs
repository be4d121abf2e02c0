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
    /// The documents attached (key `formats`; default: every format this build writes).
    pub formats: Formats,
}

/// The documents a report is written as: any non-empty subset of HTML, PDF and CSV tables.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Formats {
    pub html: bool,
    /// Only with the `pdf` feature (parsing refuses it otherwise).
    pub pdf: bool,
    pub csv: bool,
}

impl Default for Formats {
    /// Every format this build writes.
    fn default() -> Self {
        Formats {
            html: true,
            pdf: cfg!(feature = "pdf"),
            csv: true,
        }
    }
}

impl Formats {
    /// The format names, in the order documents are written.
    pub const NAMES: [&'static str; 3] = ["html", "pdf", "csv"];

    /// Formats from names (`html`, `pdf`, `csv`; repeats allowed).
    ///
    /// # Errors
    /// An unknown name, `pdf` in a build without the `pdf` feature, or no name at all; the
    /// message says what is expected.
    pub fn from_names<'a>(names: impl IntoIterator<Item = &'a str>) -> Result<Formats, String> {
        let mut f = Formats {
            html: false,
            pdf: false,
            csv: false,
        };
        for n in names {
            match n.trim().to_ascii_lowercase().as_str() {
                "html" => f.html = true,
                "pdf" if cfg!(feature = "pdf") => f.pdf = true,
                "pdf" => {
                    return Err(
                        "this seepd was built without PDF output (feature \"pdf\"); expected html and/or csv"
                            .into(),
                    )
                }
                "csv" => f.csv = true,
                "" => {}
                other => {
                    return Err(format!(
                        "unknown report format {other:?}; expected html, pdf or csv"
                    ))
                }
            }
        }
        if f == (Formats {
            html: false,
            pdf: false,
            csv: false,
        }) {
            return Err("no report format given; expected html, pdf or csv".into());
        }
        Ok(f)
    }
}

impl std::str::FromStr for Formats {
    type Err = String;

    /// A comma-separated list such as `html,pdf` (the `--format` argument).
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Formats::from_names(s.split(','))
    }
}

impl std::fmt::Display for Formats {
    /// The comma-separated list (`html,pdf,csv`), as `--format` reads it.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let on = [self.html, self.pdf, self.csv];
        let names: Vec<&str> = Formats::NAMES
            .iter()
            .zip(on)
            .filter_map(|(n, on)| on.then_some(*n))
            .collect();
        f.write_str(&names.join(","))
    }
}
