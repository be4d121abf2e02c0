//! Reading a site file's `[[report]]` tables: scheduled instrumentation reports (daily, weekly
//! or monthly at a local time, with recipients and contact lists).
//!
//! Owns those keys and the checks within one table. Checks across files (unique report ids,
//! contact lists that exist in the same site) are in `cross_check`, called by `load`, which
//! also resolves `out_dir` through `finish`. Computing due times is `report::schedule`'s job.

use std::path::{Path, PathBuf};

use chrono::{NaiveTime, Weekday};

use serde::Deserialize;

use super::de::{self, Int, Strings, Text};
use super::model::{Every, Formats, ReportSchedule};
use super::problem::{again, Cx, FirstSeen, Problem};
use super::reader::Tbl;
use super::site::Pos;
use super::smtp::plain_address;

/// Top-level keys of a site file that this module reads.
pub(crate) const KEYS: [&str; 1] = ["report"];

/// `[[report]]` as written; checks in `read_one`.
#[derive(Deserialize, Default)]
struct Raw {
    id: Option<Text>,
    formats: Option<Vec<String>>,
    every: Option<Kind>,
    at: Option<String>,
    weekday: Option<Day>,
    day: Option<Int<1, 28>>,
    recipients: Option<Strings<false>>,
    contacts: Option<Strings<false>>,
    out_dir: Option<Text>,
}

#[derive(Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
enum Kind {
    Daily,
    Weekly,
    Monthly,
}

/// `weekday` as written.
#[derive(Clone, Copy, Deserialize)]
#[serde(rename_all = "lowercase")]
enum Day {
    Mon,
    Tue,
    Wed,
    Thu,
    Fri,
    Sat,
    Sun,
}

impl From<Day> for Weekday {
    fn from(d: Day) -> Weekday {
        Weekday::try_from(d as u8).unwrap_or(Weekday::Mon)
    }
}

/// One `[[report]]` as read, with what the cross-file checks need.
pub(crate) struct ReportEntry {
    /// The schedule; `None` if the table had problems (already reported).
    pub schedule: Option<ReportSchedule>,
    pub id: Option<(String, Pos)>,
    /// Contact list names and where they are written.
    pub contacts: Vec<(String, Pos)>,
}

/// Read the `[[report]]` tables of a site file.
pub(crate) fn read(cx: &mut Cx<'_>, root: &Tbl<'_>, site: &str) -> Vec<ReportEntry> {
    root.tables(cx, "report")
        .into_iter()
        .map(|mut t| read_one(cx, &mut t, site))
        .collect()
}

fn read_one(cx: &mut Cx<'_>, t: &mut Tbl<'_>, site: &str) -> ReportEntry {
    let before = cx.problems.len();
    let r: Raw = de::named(cx, t, ("report", "id"));
    let id = t.need(cx, "id", r.id.map(|i| i.0));
    let id_pos = cx.pos(t.value_span("id"));
    let kind = t.need(cx, "every", r.every);
    let at = t.need(cx, "at", r.at).and_then(|s| {
        let parsed = NaiveTime::parse_from_str(s.trim(), "%H:%M").ok();
        if parsed.is_none() {
            t.problem_at(
                cx,
                "at",
                format!("key \"at\" is {s:?}, expected a local time of day such as \"07:30\""),
            );
        }
        parsed
    });
    let weekday = match kind {
        Some(Kind::Weekly) => t.need(cx, "weekday", r.weekday),
        _ => r.weekday,
    };
    let day = match kind {
        Some(Kind::Monthly) => t.need(cx, "day", r.day),
        _ => r.day,
    };
    for (key, wanted) in [("weekday", Kind::Weekly), ("day", Kind::Monthly)] {
        if t.has(key) && kind.is_some_and(|k| k != wanted) {
            let every = if wanted == Kind::Weekly {
                "weekly"
            } else {
                "monthly"
            };
            t.problem_at(
                cx,
                key,
                format!("key \"{key}\" applies only to every = \"{every}\"; remove it"),
            );
        }
    }
    let recipients = r.recipients.unwrap_or_default().0;
    for r in recipients.iter().filter(|r| !plain_address(r)) {
        t.problem_at(
            cx,
            "recipients",
            format!("address {r:?} is not a plain address; expected e.g. engineer@example.org"),
        );
    }
    let contacts = r.contacts.unwrap_or_default().0;
    if recipients.is_empty() && contacts.is_empty() && !t.has("recipients") && !t.has("contacts") {
        t.problem(
            cx,
            "no one receives this report; expected \"recipients\" (addresses) and/or \"contacts\" (names of [[contacts]] lists)",
        );
    }
    let out_dir = r.out_dir.map(|d| PathBuf::from(d.0));
    let formats = match r.formats {
        Some(names) => Formats::from_names(names.iter().map(String::as_str))
            .map_err(|e| t.problem_at(cx, "formats", format!("key \"formats\": {e}")))
            .unwrap_or_default(),
        None => Formats::default(),
    };
    let contacts_pos = cx.pos(t.value_span("contacts"));
    let every = match kind {
        Some(Kind::Daily) => Some(Every::Daily),
        Some(Kind::Weekly) => weekday.map(|d| Every::Weekly(d.into())),
        Some(Kind::Monthly) => day.map(|d| Every::Monthly(d.0 as u32)),
        None => None,
    };
    let schedule = match (&id, every, at) {
        (Some(id), Some(every), Some(at)) if cx.problems.len() == before => Some(ReportSchedule {
            id: id.clone(),
            site: site.to_string(),
            every,
            at,
            recipients,
            contacts: contacts.clone(),
            out_dir,
            formats,
        }),
        _ => None,
    };
    ReportEntry {
        schedule,
        id: id.map(|s| (s, id_pos)),
        contacts: contacts.into_iter().map(|c| (c, contacts_pos)).collect(),
    }
}

/// One site file's reports and the names of its `[[contacts]]` lists.
pub(crate) struct SiteReports<'a> {
    pub file: &'a Path,
    pub entries: &'a [ReportEntry],
    pub contact_lists: Vec<String>,
}

/// Unique report ids across sites; contact lists named by a report exist in its site.
pub(crate) fn cross_check(files: &[SiteReports<'_>], problems: &mut Vec<Problem>) {
    let mut seen = FirstSeen::new();
    for f in files {
        for e in f.entries {
            if let Some((id, pos)) = &e.id {
                if let Some((at, ())) = again(&mut seen, id, (f.file, *pos), ()) {
                    problems.push(Problem::at(
                        f.file,
                        *pos,
                        format!(
                            "report id {id:?} is already used at {at}; expected report ids unique across all sites"
                        ),
                    ));
                }
            }
            for (name, pos) in &e.contacts {
                if !f.contact_lists.contains(name) {
                    problems.push(Problem::at(
                        f.file,
                        *pos,
                        format!(
                            "report {:?}: contacts {name:?} is not a [[contacts]] list of this site; expected one of: {}",
                            e.id.as_ref().map_or("", |(i, _)| i.as_str()),
                            if f.contact_lists.is_empty() { "(none configured)".to_string() } else { f.contact_lists.join(", ") }
                        ),
                    ));
                }
            }
        }
    }
}

/// The validated schedules, `out_dir` resolved against the configuration directory.
pub(crate) fn finish(dir: &Path, entries: Vec<ReportEntry>) -> Vec<ReportSchedule> {
    entries
        .into_iter()
        .filter_map(|e| e.schedule)
        .map(|mut s| {
            s.out_dir = s.out_dir.map(|d| dir.join(d));
            s
        })
        .collect()
}
