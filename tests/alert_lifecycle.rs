//! Alert lifecycle rows that need the evaluator and the store (the pure rows are in
//! `domain::rules` tests): silences and the most severe level, the history of events, alerts
//! whose rule was removed, and the contact-level check of the configuration.

#[path = "scenarios/mod.rs"]
mod scenarios;

use std::sync::Arc;

use scenarios::*;
use seepd::alerts::{Evaluator, Observation};
use seepd::store::{SilenceRow, Store};

fn river(t_h: i64, value: f64) -> Observation {
    Observation {
        object: "AB-RIVER".into(),
        quantity: "total_head".into(),
        t_ms: START_MS + t_h * HOUR_MS,
        value: Some(value),
        unit: "m".into(),
        reason: None,
    }
}

/// Feed river stages hour by hour (evaluation clock = reading time) and commit each evaluation.
fn feed(e: &mut Evaluator, store: &mut Store, stages: &[(i64, f64)]) {
    for &(h, v) in stages {
        let w = e.evaluate(&[river(h, v)], START_MS + h * HOUR_MS);
        store.write_alerts(&w).unwrap();
    }
}

fn notices(store: &Store) -> Vec<(String, String, String)> {
    let mut st = store
        .conn()
        .prepare("SELECT kind, level, status FROM notices ORDER BY id")
        .unwrap();
    st.query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .unwrap()
        .map(Result::unwrap)
        .collect()
}

/// Finding 3: a silence on the river rule holds back watch and concern, records each suppressed
/// notice as an event, and still lets the escalation to the most severe level through; with
/// `--all-levels` it holds that back too (still recorded).
#[test]
fn a_silence_never_swallows_the_most_severe_level_unless_it_says_so() {
    for all_levels in [false, true] {
        let ex = example(|_, t| t);
        let cfg = Arc::new(ex.cfg.clone());
        let mut store = Store::open(&ex.dir.path().join("a.sqlite")).unwrap();
        let mut e = Evaluator::load(Arc::clone(&cfg), &store).unwrap();
        e.set_silences(vec![SilenceRow {
            id: 1,
            rule: Some("ash-bend-river-stage".into()),
            object: None,
            until_ms: START_MS + 100 * HOUR_MS,
            reason: "gauge maintenance".into(),
            who: "tech".into(),
            all_levels,
        }]);
        feed(
            &mut e,
            &mut store,
            &[
                (0, 95.5),
                (1, 95.6),
                (2, 97.0),
                (3, 97.1),
                (4, 98.0),
                (5, 98.1),
            ],
        );
        let n = notices(&store);
        let raise = n.iter().find(|x| x.0 == "raise").unwrap();
        assert_eq!(raise.2, "silenced", "{n:?}");
        let to_act = n
            .iter()
            .find(|x| x.0 == "escalate" && x.1 == "act")
            .unwrap();
        assert_eq!(
            to_act.2 == "silenced",
            all_levels,
            "all_levels {all_levels}: {n:?}"
        );
        let silenced: i64 = store
            .conn()
            .query_row(
                "SELECT count(*) FROM alert_events WHERE kind = 'silenced'",
                [],
                |r| r.get(0),
            )
            .unwrap();
        let suppressed = n.iter().filter(|x| x.2 == "silenced").count() as i64;
        assert_eq!(silenced, suppressed, "every suppressed notice is recorded");
    }
}

/// Finding 4: the alert's history keeps each step with its own level and value, in order; an
/// acknowledgement is recorded at the level it was given at.
#[test]
fn history_keeps_each_step_with_its_level_and_value() {
    let ex = example(|_, t| t);
    let cfg = Arc::new(ex.cfg.clone());
    let mut store = Store::open(&cfg.service.database).unwrap();
    let mut e = Evaluator::load(Arc::clone(&cfg), &store).unwrap();
    feed(&mut e, &mut store, &[(0, 95.5), (1, 95.6)]);
    let alert: i64 = store
        .conn()
        .query_row("SELECT id FROM alerts", [], |r| r.get(0))
        .unwrap();
    store
        .acknowledge(alert, "on-call", None, START_MS + HOUR_MS + 60_000)
        .unwrap();
    let acks = store.unapplied_acks().unwrap();
    e.apply_acks(&acks);
    feed(&mut e, &mut store, &[(2, 97.0), (3, 97.1), (4, 95.6)]);
    let h: Vec<(String, String, Option<f64>)> = store
        .alert_events(alert)
        .unwrap()
        .into_iter()
        .map(|x| (x.kind, x.level, x.value))
        .collect();
    assert_eq!(h[0], ("raised".into(), "watch".into(), Some(95.6)));
    assert_eq!(h[1].0, "acknowledged");
    assert_eq!(h[1].1, "watch");
    assert_eq!(h[2], ("escalated".into(), "concern".into(), Some(97.1)));
    // `seepd alerts` lists the history under the alert, in the same order.
    let text = seepd::alerts::commands::report(&cfg, chrono::Utc::now()).unwrap();
    let raised = text.find("raised").unwrap();
    let escalated = text.find("escalated").unwrap();
    assert!(raised < escalated, "{text}");
    assert!(text.contains("now concern"), "{text}");
}

/// A catch-up: readings stamped long ago arrive a second apart on a much later wall clock
/// (a logger's backlog after an outage). The all-clear sits in the readings' timeline beside
/// the raise — when the 2 h keep-active time had passed in reading time — not at the wall time
/// it was evaluated, so the alert's history and the report read in order.
#[test]
fn a_caught_up_all_clear_is_stamped_in_the_readings_timeline() {
    let ex = example(|_, t| t);
    let cfg = Arc::new(ex.cfg.clone());
    let mut store = Store::open(&cfg.service.database).unwrap();
    let mut e = Evaluator::load(Arc::clone(&cfg), &store).unwrap();
    let wall = START_MS + 30 * 24 * HOUR_MS;
    // Watch is above 95.0 m, two readings to raise; cleared at 94.0 m (below the 0.2 m
    // deadband), kept active 2 h.
    let stages = [
        (0, 95.5),
        (1, 95.6),
        (2, 94.0),
        (3, 94.0),
        (4, 94.0),
        (5, 94.0),
    ];
    for (k, &(h, v)) in stages.iter().enumerate() {
        let w = e.evaluate(&[river(h, v)], wall + k as i64 * 1000);
        store.write_alerts(&w).unwrap();
    }
    let (alert, raised, resolved): (i64, i64, Option<i64>) = store
        .conn()
        .query_row("SELECT id, raised_ms, resolved_ms FROM alerts", [], |r| {
            Ok((r.get(0)?, r.get(1)?, r.get(2)?))
        })
        .unwrap();
    assert_eq!(raised, START_MS + HOUR_MS, "raised at the second reading");
    assert_eq!(
        resolved,
        Some(START_MS + 4 * HOUR_MS),
        "resolved when 2 h inside had passed in reading time"
    );
    let h: Vec<(String, i64)> = store
        .alert_events(alert)
        .unwrap()
        .into_iter()
        .map(|x| (x.kind, x.t_ms))
        .collect();
    assert_eq!(
        h,
        vec![
            ("raised".into(), START_MS + HOUR_MS),
            ("resolved".into(), START_MS + 4 * HOUR_MS)
        ]
    );
}

/// Issue 11, item 6: an alert whose rule was removed from the configuration is closed at the
/// next start, with an event saying why and a message to the contacts; its rule state goes.
#[test]
fn removing_a_rule_closes_its_active_alert_with_a_notice() {
    let ex = example(|_, t| t);
    let db = ex.dir.path().join("a.sqlite");
    let mut store = Store::open(&db).unwrap();
    let mut e = Evaluator::load(Arc::new(ex.cfg.clone()), &store).unwrap();
    feed(&mut e, &mut store, &[(0, 95.5), (1, 95.6)]);
    drop(e);
    // The same site without the river rule.
    let edited = example(|name, t| {
        if name != "levee-ash-bend.toml" {
            return t;
        }
        let start = t.find("# River stage (total_head").unwrap();
        let end = t.find("# Toe check (a derived object)").unwrap();
        format!("{}{}", &t[..start], &t[end..])
    });
    assert!(!edited
        .cfg
        .alerting
        .rules
        .iter()
        .any(|r| r.id == "ash-bend-river-stage"));
    let mut e = Evaluator::load(Arc::new(edited.cfg.clone()), &store).unwrap();
    let w = e.evaluate(&[], START_MS + 2 * HOUR_MS);
    store.write_alerts(&w).unwrap();
    let open: i64 = store
        .conn()
        .query_row(
            "SELECT count(*) FROM alerts WHERE resolved_ms IS NULL",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(open, 0);
    let (kind, detail): (String, String) = store
        .conn()
        .query_row(
            "SELECT kind, detail FROM alert_events ORDER BY id DESC LIMIT 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .unwrap();
    assert_eq!(kind, "closed");
    assert!(
        detail.contains("no longer in the configuration"),
        "{detail}"
    );
    let (subject, to): (String, String) = store
        .conn()
        .query_row(
            "SELECT subject, recipients FROM outbox WHERE subject LIKE '%Closed%'",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .unwrap();
    assert!(
        subject.contains("Closed") && subject.contains("ash-bend-river-stage"),
        "{subject}"
    );
    assert!(to.contains("levee-oncall@example.invalid"), "{to}");
    let empty: i64 = store
        .conn()
        .query_row(
            "SELECT count(*) FROM outbox WHERE subject = '[seepd] '",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(empty, 0, "no message for a notice of the removed rule");
    let states: i64 = store
        .conn()
        .query_row(
            "SELECT count(*) FROM rule_states WHERE rule = 'ash-bend-river-stage'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(states, 0);
}

/// Finding 5: a contact list naming a level no rule of its site defines is a configuration
/// problem at its file and line; a rule level no list receives is a warning.
#[test]
fn contact_levels_must_be_levels_of_the_site_rules() {
    let dir = tempfile::tempdir().unwrap();
    for (name, text) in seepd::scenario::EXAMPLE_CONFIG {
        let text = if name == "levee-ash-bend.toml" {
            text.replace(
                "levels = [\"watch\", \"concern\", \"act\"]",
                "levels = [\"watch\", \"concern\", \"alarm\"]",
            )
        } else {
            text.to_string()
        };
        std::fs::write(dir.path().join(name), text).unwrap();
    }
    let problems = seepd::config::load_dir(dir.path()).unwrap_err().to_string();
    assert!(
        problems.contains("levee-ash-bend.toml:")
            && problems.contains("level \"alarm\" is not a level of any rule of this site"),
        "{problems}"
    );
    // Without "act" on any list (the escalation list keeps concern only): a warning.
    let ex = example(|name, t| {
        if name == "levee-ash-bend.toml" {
            t.replace(
                "levels = [\"watch\", \"concern\", \"act\"]",
                "levels = [\"watch\", \"concern\"]",
            )
            .replace("levels = [\"concern\", \"act\"]", "levels = [\"concern\"]")
        } else {
            t
        }
    });
    let warnings = ex.cfg.alerting.warnings();
    assert!(
        warnings
            .iter()
            .any(|w| w.contains("levee-ash-bend.toml:") && w.contains("level \"act\"")),
        "{warnings:?}"
    );
}
