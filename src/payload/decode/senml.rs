//! The SenML JSON payload format (RFC 8428): a pack of records with base values.
//!
//! Owns the resolution of records (§4.6: base name + name, base time + time, base value + value,
//! base unit as default; bases carry forward until changed), relative times against the `now`
//! passed in (§4.5.3), must-understand fields (§4.4), and pairing a channel's thermistor record
//! (name ending in `/temperature`, or unit `Cel`) with its reading. SenML times are always epoch
//! seconds; the subscription's epoch unit does not apply.

use std::collections::HashMap;

use chrono::{DateTime, Utc};
use serde_json::{Map, Value};

use super::{malformed, parse_json, time, Decoded, Entries};
use crate::quality::{Reason, Reject};

/// Resolved times below this (seconds) are relative to now (RFC 8428 §4.5.3).
const RELATIVE_LIMIT_S: f64 = (1u64 << 28) as f64;

/// The SenML version this decoder implements (RFC 8428: `bver` defaults to 10). A pack of a
/// newer version must not be used (RFC 8428, Base Version; RFC 9100 reads the number as a set
/// of features, each newer one unknown here).
const SENML_VERSION: u64 = 10;

/// Name suffix of a thermistor record.
const TEMPERATURE_SUFFIX: &str = "/temperature";

/// SenML unit of a thermistor record (degrees Celsius).
const CELSIUS: &str = "Cel";

/// Base fields in force, carried from record to record until changed.
#[derive(Default)]
struct Base {
    name: String,
    time_s: f64,
    unit: Option<String>,
    value: f64,
}

/// A record after base values have been applied.
struct Resolved {
    name: String,
    unit: Option<String>,
    time: Option<DateTime<Utc>>,
    value: f64,
}

/// A record's place in the output: a reading (or its reject), or a thermistor value waiting to
/// be attached to the reading of `name` at `time`.
enum Item {
    Reading(Result<Decoded, Reject>),
    Temperature {
        name: String,
        time: Option<DateTime<Utc>>,
        value: f64,
    },
}

/// Decode a SenML JSON pack.
///
/// # Errors
/// `Malformed` if the payload is not a JSON array of records, is empty, has a base field of the
/// wrong type, or has a field ending in `_` (must-understand, RFC 8428 §4.4).
pub(super) fn decode(payload: &[u8], now: DateTime<Utc>) -> Result<Entries, Reject> {
    let Value::Array(records) = parse_json(payload)? else {
        return Err(malformed("SenML pack is not a JSON array"));
    };
    if records.is_empty() {
        return Err(malformed("SenML pack is empty"));
    }
    for (i, record) in records.iter().enumerate() {
        if let Some(key) = record
            .as_object()
            .and_then(|o| o.keys().find(|k| k.ends_with('_')))
        {
            return Err(malformed(format!(
                "record {i}: field {key:?} must be understood and is not (RFC 8428 §4.4)"
            )));
        }
        if let Some(v) = record.as_object().and_then(|o| o.get("bver")) {
            check_version(i, v)?;
        }
    }

    let mut base = Base::default();
    let mut items = Vec::with_capacity(records.len());
    for (i, record) in records.iter().enumerate() {
        let Value::Object(obj) = record else {
            items.push(Item::Reading(Err(malformed(format!(
                "record {i}: not an object"
            )))));
            continue;
        };
        update_base(&mut base, obj).map_err(|why| malformed(format!("record {i}: {why}")))?;
        let item = match resolve(&base, obj, now) {
            Err(r) => Item::Reading(Err(Reject::new(
                r.reason,
                format!("record {i}: {}", r.detail),
            ))),
            Ok(rec) => match thermistor_of(&rec) {
                Some(name) => Item::Temperature {
                    name,
                    time: rec.time,
                    value: rec.value,
                },
                None => Item::Reading(Ok(Decoded {
                    instrument: Some(rec.name.clone()),
                    channel: Some(rec.name),
                    time: rec.time,
                    value: rec.value,
                    temperature_c: None,
                })),
            },
        };
        items.push(item);
    }
    Ok(pair_temperatures(items))
}

/// A record's `bver`: a positive integer no newer than [`SENML_VERSION`].
fn check_version(i: usize, v: &Value) -> Result<(), Reject> {
    match v.as_u64() {
        Some(n) if (1..=SENML_VERSION).contains(&n) => Ok(()),
        Some(n) if n > SENML_VERSION => Err(Reject::new(
            Reason::UnsupportedVersion,
            format!(
                "record {i}: SenML version bver = {n} is newer than version {SENML_VERSION}, \
                 which this decoder implements; a pack of a newer version must not be used \
                 (RFC 8428)"
            ),
        )),
        _ => Err(malformed(format!(
            "record {i}: field \"bver\" is {v}, expected a positive integer (the SenML version)"
        ))),
    }
}

/// Apply the base fields of a record. Errors are whole-pack: later records depend on them.
fn update_base(base: &mut Base, obj: &Map<String, Value>) -> Result<(), String> {
    if let Some(v) = obj.get("bn") {
        base.name = v
            .as_str()
            .ok_or("field \"bn\" is not a string")?
            .to_string();
    }
    if let Some(v) = obj.get("bt") {
        base.time_s = v.as_f64().ok_or("field \"bt\" is not a number")?;
    }
    if let Some(v) = obj.get("bu") {
        base.unit = Some(
            v.as_str()
                .ok_or("field \"bu\" is not a string")?
                .to_string(),
        );
    }
    if let Some(v) = obj.get("bv") {
        base.value = v.as_f64().ok_or("field \"bv\" is not a number")?;
    }
    Ok(())
}

/// Resolve one record against the bases in force.
fn resolve(base: &Base, obj: &Map<String, Value>, now: DateTime<Utc>) -> Result<Resolved, Reject> {
    let name = match obj.get("n") {
        None => base.name.clone(),
        Some(Value::String(n)) => format!("{}{n}", base.name),
        Some(_) => return Err(malformed("field \"n\" is not a string")),
    };
    if name.is_empty() {
        return Err(malformed("record has no name (bn + n is empty)"));
    }
    let unit = match obj.get("u") {
        None => base.unit.clone(),
        Some(Value::String(u)) => Some(u.clone()),
        Some(_) => return Err(malformed(format!("{name}: field \"u\" is not a string"))),
    };
    let value = match obj.get("v") {
        Some(v) => v
            .as_f64()
            .ok_or_else(|| malformed(format!("{name}: field \"v\" is not a number")))?,
        None => {
            let what = ["vs", "vb", "vd"]
                .into_iter()
                .find(|k| obj.contains_key(*k));
            return Err(malformed(match what {
                Some(k) => format!("{name}: non-numeric value (field {k:?})"),
                None => format!("{name}: no numeric value (field \"v\")"),
            }));
        }
    };
    let t = match obj.get("t") {
        None => 0.0,
        Some(v) => v.as_f64().ok_or_else(|| {
            Reject::new(
                Reason::BadTime,
                format!("{name}: field \"t\" is not a number"),
            )
        })?,
    };
    let time = resolve_time(base.time_s + t, now)
        .map_err(|r| Reject::new(r.reason, format!("{name}: {}", r.detail)))?;
    Ok(Resolved {
        name,
        unit,
        time,
        value: base.value + value,
    })
}

/// Turn a resolved SenML time (seconds) into a time: 0 means "now, unknown" (None); below 2^28
/// it is relative to `now`; otherwise seconds since the Unix epoch. Rounded to the millisecond.
fn resolve_time(seconds: f64, now: DateTime<Utc>) -> Result<Option<DateTime<Utc>>, Reject> {
    if !seconds.is_finite() {
        return Err(Reject::new(
            Reason::BadTime,
            format!("time {seconds} is not finite"),
        ));
    }
    if seconds == 0.0 {
        return Ok(None);
    }
    let ms = if seconds < RELATIVE_LIMIT_S {
        // Exact in f64: epoch milliseconds of any real clock are far below 2^53.
        now.timestamp_millis() as f64 + seconds * 1000.0
    } else {
        seconds * 1000.0
    };
    time::from_epoch_ms(ms).map(Some)
}

/// If a record is a thermistor temperature, the name of the reading it belongs to.
fn thermistor_of(rec: &Resolved) -> Option<String> {
    if let Some(stem) = rec.name.strip_suffix(TEMPERATURE_SUFFIX) {
        return Some(stem.to_string());
    }
    (rec.unit.as_deref() == Some(CELSIUS)).then(|| rec.name.clone())
}

/// Attach each thermistor value to the readings of the same name and time that have none yet;
/// a thermistor value with no such reading is dropped (it is not a reading itself).
fn pair_temperatures(items: Vec<Item>) -> Entries {
    let mut out: Entries = Vec::with_capacity(items.len());
    let mut temperatures = Vec::new();
    for item in items {
        match item {
            Item::Reading(r) => out.push(r),
            Item::Temperature { name, time, value } => temperatures.push((name, time, value)),
        }
    }
    // Index readings by (name, time) so that large packs stay linear.
    let mut by_key: HashMap<(String, Option<DateTime<Utc>>), Vec<usize>> = HashMap::new();
    for (i, entry) in out.iter().enumerate() {
        if let Ok(Decoded {
            channel: Some(name),
            time,
            ..
        }) = entry
        {
            by_key.entry((name.clone(), *time)).or_default().push(i);
        }
    }
    for (name, time, value) in temperatures {
        for &i in by_key.get(&(name, time)).into_iter().flatten() {
            if let Some(Ok(reading)) = out.get_mut(i) {
                reading.temperature_c.get_or_insert(value);
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A fixed "now" for relative times: 2026-03-01T12:00:00Z.
    fn now() -> DateTime<Utc> {
        DateTime::from_timestamp(1_772_366_400, 0).expect("fixed now")
    }

    fn at(text: &str) -> Option<DateTime<Utc>> {
        Some(
            DateTime::parse_from_rfc3339(text)
                .expect("test time")
                .with_timezone(&Utc),
        )
    }

    fn run(payload: &str) -> Result<Entries, Reject> {
        decode(payload.as_bytes(), now())
    }

    fn ok(entry: &Result<Decoded, Reject>) -> &Decoded {
        entry.as_ref().expect("reading")
    }

    #[test]
    fn single_record() {
        let out = run(r#"[{"n":"PZ-7","u":"Hz","v":812.5,"t":1772366400}]"#).expect("ok");
        assert_eq!(
            out,
            vec![Ok(Decoded {
                instrument: Some("PZ-7".into()),
                channel: Some("PZ-7".into()),
                time: at("2026-03-01T12:00:00Z"),
                value: 812.5,
                temperature_c: None,
            })]
        );
    }

    #[test]
    fn base_name_time_and_value_apply_and_carry_forward() {
        let out = run(
            r#"[{"bn":"L7/","bt":1772366400,"bv":100,"n":"1","v":1.5,"t":-60},
                {"n":"2","v":2},
                {"bn":"L8/","n":"1","v":3,"t":0.25},
                {"bt":1772370000,"bv":0,"n":"2","v":4}]"#,
        )
        .expect("ok");
        assert_eq!(out.len(), 4);
        assert_eq!(ok(&out[0]).channel.as_deref(), Some("L7/1"));
        assert_eq!(ok(&out[0]).time, at("2026-03-01T11:59:00Z"));
        assert_eq!(ok(&out[0]).value, 101.5);
        assert_eq!(ok(&out[1]).channel.as_deref(), Some("L7/2"));
        assert_eq!(ok(&out[1]).time, at("2026-03-01T12:00:00Z"));
        assert_eq!(ok(&out[1]).value, 102.0);
        assert_eq!(ok(&out[2]).instrument.as_deref(), Some("L8/1"));
        assert_eq!(ok(&out[2]).time, at("2026-03-01T12:00:00.250Z"));
        assert_eq!(ok(&out[2]).value, 103.0);
        assert_eq!(ok(&out[3]).channel.as_deref(), Some("L8/2"));
        assert_eq!(ok(&out[3]).time, at("2026-03-01T13:00:00Z"));
        assert_eq!(ok(&out[3]).value, 4.0);
    }

    #[test]
    fn base_name_alone_names_the_record() {
        let out = run(r#"[{"bn":"SP-2","v":3.25}]"#).expect("ok");
        assert_eq!(ok(&out[0]).instrument.as_deref(), Some("SP-2"));
    }

    #[test]
    fn times_are_rounded_to_the_millisecond() {
        let out =
            run(r#"[{"n":"a","v":1,"t":1772366400.0004},{"n":"b","v":1,"t":1772366400.0006}]"#)
                .expect("ok");
        assert_eq!(ok(&out[0]).time, at("2026-03-01T12:00:00Z"));
        assert_eq!(ok(&out[1]).time, at("2026-03-01T12:00:00.001Z"));
    }

    #[test]
    fn relative_times_resolve_against_now() {
        let out = run(r#"[{"n":"a","v":1,"t":-30.5},{"n":"b","v":1,"t":120},
                {"n":"c","v":1,"t":268435455},{"n":"d","v":1,"t":268435456}]"#)
        .expect("ok");
        assert_eq!(ok(&out[0]).time, at("2026-03-01T11:59:29.500Z"));
        assert_eq!(ok(&out[1]).time, at("2026-03-01T12:02:00Z"));
        // Just below 2^28: still relative (about 8.5 years ahead of now).
        let c = ok(&out[2]).time.expect("time");
        assert_eq!((c - now()).num_seconds(), 268_435_455);
        // 2^28 itself is absolute: 1978-07-04T21:24:16Z.
        assert_eq!(ok(&out[3]).time, at("1978-07-04T21:24:16Z"));
        // A different now moves relative times and leaves absolute ones.
        let later = now() + chrono::TimeDelta::hours(1);
        let moved = decode(
            br#"[{"n":"a","v":1,"t":-30},{"n":"d","v":1,"t":1772366400}]"#,
            later,
        )
        .expect("ok");
        assert_eq!(ok(&moved[0]).time, at("2026-03-01T12:59:30Z"));
        assert_eq!(ok(&moved[1]).time, at("2026-03-01T12:00:00Z"));
    }

    #[test]
    fn no_time_at_all_is_none() {
        let out = run(r#"[{"n":"a","v":1},{"bt":5,"n":"b","v":1,"t":-5}]"#).expect("ok");
        assert_eq!(ok(&out[0]).time, None);
        assert_eq!(ok(&out[1]).time, None, "resolved time 0 is 'now'");
    }

    #[test]
    fn temperature_pairs_with_its_reading() {
        let out = run(r#"[{"bn":"L7/","bt":1772366400,"n":"1","u":"Hz","v":812.5},
                {"n":"1/temperature","u":"Cel","v":11.5},
                {"n":"2","v":790},
                {"n":"2","u":"Cel","v":9.25},
                {"n":"3","v":700,"t":60},
                {"n":"3/temperature","v":8.0},
                {"n":"9/temperature","v":20}]"#)
        .expect("ok");
        assert_eq!(out.len(), 3, "temperature records are not readings");
        assert_eq!(ok(&out[0]).channel.as_deref(), Some("L7/1"));
        assert_eq!(ok(&out[0]).temperature_c, Some(11.5));
        assert_eq!(
            ok(&out[1]).temperature_c,
            Some(9.25),
            "unit Cel without suffix"
        );
        // Same name but a different time: not paired.
        assert_eq!(ok(&out[2]).channel.as_deref(), Some("L7/3"));
        assert_eq!(ok(&out[2]).temperature_c, None);
    }

    #[test]
    fn temperature_before_its_reading_and_without_time_pairs() {
        let out = run(r#"[{"n":"5/temperature","v":7.5},{"n":"5","v":1}]"#).expect("ok");
        assert_eq!(out.len(), 1);
        assert_eq!(ok(&out[0]).temperature_c, Some(7.5));
        assert_eq!(ok(&out[0]).time, None);
    }

    #[test]
    fn non_numeric_and_bad_records_reject_only_themselves() {
        let out = run(
            r#"[{"n":"a","vs":"open"},{"n":"b","vb":true},{"n":"c","vd":"AAEC"},{"n":"d"},
                {"n":"e","v":"1"},{"n":5,"v":1},{"v":1},7,{"n":"f","v":1,"t":"noon"},
                {"n":"g","v":1,"t":1e300},{"n":"h","v":2,"t":1772366400}]"#,
        )
        .expect("ok");
        assert_eq!(out.len(), 11);
        for (i, entry) in out[..8].iter().enumerate() {
            let err = entry.as_ref().expect_err("bad record");
            assert_eq!(err.reason, Reason::Malformed, "{i}: {err}");
            assert!(err.detail.starts_with(&format!("record {i}:")), "{err}");
        }
        for entry in &out[8..10] {
            assert_eq!(
                entry.as_ref().expect_err("bad time").reason,
                Reason::BadTime
            );
        }
        assert_eq!(ok(&out[10]).value, 2.0);
    }

    #[test]
    fn must_understand_field_rejects_the_pack() {
        let err = run(r#"[{"n":"a","v":1},{"n":"b","v":2,"rt_":1}]"#).expect_err("must understand");
        assert_eq!(err.reason, Reason::Malformed);
        assert!(err.detail.contains("rt_"), "{err}");
        // Unknown fields without the underscore are ignored.
        let out = run(r#"[{"n":"a","v":1,"ut":60,"bver":10,"colour":"red","s":3}]"#).expect("ok");
        assert_eq!(ok(&out[0]).value, 1.0);
    }

    /// RFC 8428: `bver` defaults to 10; a pack of a newer version must not be used. RFC 9100's
    /// version 26 (10 plus secondary units) is one such.
    #[test]
    fn a_newer_senml_version_rejects_the_pack() {
        for bver in [11, 26] {
            let pack = format!(r#"[{{"bver":{bver},"n":"a","v":1}},{{"n":"b","v":2}}]"#);
            let err = run(&pack).expect_err("newer version");
            assert_eq!(err.reason, Reason::UnsupportedVersion, "{err}");
            assert!(err.detail.contains(&format!("bver = {bver}")), "{err}");
        }
        // In a later record too: the whole pack is refused.
        let err = run(r#"[{"n":"a","v":1},{"n":"b","v":2,"bver":12}]"#).expect_err("newer");
        assert_eq!(err.reason, Reason::UnsupportedVersion);
        for bad in ["0", "-1", "10.5", "\"10\""] {
            let err = run(&format!(r#"[{{"bver":{bad},"n":"a","v":1}}]"#)).expect_err("bad");
            assert_eq!(err.reason, Reason::Malformed, "bver {bad}: {err}");
        }
        for known in [1, 5, 10] {
            let out = run(&format!(r#"[{{"bver":{known},"n":"a","v":1}}]"#)).expect("known");
            assert_eq!(ok(&out[0]).value, 1.0);
        }
    }

    #[test]
    fn whole_pack_malformed_cases() {
        for payload in [
            "",
            "{}",
            "[]",
            r#"{"n":"a","v":1}"#,
            r#"[{"bn":5,"n":"a","v":1}]"#,
            r#"[{"bt":"soon","n":"a","v":1}]"#,
            r#"[{"bu":1,"n":"a","v":1}]"#,
            r#"[{"bv":"x","n":"a","v":1}]"#,
            r#"[{"n":"a","v":1e999}]"#,
        ] {
            let err = run(payload).expect_err(payload);
            assert_eq!(err.reason, Reason::Malformed, "{payload}");
        }
    }

    #[test]
    fn extreme_numbers_do_not_panic() {
        let out = run(
            r#"[{"bt":-1.7e308,"n":"a","v":1,"t":-1.7e308},{"bt":0,"n":"b","v":1.7e308,"bv":1.7e308},
                {"n":"c","v":1,"t":9.3e15},{"n":"d","v":1,"t":-9.3e15}]"#,
        )
        .expect("ok");
        assert_eq!(out[0].as_ref().expect_err("time").reason, Reason::BadTime);
        assert_eq!(ok(&out[1]).value, f64::INFINITY);
        assert_eq!(out[2].as_ref().expect_err("time").reason, Reason::BadTime);
        assert_eq!(out[3].as_ref().expect_err("time").reason, Reason::BadTime);
    }

    #[test]
    fn large_pack_pairs_in_reasonable_time() {
        let mut records = Vec::new();
        for i in 0..5000 {
            records.push(format!(r#"{{"n":"{i}","v":{i}}}"#));
            records.push(format!(r#"{{"n":"{i}/temperature","v":{}}}"#, i % 30));
        }
        let out = run(&format!("[{}]", records.join(","))).expect("ok");
        assert_eq!(out.len(), 5000);
        assert_eq!(ok(&out[4321]).temperature_c, Some((4321 % 30) as f64));
    }
}
