//! The CSV payload format: lines of `time,channel,value[,temperature]`.
//!
//! Owns the line rules (blank lines and `#` comments skipped, CRLF accepted, fields trimmed, an
//! empty time meaning "no time"). One bad line rejects that line only. No quoting: a field never
//! contains a comma.

use super::{malformed, number_from_text, time, Decoded, Entries};
use crate::config::model::EpochUnit;
use crate::quality::{Reason, Reject};

/// Decode a CSV payload.
///
/// # Errors
/// `Malformed` if the payload is not UTF-8 or holds no data line at all.
pub(super) fn decode(unit: EpochUnit, payload: &[u8]) -> Result<Entries, Reject> {
    let text = std::str::from_utf8(payload)
        .map_err(|e| malformed(format!("payload is not UTF-8: {e}")))?;
    let entries: Entries = text
        .split('\n')
        .enumerate()
        .filter_map(|(i, raw)| {
            // `trim` also removes the `\r` of a CRLF line end.
            let line = raw.trim();
            if line.is_empty() || line.starts_with('#') {
                None
            } else {
                Some(parse_line(unit, i + 1, line))
            }
        })
        .collect();
    if entries.is_empty() {
        return Err(malformed("no data lines"));
    }
    Ok(entries)
}

/// One data line; `number` is its 1-based line number in the payload.
fn parse_line(unit: EpochUnit, number: usize, line: &str) -> Result<Decoded, Reject> {
    let fields: Vec<&str> = line.split(',').map(str::trim).collect();
    let bad = |reason, why: String| Reject::new(reason, format!("line {number}: {why}"));
    let (time_text, channel, value_text, temperature_text) = match fields.as_slice() {
        [t, c, v] => (*t, *c, *v, None),
        [t, c, v, temp] => (*t, *c, *v, Some(*temp).filter(|s| !s.is_empty())),
        _ => {
            return Err(bad(
                Reason::Malformed,
                format!(
                    "expected 3 or 4 fields (time,channel,value[,temperature]), found {}",
                    fields.len()
                ),
            ))
        }
    };
    if channel.is_empty() {
        return Err(bad(Reason::Malformed, "empty channel".into()));
    }
    let value = number_from_text(value_text).ok_or_else(|| {
        bad(
            Reason::Malformed,
            format!("value {value_text:?} is not a number"),
        )
    })?;
    let temperature_c = match temperature_text {
        None => None,
        Some(t) => Some(number_from_text(t).ok_or_else(|| {
            bad(
                Reason::Malformed,
                format!("temperature {t:?} is not a number"),
            )
        })?),
    };
    let time = if time_text.is_empty() {
        None
    } else {
        Some(time::from_text(time_text, unit).map_err(|r| bad(r.reason, r.detail))?)
    };
    Ok(Decoded {
        instrument: Some(channel.to_string()),
        channel: Some(channel.to_string()),
        time,
        value,
        temperature_c,
    })
}

#[cfg(test)]
mod tests {
    use chrono::{DateTime, Utc};

    use super::*;

    fn at(text: &str) -> Option<DateTime<Utc>> {
        Some(
            DateTime::parse_from_rfc3339(text)
                .expect("test time")
                .with_timezone(&Utc),
        )
    }

    fn ok(entry: &Result<Decoded, Reject>) -> &Decoded {
        entry.as_ref().expect("reading")
    }

    #[test]
    fn single_line_without_final_newline() {
        let out = decode(EpochUnit::Auto, b"2026-03-01T12:00:00Z,VW-3,2875.25,11.5").expect("ok");
        assert_eq!(
            out,
            vec![Ok(Decoded {
                instrument: Some("VW-3".into()),
                channel: Some("VW-3".into()),
                time: at("2026-03-01T12:00:00Z"),
                value: 2875.25,
                temperature_c: Some(11.5),
            })]
        );
    }

    #[test]
    fn several_lines_crlf_comments_and_blanks() {
        let payload = "# logger L7 dump\r\n\
                       1772366400 , 1 , 10.5\r\n\
                       \r\n\
                       1772366400000,2,NaN,\r\n\
                       \t# indented comment\n\
                       ,3,-inf,9.75\n";
        let out = decode(EpochUnit::Auto, payload.as_bytes()).expect("ok");
        assert_eq!(out.len(), 3);
        assert_eq!(ok(&out[0]).channel.as_deref(), Some("1"));
        assert_eq!(ok(&out[0]).value, 10.5);
        assert_eq!(ok(&out[0]).time, at("2026-03-01T12:00:00Z"));
        assert_eq!(ok(&out[1]).time, at("2026-03-01T12:00:00Z"));
        assert!(ok(&out[1]).value.is_nan());
        assert_eq!(ok(&out[1]).temperature_c, None, "empty 4th field");
        assert_eq!(ok(&out[2]).time, None, "empty time field");
        assert_eq!(ok(&out[2]).value, f64::NEG_INFINITY);
        assert_eq!(ok(&out[2]).temperature_c, Some(9.75));
    }

    #[test]
    fn epoch_unit_applies_to_numbers() {
        let out = decode(EpochUnit::Milliseconds, b"1772366400,1,1").expect("ok");
        assert_eq!(ok(&out[0]).time, at("1970-01-21T12:19:26.400Z"));
        let out = decode(EpochUnit::Seconds, b"1772366400.5,1,1").expect("ok");
        assert_eq!(ok(&out[0]).time, at("2026-03-01T12:00:00.5Z"));
    }

    #[test]
    fn bad_lines_are_rejected_and_good_ones_kept() {
        let payload = "time,channel,value\n\
                       2026-03-01T12:00:00Z,1,5\n\
                       2026-03-01T12:00:00Z,2\n\
                       2026-03-01T12:00:00Z,3,4,5,6\n\
                       later,4,1\n\
                       2026-03-01T12:00:00Z,,1\n\
                       2026-03-01T12:00:00Z,6,1,hot\n\
                       2026-03-01T12:00:00+01:00,7,8\n";
        let out = decode(EpochUnit::Auto, payload.as_bytes()).expect("ok");
        assert_eq!(out.len(), 8);
        let expect_err = |i: usize, reason: Reason, line: usize| {
            let err = out[i].as_ref().expect_err("bad line");
            assert_eq!(err.reason, reason, "{err}");
            assert!(err.detail.starts_with(&format!("line {line}:")), "{err}");
        };
        expect_err(0, Reason::Malformed, 1); // header: "value" is not a number
        assert_eq!(ok(&out[1]).value, 5.0);
        expect_err(2, Reason::Malformed, 3);
        expect_err(3, Reason::Malformed, 4);
        expect_err(4, Reason::BadTime, 5);
        expect_err(5, Reason::Malformed, 6);
        expect_err(6, Reason::Malformed, 7);
        assert_eq!(ok(&out[7]).time, at("2026-03-01T11:00:00Z"));
    }

    #[test]
    fn whole_payload_rejects() {
        for payload in [
            &b""[..],
            b"\n\r\n  \n",
            b"# only a comment\n",
            b"1,2,\xff\n",
        ] {
            let err = decode(EpochUnit::Auto, payload).expect_err("no readings");
            assert_eq!(err.reason, Reason::Malformed);
        }
    }

    #[test]
    fn huge_numbers_do_not_panic() {
        let out = decode(EpochUnit::Auto, b"1e999,1,1e999\n99999999999999999999,2,1").expect("ok");
        assert_eq!(out[0].as_ref().expect_err("time").reason, Reason::BadTime);
        assert_eq!(out[1].as_ref().expect_err("time").reason, Reason::BadTime);
    }
}
