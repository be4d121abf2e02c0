//! Simulated loggers for the invented demo site: the shared flood scenarios of
//! `crate::scenario` (a levee flood and a dam pool rise and drawdown, physically consistent, no
//! injected sensor faults) formatted as each logger publishes them — JSON with several channels
//! for the levee logger, CSV for its standpipe channel, SenML for the dam logger — plus a few
//! malformed messages. All numbers here are invented.

use std::collections::BTreeMap;

use chrono::{DateTime, SecondsFormat, Utc};

use crate::config::Config;
use crate::scenario::raw::{readings, RawReading};
use crate::scenario::{dam_pool, levee_flood_with};

/// Length of the demo in simulated days.
pub const SCENARIO_DAYS: u32 = 30;

/// The raw readings of every simulated hour.
pub struct Sim {
    by_hour: BTreeMap<u32, Vec<RawReading>>,
}

impl Sim {
    /// The demo's scenarios from `start_ms` for `SCENARIO_DAYS` days, on the example
    /// configuration `cfg` (the raw values invert its calibrations).
    ///
    /// # Errors
    /// An instrument of the scenario missing from `cfg`, or a value its range cannot express.
    pub fn new(cfg: &Config, start_ms: i64) -> anyhow::Result<Sim> {
        let hours = SCENARIO_DAYS * 24;
        let mut levee = levee_flood_with(cfg, start_ms, Vec::new());
        levee.hours = hours;
        let mut dam = dam_pool(start_ms);
        dam.faults.clear();
        dam.hours = hours;
        let mut by_hour: BTreeMap<u32, Vec<RawReading>> = BTreeMap::new();
        for s in [levee, dam] {
            for r in readings(&s, cfg).map_err(|e| anyhow::anyhow!("demo scenario: {e}"))? {
                by_hour.entry(r.hour).or_default().push(r);
            }
        }
        Ok(Sim { by_hour })
    }

    /// The messages every logger publishes at simulated `hour` (time `t`), as (topic, payload).
    pub fn messages(&self, hour: u32, t: DateTime<Utc>) -> Vec<(String, Vec<u8>)> {
        let ts = t.to_rfc3339_opts(SecondsFormat::Secs, true);
        let empty = Vec::new();
        let rs = self.by_hour.get(&hour).unwrap_or(&empty);
        let raw = |id: &str| rs.iter().find(|r| r.instrument == id);
        let mut out = Vec::new();
        // Levee logger: JSON with several channels per message.
        let channel = |id: &str, ch: &str| {
            raw(id).map(|r| {
                let mut v = serde_json::json!({"channel": ch, "value": r.raw});
                if let Some(t) = r.temperature_c {
                    v["temperature"] = serde_json::json!(t);
                }
                v
            })
        };
        let levee: Vec<serde_json::Value> = [
            ("AB-RIVER", "river"),
            ("AB-BARO", "baro"),
            ("AB-PZ-1A", "1"),
            ("AB-PZ-1B", "2"),
            ("AB-PZ-2A", "3"),
            ("AB-PZ-2B", "4"),
        ]
        .iter()
        .filter_map(|(id, ch)| channel(id, ch))
        .collect();
        out.push((
            "demo/AB-LOG1/json".to_string(),
            serde_json::json!({"time": ts, "readings": levee})
                .to_string()
                .into_bytes(),
        ));
        // The standpipe is read by the same logger's CSV channel.
        if let Some(r) = raw("AB-SP-3") {
            out.push((
                "demo/AB-LOG1/csv".to_string(),
                format!("{ts},5,{}\n", r.raw).into_bytes(),
            ));
        }
        // Dam logger: SenML pack with base name and base time.
        let mut senml = Vec::new();
        for (k, (id, name, unit)) in [
            ("TH-POOL", "POOL", Some("m")),
            ("TH-TAIL", "TAIL", Some("m")),
            ("TH-PZ-1", "PZ-1", None),
            ("TH-PZ-2", "PZ-2", None),
            ("TH-PZ-3", "PZ-3", Some("m")),
        ]
        .iter()
        .enumerate()
        {
            let Some(r) = raw(id) else { continue };
            let mut rec = serde_json::json!({"n": name, "v": r.raw});
            if let Some(u) = unit {
                rec["u"] = serde_json::json!(u);
            }
            if k == 0 || senml.is_empty() {
                rec["bn"] = serde_json::json!("TH-");
                rec["bt"] = serde_json::json!(t.timestamp());
            }
            senml.push(rec);
        }
        out.push((
            "demo/TH-LOG1/senml".to_string(),
            serde_json::Value::Array(senml).to_string().into_bytes(),
        ));
        // Now and then, the kinds of bad input a real network produces.
        match hour % 53 {
            7 => out.push((
                "demo/AB-LOG1/json".into(),
                b"{\"time\": \"2026-01-01T00:00:00Z\", \"readings\": [".to_vec(),
            )),
            19 => out.push((
                "demo/AB-LOG1/json".into(),
                format!("{{\"time\":\"{ts}\",\"channel\":\"9\",\"value\":1.0}}").into_bytes(),
            )),
            31 => out.push((
                "demo/AB-LOG1/csv".into(),
                format!("{ts},5,NaN\n").into_bytes(),
            )),
            43 => out.push((
                "demo/AB-LOG1/json".into(),
                format!("{{\"time\":\"{ts}\",\"channel\":\"3\",\"value\":27.5}}").into_bytes(),
            )),
            _ => {}
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::{Engine, Message};
    use std::sync::Arc;

    /// The demo's first two minutes at the default pace (6 s a simulated day: 20 days) through
    /// the real engine and rules: plausible heads (no tip above the water driving it; the toe
    /// piezometer below the river), no health flag, and no alert but the genuine ones of the
    /// simulated flood — no no-data alert for instruments that report, no escalation or
    /// reminder with a raise.
    #[test]
    fn the_first_two_minutes_show_plausible_heads_and_no_false_alert() {
        let dir = tempfile::tempdir().unwrap();
        let cfg = Arc::new(crate::demo::example_config(dir.path()).unwrap());
        let now = Utc::now();
        let start = now - chrono::Duration::days(i64::from(SCENARIO_DAYS));
        let sim = Sim::new(&cfg, start.timestamp_millis()).unwrap();
        let mut engine = Engine::new(Arc::clone(&cfg));
        let mut ev = crate::alerts::Evaluator::new(Arc::clone(&cfg));
        let mut actions = Vec::new();
        let mut last: BTreeMap<String, f64> = BTreeMap::new();
        // 0.25 s of wall time per simulated hour.
        for hour in 0..20 * 24 {
            let t = start + chrono::Duration::hours(i64::from(hour));
            let wall_ms = now.timestamp_millis() + i64::from(hour) * 250;
            for (topic, payload) in sim.messages(hour, t) {
                let o = engine.process(&Message {
                    topic,
                    payload,
                    arrival: Utc::now(),
                    redelivered: false,
                });
                for r in &o.readings {
                    assert!(
                        r.flags.is_empty() || r.flags == crate::quality::Flags::TIME_FROM_ARRIVAL,
                        "{} hour {hour} flagged {:?}",
                        r.instrument,
                        r.flags.names()
                    );
                    if let Some(h) = r.total_head_m {
                        last.insert(r.instrument.clone(), h);
                    }
                }
                let obs = ev.observations(&o);
                ev.evaluate(&obs, wall_ms);
                actions.extend(
                    ev.take_transitions()
                        .into_iter()
                        .map(|x| (hour, x.rule, x.action.name())),
                );
            }
            let river = last.get("AB-RIVER").copied().unwrap_or(f64::MAX);
            for id in ["AB-PZ-1B", "AB-PZ-2B"] {
                if let Some(h) = last.get(id) {
                    assert!(*h < river, "hour {hour}: {id} {h} above the river {river}");
                }
            }
            // A shallow tip in the top blanket reads no more than the deep head under it (or
            // its own elevation when dry), and above landside ground only with the river high.
            for (id, deep, tip) in [
                ("AB-PZ-1A", "AB-PZ-1B", 95.0),
                ("AB-PZ-2A", "AB-PZ-2B", 95.2),
            ] {
                if let (Some(h), Some(d)) = (last.get(id), last.get(deep)) {
                    assert!(
                        *h <= d.max(tip) + 0.02,
                        "hour {hour}: {id} {h} above {deep} {d}"
                    );
                    assert!(
                        *h <= 96.0 || river > 97.0,
                        "hour {hour}: {id} {h}, river {river}"
                    );
                }
            }
        }
        assert!(
            actions
                .iter()
                .all(|(_, rule, action)| !rule.contains("silent")
                    && *action != "remind"
                    && *action != "notify_escalation"
                    && !rule.ends_with(":unavailable")),
            "{actions:?}"
        );
        // The flood raises the river stage and toe alerts for real.
        assert!(actions
            .iter()
            .any(|(_, r, a)| r == "ash-bend-river-stage" && *a == "raise"));
    }
}
