//! State-machine checks: hysteresis against flapping, persistence, keep-active, escalation of
//! levels and to the second list, reminders, acknowledgement, no-data.

use super::*;

const MIN: i64 = 60_000;
const HOUR: i64 = 60 * MIN;
const DAY: i64 = 24 * HOUR;

fn level(name: &str, direction: Direction, bound: f64) -> LevelSpec {
    LevelSpec {
        name: name.into(),
        direction,
        bound,
        deadband: 0.0,
        persist_readings: 1,
        persist_ms: 0,
        keep_active_ms: 0,
        response: format!("respond to {name}"),
    }
}

/// Factor of safety below 2.0 / 1.6 / 1.3.
fn fs_spec() -> Spec {
    Spec {
        check: Check::Threshold,
        levels: vec![
            level("watch", Direction::Below, 2.0),
            level("concern", Direction::Below, 1.6),
            level("act", Direction::Below, 1.3),
        ],
        remind_every_ms: None,
        escalate_after_ms: None,
    }
}

/// Feed (t, value) pairs; return every action with its time.
fn run(spec: &Spec, s: &mut State, points: &[(i64, f64)]) -> Vec<(i64, Action)> {
    let mut out = Vec::new();
    for &(t, v) in points {
        let (next, actions) = step(
            spec,
            s,
            Some(Obs {
                t_ms: t,
                value: Some(v),
            }),
            t,
        );
        *s = next;
        out.extend(actions.into_iter().map(|a| (t, a)));
    }
    out
}

fn tick(spec: &Spec, s: &mut State, t: i64) -> Vec<Action> {
    let (next, actions) = step(spec, s, None, t);
    *s = next;
    actions
}

#[test]
fn flapping_for_a_day_gives_one_raise_and_one_resolve_with_hysteresis() {
    // Head above 100.0 m with a 0.3 m deadband; the value flaps ±0.1 m around the bound every
    // 10 minutes for a day, then falls well below.
    let mut spec = fs_spec();
    spec.levels = vec![LevelSpec {
        deadband: 0.3,
        ..level("watch", Direction::Above, 100.0)
    }];
    let mut points: Vec<(i64, f64)> = (0..144)
        .map(|i| (i * 10 * MIN, if i % 2 == 0 { 100.1 } else { 99.9 }))
        .collect();
    points.push((DAY + HOUR, 99.5));
    let mut s = State::default();
    let actions = run(&spec, &mut s, &points);
    let names: Vec<&str> = actions.iter().map(|(_, a)| a.name()).collect();
    assert_eq!(names, ["raise", "resolve"], "{actions:?}");
    assert_eq!(actions[1].0, DAY + HOUR);

    // Without the deadband the same series raises and resolves on every swing.
    spec.levels[0].deadband = 0.0;
    let mut s = State::default();
    let raises = run(&spec, &mut s, &points)
        .iter()
        .filter(|(_, a)| matches!(a, Action::Raise { .. }))
        .count();
    assert_eq!(raises, 72);
}

#[test]
fn persistence_by_readings_and_by_duration() {
    let mut spec = fs_spec();
    spec.levels[0].persist_readings = 3;
    let mut s = State::default();
    // Two readings below 2.0, one back above: no raise; then three in a row: raise on the third.
    let a = run(
        &spec,
        &mut s,
        &[(0, 1.9), (HOUR, 1.9), (2 * HOUR, 2.1), (3 * HOUR, 1.9)],
    );
    assert!(a.is_empty(), "{a:?}");
    assert_eq!(
        s.phase,
        Phase::Pending {
            level: 0,
            since_ms: 3 * HOUR
        }
    );
    let a = run(&spec, &mut s, &[(4 * HOUR, 1.9), (5 * HOUR, 1.95)]);
    assert_eq!(a, [(5 * HOUR, Action::Raise { level: 0 })]);

    // Duration: below 2.0 for 6 h; a tick raises once the time has passed, no reading needed.
    let mut spec = fs_spec();
    spec.levels[0].persist_ms = 6 * HOUR;
    let mut s = State::default();
    assert!(run(&spec, &mut s, &[(0, 1.9)]).is_empty());
    assert!(tick(&spec, &mut s, 6 * HOUR - 1).is_empty());
    assert_eq!(tick(&spec, &mut s, 6 * HOUR), [Action::Raise { level: 0 }]);
}

#[test]
fn keep_active_holds_the_alert_after_the_value_returns() {
    let mut spec = fs_spec();
    spec.levels[0].keep_active_ms = 2 * HOUR;
    let mut s = State::default();
    assert_eq!(run(&spec, &mut s, &[(0, 1.9)]).len(), 1);
    // Back inside at 1 h: clearing, not resolved; back out at 2 h cancels the clearing.
    assert!(run(&spec, &mut s, &[(HOUR, 2.1), (2 * HOUR, 1.95)]).is_empty());
    assert_eq!(s.phase, Phase::Active { level: 0 });
    assert!(run(&spec, &mut s, &[(3 * HOUR, 2.2)]).is_empty());
    assert!(tick(&spec, &mut s, 5 * HOUR - 1).is_empty());
    assert_eq!(tick(&spec, &mut s, 5 * HOUR), [Action::Resolve { from: 0 }]);
    assert_eq!(s.phase, Phase::Normal);
}

#[test]
fn levels_escalate_and_de_escalate_in_order() {
    let mut spec = fs_spec();
    for l in &mut spec.levels {
        l.deadband = 0.05;
    }
    let mut s = State::default();
    let a = run(
        &spec,
        &mut s,
        &[
            (0, 1.9),
            (HOUR, 1.5),
            (2 * HOUR, 1.2),
            (3 * HOUR, 1.33), // inside the act deadband: still act
            (4 * HOUR, 1.4),  // act clears; concern holds
            (5 * HOUR, 2.02), // inside the watch deadband: watch holds
            (6 * HOUR, 2.1),  // all clear
        ],
    );
    let got: Vec<Action> = a.into_iter().map(|(_, a)| a).collect();
    assert_eq!(
        got,
        [
            Action::Raise { level: 0 },
            Action::Escalate { from: 0, to: 1 },
            Action::Escalate { from: 1, to: 2 },
            Action::DeEscalate { from: 2, to: 1 },
            Action::DeEscalate { from: 1, to: 0 },
            Action::Resolve { from: 0 },
        ]
    );
    // A jump straight to the most severe level raises at that level.
    let mut s = State::default();
    assert_eq!(
        run(&spec, &mut s, &[(0, 1.0)]),
        [(0, Action::Raise { level: 2 })]
    );
}

#[test]
fn escalation_to_the_second_list_unless_acknowledged() {
    let mut spec = fs_spec();
    spec.escalate_after_ms = Some(30 * MIN);
    let mut s = State::default();
    run(&spec, &mut s, &[(0, 1.5)]);
    assert!(tick(&spec, &mut s, 29 * MIN).is_empty());
    assert_eq!(
        tick(&spec, &mut s, 30 * MIN),
        [Action::NotifyEscalation { level: 1 }]
    );
    assert!(tick(&spec, &mut s, 10 * HOUR).is_empty(), "only once");

    // Acknowledged in time: no escalation.
    let mut s = State::default();
    run(&spec, &mut s, &[(0, 1.5)]);
    s = acknowledge(&s);
    assert!(tick(&spec, &mut s, HOUR).is_empty());
}

#[test]
fn reminders_over_ten_days_are_ceil_of_ten_days_over_the_interval() {
    // [derived] notices (raise + reminders) in [0, 10 d) = ceil(10 d / R).
    for repeat in [6 * HOUR, 7 * HOUR, 25 * HOUR, 10 * DAY] {
        let mut spec = fs_spec();
        spec.remind_every_ms = Some(repeat);
        let mut s = State::default();
        let mut notices = run(&spec, &mut s, &[(0, 1.9)]).len();
        let mut t = MIN;
        while t < 10 * DAY {
            notices += tick(&spec, &mut s, t)
                .iter()
                .filter(|a| matches!(a, Action::Remind { .. }))
                .count();
            t += MIN;
        }
        let expected = (10 * DAY + repeat - 1) / repeat;
        assert_eq!(notices as i64, expected, "repeat {repeat} ms");
    }
}

#[test]
fn acknowledged_alerts_get_no_reminders_until_they_escalate() {
    let mut spec = fs_spec();
    spec.remind_every_ms = Some(HOUR);
    let mut s = State::default();
    run(&spec, &mut s, &[(0, 1.9)]);
    s = acknowledge(&s);
    assert!((1..10).all(|h| tick(&spec, &mut s, h * HOUR).is_empty()));
    // A more severe level re-arms reminders.
    run(&spec, &mut s, &[(10 * HOUR, 1.5)]);
    assert_eq!(
        tick(&spec, &mut s, 11 * HOUR),
        [Action::Remind { level: 1 }]
    );
}

#[test]
fn no_value_and_old_observations_change_nothing() {
    let spec = fs_spec();
    let mut s = State::default();
    run(&spec, &mut s, &[(HOUR, 1.9)]);
    let before = s.clone();
    let (after, a) = step(
        &spec,
        &s,
        Some(Obs {
            t_ms: 2 * HOUR,
            value: None,
        }),
        2 * HOUR,
    );
    assert!(a.is_empty());
    assert_eq!(after.phase, before.phase);
    // An older reading (out of order) does not resolve the alert.
    let a = run(&spec, &mut s, &[(0, 2.5)]);
    assert!(a.is_empty());
    assert_eq!(s.phase, Phase::Active { level: 0 });
}

#[test]
fn no_data_rule_raises_on_silence_and_resolves_on_the_next_reading() {
    let spec = Spec {
        check: Check::NoData,
        levels: vec![level("watch", Direction::Above, 3.0 * 3600.0)],
        remind_every_ms: None,
        escalate_after_ms: None,
    };
    let mut s = State::default();
    assert!(tick(&spec, &mut s, 0).is_empty());
    let obs = |t| {
        Some(Obs {
            t_ms: t,
            value: Some(1.0),
        })
    };
    let (next, a) = step(&spec, &s, obs(HOUR), HOUR);
    s = next;
    assert!(a.is_empty());
    assert!(
        tick(&spec, &mut s, 4 * HOUR).is_empty(),
        "exactly 3 h is not more than 3 h"
    );
    assert_eq!(
        tick(&spec, &mut s, 4 * HOUR + 1),
        [Action::Raise { level: 0 }]
    );
    let (_, a) = step(&spec, &s, obs(5 * HOUR), 5 * HOUR);
    assert_eq!(a, [Action::Resolve { from: 0 }]);
}

#[test]
fn state_round_trips_through_json() {
    let spec = fs_spec();
    let mut s = State::default();
    run(&spec, &mut s, &[(0, 1.5)]);
    let text = serde_json::to_string(&s).unwrap_or_default();
    let back: State = serde_json::from_str(&text).unwrap_or_default();
    assert_eq!(back, s);
}

// ---- The lifecycle table of README "Alerts / Lifecycle", one test per row. ----

/// Hourly FS readings, persistence 2, escalation after 1 h, reminders every 4 h.
fn hourly_spec() -> Spec {
    let mut spec = fs_spec();
    for l in &mut spec.levels {
        l.persist_readings = 2;
        l.deadband = 0.05;
    }
    spec.escalate_after_ms = Some(HOUR);
    spec.remind_every_ms = Some(4 * HOUR);
    spec
}

/// One observation at `t`, evaluated at `now` (the evaluation clock), with its actions.
fn at(spec: &Spec, s: &mut State, t: i64, now: i64, v: f64) -> Vec<Action> {
    let (next, a) = step(
        spec,
        s,
        Some(Obs {
            t_ms: t,
            value: Some(v),
        }),
        now,
    );
    *s = next;
    a
}

#[test]
fn row_normal_to_pending_to_normal() {
    let spec = hourly_spec();
    let mut s = State::default();
    assert!(at(&spec, &mut s, 0, 0, 1.9).is_empty());
    assert_eq!(
        s.phase,
        Phase::Pending {
            level: 0,
            since_ms: 0
        }
    );
    assert!(at(&spec, &mut s, HOUR, HOUR, 2.1).is_empty());
    assert_eq!(s.phase, Phase::Normal);
}

#[test]
fn row_pending_to_active_raises_and_no_timer_fires_with_the_raise() {
    // Finding 2: hourly data, persist 2, escalate after 1 h: the raise comes alone, the
    // escalation notice one hour of evaluation time later, never at the raise.
    let spec = hourly_spec();
    let mut s = State::default();
    at(&spec, &mut s, 0, 0, 1.9);
    assert_eq!(
        at(&spec, &mut s, HOUR, HOUR, 1.9),
        [Action::Raise { level: 0 }]
    );
    assert!(tick(&spec, &mut s, 2 * HOUR - 1).is_empty());
    assert_eq!(
        tick(&spec, &mut s, 2 * HOUR),
        [Action::NotifyEscalation { level: 0 }]
    );
    // Live with readings stamped 30 days ago (a demo, a catch-up): the timers start at the
    // evaluation time of the raise, so nothing else fires with it.
    let mut s = State::default();
    let now = 30 * DAY;
    at(&spec, &mut s, 0, now, 1.9);
    assert_eq!(
        at(&spec, &mut s, HOUR, now + 200, 1.9),
        [Action::Raise { level: 0 }]
    );
    assert!(tick(&spec, &mut s, now + 1000).is_empty());
    assert_eq!(
        tick(&spec, &mut s, now + 200 + HOUR),
        [Action::NotifyEscalation { level: 0 }]
    );
}

#[test]
fn row_escalate_re_arms_the_escalation_timer_from_the_move() {
    // Finding 2, live: acknowledged at watch, moved to concern; the escalation list is told
    // escalate_after after the move, not 63 s after it.
    let spec = hourly_spec();
    let mut s = State::default();
    at(&spec, &mut s, 0, 0, 1.9);
    at(&spec, &mut s, HOUR, HOUR, 1.9);
    s = acknowledge(&s);
    assert!(tick(&spec, &mut s, 5 * HOUR).is_empty(), "acked: nothing");
    at(&spec, &mut s, 5 * HOUR, 5 * HOUR, 1.5);
    assert_eq!(
        at(&spec, &mut s, 6 * HOUR, 6 * HOUR, 1.5),
        [Action::Escalate { from: 0, to: 1 }]
    );
    assert!(!s.alert.unwrap().acked, "the ack was for watch");
    assert!(tick(&spec, &mut s, 6 * HOUR + 63_000).is_empty());
    assert_eq!(
        tick(&spec, &mut s, 7 * HOUR),
        [Action::NotifyEscalation { level: 1 }]
    );
}

#[test]
fn row_an_acknowledgement_holds_for_its_level_and_below() {
    let spec = hourly_spec();
    let mut s = State::default();
    at(&spec, &mut s, 0, 0, 1.5);
    at(&spec, &mut s, HOUR, HOUR, 1.5);
    assert_eq!(s.active_level(), Some(1));
    s = acknowledge(&s);
    assert_eq!(s.alert.unwrap().acked_level, Some(1));
    // Back to watch: de-escalate, still acknowledged: no reminder, no escalation.
    let a = at(&spec, &mut s, 2 * HOUR, 2 * HOUR, 1.8);
    assert_eq!(a, [Action::DeEscalate { from: 1, to: 0 }]);
    assert!(s.alert.unwrap().acked);
    assert!((3..20).all(|h| tick(&spec, &mut s, h * HOUR).is_empty()));
    // Up to concern again: still within the acknowledged level.
    at(&spec, &mut s, 20 * HOUR, 20 * HOUR, 1.5);
    assert_eq!(
        at(&spec, &mut s, 21 * HOUR, 21 * HOUR, 1.5),
        [Action::Escalate { from: 0, to: 1 }]
    );
    assert!(s.alert.unwrap().acked);
    assert!(tick(&spec, &mut s, 30 * HOUR).is_empty());
}

#[test]
fn row_active_to_clearing_and_back_then_resolve() {
    let mut spec = hourly_spec();
    spec.levels[0].keep_active_ms = 2 * HOUR;
    (spec.escalate_after_ms, spec.remind_every_ms) = (None, None);
    let mut s = State::default();
    at(&spec, &mut s, 0, 0, 1.9);
    at(&spec, &mut s, HOUR, HOUR, 1.9);
    assert!(at(&spec, &mut s, 2 * HOUR, 2 * HOUR, 2.1).is_empty());
    assert!(matches!(s.phase, Phase::Clearing { level: 0, .. }));
    assert!(at(&spec, &mut s, 3 * HOUR, 3 * HOUR, 1.9).is_empty());
    assert_eq!(s.phase, Phase::Active { level: 0 });
    at(&spec, &mut s, 4 * HOUR, 4 * HOUR, 2.1);
    assert!(at(&spec, &mut s, 5 * HOUR, 5 * HOUR, 2.1).is_empty());
    assert_eq!(
        at(&spec, &mut s, 6 * HOUR, 6 * HOUR, 2.1),
        [Action::Resolve { from: 0 }]
    );
    assert_eq!(s.phase, Phase::Normal);
    assert!(s.alert.is_none());
}

#[test]
fn row_reminders_while_not_acknowledged() {
    let spec = hourly_spec();
    let mut s = State::default();
    at(&spec, &mut s, 0, 0, 1.9);
    at(&spec, &mut s, HOUR, HOUR, 1.9);
    tick(&spec, &mut s, 2 * HOUR);
    assert_eq!(tick(&spec, &mut s, 5 * HOUR), [Action::Remind { level: 0 }]);
}

#[test]
fn row_no_data_counts_silence_on_the_evaluation_clock() {
    // Finding 8: readings stamped 30 days ago keep arriving; no alert.
    let spec = Spec {
        check: Check::NoData,
        levels: vec![level("watch", Direction::Above, 3.0 * 3600.0)],
        remind_every_ms: None,
        escalate_after_ms: None,
    };
    let now = 30 * DAY;
    let mut s = State::default();
    assert!(tick(&spec, &mut s, now).is_empty());
    for k in 0..100 {
        let (next, a) = step(
            &spec,
            &s,
            Some(Obs {
                t_ms: k * HOUR,
                value: Some(1.0),
            }),
            now + k * 200,
        );
        s = next;
        assert!(a.is_empty(), "reading {k}: {a:?}");
    }
    // Silent on the evaluation clock: raise; any reading ends it, whatever its stamp.
    assert_eq!(
        tick(&spec, &mut s, now + 99 * 200 + 3 * HOUR + 1),
        [Action::Raise { level: 0 }]
    );
    let (_, a) = step(
        &spec,
        &s,
        Some(Obs {
            t_ms: 0,
            value: Some(1.0),
        }),
        now + 4 * HOUR,
    );
    assert_eq!(a, [Action::Resolve { from: 0 }]);
}

#[test]
fn row_keep_active_on_ticks_runs_from_the_reading_time_by_the_time_passed() {
    // Readings stamped 30 days ago (a catch-up): back inside at reading time 2 h; a tick one
    // second later must not cut the 2 h keep-active short; one 2 h later ends it.
    let mut spec = hourly_spec();
    spec.levels[0].keep_active_ms = 2 * HOUR;
    (spec.escalate_after_ms, spec.remind_every_ms) = (None, None);
    let now = 30 * DAY;
    let mut s = State::default();
    at(&spec, &mut s, 0, now, 1.9);
    at(&spec, &mut s, HOUR, now + 1000, 1.9);
    assert!(at(&spec, &mut s, 2 * HOUR, now + 2000, 2.1).is_empty());
    assert!(
        tick(&spec, &mut s, now + 3000).is_empty(),
        "keep-active holds"
    );
    assert!(tick(&spec, &mut s, now + 2000 + 2 * HOUR - 1).is_empty());
    assert_eq!(
        tick(&spec, &mut s, now + 2000 + 2 * HOUR),
        [Action::Resolve { from: 0 }]
    );
}
