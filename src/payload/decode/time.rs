//! Timestamps found in payloads: RFC 3339 text and epoch numbers, kept to the millisecond.
//!
//! Owns the reading of time values only; whether a time is plausible (future, before install)
//! is the engine's business. Every failure is a `Reason::BadTime` reject, never a panic.

use chrono::{DateTime, Utc};

use crate::config::model::EpochUnit;
use crate::quality::{Reason, Reject};

/// Auto epoch unit: magnitudes below this are seconds, at or above it milliseconds.
const AUTO_MS_THRESHOLD: f64 = 1e11;

/// Largest magnitude of milliseconds we try to turn into a time (well inside i64; chrono's own
/// range is far smaller and is checked afterwards).
const MAX_ABS_MS: f64 = 9.0e18;

fn bad_time(detail: impl Into<String>) -> Reject {
    Reject::new(Reason::BadTime, detail)
}

/// A time from a millisecond count since the Unix epoch, rounded to the nearest millisecond.
///
/// # Errors
/// `BadTime` if the count is not finite or outside the representable range.
pub(crate) fn from_epoch_ms(ms: f64) -> Result<DateTime<Utc>, Reject> {
    let rounded = ms.round();
    if !rounded.is_finite() || rounded.abs() > MAX_ABS_MS {
        return Err(bad_time(format!("epoch time {ms} ms is out of range")));
    }
    // In range of i64 by the check above, so the cast is exact for integral values.
    DateTime::from_timestamp_millis(rounded as i64)
        .ok_or_else(|| bad_time(format!("epoch time {ms} ms is out of range")))
}

/// A time from an epoch number read with the subscription's unit.
///
/// # Errors
/// `BadTime` if the number is not finite or the time is out of range.
pub(crate) fn from_epoch(x: f64, unit: EpochUnit) -> Result<DateTime<Utc>, Reject> {
    if !x.is_finite() {
        return Err(bad_time(format!("epoch time {x} is not a finite number")));
    }
    let ms = match unit {
        EpochUnit::Seconds => x * 1000.0,
        EpochUnit::Milliseconds => x,
        EpochUnit::Auto if x.abs() < AUTO_MS_THRESHOLD => x * 1000.0,
        EpochUnit::Auto => x,
    };
    from_epoch_ms(ms)
}

/// A time from text: an epoch number (read with `unit`) or an RFC 3339 timestamp.
///
/// # Errors
/// `BadTime` if the text is neither, or the time is out of range.
pub(crate) fn from_text(text: &str, unit: EpochUnit) -> Result<DateTime<Utc>, Reject> {
    let text = text.trim();
    if let Ok(x) = text.parse::<f64>() {
        return from_epoch(x, unit);
    }
    let parsed = DateTime::parse_from_rfc3339(text).map_err(|e| {
        bad_time(format!(
            "time {text:?} is not RFC 3339 or an epoch number: {e}"
        ))
    })?;
    // Round to the millisecond. A leap second's nanoseconds (>= 1e9) simply carry over.
    let ms = i64::from(parsed.timestamp_subsec_nanos()).saturating_add(500_000) / 1_000_000;
    parsed
        .timestamp()
        .checked_mul(1000)
        .and_then(|s| s.checked_add(ms))
        .and_then(DateTime::from_timestamp_millis)
        .ok_or_else(|| bad_time(format!("time {text:?} is out of range")))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn utc(text: &str) -> DateTime<Utc> {
        DateTime::parse_from_rfc3339(text)
            .expect("test time")
            .with_timezone(&Utc)
    }

    #[test]
    fn rfc3339_forms() {
        let want = utc("2026-03-01T12:00:00Z");
        assert_eq!(from_text("2026-03-01T12:00:00Z", EpochUnit::Auto), Ok(want));
        assert_eq!(
            from_text("2026-03-01T13:30:00+01:30", EpochUnit::Auto),
            Ok(want)
        );
        assert_eq!(
            from_text(" 2026-03-01T07:00:00-05:00 ", EpochUnit::Auto),
            Ok(want)
        );
        let t = from_text("2026-03-01T12:00:00.1234Z", EpochUnit::Auto).expect("fraction");
        assert_eq!(t.timestamp_subsec_millis(), 123);
        let t = from_text("2026-03-01T12:00:00.9996Z", EpochUnit::Auto).expect("round up");
        assert_eq!(t, utc("2026-03-01T12:00:01Z"));
    }

    #[test]
    fn epoch_numbers_by_unit() {
        let want = utc("2026-03-01T12:00:00Z");
        let s = want.timestamp() as f64;
        assert_eq!(from_epoch(s, EpochUnit::Auto), Ok(want));
        assert_eq!(from_epoch(s * 1000.0, EpochUnit::Auto), Ok(want));
        assert_eq!(from_epoch(s, EpochUnit::Seconds), Ok(want));
        assert_eq!(from_epoch(s * 1000.0, EpochUnit::Milliseconds), Ok(want));
        // The same number means different things under different units.
        assert_ne!(from_epoch(s, EpochUnit::Milliseconds), Ok(want));
        let t = from_epoch(s + 0.2506, EpochUnit::Seconds).expect("fraction");
        assert_eq!(t.timestamp_subsec_millis(), 251);
    }

    #[test]
    fn auto_threshold_is_1e11() {
        let below = from_epoch(99_999_999_999.0, EpochUnit::Auto).expect("seconds");
        assert_eq!(below.timestamp(), 99_999_999_999);
        let at = from_epoch(1e11, EpochUnit::Auto).expect("milliseconds");
        assert_eq!(at.timestamp(), 100_000_000);
        let negative = from_epoch(-86_400.0, EpochUnit::Auto).expect("seconds");
        assert_eq!(negative.timestamp(), -86_400);
    }

    #[test]
    fn numeric_text_is_epoch() {
        let want = utc("2026-03-01T12:00:00Z");
        let text = want.timestamp().to_string();
        assert_eq!(from_text(&text, EpochUnit::Auto), Ok(want));
        assert_eq!(
            from_text(&format!("{}000", text), EpochUnit::Auto),
            Ok(want)
        );
    }

    #[test]
    fn unreadable_times_are_bad_time() {
        for text in [
            "",
            "yesterday",
            "2026-13-01T00:00:00Z",
            "2026-03-01 12:00",
            "NaN",
            "inf",
            "1e400",
            "-1e300",
            "99999999999999999999999",
        ] {
            let err = from_text(text, EpochUnit::Auto).expect_err(text);
            assert_eq!(err.reason, Reason::BadTime, "{text}");
        }
        for x in [f64::NAN, f64::INFINITY, f64::MAX, -f64::MAX, 1e300, 9.1e18] {
            for unit in [EpochUnit::Auto, EpochUnit::Seconds, EpochUnit::Milliseconds] {
                let err = from_epoch(x, unit).expect_err("out of range");
                assert_eq!(err.reason, Reason::BadTime);
            }
        }
    }
}
