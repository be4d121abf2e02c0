//! Property tests of the payload decoders (proptest, on stable; the long runs are the fuzz
//! targets in `fuzz/`): any bytes give a value or a reject with a reason, never a panic; a
//! reading written in any of the three formats reads back as written; SenML base fields
//! resolve as RFC 8428 §4.6 says; a valid payload cut or corrupted anywhere never panics.

use chrono::{DateTime, Utc};
use proptest::prelude::*;

use super::test_support::sub;
use super::*;
use crate::config::model::EpochUnit;

fn now() -> DateTime<Utc> {
    DateTime::from_timestamp(1_772_366_400, 0).expect("fixed now")
}

fn formats() -> impl Strategy<Value = PayloadFormat> {
    prop_oneof![
        Just(PayloadFormat::Json),
        Just(PayloadFormat::Senml),
        Just(PayloadFormat::Csv)
    ]
}

fn units() -> impl Strategy<Value = EpochUnit> {
    prop_oneof![
        Just(EpochUnit::Auto),
        Just(EpochUnit::Seconds),
        Just(EpochUnit::Milliseconds)
    ]
}

/// Every outcome is a value or a reject that says why.
fn judged(out: &Result<Entries, Reject>) -> bool {
    match out {
        Err(r) => !r.detail.is_empty(),
        Ok(entries) => entries
            .iter()
            .all(|e| e.as_ref().map_or_else(|r| !r.detail.is_empty(), |_| true)),
    }
}

/// A reading as a logger might send it: a channel name, a finite value, a time in whole
/// milliseconds between 2001 and 2100.
fn reading() -> impl Strategy<Value = (String, f64, i64)> {
    (
        "[A-Za-z0-9_-]{1,12}",
        -1.0e6f64..1.0e6,
        978_307_200_000i64..4_102_444_800_000,
    )
}

/// Cases per property: `default`, or `PROPTEST_CASES` for a longer run (shared with the other
/// property tests).
pub(crate) fn cases(default: u32) -> u32 {
    std::env::var("PROPTEST_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(cases(512)))]

    #[test]
    fn any_bytes_give_a_value_or_a_reason(
        bytes in proptest::collection::vec(any::<u8>(), 0..2048),
        format in formats(),
        unit in units(),
    ) {
        let out = decode(&sub(format, unit), &bytes, now());
        prop_assert!(judged(&out), "{out:?}");
    }

    #[test]
    fn json_text_of_any_shape_never_panics(text in "[\\[\\]{}\",:0-9a-z.eE+-]{0,400}") {
        for format in [PayloadFormat::Json, PayloadFormat::Senml] {
            let out = decode(&sub(format, EpochUnit::Auto), text.as_bytes(), now());
            prop_assert!(judged(&out));
        }
    }

    #[test]
    fn a_reading_reads_back_in_every_format((channel, value, t_ms) in reading()) {
        let t = DateTime::from_timestamp_millis(t_ms).expect("in range");
        let secs = t_ms as f64 / 1000.0;
        let payloads = [
            (PayloadFormat::Json, EpochUnit::Milliseconds,
             format!(r#"{{"time":{t_ms},"channel":"{channel}","value":{value:?}}}"#)),
            (PayloadFormat::Json, EpochUnit::Auto,
             format!(r#"{{"time":"{}","channel":"{channel}","value":"{value:?}"}}"#, t.to_rfc3339())),
            (PayloadFormat::Csv, EpochUnit::Auto, format!("{},{channel},{value:?}\n", t.to_rfc3339())),
            (PayloadFormat::Senml, EpochUnit::Auto,
             format!(r#"[{{"n":"{channel}","v":{value:?},"t":{secs:?}}}]"#)),
        ];
        for (format, unit, text) in payloads {
            let out = decode(&sub(format, unit), text.as_bytes(), now()).expect(&text);
            prop_assert_eq!(out.len(), 1, "{}", text);
            let d = out[0].as_ref().expect("a reading");
            prop_assert_eq!(d.channel.as_deref(), Some(channel.as_str()));
            prop_assert_eq!(d.value, value);
            prop_assert_eq!(d.time, Some(t), "{}", text);
        }
    }

    /// RFC 8428 §4.6: name = bn + n, time = bt + t, value = bv + v; bases carry forward.
    #[test]
    fn senml_bases_resolve(
        bn in "[A-Z]{1,4}-",
        bt in 1_700_000_000i64..1_800_000_000,
        bv in -100i32..100,
        records in proptest::collection::vec(("[0-9]{1,3}", -3600i32..3600, -1000i32..1000), 1..20),
    ) {
        let mut pack = Vec::new();
        for (k, (n, t, v)) in records.iter().enumerate() {
            let base = if k == 0 {
                format!(r#""bn":"{bn}","bt":{bt},"bv":{bv},"#)
            } else {
                String::new()
            };
            pack.push(format!(r#"{{{base}"n":"{n}","t":{t},"v":{v}}}"#));
        }
        let text = format!("[{}]", pack.join(","));
        let out = decode(&sub(PayloadFormat::Senml, EpochUnit::Auto), text.as_bytes(), now())
            .expect("a valid pack");
        prop_assert_eq!(out.len(), records.len());
        for (d, (n, t, v)) in out.iter().zip(&records) {
            let d = d.as_ref().expect("a reading");
            let name = format!("{bn}{n}");
            prop_assert_eq!(d.channel.as_deref(), Some(name.as_str()));
            prop_assert_eq!(d.value, f64::from(bv) + f64::from(*v));
            prop_assert_eq!(d.time, DateTime::from_timestamp(bt + i64::from(*t), 0));
        }
    }

    #[test]
    fn a_valid_payload_cut_or_corrupted_never_panics(
        (channel, value, t_ms) in reading(),
        cut in any::<prop::sample::Index>(),
        at in any::<prop::sample::Index>(),
        byte in any::<u8>(),
        format in formats(),
    ) {
        let text = match format {
            PayloadFormat::Json => format!(r#"{{"time":{t_ms},"readings":[{{"channel":"{channel}","value":{value:?},"temperature":12.5}}]}}"#),
            PayloadFormat::Csv => format!("{t_ms},{channel},{value:?},12.5\n"),
            PayloadFormat::Senml => format!(r#"[{{"bn":"{channel}/","bt":{t_ms},"n":"1","v":{value:?}}},{{"n":"1/temperature","v":12.5}}]"#),
        };
        let mut bytes = text.into_bytes();
        let i = at.index(bytes.len());
        bytes[i] = byte;
        bytes.truncate(cut.index(bytes.len() + 1));
        let out = decode(&sub(format, EpochUnit::Auto), &bytes, now());
        prop_assert!(judged(&out));
    }
}
