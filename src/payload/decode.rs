//! Payload decoding: bytes from the broker → readings as the payload states them.
//!
//! Owns the three payload formats (JSON, SenML JSON, CSV) and the reading of their timestamps.
//! It does not map readings to instruments, check ranges, reject non-finite values or read the
//! clock (`now` is passed in). Payloads are hostile: every input yields a value or a `Reject`,
//! never a panic.

mod csv;
mod json;
mod senml;
mod time;

use chrono::{DateTime, Utc};

use crate::config::model::{PayloadFormat, Subscription};
use crate::quality::{Reason, Reject};

/// One reading as found in a payload, before it is mapped to an instrument or reduced.
#[derive(Debug, Clone, PartialEq)]
pub struct Decoded {
    /// Instrument id carried in the payload, if any.
    pub instrument: Option<String>,
    /// Logger channel carried in the payload, if any.
    pub channel: Option<String>,
    /// None = the payload had no time (the caller uses the arrival time and flags it).
    pub time: Option<DateTime<Utc>>,
    /// The raw value; may be NaN or ±Inf, which the caller rejects.
    pub value: f64,
    /// Thermistor temperature sent with the reading; passed on as sent (it may be non-finite).
    pub temperature_c: Option<f64>,
}

/// What a payload decodes to: each reading, or the reject of that one entry.
pub type Entries = Vec<Result<Decoded, Reject>>;

/// Decode a payload according to the subscription's format.
///
/// `now` is used only by SenML, whose times below 2^28 s are relative to the present
/// (RFC 8428 §4.5.3).
///
/// # Errors
/// The outer `Err` means the whole payload is unusable (`Malformed`: not UTF-8, not JSON, wrong
/// shape, no readings). Inner `Err` items reject one entry (`Malformed` or `BadTime`) so that the
/// good entries of the same message survive.
pub fn decode(sub: &Subscription, payload: &[u8], now: DateTime<Utc>) -> Result<Entries, Reject> {
    match sub.format {
        PayloadFormat::Json => json::decode(&sub.json, sub.epoch_unit, payload),
        PayloadFormat::Senml => senml::decode(payload, now),
        PayloadFormat::Csv => csv::decode(sub.epoch_unit, payload),
    }
}

fn malformed(detail: impl Into<String>) -> Reject {
    Reject::new(Reason::Malformed, detail)
}

/// Parse a payload as one JSON document (shared by JSON and SenML). serde_json limits nesting
/// depth, so deeply nested input is an error, not a stack overflow.
fn parse_json(payload: &[u8]) -> Result<serde_json::Value, Reject> {
    serde_json::from_slice(payload).map_err(|e| malformed(format!("invalid JSON: {e}")))
}

/// A numeric value from text, accepting the spellings of NaN and infinity.
fn number_from_text(text: &str) -> Option<f64> {
    text.trim().parse::<f64>().ok()
}

#[cfg(test)]
pub(crate) mod test_support {
    use crate::config::model::{EpochUnit, JsonFields, PayloadFormat, Subscription};

    /// A subscription with the default JSON field names.
    pub(crate) fn sub(format: PayloadFormat, epoch_unit: EpochUnit) -> Subscription {
        Subscription {
            pattern: "t/{logger}".into(),
            filter: "t/+".into(),
            qos: 1,
            format,
            epoch_unit,
            json: JsonFields::default(),
        }
    }
}

#[cfg(test)]
pub(crate) mod props;

#[cfg(test)]
mod tests {
    use super::test_support::sub;
    use super::*;
    use crate::config::model::EpochUnit;

    fn now() -> DateTime<Utc> {
        DateTime::from_timestamp(1_772_366_400, 0).expect("fixed now")
    }

    #[test]
    fn dispatches_on_format() {
        let json = br#"{"channel":"1","value":2.5}"#;
        let senml = br#"[{"n":"1","v":2.5}]"#;
        let csv = b",1,2.5";
        for (format, payload) in [
            (PayloadFormat::Json, &json[..]),
            (PayloadFormat::Senml, &senml[..]),
            (PayloadFormat::Csv, &csv[..]),
        ] {
            let s = sub(format, EpochUnit::Auto);
            let out = decode(&s, payload, now()).expect("decodes");
            assert_eq!(out.len(), 1);
            let r = out[0].as_ref().expect("reading");
            assert_eq!(r.channel.as_deref(), Some("1"));
            assert_eq!(r.value, 2.5);
            assert_eq!(r.time, None);
        }
        // The same bytes are not valid in another format.
        let s = sub(PayloadFormat::Senml, EpochUnit::Auto);
        assert!(decode(&s, json, now()).is_err());
    }

    /// Cheap deterministic byte generator for the hostile-input sweep.
    fn scramble(seed: u64, len: usize) -> Vec<u8> {
        let mut x = seed.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1);
        (0..len)
            .map(|_| {
                x ^= x << 13;
                x ^= x >> 7;
                x ^= x << 17;
                (x >> 24) as u8
            })
            .collect()
    }

    #[test]
    fn hostile_bytes_never_panic() {
        let mut inputs: Vec<Vec<u8>> = vec![
            Vec::new(),
            vec![0xff, 0xfe, 0x00, 0x80],
            b"[".repeat(100_000),
            b"{\"a\":".repeat(50_000),
            b"[{\"n\":".repeat(20_000),
            b"1e999999".to_vec(),
            b"-".to_vec(),
            b"\n\n\r\n,,,\n".to_vec(),
            "é,ü,∞\n".as_bytes().to_vec(),
        ];
        inputs.extend((0..200).map(|seed| scramble(seed, (seed as usize * 7) % 300)));
        for format in [
            PayloadFormat::Json,
            PayloadFormat::Senml,
            PayloadFormat::Csv,
        ] {
            let s = sub(format, EpochUnit::Auto);
            for input in &inputs {
                // Any outcome is fine as long as it is a value, not a panic.
                let _ = decode(&s, input, now());
            }
        }
    }

    #[test]
    fn empty_payload_is_malformed_in_every_format() {
        for format in [
            PayloadFormat::Json,
            PayloadFormat::Senml,
            PayloadFormat::Csv,
        ] {
            let s = sub(format, EpochUnit::Auto);
            let err = decode(&s, b"", now()).expect_err("empty");
            assert_eq!(err.reason, Reason::Malformed);
        }
    }
}
