//! Alert email rendering: subject, plain text and HTML of one message holding one or more
//! notices (alerts that fired together). Pure text building; no I/O.
//!
//! Numbers, units and names come from `present` in the site's display units (stored values
//! stay SI). Every message carries the value against its bound, the direction, the recent rate and the
//! last readings, the response text, a status-page link, how to acknowledge, and the caution.

use chrono_tz::Tz;
use std::fmt::Write as _;

use chrono::{TimeZone, Utc};

use crate::config::DisplayUnits;
use crate::domain::rules::{Check, Direction, LevelSpec};
use crate::present::format::{duration, shown, shown_rate_per_day};
use crate::present::quantity_name;

/// The caution every message carries.
pub const CAUTION: &str = "Automated screening only. Verify in the field before acting; follow \
the emergency action plan, local regulations and the direction of the engineer of record. A quiet \
seepd is not evidence of a safe structure.";

/// One notice as it is shown.
#[derive(Debug, Clone)]
pub struct Item<'a> {
    /// `raise`, `escalate`, `de_escalate`, `resolve`, `remind`, `notify_escalation`.
    pub kind: &'a str,
    pub alert: i64,
    pub rule: &'a str,
    pub site_id: &'a str,
    pub site_name: &'a str,
    pub object: &'a str,
    pub quantity: &'a str,
    pub check: &'a Check,
    pub level: &'a LevelSpec,
    /// Position of the level (0 least severe), for ordering.
    pub severity: usize,
    pub value: Option<f64>,
    pub unit: &'a str,
    pub t_ms: i64,
    /// Last values (time, value), oldest first.
    pub recent: &'a [(i64, f64)],
    /// The site's time zone: times are shown in it (and in UTC).
    pub tz: Tz,
    /// The site's display units.
    pub units: DisplayUnits,
    /// The watched instrument's kind identifier (None for a derived object), for its words.
    pub instrument_kind: Option<&'static str>,
}

/// A time to the minute in the site's time zone, with UTC beside it unless the zone is UTC.
pub fn time(t_ms: i64, tz: Tz) -> String {
    Utc.timestamp_millis_opt(t_ms).single().map_or_else(
        || t_ms.to_string(),
        |t| {
            if tz == chrono_tz::UTC {
                t.format("%Y-%m-%d %H:%M UTC").to_string()
            } else {
                format!(
                    "{} ({} UTC)",
                    t.with_timezone(&tz).format("%Y-%m-%d %H:%M %Z"),
                    t.format("%H:%M")
                )
            }
        },
    )
}

fn headline(kind: &str, level: &str) -> String {
    let level = level.to_uppercase();
    match kind {
        "raise" => level,
        "escalate" => format!("{level} (escalated)"),
        "de_escalate" => format!("{level} (lowered)"),
        "remind" => format!("Reminder: {level}"),
        "notify_escalation" => format!("Not acknowledged: {level}"),
        "resolve" => format!("All clear (was {level})"),
        other => format!("{level} ({other})"),
    }
}

impl Item<'_> {
    /// A stored value of the watched quantity as a person reads it.
    fn with_unit(&self, v: f64) -> String {
        shown(v, self.quantity, self.unit, self.units)
    }

    /// The watched quantity in words.
    fn words(&self) -> String {
        quantity_name(self.quantity, self.instrument_kind).to_lowercase()
    }

    fn subject_part(&self) -> String {
        let value = match (self.check, self.value) {
            (Check::NoData, Some(age_s)) => format!("no data for {}", duration(age_s as i64)),
            (Check::Unavailable, Some(age_s)) => {
                format!("safety value unavailable for {}", duration(age_s as i64))
            }
            (_, Some(v)) => self.with_unit(v),
            (_, None) => "no value".into(),
        };
        format!(
            "{} {}: {} {} {}",
            headline(self.kind, &self.level.name),
            self.site_id,
            self.object,
            self.words(),
            value
        )
    }

    /// "1.52 — below the concern bound 1.6; clears above 1.65 (deadband 0.05)".
    fn against_bound(&self) -> String {
        let l = self.level;
        let Some(v) = self.value else {
            return "no value".into();
        };
        if *self.check == Check::Unavailable {
            return format!(
                "safety value unavailable: no value for {} (limit {}) because its inputs could not be used; see `seepd alerts` for the reason",
                duration(v as i64),
                duration(l.bound as i64)
            );
        }
        if *self.check == Check::NoData {
            return format!(
                "no reading for {}; the limit is {} (the instrument's interval times the rule's factor)",
                duration(v as i64),
                duration(l.bound as i64)
            );
        }
        let clear = match l.direction {
            Direction::Above => format!("below {}", self.with_unit(l.bound - l.deadband)),
            Direction::Below => format!("above {}", self.with_unit(l.bound + l.deadband)),
        };
        format!(
            "{} at {} — bound: {} {} ({} level); the level clears {} (deadband {})",
            self.with_unit(v),
            time(self.t_ms, self.tz),
            l.direction.name(),
            self.with_unit(l.bound),
            l.name,
            clear,
            shown(l.deadband, self.quantity, self.unit, self.units)
        )
    }

    /// Rate over the recent values, per day.
    fn rate(&self) -> String {
        match (self.recent.first(), self.recent.last()) {
            (Some(&(t0, v0)), Some(&(t1, v1))) if t1 > t0 => {
                let per_s = (v1 - v0) / ((t1 - t0) as f64 / 1000.0);
                format!(
                    "{} over the last {} values ({} to {})",
                    shown_rate_per_day(per_s, self.quantity, self.unit, self.units),
                    self.recent.len(),
                    time(t0, self.tz),
                    time(t1, self.tz)
                )
            }
            _ => "not enough values for a rate".into(),
        }
    }
}

pub(crate) fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Subject, text and HTML of one message. `items` is sorted most severe first.
pub fn render(items: &mut [Item<'_>], status_url: &str) -> (String, String, String) {
    items.sort_by(|a, b| b.severity.cmp(&a.severity).then(a.alert.cmp(&b.alert)));
    let mut subject = format!(
        "[seepd] {}",
        items.first().map(Item::subject_part).unwrap_or_default()
    );
    if items.len() > 1 {
        let _ = write!(subject, " (+{} more)", items.len() - 1);
    }
    let mut text = String::new();
    let mut html = String::from("<!DOCTYPE html><html><body style=\"font-family:sans-serif\">");
    for it in items.iter() {
        let head = headline(it.kind, &it.level.name);
        let _ = writeln!(text, "== Alert {} — {head} ==", it.alert);
        let _ = writeln!(text, "Site:        {} ({})", it.site_name, it.site_id);
        let _ = writeln!(
            text,
            "Watching:    {} {} (rule {})",
            it.object,
            it.words(),
            it.rule
        );
        let _ = writeln!(text, "Value:       {}", it.against_bound());
        if *it.check == Check::Threshold {
            let _ = writeln!(text, "Recent rate: {}", it.rate());
            let _ = writeln!(text, "Last values:");
            for &(t, v) in it.recent.iter().rev() {
                let _ = writeln!(text, "  {}  {}", time(t, it.tz), it.with_unit(v));
            }
        }
        let _ = writeln!(text, "Response:    {}", it.level.response);
        if it.kind != "resolve" {
            let _ = writeln!(
                text,
                "Acknowledge: seepd ack {} --config DIR --by NAME",
                it.alert
            );
        }
        let _ = writeln!(text);

        let _ = write!(
            html,
            "<h2>Alert {} — {}</h2><table cellpadding=\"3\">\
             <tr><th align=\"left\">Site</th><td>{} ({})</td></tr>\
             <tr><th align=\"left\">Watching</th><td>{} {} (rule {})</td></tr>\
             <tr><th align=\"left\">Value</th><td>{}</td></tr>",
            it.alert,
            escape(&head),
            escape(it.site_name),
            escape(it.site_id),
            escape(it.object),
            escape(&it.words()),
            escape(it.rule),
            escape(&it.against_bound())
        );
        if *it.check == Check::Threshold {
            let _ = write!(
                html,
                "<tr><th align=\"left\">Recent rate</th><td>{}</td></tr>",
                escape(&it.rate())
            );
        }
        let _ = write!(
            html,
            "<tr><th align=\"left\">Response</th><td><strong>{}</strong></td></tr></table>",
            escape(&it.level.response)
        );
        if *it.check == Check::Threshold && !it.recent.is_empty() {
            html.push_str(
                "<table border=\"1\" cellpadding=\"3\"><tr><th>time</th><th>value</th></tr>",
            );
            for &(t, v) in it.recent.iter().rev() {
                let _ = write!(
                    html,
                    "<tr><td>{}</td><td>{}</td></tr>",
                    escape(&time(t, it.tz)),
                    escape(&it.with_unit(v))
                );
            }
            html.push_str("</table>");
        }
        if it.kind != "resolve" {
            let _ = write!(
                html,
                "<p>Acknowledge: <code>seepd ack {} --config DIR --by NAME</code></p>",
                it.alert
            );
        }
    }
    let _ = writeln!(text, "Status page: {status_url}");
    let _ = writeln!(text, "\n{CAUTION}");
    let _ = write!(
        html,
        "<p>Status page: <a href=\"{0}\">{0}</a></p><p><em>{1}</em></p></body></html>",
        escape(status_url),
        escape(CAUTION)
    );
    (subject, text, html)
}

#[cfg(test)]
mod time_tests {
    use super::*;

    #[test]
    fn times_are_shown_in_the_site_zone_with_utc_beside() {
        // 2026-01-15 12:00 UTC is 06:00 in Chicago (CST, UTC−6) [definition of the zone].
        let t = Utc
            .with_ymd_and_hms(2026, 1, 15, 12, 0, 0)
            .unwrap()
            .timestamp_millis();
        assert_eq!(time(t, chrono_tz::UTC), "2026-01-15 12:00 UTC");
        assert_eq!(
            time(t, chrono_tz::America::Chicago),
            "2026-01-15 06:00 CST (12:00 UTC)"
        );
    }
}
