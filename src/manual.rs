//! Manual readings: a value read by hand (a standpipe dipped, a readout box read at the
//! terminal) entered with `seepd record` or the instrument page's form. Both check the entry
//! against the configuration at once (unknown instrument, value not a finite number or outside
//! the instrument's physical range, time in the future or before installation, a temperature
//! out of range or given for an instrument whose reduction uses none) and put it in
//! the database's inbox; the running service's writer takes it through the same engine, rules
//! and store as telemetry, flagged `manual` (or the next start does, when no service runs).
//!
//! Owns the entry checks and the command's wording; the inbox SQL is the store's.

use std::path::Path;
use std::time::Duration;

use anyhow::bail;
use chrono::{DateTime, Utc};

use crate::config::{Config, Instrument, Kind};
use crate::store::pages::ManualReading;
use crate::store::Store;

/// A checked manual entry.
#[derive(Debug, Clone, PartialEq)]
pub struct Entry {
    pub instrument: String,
    pub value: f64,
    /// Thermistor temperature read with it (vibrating-wire piezometers), °C.
    pub temperature_c: Option<f64>,
    pub time: DateTime<Utc>,
    pub by: String,
}

/// What is given by hand: the instrument, its value and optionally the thermistor temperature
/// as typed, and who read it when.
#[derive(Debug, Clone, Copy)]
pub struct Given<'a> {
    pub instrument: &'a str,
    pub value: &'a str,
    pub temperature: Option<&'a str>,
    pub time: Option<DateTime<Utc>>,
    pub by: &'a str,
}

/// Thermistor temperatures accepted, °C: the usual rated range of the thermistors built into
/// vibrating-wire piezometers (common practice, not a standard).
const TEMPERATURE_RANGE_C: (f64, f64) = (-40.0, 80.0);

/// How long `seepd record` waits for a running service to take the entry.
const WAIT: Duration = Duration::from_secs(5);

/// Check an entry against the configuration; every problem in words.
///
/// # Errors
/// Unknown instrument, a value that is not a finite number or is outside the instrument's
/// physical range, a temperature that is not a number within the thermistor range or is given
/// for an instrument other than a vibrating-wire piezometer, a time after `now` (beyond the
/// configured clock skew) or before the instrument's installation, an empty or overlong name.
pub fn check(cfg: &Config, g: &Given<'_>, now: DateTime<Utc>) -> anyhow::Result<Entry> {
    let Given {
        instrument,
        value,
        temperature,
        time,
        by,
    } = *g;
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
    let temperature_c = match temperature.map(str::trim).filter(|t| !t.is_empty()) {
        None => None,
        Some(_) if !matches!(inst.kind, Kind::VibratingWire(_)) => bail!(
            "{instrument} is a {}: its reduction uses no temperature (only vibrating-wire \
             piezometers take one)",
            inst.kind.name().replace('_', " ")
        ),
        Some(t) => match t.parse::<f64>() {
            Ok(c) if c >= TEMPERATURE_RANGE_C.0 && c <= TEMPERATURE_RANGE_C.1 => Some(c),
            Ok(c) if c.is_finite() => bail!(
                "temperature {c} °C is outside the thermistor range [{}, {}] °C",
                TEMPERATURE_RANGE_C.0,
                TEMPERATURE_RANGE_C.1
            ),
            _ => bail!("temperature {t:?} is not a finite number (°C)"),
        },
    };
    let (lo, hi) = inst.raw_range;
    if v < lo || v > hi {
        bail!(
            "value {v} is outside the physical range of {instrument} [{lo}, {hi}] (the value is \
             its {}, as its logger would send it)",
            crate::present::labels::raw_value(&inst.kind)
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
        temperature_c,
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
    Ok(store.queue_manual(&ManualReading {
        id: 0,
        instrument: e.instrument.clone(),
        value: e.value,
        temperature_c: e.temperature_c,
        t_ms: e.time.timestamp_millis(),
        by: e.by.clone(),
        entered_ms: now.timestamp_millis(),
    })?)
}

/// A caution for an entry the reduction will not fully correct: a vibrating-wire reading with a
/// thermal factor but no temperature (stored flagged `temp_missing`, without the correction).
pub fn caution(cfg: &Config, e: &Entry) -> Option<String> {
    let inst: &Instrument = cfg.instruments.get(&e.instrument)?;
    match &inst.kind {
        Kind::VibratingWire(vw) if vw.thermal_factor != 0.0 && e.temperature_c.is_none() => Some(
            "No temperature given: reduced without the thermal correction and flagged \
             temp_missing."
                .into(),
        ),
        _ => None,
    }
}

/// `seepd record`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Record {
    #[command(flatten)]
    config: crate::command::ConfigDir,
    /// Instrument id.
    instrument: String,
    /// The value in the instrument's raw unit (what its logger would send).
    #[arg(allow_negative_numbers = true)]
    value: String,
    /// The thermistor temperature read with it, °C (vibrating-wire piezometers: the
    /// thermal correction needs it).
    #[arg(long, value_name = "C", allow_hyphen_values = true)]
    temperature: Option<String>,
    /// When it was read (RFC 3339 or YYYY-MM-DD, UTC); default: now.
    #[arg(long, value_name = "TIME", value_parser = crate::timetext::instant)]
    time: Option<DateTime<Utc>>,
    /// Who read it (default: the login name).
    #[arg(long, value_name = "NAME")]
    by: Option<String>,
}

impl crate::command::Run for Record {
    fn run(self, now: DateTime<Utc>) -> anyhow::Result<()> {
        let cfg = self.config.load()?;
        let by = crate::command::who(self.by);
        let given = Given {
            instrument: &self.instrument,
            value: &self.value,
            temperature: self.temperature.as_deref(),
            time: self.time,
            by: &by,
        };
        crate::command::emit(&record(&cfg, &given, now)?)
    }
}

/// `seepd record`: check, put in the inbox, and wait a few seconds for a running service to
/// take it; say what became of it.
///
/// # Errors
/// A refused entry (see `check`), database errors, or a reading the service quarantined.
fn record(cfg: &Config, given: &Given<'_>, now: DateTime<Utc>) -> anyhow::Result<String> {
    let e = check(cfg, given, now)?;
    let id = submit(&cfg.service.database, &e, now)?;
    let store = Store::open(&cfg.service.database)?;
    let what = format!(
        "Manual reading {id}: {} = {}{} at {} by {}",
        e.instrument,
        e.value,
        e.temperature_c
            .map(|c| format!(" ({c} °C)"))
            .unwrap_or_default(),
        e.time.to_rfc3339(),
        e.by
    );
    let caution = caution(cfg, &e)
        .map(|c| format!("{c}\n"))
        .unwrap_or_default();
    let started = std::time::Instant::now();
    while started.elapsed() < WAIT {
        if let Some(f) = store.manual_fate(id)? {
            if f.result.starts_with("quarantined") {
                bail!("manual reading {id} of {}: {}", e.instrument, f.result);
            }
            return Ok(format!("{what}: {}.\n{caution}", f.result));
        }
        std::thread::sleep(Duration::from_millis(100));
    }
    Ok(format!(
        "{what} is waiting; seepd takes it when it runs (no running service took it within {} \
         s).\n{caution}",
        WAIT.as_secs()
    ))
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

    fn given<'a>(
        instrument: &'a str,
        value: &'a str,
        temperature: Option<&'a str>,
        time: Option<DateTime<Utc>>,
        by: &'a str,
    ) -> Given<'a> {
        Given {
            instrument,
            value,
            temperature,
            time,
            by,
        }
    }

    #[test]
    fn a_good_entry_is_kept_as_given() {
        let now = at("2026-05-01T12:00:00Z");
        let t = Some(at("2026-05-01T09:30:00Z"));
        let e = check(&cfg(), &given("AB-SP-3", " 4.25 ", None, t, "Kim"), now).unwrap();
        assert_eq!(e.value, 4.25);
        assert_eq!(e.time, at("2026-05-01T09:30:00Z"));
        assert_eq!(e.by, "Kim");
        assert_eq!(e.temperature_c, None);
        let e = check(&cfg(), &given("AB-SP-3", "4", None, None, "Kim"), now).unwrap();
        assert_eq!(e.time, now, "no time given: now");
        // A vibrating-wire readout with its thermistor temperature; an empty field is none.
        let vw = given("AB-PZ-1A", "2450.5", Some(" 11.5 "), None, "Kim");
        let e = check(&cfg(), &vw, now).unwrap();
        assert_eq!(e.temperature_c, Some(11.5));
        assert_eq!(caution(&cfg(), &e), None);
        let e = check(
            &cfg(),
            &Given {
                temperature: Some(""),
                ..vw
            },
            now,
        )
        .unwrap();
        assert_eq!(e.temperature_c, None);
        let c = caution(&cfg(), &e).expect("a thermal factor without a temperature");
        assert!(c.contains("temp_missing"), "{c}");
    }

    #[test]
    fn each_bad_entry_is_refused_in_words() {
        let now = at("2026-05-01T12:00:00Z");
        let c = cfg();
        let refused_t = |i: &str, v: &str, temp: Option<&str>, t: Option<&str>, by: &str| {
            format!(
                "{:#}",
                check(&c, &given(i, v, temp, t.map(at), by), now).unwrap_err()
            )
        };
        let refused = |i: &str, v: &str, t: Option<&str>, by: &str| refused_t(i, v, None, t, by);
        assert!(refused("NOPE", "1", None, "Kim").contains("no instrument \"NOPE\""));
        assert!(refused("AB-SP-3", "four", None, "Kim").contains("not a finite number"));
        assert!(refused("AB-SP-3", "NaN", None, "Kim").contains("not a finite number"));
        let r = refused("AB-SP-3", "9.5", None, "Kim");
        assert!(r.contains("outside the physical range"), "{r}");
        assert!(
            r.contains("its depth to water below the reference point in m"),
            "{r}"
        );
        let r = refused("AB-PZ-1A", "6000", None, "Kim");
        assert!(r.contains("its frequency in Hz"), "{r}");
        assert!(refused("AB-SP-3", "-0.1", None, "Kim").contains("outside the physical range"));
        assert!(refused("AB-SP-3", "4", Some("2026-05-01T13:00:00Z"), "Kim").contains("future"));
        assert!(refused("AB-SP-3", "4", Some("2025-02-01T00:00:00Z"), "Kim").contains("installed"));
        assert!(refused("AB-SP-3", "4", None, " ").contains("name"));
        // A temperature only for a vibrating-wire piezometer, a number within the range.
        let r = refused_t("AB-SP-3", "4", Some("12"), None, "Kim");
        assert!(
            r.contains("standpipe: its reduction uses no temperature"),
            "{r}"
        );
        let r = refused_t("AB-PZ-1A", "2450", Some("warm"), None, "Kim");
        assert!(
            r.contains("temperature \"warm\" is not a finite number"),
            "{r}"
        );
        let r = refused_t("AB-PZ-1A", "2450", Some("95"), None, "Kim");
        assert!(r.contains("outside the thermistor range [-40, 80]"), "{r}");
        assert!(refused_t("AB-PZ-1A", "2450", Some("inf"), None, "Kim").contains("finite"));
        // Within the clock skew of now is not the future.
        let t = Some(at("2026-05-01T12:00:30Z"));
        check(&c, &given("AB-SP-3", "4", None, t, "Kim"), now).unwrap();
    }
}
