//! The one reader of times written by people — command-line options, the `installed` key of an
//! instrument, a silence's expiry: an RFC 3339 date-time, or a date (midnight UTC), or for an
//! expiry a span from now (`+30m`, `+4h`, `+2d`). Timestamps inside payloads are the
//! decoders' (`payload::decode::time`).

use chrono::{DateTime, NaiveDate, Utc};

/// What the error messages offer as the accepted forms.
const FORMS: &str = "an RFC 3339 time (2026-03-02T08:00:00Z) or a date (2026-03-02)";

/// An RFC 3339 date-time, or a date (midnight UTC).
///
/// # Errors
/// Neither form: a message naming the accepted forms.
pub fn instant(text: &str) -> Result<DateTime<Utc>, String> {
    let text = text.trim();
    if let Ok(d) = NaiveDate::parse_from_str(text, "%Y-%m-%d") {
        if let Some(t) = d.and_hms_opt(0, 0, 0) {
            return Ok(t.and_utc());
        }
    }
    DateTime::parse_from_rfc3339(text)
        .map(|t| t.with_timezone(&Utc))
        .map_err(|e| format!("{text:?} is not {FORMS} ({e})"))
}

/// `instant`, or a span after `now`: `+N` followed by `m`, `h` or `d`.
///
/// # Errors
/// None of the forms: a message naming them.
pub fn instant_or_span(text: &str, now: DateTime<Utc>) -> Result<DateTime<Utc>, String> {
    let text = text.trim();
    let Some(rel) = text.strip_prefix('+') else {
        return instant(text).map_err(|e| format!("{e}, or a span such as +4h"));
    };
    let (n, unit) = rel.split_at(rel.len().saturating_sub(1));
    let n: i64 = n
        .parse()
        .map_err(|_| format!("{text:?}: expected a span such as +30m, +4h, +2d"))?;
    let secs = match unit {
        "m" => 60,
        "h" => 3600,
        "d" => 86_400,
        _ => return Err(format!("{text:?}: expected a unit m, h or d (e.g. +4h)")),
    };
    Ok(now + chrono::Duration::seconds(n.saturating_mul(secs)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates_times_and_spans() {
        let t = instant("2026-03-02T08:00:00+01:00").unwrap();
        assert_eq!(t.to_rfc3339(), "2026-03-02T07:00:00+00:00");
        assert_eq!(
            instant("2026-03-02").unwrap().to_rfc3339(),
            "2026-03-02T00:00:00+00:00"
        );
        let e = instant("yesterday").unwrap_err();
        assert!(e.contains("RFC 3339") && e.contains("yesterday"), "{e}");
        let now = instant("2026-03-02T00:00:00Z").unwrap();
        assert_eq!(
            instant_or_span("+4h", now).unwrap(),
            now + chrono::Duration::hours(4)
        );
        assert_eq!(
            instant_or_span("+2d", now).unwrap(),
            now + chrono::Duration::days(2)
        );
        assert!(instant_or_span("+4y", now).unwrap_err().contains("unit"));
        assert!(instant_or_span("+xh", now).unwrap_err().contains("span"));
        assert!(instant_or_span("soon", now).unwrap_err().contains("+4h"));
    }
}
