//! Manual readings: a value read by hand (a standpipe dipped, a readout box read at the
//! terminal) entered with `seepd record` or the instrument page's form. Both check the entry
//! against the configuration at once (unknown instrument, value not a finite number or outside
//! the instrument's physical range, time in the future or before installation) and put it in
//! the database's inbox; the running service's writer takes it through the same engine, rules
//! and store as telemetry, flagged `manual` (or the next start does, when no service runs).
//!
//! Owns the entry checks and the command's wording; the inbox SQL is the store's.

use std::path::Path;
use std::time::Duration;

use anyhow::bail;
use chrono::{DateTime, Utc};

use crate::config::Config;
use crate::store::Store;

/// A checked manual entry.
#[derive(Debug, Clone, PartialEq)]
pub struct Entry {
    pub instrument: String,
    pub value: f64,
    pub time: DateTime<Utc>,
    pub by: String,
}

/// How long `seepd record` waits for a running service to take the entry.
const WAIT: Duration = Duration::from_secs(5);

/// Check an entry against the configuration; every problem in words.
///
/// # Errors
/// Unknown instrument, a value that is not a finite number or is outside the instrument's
/// physical range, a time after `now` (beyond the configured clock skew) or before the
/// instrument's installation, an empty or overlong name.
pub fn check(
    cfg: &Config,
    instrument: &str,
    value: &str,
    time: Option<DateTime<Utc>>,
    by: &str,
    now: DateTime<Utc>,
) -> anyhow::Result<Entry> {
    let Some(inst) = cfg.instruments.get(instrument) else {
        let mut known: Vec<&str> = cfg.instruments.keys().map(String::as_str).collect();
        known.sort_unstable();
        bail!(
            "there is no instrument {instrument:?} in the configuration (known: {})",
            known.join(", ")
        );
    };
    let v: f64 = match value.trim().parse() {
        Ok(v) if f64::is_finite(v) => v,
        _ => bail!("value {value:?} is not a finite number"),
    };
    let (lo, hi) = inst.raw_range;
    if v < lo || v > hi {
        bail!(
            "value {v} is outside the physical range of {instrument} [{lo}, {hi}] (the value is \
             in the instrument's raw unit, as its logger would send it)"
        );
    }
    let time = time.unwrap_or(now);
    let skew = chrono::Duration::seconds(cfg.service.clock_skew_s);
    if time > now + skew {
        bail!(
            "time {} is in the future (now is {})",
            time.to_rfc3339(),
            now.to_rfc3339()
        );
    }
    if time < inst.installed {
        bail!(
            "time {} is before {instrument} was installed ({})",
            time.to_rfc3339(),
            inst.installed.to_rfc3339()
        );
    }
    let by = by.trim();
    if by.is_empty() || by.chars().count() > 100 || by.chars().any(char::is_control) {
        bail!("name {by:?}: expected 1 to 100 printable characters");
    }
    Ok(Entry {
        instrument: instrument.to_string(),
        value: v,
        time,
        by: by.to_string(),
    })
}

/// Put a checked entry in the inbox; its inbox id.
///
/// # Errors
/// Database errors.
pub fn submit(db: &Path, e: &Entry, now: DateTime<Utc>) -> anyhow::Result<i64> {
    let store = Store::open(db)?;
    Ok(store.queue_manual(
        &e.instrument,
        e.value,
        e.time.timestamp_millis(),
        &e.by,
        now.timestamp_millis(),
    )?)
}

/// `seepd record`: check, put in the inbox, and wait a few seconds for a running service to
/// take it; say what became of it.
///
/// # Errors
/// A refused entry (see `check`), database errors, or a reading the service quarantined.
pub fn record_cmd(
    cfg: &Config,
    instrument: &str,
    value: &str,
    time: Option<DateTime<Utc>>,
    by: &str,
) -> anyhow::Result<String> {
    let now = Utc::now();
    let e = check(cfg, instrument, value, time, by, now)?;
    let id = submit(&cfg.service.database, &e, now)?;
    let store = Store::open(&cfg.service.database)?;
    let started = std::time::Instant::now();
    while started.elapsed() < WAIT {
        if let Some(f) = store.manual_fate(id)? {
            if f.result.starts_with("quarantined") {
                bail!("manual reading {id} of {instrument}: {}", f.result);
            }
            return Ok(format!(
                "Manual reading {id}: {instrument} = {} at {} by {}: {}.\n",
                e.value,
                e.time.to_rfc3339(),
                e.by,
                f.result
            ));
        }
        std::thread::sleep(Duration::from_millis(100));
    }
    Ok(format!(
        "Manual reading {id}: {instrument} = {} at {} by {} is waiting; seepd takes it when it \
         runs (no running service took it within {} s).\n",
        e.value,
        e.time.to_rfc3339(),
        e.by,
        WAIT.as_secs()
    ))
}

/// The login name of whoever runs the command (`$USER`, `$LOGNAME`), for `--by`.
pub fn login_name() -> String {
    std::env::var("USER")
        .or_else(|_| std::env::var("LOGNAME"))
        .unwrap_or_else(|_| "unknown".into())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cfg() -> Config {
        let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
        crate::config::load_dir(&dir).expect("example config")
    }

    fn at(s: &str) -> DateTime<Utc> {
        DateTime::parse_from_rfc3339(s).unwrap().with_timezone(&Utc)
    }

    #[test]
    fn a_good_entry_is_kept_as_given() {
        let now = at("2026-05-01T12:00:00Z");
        let e = check(
            &cfg(),
            "AB-SP-3",
            " 4.25 ",
            Some(at("2026-05-01T09:30:00Z")),
            "Kim",
            now,
        )
        .unwrap();
        assert_eq!(e.value, 4.25);
        assert_eq!(e.time, at("2026-05-01T09:30:00Z"));
        assert_eq!(e.by, "Kim");
        let e = check(&cfg(), "AB-SP-3", "4", None, "Kim", now).unwrap();
        assert_eq!(e.time, now, "no time given: now");
    }

    #[test]
    fn each_bad_entry_is_refused_in_words() {
        let now = at("2026-05-01T12:00:00Z");
        let c = cfg();
        let refused = |i: &str, v: &str, t: Option<&str>, by: &str| {
            format!("{:#}", check(&c, i, v, t.map(at), by, now).unwrap_err())
        };
        assert!(refused("NOPE", "1", None, "Kim").contains("no instrument \"NOPE\""));
        assert!(refused("AB-SP-3", "four", None, "Kim").contains("not a finite number"));
        assert!(refused("AB-SP-3", "NaN", None, "Kim").contains("not a finite number"));
        assert!(refused("AB-SP-3", "9.5", None, "Kim").contains("outside the physical range"));
        assert!(refused("AB-SP-3", "-0.1", None, "Kim").contains("outside the physical range"));
        assert!(refused("AB-SP-3", "4", Some("2026-05-01T13:00:00Z"), "Kim").contains("future"));
        assert!(refused("AB-SP-3", "4", Some("2025-02-01T00:00:00Z"), "Kim").contains("installed"));
        assert!(refused("AB-SP-3", "4", None, " ").contains("name"));
        // Within the clock skew of now is not the future.
        check(
            &c,
            "AB-SP-3",
            "4",
            Some(at("2026-05-01T12:00:30Z")),
            "Kim",
            now,
        )
        .unwrap();
    }
}
