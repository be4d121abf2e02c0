//! A reading stamped ahead of real time (inside `max_future_s`) must not suppress the alerts
//! and derived values of the real readings that follow it. The rule: a reading stamped more
//! than `clock_skew_s` after its arrival is stored flagged `time_ahead` and kept out of every
//! clock-driven state (rules, health, rates, completeness, derived inputs).
//!
//! The scenario is a river gauge read hourly whose logger sends one reading 90 minutes ahead
//! (a clock briefly set to the wrong zone), with `max_future_s` raised to 2 h so that it is
//! accepted; the river then rises past the rule's "watch" bound (95.0 m, two readings).

mod common;

use std::sync::Arc;

use chrono::{DateTime, Duration, Utc};
use seepd::alerts::{observations, Evaluator};
use seepd::domain::rules::Action;
use seepd::engine::{Engine, Message, Outcome};
use seepd::quality::Flags;

/// The river gauge reports depth above its datum (90.0 m): depth 4.0 m = elevation 94.0 m.
fn reading(
    engine: &mut Engine,
    stamped: DateTime<Utc>,
    arrival: DateTime<Utc>,
    depth: f64,
) -> Outcome {
    engine.process(&Message {
        topic: "demo/AB-LOG1/json".into(),
        payload: common::river_json(stamped.timestamp(), depth).into_bytes(),
        arrival,
        redelivered: false,
    })
}

#[test]
fn a_reading_stamped_ahead_does_not_hide_the_readings_after_it() {
    let dir = tempfile::tempdir().unwrap();
    let cfg_dir = common::example_config(dir.path(), 1883);
    common::edit(
        &cfg_dir,
        "seepd.toml",
        &[("max_future_s = 600", "max_future_s = 7200")],
    );
    let cfg = Arc::new(seepd::config::load_dir(&cfg_dir).unwrap());
    let mut engine = Engine::new(Arc::clone(&cfg));
    let mut rules = Evaluator::new(Arc::clone(&cfg));
    let h0 = DateTime::parse_from_rfc3339("2026-03-01T00:00:00Z")
        .unwrap()
        .with_timezone(&Utc);
    let hour = Duration::hours(1);
    // (hours after h0, minutes the stamp is ahead of arrival, depth m)
    let timeline = [
        (0, 0, 4.0),
        (1, 90, 4.2),
        (2, 0, 6.0),
        (3, 0, 7.0),
        (4, 0, 7.1),
    ];
    let mut raised_at = None;
    let mut outcomes = Vec::new();
    for (h, ahead_min, depth) in timeline {
        let arrival = h0 + hour * h;
        let out = reading(
            &mut engine,
            arrival + Duration::minutes(ahead_min),
            arrival,
            depth,
        );
        assert!(out.quarantined.is_empty(), "{:?}", out.quarantined);
        rules.evaluate(&observations(&out), arrival.timestamp_millis());
        let raise = rules
            .take_transitions()
            .into_iter()
            .any(|t| matches!(t.action, Action::Raise { .. }) && t.rule == "ash-bend-river-stage");
        if raise {
            raised_at = Some(h);
        }
        outcomes.push(out);
    }
    // The early reading is stored, flagged, and derived nothing.
    let early = &outcomes[1];
    assert_eq!(early.readings.len(), 1);
    assert!(early.readings[0].flags.contains(Flags::TIME_AHEAD));
    assert!(early.derived.is_empty(), "{:?}", early.derived);
    // The real readings after it: 96.0 m then 97.0 m are two readings beyond 95.0 m — the
    // rule raises at hour 3, as it would without the early reading.
    assert_eq!(
        raised_at,
        Some(3),
        "the rule was held up by the early reading"
    );
    for (h, out) in outcomes.iter().enumerate().skip(2) {
        assert!(
            !out.readings[0].flags.contains(Flags::TIME_AHEAD),
            "hour {h}"
        );
        // Derived values of the readings that follow: completeness is reported, and the
        // blanket-theory reach fed by the river is computed at the reading's own time.
        let t_ms = out.readings[0].t_ms;
        let has = |q: &str| {
            out.derived
                .iter()
                .any(|d| d.quantity == q && d.t_ms == t_ms)
        };
        assert!(has("completeness_24h"), "hour {h}: {:?}", out.derived);
        assert!(has("net_head"), "hour {h}: {:?}", out.derived);
    }
}

#[test]
fn a_small_clock_skew_is_not_flagged_and_clock_skew_s_is_bounded() {
    let dir = tempfile::tempdir().unwrap();
    let cfg_dir = common::example_config(dir.path(), 1883);
    let cfg = Arc::new(seepd::config::load_dir(&cfg_dir).unwrap());
    let mut engine = Engine::new(cfg);
    let now = Utc::now();
    let out = reading(&mut engine, now + Duration::seconds(30), now, 4.0);
    assert!(!out.readings[0].flags.contains(Flags::TIME_AHEAD));
    let out = reading(
        &mut engine,
        now + hour() + Duration::seconds(120),
        now + hour(),
        4.0,
    );
    assert!(out.readings[0].flags.contains(Flags::TIME_AHEAD));
    // clock_skew_s beyond max_future_s is a configuration problem.
    common::edit(
        &cfg_dir,
        "seepd.toml",
        &[(
            "max_future_s = 600",
            "max_future_s = 600\nclock_skew_s = 900",
        )],
    );
    let problems = seepd::config::load_dir(&cfg_dir).unwrap_err();
    assert!(problems.to_string().contains("clock_skew_s"), "{problems}");
}

fn hour() -> Duration {
    Duration::hours(1)
}
