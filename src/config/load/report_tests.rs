//! `[[report]]` tables: a valid schedule loads with its contacts resolved later; every bad key
//! gives a located problem; report ids are unique and contact lists must exist in the site.

use chrono::{NaiveTime, Weekday};

use super::*;
use crate::config::Every;

const SITE: &str = "[site]\nid = \"s\"\ntime_zone = \"America/Chicago\"\n\
[[contacts]]\nname = \"file\"\nemails = [\"file@example.invalid\"]\n";

fn no_env(_: &str) -> Option<String> {
    None
}

fn load(site: &str) -> Result<Config, Vec<(usize, String)>> {
    let dir = tempfile::tempdir().expect("tempdir");
    std::fs::write(dir.path().join("seepd.toml"), super::tests::SERVICE).expect("write");
    std::fs::write(dir.path().join("s.toml"), site).expect("write");
    load_dir_with(dir.path(), &no_env)
        .map_err(|Problems(ps)| ps.into_iter().map(|p| (p.line, p.message)).collect())
}

#[test]
fn a_weekly_and_a_monthly_schedule_load() {
    let site = format!(
        "{SITE}[[report]]\nid = \"w\"\nevery = \"weekly\"\nweekday = \"mon\"\nat = \"07:30\"\n\
         contacts = [\"file\"]\nout_dir = \"reports\"\n\
         [[report]]\nid = \"m\"\nevery = \"monthly\"\nday = 28\nat = \"23:05\"\n\
         recipients = [\"a@example.invalid\"]\nformats = [\"pdf\", \"csv\"]\n"
    );
    let cfg = load(&site).expect("valid");
    assert_eq!(cfg.reports.len(), 2);
    let w = &cfg.reports[0];
    assert_eq!(w.every, Every::Weekly(Weekday::Mon));
    assert_eq!(w.at, NaiveTime::from_hms_opt(7, 30, 0).expect("time"));
    assert_eq!(w.contacts, ["file"]);
    assert!(w
        .out_dir
        .as_ref()
        .is_some_and(|d| d.ends_with("reports") && d.is_absolute()));
    assert_eq!(cfg.reports[1].every, Every::Monthly(28));
    assert_eq!(cfg.reports[1].site, "s");
    assert_eq!(
        w.formats,
        crate::config::Formats::default(),
        "all by default"
    );
    assert_eq!(
        cfg.reports[1].formats,
        crate::config::Formats {
            html: false,
            pdf: true,
            csv: true
        }
    );
}

#[test]
fn every_bad_key_is_a_located_problem() {
    let site = format!(
        "{SITE}[[report]]\nid = \"r\"\nevery = \"hourly\"\nat = \"7h30\"\n\
         recipients = [\"not an address\"]\nformat = \"pdf\"\n\
         [[report]]\nid = \"r\"\nevery = \"monthly\"\nday = 31\nweekday = \"mon\"\nat = \"06:00\"\n\
         contacts = [\"nobody\"]\n\
         [[report]]\nid = \"q\"\nevery = \"weekly\"\nat = \"06:00\"\n\
         formats = [\"html\", \"docx\"]\n"
    );
    let p = load(&site).expect_err("problems");
    let has = |line: usize, text: &str| {
        assert!(
            p.iter().any(|(l, m)| *l == line && m.contains(text)),
            "no problem at line {line} with {text:?} in {p:?}"
        );
    };
    has(
        9,
        "key \"every\" is \"hourly\", expected one of: daily, weekly, monthly",
    );
    has(10, "\"7h30\", expected a local time of day");
    has(11, "not a plain address");
    has(12, "unknown key \"format\"");
    has(14, "report id \"r\" is already used");
    has(16, "key \"day\" is 31, expected between 1 and 28");
    has(17, "applies only to every = \"weekly\"");
    has(
        19,
        "contacts \"nobody\" is not a [[contacts]] list of this site",
    );
    has(20, "missing key \"weekday\"");
    has(20, "no one receives this report");
    has(
        24,
        "key \"formats\": unknown report format \"docx\"; expected html, pdf or csv",
    );
}
