//! The report's alerts table: alerts raised, resolved and acknowledged in the period, and
//! silences created or in force in it, for one site, as text rows ordered by time.
//!
//! Reads the alerting tables only; never changes them.

use std::collections::BTreeSet;

use chrono_tz::Tz;
use rusqlite::{params, Connection};

use super::html::local;
use crate::config::Config;

/// One table row: (time ms, [time, event, object / rule, level, detail]).
type Row = (i64, [String; 5]);

fn value(v: Option<f64>, unit: &str) -> String {
    v.map_or_else(|| "no value".to_string(), |v| format!("{v:.3} {unit}"))
}

/// Alerts, acknowledgements and silences of `site` in [from_ms, to_ms), oldest first.
///
/// # Errors
/// SQLite errors.
pub fn rows(
    cfg: &Config,
    conn: &Connection,
    site: &str,
    from_ms: i64,
    to_ms: i64,
    tz: Tz,
) -> rusqlite::Result<Vec<[String; 5]>> {
    let mut out: Vec<Row> = Vec::new();
    let mut st = conn.prepare(
        "SELECT id, rule, object, quantity, level, raised_ms, value, unit, resolved_ms
         FROM alerts WHERE site = ?1
           AND ((raised_ms >= ?2 AND raised_ms < ?3) OR (resolved_ms >= ?2 AND resolved_ms < ?3))",
    )?;
    let alerts = st.query_map(params![site, from_ms, to_ms], |r| {
        Ok((
            r.get::<_, i64>(0)?,
            r.get::<_, String>(1)?,
            r.get::<_, String>(2)?,
            r.get::<_, String>(3)?,
            r.get::<_, String>(4)?,
            r.get::<_, i64>(5)?,
            r.get::<_, Option<f64>>(6)?,
            r.get::<_, String>(7)?,
            r.get::<_, Option<i64>>(8)?,
        ))
    })?;
    for a in alerts {
        let (id, rule, object, quantity, level, raised, v, unit, resolved) = a?;
        let what = format!("{object} / {rule}");
        if (from_ms..to_ms).contains(&raised) {
            out.push((
                raised,
                [
                    local(raised, tz),
                    "raised".into(),
                    what.clone(),
                    level.clone(),
                    format!("alert #{id}: {quantity} {}", value(v, &unit)),
                ],
            ));
        }
        if let Some(t) = resolved.filter(|t| (from_ms..to_ms).contains(t)) {
            out.push((
                t,
                [
                    local(t, tz),
                    "resolved".into(),
                    what,
                    level,
                    format!("alert #{id}"),
                ],
            ));
        }
    }
    let mut st = conn.prepare(
        "SELECT k.t_ms, k.who, k.note, a.id, a.rule, a.object, a.level
         FROM acks k JOIN alerts a ON a.id = k.alert
         WHERE a.site = ?1 AND k.t_ms >= ?2 AND k.t_ms < ?3",
    )?;
    let acks = st.query_map(params![site, from_ms, to_ms], |r| {
        Ok((
            r.get::<_, i64>(0)?,
            r.get::<_, String>(1)?,
            r.get::<_, Option<String>>(2)?,
            r.get::<_, i64>(3)?,
            r.get::<_, String>(4)?,
            r.get::<_, String>(5)?,
            r.get::<_, String>(6)?,
        ))
    })?;
    for k in acks {
        let (t, who, note, id, rule, object, level) = k?;
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
    let mut st = conn.prepare(
        "SELECT rule, object, until_ms, reason, who, created_ms FROM silences
         WHERE created_ms < ?2 AND until_ms > ?1",
    )?;
    let silences = st.query_map(params![from_ms, to_ms], |r| {
        Ok((
            r.get::<_, Option<String>>(0)?,
            r.get::<_, Option<String>>(1)?,
            r.get::<_, i64>(2)?,
            r.get::<_, String>(3)?,
            r.get::<_, String>(4)?,
            r.get::<_, i64>(5)?,
        ))
    })?;
    for s in silences {
        let (rule, object, until, reason, who, created) = s?;
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
