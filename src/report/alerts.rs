//! The report's alerts table: every alert event of the period (raised, escalated, de-escalated,
//! acknowledged, silenced, reminded, resolved, closed) with its own level and value, and
//! silences created or in force in it, for one site, as text rows ordered by time.
//!
//! Reads the alerting tables through `Store` (`store::report_reads`); never changes them.

use std::collections::BTreeSet;

use chrono_tz::Tz;

use super::html::local;
use crate::config::{Config, DisplayUnits};
use crate::present::{quantity_name, shown};
use crate::store::report_reads::{PeriodAck, PeriodEvent, PeriodSilence};
use crate::store::{Store, StoreError};

/// One table row: (time ms, [time, event, object / rule, level, detail]).
type Row = (i64, [String; 5]);

fn value(v: Option<f64>, quantity: &str, unit: &str, units: DisplayUnits) -> String {
    v.map_or_else(
        || "no value".to_string(),
        |v| shown(v, quantity, unit, units),
    )
}

/// Alerts, acknowledgements and silences of `site` in [from_ms, to_ms), oldest first.
///
/// # Errors
/// SQLite errors.
pub fn rows(
    cfg: &Config,
    store: &Store,
    site: &str,
    from_ms: i64,
    to_ms: i64,
    tz: Tz,
    units: DisplayUnits,
) -> Result<Vec<[String; 5]>, StoreError> {
    let mut out: Vec<Row> = Vec::new();
    // Every step of every alert of the site in the period, in the order it happened, with
    // the level and value of that step (not of the alert's latest state).
    for PeriodEvent {
        event: e,
        object,
        quantity,
    } in store.period_events(site, from_ms, to_ms)?
    {
        let v = value(e.value, &quantity, &e.unit, units);
        let kind = cfg.instruments.get(&object).map(|i| i.kind.name());
        let words = quantity_name(&quantity, kind).to_lowercase();
        // An age (s) on a safety value is how long it has had no value.
        let (words, v) = if e.unit == "s" && quantity != "no_data" {
            (format!("{words}:"), format!("no value for {v}"))
        } else {
            (words, v)
        };
        let detail = if e.detail.is_empty() {
            format!("alert #{}: {words} {v}", e.alert)
        } else {
            format!("alert #{}: {words} {v}; {}", e.alert, e.detail)
        };
        out.push((
            e.t_ms,
            [
                local(e.t_ms, tz),
                crate::present::labels::event(&e.kind),
                format!("{object} / {}", e.rule),
                e.level,
                detail,
            ],
        ));
    }
    // Acknowledgements from the operators' own record (also those the service has not applied
    // yet), at the level the alert had when it was acknowledged.
    for PeriodAck {
        t_ms: t,
        who,
        note,
        alert: id,
        rule,
        object,
        level,
    } in store.period_acks(site, from_ms, to_ms)?
    {
        let note = note.map(|n| format!(": {n}")).unwrap_or_default();
        out.push((
            t,
            [
                local(t, tz),
                "acknowledged".into(),
                format!("{object} / {rule}"),
                level,
                format!("alert #{id} by {who}{note}"),
            ],
        ));
    }
    // Silences have no site: a rule's silence belongs to the rule's site, an object's to the
    // site of the instrument or of the rules on it.
    let rules: BTreeSet<&str> = cfg
        .alerting
        .rules
        .iter()
        .filter(|r| r.site == site)
        .map(|r| r.id.as_str())
        .collect();
    let objects: BTreeSet<&str> = cfg
        .instruments
        .values()
        .filter(|i| i.site == site)
        .map(|i| i.id.as_str())
        .chain(
            cfg.alerting
                .rules
                .iter()
                .filter(|r| r.site == site)
                .map(|r| r.object.as_str()),
        )
        .collect();
    for PeriodSilence {
        rule,
        object,
        until_ms: until,
        reason,
        who,
        created_ms: created,
    } in store.period_silences(from_ms, to_ms)?
    {
        let what = match (&rule, &object) {
            (Some(r), _) if rules.contains(r.as_str()) => format!("rule {r}"),
            (_, Some(o)) if objects.contains(o.as_str()) => o.clone(),
            _ => continue,
        };
        let (t, event) = if created >= from_ms {
            (created, "silenced")
        } else {
            (from_ms, "silence in force")
        };
        out.push((
            t,
            [
                local(t, tz),
                event.into(),
                what,
                "—".into(),
                format!("until {} by {who}: {reason}", local(until, tz)),
            ],
        ));
    }
    out.sort_by_key(|(t, _)| *t);
    Ok(out.into_iter().map(|(_, r)| r).collect())
}
