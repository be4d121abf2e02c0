//! Shared by the scenario tests: run a scenario of `seepd::scenario` through `seepd replay`
//! (the library function, into a SQLite file) and read back the timeline an on-call engineer
//! would see: the flags each reading got, the derived values that had none and why, and the
//! alert transitions in order.

#![allow(dead_code)]

use std::collections::BTreeMap;
use std::path::PathBuf;

use chrono::{DateTime, TimeZone, Utc};
use seepd::config::{Config, PayloadFormat};
use seepd::scenario::{raw, Scenario};
use seepd::store::Store;
use serde_json::Value;

/// 2026-01-01T00:00Z: scenarios start here (in the past, so no reading is ahead of "now").
pub const START_MS: i64 = 1_767_225_600_000;
pub const HOUR_MS: i64 = 3_600_000;

pub struct Example {
    pub dir: tempfile::TempDir,
    pub cfg: Config,
}

/// The example configuration in a temporary directory, optionally edited first.
pub fn example(edit: impl Fn(&str, String) -> String) -> Example {
    let dir = tempfile::tempdir().unwrap();
    for (name, text) in seepd::scenario::EXAMPLE_CONFIG {
        std::fs::write(dir.path().join(name), edit(name, text.to_string())).unwrap();
    }
    let cfg = seepd::config::load_dir(dir.path()).unwrap_or_else(|p| panic!("{p}"));
    Example { dir, cfg }
}

/// What a replay of a scenario produced.
pub struct Timeline {
    pub records: Vec<Value>,
    pub db: PathBuf,
    /// (instrument, hour) → flags of that reading (as stored after the replay).
    pub flags: BTreeMap<(String, u32), Vec<String>>,
}

pub fn hour_of(t_ms: i64) -> u32 {
    ((t_ms - START_MS) / HOUR_MS) as u32
}

fn ms(time: &str) -> i64 {
    DateTime::parse_from_rfc3339(time)
        .unwrap()
        .timestamp_millis()
}

/// Replay `s` on `ex` into a database file in its directory.
pub fn replay(ex: &Example, s: &Scenario) -> Timeline {
    let input = raw::ndjson(s, &ex.cfg).unwrap();
    let db = ex.dir.path().join("scenario.sqlite");
    let mut store = Store::open(&db).unwrap();
    let mut out = Vec::new();
    let now = Utc
        .timestamp_millis_opt(START_MS + 60 * 24 * HOUR_MS)
        .unwrap();
    seepd::replay::run(
        &ex.cfg,
        PayloadFormat::Json,
        input.as_bytes(),
        &mut store,
        &mut out,
        now,
    )
    .unwrap();
    let records: Vec<Value> = String::from_utf8(out)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let conn = rusqlite::Connection::open(&db).unwrap();
    let mut st = conn
        .prepare("SELECT instrument, t_ms, flags FROM readings")
        .unwrap();
    let mut flags = BTreeMap::new();
    for row in st
        .query_map([], |r| {
            Ok((
                r.get::<_, String>(0)?,
                r.get::<_, i64>(1)?,
                r.get::<_, i64>(2)?,
            ))
        })
        .unwrap()
    {
        let (id, t, f) = row.unwrap();
        let names: Vec<String> = seepd::quality::Flags(f as u32)
            .names()
            .into_iter()
            .map(str::to_string)
            .collect();
        flags.insert((id, hour_of(t)), names);
    }
    Timeline { records, db, flags }
}

impl Timeline {
    /// Readings carrying any of `names`, as (instrument, hour, flags).
    pub fn flagged(&self, names: &[&str]) -> Vec<(String, u32, Vec<String>)> {
        self.flags
            .iter()
            .filter(|(_, f)| f.iter().any(|x| names.contains(&x.as_str())))
            .map(|((id, h), f)| (id.clone(), *h, f.clone()))
            .collect()
    }

    /// Derived values of `object` without a value because of their inputs: (quantity, hour,
    /// reason), the last record for each (object, quantity, time) winning.
    pub fn unavailable(&self, object: &str) -> Vec<(String, u32, String)> {
        let mut last: BTreeMap<(String, i64), Option<String>> = BTreeMap::new();
        for r in &self.records {
            if r["type"] == "derived" && r["id"] == object {
                let reason = r["reason"].as_str().map(str::to_string);
                let key = (
                    r["quantity"].as_str().unwrap().to_string(),
                    ms(r["time"].as_str().unwrap()),
                );
                last.insert(key, reason.filter(|_| r["value"].is_null()));
            }
        }
        last.into_iter()
            .filter_map(|((q, t), r)| {
                r.filter(|r| r.starts_with("input "))
                    .map(|r| (q, hour_of(t), r))
            })
            .collect()
    }

    /// Alert transitions in order: (hour, rule, action, level).
    pub fn alerts(&self) -> Vec<(u32, String, String, String)> {
        self.records
            .iter()
            .filter(|r| r["type"] == "alert")
            .map(|r| {
                (
                    hour_of(ms(r["time"].as_str().unwrap())),
                    r["rule"].as_str().unwrap().to_string(),
                    r["action"].as_str().unwrap().to_string(),
                    r["level"].as_str().unwrap().to_string(),
                )
            })
            .collect()
    }
}
