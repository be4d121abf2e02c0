//! The JSON payload format: one object that is either a single reading or carries an array of
//! per-channel readings, with field names taken from the subscription.
//!
//! Owns the shape rules of that format (defaults from the top level, value and channel types).
//! Time text is read by `decode::time`. A field set to `null` counts as absent.

use chrono::{DateTime, Utc};
use serde_json::{Map, Value};

use super::{malformed, number_from_text, parse_json, time, Decoded, Entries};
use crate::config::model::{EpochUnit, JsonFields};
use crate::quality::{Reason, Reject};

/// A field as read: None when absent or null, else its parsed value or why it is unusable.
type Field<T> = Option<Result<T, Reject>>;

/// Decode a JSON payload.
///
/// # Errors
/// `Malformed` if the payload is not a JSON object, or its readings field is present but not a
/// non-empty array.
pub(super) fn decode(
    fields: &JsonFields,
    unit: EpochUnit,
    payload: &[u8],
) -> Result<Entries, Reject> {
    let doc = parse_json(payload)?;
    let Value::Object(top) = doc else {
        return Err(malformed(format!(
            "top level is {}, expected an object",
            kind(&doc)
        )));
    };
    let Some(readings) = top.get(&fields.readings).filter(|v| !v.is_null()) else {
        return Ok(vec![reading(fields, unit, &top, &Defaults::default(), "")]);
    };
    let Value::Array(items) = readings else {
        return Err(malformed(format!(
            "field {:?} is {}, expected an array",
            fields.readings,
            kind(readings)
        )));
    };
    if items.is_empty() {
        return Err(malformed(format!(
            "field {:?} is an empty array",
            fields.readings
        )));
    }
    let top_label = "top level: ";
    let defaults = Defaults {
        instrument: field(&top, &fields.instrument, top_label, instrument),
        channel: field(&top, &fields.channel, top_label, channel),
        time: field(&top, &fields.time, top_label, |v| time_value(v, unit)),
    };
    Ok(items
        .iter()
        .enumerate()
        .map(|(i, item)| {
            let label = format!("{}[{i}]: ", fields.readings);
            match item {
                Value::Object(obj) => reading(fields, unit, obj, &defaults, &label),
                other => Err(malformed(format!(
                    "{label}is {}, expected an object",
                    kind(other)
                ))),
            }
        })
        .collect())
}

/// Top-level fields that apply to every element of the readings array that lacks them. Each is
/// kept as read (possibly an error), so that only the elements that rely on a bad one fail.
#[derive(Default)]
struct Defaults {
    instrument: Field<String>,
    channel: Field<String>,
    time: Field<DateTime<Utc>>,
}

/// One reading from an object, falling back on `defaults` for identity and time.
fn reading(
    fields: &JsonFields,
    unit: EpochUnit,
    obj: &Map<String, Value>,
    defaults: &Defaults,
    label: &str,
) -> Result<Decoded, Reject> {
    let value = field(obj, &fields.value, label, number).unwrap_or_else(|| {
        Err(malformed(format!(
            "{label}missing field {:?}",
            fields.value
        )))
    })?;
    let instrument = or_default(
        field(obj, &fields.instrument, label, instrument),
        &defaults.instrument,
    )?;
    let channel = or_default(
        field(obj, &fields.channel, label, channel),
        &defaults.channel,
    )?;
    let temperature_c = field(obj, &fields.temperature, label, number).transpose()?;
    let own_time = field(obj, &fields.time, label, |v| time_value(v, unit));
    let time = or_default(own_time, &defaults.time)?;
    Ok(Decoded {
        instrument,
        channel,
        time,
        value,
        temperature_c,
    })
}

fn or_default<T: Clone>(own: Field<T>, default: &Field<T>) -> Result<Option<T>, Reject> {
    own.or_else(|| default.clone()).transpose()
}

/// Read a field with `parse`, prefixing any error with the entry label and the field name.
fn field<T>(
    obj: &Map<String, Value>,
    name: &str,
    label: &str,
    parse: impl Fn(&Value) -> Result<T, Reject>,
) -> Field<T> {
    let v = obj.get(name).filter(|v| !v.is_null())?;
    Some(
        parse(v).map_err(|r| Reject::new(r.reason, format!("{label}field {name:?}: {}", r.detail))),
    )
}

/// A number, or a string holding one (including NaN and infinity spellings).
fn number(v: &Value) -> Result<f64, Reject> {
    match v {
        Value::Number(n) => n
            .as_f64()
            .ok_or_else(|| malformed(format!("number {n} unusable"))),
        Value::String(s) => {
            number_from_text(s).ok_or_else(|| malformed(format!("{s:?} is not a number")))
        }
        other => Err(malformed(format!("is {}, expected a number", kind(other)))),
    }
}

fn instrument(v: &Value) -> Result<String, Reject> {
    match v {
        Value::String(s) => Ok(s.clone()),
        other => Err(malformed(format!("is {}, expected a string", kind(other)))),
    }
}

/// A channel: a string, or an integer written as its decimal string.
fn channel(v: &Value) -> Result<String, Reject> {
    match v {
        Value::String(s) => Ok(s.clone()),
        Value::Number(n) if n.is_i64() || n.is_u64() => Ok(n.to_string()),
        other => Err(malformed(format!(
            "is {}, expected a string or an integer",
            kind(other)
        ))),
    }
}

/// A time: RFC 3339 or epoch text, or an epoch number.
fn time_value(v: &Value, unit: EpochUnit) -> Result<DateTime<Utc>, Reject> {
    match v {
        Value::String(s) => time::from_text(s, unit),
        Value::Number(n) => match n.as_f64() {
            Some(x) => time::from_epoch(x, unit),
            None => Err(Reject::new(Reason::BadTime, format!("number {n} unusable"))),
        },
        other => Err(Reject::new(
            Reason::BadTime,
            format!("is {}, expected a string or a number", kind(other)),
        )),
    }
}

/// What kind of JSON value this is, for messages.
fn kind(v: &Value) -> &'static str {
    match v {
        Value::Null => "null",
        Value::Bool(_) => "a boolean",
        Value::Number(n) if n.is_f64() => "a fractional number",
        Value::Number(_) => "an integer",
        Value::String(_) => "a string",
        Value::Array(_) => "an array",
        Value::Object(_) => "an object",
    }
}

#[cfg(test)]
mod tests {
    use super::super::test_support::sub;
    use super::*;
    use crate::config::model::PayloadFormat;

    fn run(unit: EpochUnit, payload: &str) -> Result<Entries, Reject> {
        decode(
            &sub(PayloadFormat::Json, unit).json,
            unit,
            payload.as_bytes(),
        )
    }

    fn ok(entry: &Result<Decoded, Reject>) -> &Decoded {
        entry.as_ref().expect("reading")
    }

    fn at(text: &str) -> Option<DateTime<Utc>> {
        Some(
            DateTime::parse_from_rfc3339(text)
                .expect("test time")
                .with_timezone(&Utc),
        )
    }

    #[test]
    fn single_reading_object() {
        let out = run(
            EpochUnit::Auto,
            r#"{"time":"2026-03-01T12:00:00Z","instrument":"PZ-1","value":2875.5,"temperature":11.25}"#,
        )
        .expect("decodes");
        assert_eq!(
            out,
            vec![Ok(Decoded {
                instrument: Some("PZ-1".into()),
                channel: None,
                time: at("2026-03-01T12:00:00Z"),
                value: 2875.5,
                temperature_c: Some(11.25),
            })]
        );
    }

    #[test]
    fn readings_array_with_top_level_defaults_and_overrides() {
        let out = run(
            EpochUnit::Auto,
            r#"{"time":1772366400,"channel":9,"readings":[
                {"channel":1,"value":"2801.5","temperature":"12.0"},
                {"channel":"2","value":3,"time":"2026-03-01T11:00:00+00:00"},
                {"instrument":"SP-4","value":-1.5},
                {"value":7}
            ]}"#,
        )
        .expect("decodes");
        assert_eq!(out.len(), 4);
        assert_eq!(ok(&out[0]).channel.as_deref(), Some("1"));
        assert_eq!(ok(&out[0]).value, 2801.5);
        assert_eq!(ok(&out[0]).temperature_c, Some(12.0));
        assert_eq!(ok(&out[0]).time, at("2026-03-01T12:00:00Z"));
        assert_eq!(ok(&out[1]).channel.as_deref(), Some("2"));
        assert_eq!(ok(&out[1]).time, at("2026-03-01T11:00:00Z"));
        assert_eq!(ok(&out[2]).instrument.as_deref(), Some("SP-4"));
        assert_eq!(
            ok(&out[2]).channel.as_deref(),
            Some("9"),
            "top-level channel is a default"
        );
        assert_eq!(ok(&out[3]).channel.as_deref(), Some("9"));
        assert_eq!(ok(&out[3]).temperature_c, None);
    }

    #[test]
    fn custom_field_names_are_used() {
        let mut fields = sub(PayloadFormat::Json, EpochUnit::Auto).json;
        fields.value = "raw".into();
        fields.readings = "ch".into();
        fields.channel = "c".into();
        let out =
            decode(&fields, EpochUnit::Auto, br#"{"ch":[{"c":"A","raw":4.5}]}"#).expect("decodes");
        assert_eq!(ok(&out[0]).channel.as_deref(), Some("A"));
        assert_eq!(ok(&out[0]).value, 4.5);
        // The default names mean nothing now.
        let out = decode(&fields, EpochUnit::Auto, br#"{"value":1}"#).expect("one entry");
        assert_eq!(
            out[0].as_ref().expect_err("no raw").reason,
            Reason::Malformed
        );
    }

    #[test]
    fn missing_time_is_none() {
        let out =
            run(EpochUnit::Auto, r#"{"channel":"3","value":1,"time":null}"#).expect("decodes");
        assert_eq!(ok(&out[0]).time, None);
    }

    #[test]
    fn every_time_form() {
        let want = at("2026-03-01T12:00:00.250Z");
        for (unit, t) in [
            (EpochUnit::Auto, r#""2026-03-01T12:00:00.25Z""#),
            (EpochUnit::Auto, r#""2026-03-01T14:00:00.250+02:00""#),
            (EpochUnit::Auto, "1772366400.25"),
            (EpochUnit::Auto, "1772366400250"),
            (EpochUnit::Auto, r#""1772366400.25""#),
            (EpochUnit::Seconds, "1772366400.25"),
            (EpochUnit::Milliseconds, "1772366400250"),
            (EpochUnit::Milliseconds, r#""1772366400250""#),
        ] {
            let payload = format!(r#"{{"channel":"1","value":1,"time":{t}}}"#);
            let out = run(unit, &payload).expect("decodes");
            assert_eq!(ok(&out[0]).time, want, "{unit:?} {t}");
        }
    }

    #[test]
    fn bad_time_rejects_only_that_entry() {
        let out = run(
            EpochUnit::Auto,
            r#"{"readings":[{"channel":1,"value":1,"time":"noon"},{"channel":2,"value":2,"time":1e300},
               {"channel":3,"value":3,"time":true},{"channel":4,"value":4,"time":1772366400}]}"#,
        )
        .expect("decodes");
        for entry in &out[..3] {
            assert_eq!(
                entry.as_ref().expect_err("bad time").reason,
                Reason::BadTime
            );
        }
        assert_eq!(ok(&out[3]).time, at("2026-03-01T12:00:00Z"));
    }

    #[test]
    fn bad_top_level_time_fails_only_entries_that_use_it() {
        let out = run(
            EpochUnit::Auto,
            r#"{"time":"never","readings":[{"channel":1,"value":1},{"channel":2,"value":2,"time":0}]}"#,
        )
        .expect("decodes");
        let err = out[0].as_ref().expect_err("inherits bad time");
        assert_eq!(err.reason, Reason::BadTime);
        assert!(err.detail.contains("top level"), "{}", err.detail);
        assert_eq!(ok(&out[1]).time, DateTime::from_timestamp(0, 0));
    }

    #[test]
    fn nan_and_infinity_strings_are_non_finite_values() {
        let out = run(
            EpochUnit::Auto,
            r#"{"readings":[{"channel":1,"value":"NaN"},{"channel":2,"value":"inf"},
               {"channel":3,"value":"-Infinity"},{"channel":4,"value":" 12.5 "}]}"#,
        )
        .expect("decodes");
        assert!(ok(&out[0]).value.is_nan());
        assert_eq!(ok(&out[1]).value, f64::INFINITY);
        assert_eq!(ok(&out[2]).value, f64::NEG_INFINITY);
        assert_eq!(ok(&out[3]).value, 12.5);
    }

    #[test]
    fn bad_values_and_identities_reject_the_entry() {
        let out = run(
            EpochUnit::Auto,
            r#"{"readings":[{"channel":1,"value":"high"},{"channel":1,"value":true},
               {"channel":1},{"channel":1.5,"value":1},{"instrument":7,"value":1},
               {"channel":1,"value":1,"temperature":"warm"},7,
               {"channel":"ok","value":1e308}]}"#,
        )
        .expect("decodes");
        assert_eq!(out.len(), 8);
        for (i, entry) in out[..7].iter().enumerate() {
            let err = entry.as_ref().expect_err("bad entry");
            assert_eq!(err.reason, Reason::Malformed, "{i}");
            assert!(
                err.detail.starts_with(&format!("readings[{i}]")),
                "{}",
                err.detail
            );
        }
        assert_eq!(ok(&out[7]).value, 1e308);
    }

    #[test]
    fn whole_payload_malformed_cases() {
        for payload in [
            "",
            "[1,2]",
            "42",
            r#""text""#,
            r#"{"readings":[]}"#,
            r#"{"readings":{"channel":1}}"#,
            r#"{"value":1"#,
            r#"{"value":1e999}"#,
        ] {
            let err = run(EpochUnit::Auto, payload).expect_err(payload);
            assert_eq!(err.reason, Reason::Malformed, "{payload}");
        }
        let err = decode(
            &sub(PayloadFormat::Json, EpochUnit::Auto).json,
            EpochUnit::Auto,
            b"{\"value\":\"\xff\"}",
        )
        .expect_err("invalid UTF-8");
        assert!(err.detail.starts_with("invalid JSON"), "{}", err.detail);
    }

    #[test]
    fn deep_nesting_is_malformed_not_a_crash() {
        let deep = format!("{}1{}", "[".repeat(10_000), "]".repeat(10_000));
        let err = run(EpochUnit::Auto, &deep).expect_err("too deep");
        assert_eq!(err.reason, Reason::Malformed);
        let deep_obj = format!(
            r#"{{"value":1,"x":{}1{}}}"#,
            "[".repeat(1000),
            "]".repeat(1000)
        );
        assert!(run(EpochUnit::Auto, &deep_obj).is_err());
    }

    #[test]
    fn huge_integers_do_not_panic() {
        let out = run(
            EpochUnit::Auto,
            r#"{"channel":18446744073709551615,"value":18446744073709551615,"time":-9223372036854775808}"#,
        )
        .expect("decodes");
        assert_eq!(out[0].as_ref().expect_err("time").reason, Reason::BadTime);
        let out = run(
            EpochUnit::Auto,
            r#"{"channel":18446744073709551615,"value":1}"#,
        )
        .expect("ok");
        assert_eq!(ok(&out[0]).channel.as_deref(), Some("18446744073709551615"));
    }
}
