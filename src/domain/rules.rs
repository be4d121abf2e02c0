//! Alert rules as a pure state machine: `step(spec, state, observation, now) -> (state, actions)`.
//!
//! Owns the life of one rule's alert: normal → pending (a bound crossed, persistence not yet
//! met) → active at level n (raise; escalate to a more severe level; de-escalate) → clearing
//! (back inside the deadband, waiting out the keep-active time) → resolved; plus the notice
//! timers of an active alert (reminders while unacknowledged, escalation to the second contact
//! list). It does no I/O and never reads the clock: time comes in as `now_ms` and with each
//! observation. Who is told, and how, is decided elsewhere (`alerts`, `notify`).
//!
//! Clock: persistence durations and keep-active times are measured in observation time: on a
//! tick (a step without observation) as the newest observation's time plus the evaluation time
//! passed since it was applied. Observations
//! older than (or as old as) the newest one already applied are ignored. The notice timers
//! (escalation to the second list, reminders) run on `now_ms` only — the evaluation clock: wall
//! time live, reading time in replay — so an old reading arriving late can never make a timer
//! look expired at the moment of the raise. A no-data rule counts silence from the evaluation
//! time at which the instrument was last heard from, not from the reading's own time stamp.
//!
//! Acknowledgement holds for its level: it stops reminders and escalation while the alert stays
//! at that level or moves to a less severe one; a move to a more severe level re-arms both, and
//! the escalation timer starts again from the moment that level was reached.

use serde::{Deserialize, Serialize};

/// Which side of the bound is the dangerous side.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Direction {
    Above,
    Below,
}

impl Direction {
    /// `above` / `below`, as written in configuration and messages.
    pub fn name(self) -> &'static str {
        match self {
            Direction::Above => "above",
            Direction::Below => "below",
        }
    }
}

/// One level of a rule, in order of severity (index 0 least severe).
#[derive(Debug, Clone, PartialEq)]
pub struct LevelSpec {
    /// The user's name for the level (e.g. "watch").
    pub name: String,
    pub direction: Direction,
    /// The level is crossed when the value is strictly beyond this bound.
    pub bound: f64,
    /// Hysteresis (≥ 0, the quantity's unit): the level holds until the value is back past
    /// `bound − deadband` (above) or `bound + deadband` (below).
    pub deadband: f64,
    /// Persistence: this many consecutive readings beyond the bound (≥ 1) ...
    pub persist_readings: u32,
    /// ... spanning at least this long (ms, ≥ 0).
    pub persist_ms: i64,
    /// An active level stays active this long after the value is back inside (ms, ≥ 0).
    pub keep_active_ms: i64,
    /// What the on-call should do (from the site's response plan).
    pub response: String,
}

impl LevelSpec {
    /// Strictly beyond the bound: the level is crossed.
    pub fn crossed(&self, v: f64) -> bool {
        match self.direction {
            Direction::Above => v > self.bound,
            Direction::Below => v < self.bound,
        }
    }

    /// Still beyond the clearing threshold (bound less the deadband): an active level holds.
    pub fn holds(&self, v: f64) -> bool {
        match self.direction {
            Direction::Above => v > self.bound - self.deadband,
            Direction::Below => v < self.bound + self.deadband,
        }
    }
}

/// What a rule watches.
#[derive(Debug, Clone, PartialEq)]
pub enum Check {
    /// The observed value against the levels.
    Threshold,
    /// Silence: the value evaluated is the age (s) of the newest observation, against the one
    /// level's bound (k × the instrument's interval), direction above.
    NoData,
    /// A safety value without a value: as `NoData`, the age (s) of the newest observation that
    /// had a value (or a value that does not apply), against the one level's bound.
    Unavailable,
}

/// A rule's evaluation settings.
#[derive(Debug, Clone, PartialEq)]
pub struct Spec {
    pub check: Check,
    /// Levels in order of severity; bounds strictly monotonic in the dangerous direction.
    pub levels: Vec<LevelSpec>,
    /// Reminder interval while active and unacknowledged (ms); `None`: no reminders.
    pub remind_every_ms: Option<i64>,
    /// Notify the escalation list when not acknowledged this long after raising (ms).
    pub escalate_after_ms: Option<i64>,
}

/// Consecutive readings beyond one level's bound.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct Run {
    pub since_ms: i64,
    pub count: u32,
}

/// Where a rule is in its life.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(tag = "phase", rename_all = "snake_case")]
pub enum Phase {
    #[default]
    Normal,
    /// A bound is crossed but persistence is not met yet.
    Pending { level: usize, since_ms: i64 },
    /// Raised at `level`.
    Active { level: usize },
    /// Active at `level`, value back inside since `since_ms`, waiting out keep-active.
    Clearing { level: usize, since_ms: i64 },
}

/// The raised alert's notice bookkeeping (times on the evaluation clock).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct AlertState {
    /// The alert's id (allocated by the caller after a raise; 0 until then).
    pub id: i64,
    pub raised_ms: i64,
    /// When the current level was reached (the escalation timer runs from here); 0 in states
    /// stored by older versions (read as `raised_ms`).
    #[serde(default)]
    pub level_since_ms: i64,
    /// Last raise/escalate/de-escalate/reminder notice (reminders count from here).
    pub last_notice_ms: i64,
    /// Acknowledged for the current level (see `acked_level`).
    pub acked: bool,
    /// The level the acknowledgement was given at: it holds for that level and below.
    #[serde(default)]
    pub acked_level: Option<usize>,
    /// The escalation lists have been told (at some level): from then on they receive this
    /// alert's notices too.
    pub escalated: bool,
    /// The most severe level the escalation lists were told about (`None`: not yet, or a
    /// state from an older version — read from `escalated`).
    #[serde(default)]
    pub told_level: Option<usize>,
}

/// Everything a rule remembers between steps (persisted as JSON by the caller).
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct State {
    pub phase: Phase,
    /// Per level: the run of consecutive readings beyond its bound, if any.
    pub runs: Vec<Option<Run>>,
    /// Newest observation applied (time, value).
    pub last: Option<(i64, f64)>,
    /// Evaluation time at which `last` was applied: on a tick, persistence and keep-active run
    /// on from the reading's time by the evaluation time passed since (so readings stamped long
    /// ago, a catch-up, do not cut a keep-active short). `None` in older states: `now` is used.
    #[serde(default)]
    pub applied_ms: Option<i64>,
    /// No-data rules: newest observation time, or when watching started.
    pub seen_ms: Option<i64>,
    pub alert: Option<AlertState>,
}

impl State {
    /// The active level, if an alert is raised.
    pub fn active_level(&self) -> Option<usize> {
        match self.phase {
            Phase::Active { level } | Phase::Clearing { level, .. } => Some(level),
            _ => None,
        }
    }
}

/// What the caller must do after a step.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Action {
    Raise {
        level: usize,
    },
    /// To a more severe level.
    Escalate {
        from: usize,
        to: usize,
    },
    /// To a less severe level (the higher one cleared).
    DeEscalate {
        from: usize,
        to: usize,
    },
    /// All clear.
    Resolve {
        from: usize,
    },
    /// Still active and unacknowledged.
    Remind {
        level: usize,
    },
    /// Not acknowledged in time: tell the escalation list.
    NotifyEscalation {
        level: usize,
    },
}

impl Action {
    /// Stable snake_case name (database, NDJSON).
    pub fn name(&self) -> &'static str {
        match self {
            Action::Raise { .. } => "raise",
            Action::Escalate { .. } => "escalate",
            Action::DeEscalate { .. } => "de_escalate",
            Action::Resolve { .. } => "resolve",
            Action::Remind { .. } => "remind",
            Action::NotifyEscalation { .. } => "notify_escalation",
        }
    }

    /// The level the notice is about (the level cleared, for a resolve).
    pub fn level(&self) -> usize {
        match *self {
            Action::Raise { level } | Action::Remind { level } => level,
            Action::NotifyEscalation { level } => level,
            Action::Escalate { to, .. } | Action::DeEscalate { to, .. } => to,
            Action::Resolve { from } => from,
        }
    }
}

/// One observation of the rule's quantity; `value: None` is "no value" (never a crossing).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Obs {
    pub t_ms: i64,
    pub value: Option<f64>,
}

/// Advance one rule: apply the observation (if any), then the timers at `now_ms`.
pub fn step(spec: &Spec, state: &State, obs: Option<Obs>, now_ms: i64) -> (State, Vec<Action>) {
    let mut s = state.clone();
    s.runs.resize(spec.levels.len(), None);
    let mut actions = Vec::new();
    match spec.check {
        Check::Threshold => {
            if let Some(Obs {
                t_ms,
                value: Some(v),
            }) = obs
            {
                if v.is_finite() && s.last.is_none_or(|(t, _)| t_ms > t) {
                    apply_value(spec, &mut s, t_ms, v);
                    s.applied_ms = Some(now_ms);
                    settle(spec, &mut s, t_ms, now_ms, &mut actions);
                }
            }
            if let Some((t_last, _)) = s.last {
                let t = s
                    .applied_ms
                    .map_or(now_ms, |a| t_last + (now_ms - a).max(0));
                settle(spec, &mut s, t, now_ms, &mut actions);
            }
        }
        Check::NoData | Check::Unavailable => {
            // Heard from at the evaluation time: a reading stamped long ago but arriving now
            // (a logger catching up, a demo starting in the past) ends the silence.
            if let Some(Obs { value: Some(_), .. }) = obs {
                s.seen_ms = Some(s.seen_ms.map_or(now_ms, |seen| seen.max(now_ms)));
            }
            let seen = *s.seen_ms.get_or_insert(now_ms);
            let age_s = (now_ms - seen).max(0) as f64 / 1000.0;
            // Each evaluation is a fresh look at the silence; no run to build up.
            s.runs.iter_mut().for_each(|r| *r = None);
            apply_value(spec, &mut s, now_ms, age_s);
            settle(spec, &mut s, now_ms, now_ms, &mut actions);
        }
    }
    notice_timers(spec, &mut s, now_ms, &mut actions);
    (s, actions)
}

/// Record an acknowledgement of the current alert at its current level: no more reminders or
/// escalation notices while it stays at that level or below.
pub fn acknowledge(state: &State) -> State {
    let mut s = state.clone();
    let level = s.active_level();
    if let Some(a) = s.alert.as_mut() {
        a.acked = true;
        a.acked_level = level.max(a.acked_level);
    }
    s
}

fn apply_value(spec: &Spec, s: &mut State, t_ms: i64, v: f64) {
    for (level, run) in spec.levels.iter().zip(s.runs.iter_mut()) {
        *run = if level.crossed(v) {
            Some(run.map_or(
                Run {
                    since_ms: t_ms,
                    count: 1,
                },
                |r| Run {
                    since_ms: r.since_ms,
                    count: r.count.saturating_add(1),
                },
            ))
        } else {
            None
        };
    }
    s.last = Some((t_ms, v));
}

/// The most severe level whose run meets its persistence at `t_ms`.
fn confirmed(spec: &Spec, s: &State, t_ms: i64) -> Option<usize> {
    (0..spec.levels.len()).rev().find(|&i| {
        let l = &spec.levels[i];
        s.runs[i]
            .is_some_and(|r| r.count >= l.persist_readings && t_ms - r.since_ms >= l.persist_ms)
    })
}

/// Move between phases given the runs and the newest value, at time `t_ms` (observation time,
/// for persistence and keep-active); notice timers start at `now_ms` (evaluation clock).
fn settle(spec: &Spec, s: &mut State, t_ms: i64, now_ms: i64, actions: &mut Vec<Action>) {
    let Some((_, v)) = s.last else { return };
    let confirmed = confirmed(spec, s, t_ms);
    match s.phase {
        Phase::Normal | Phase::Pending { .. } => {
            if let Some(level) = confirmed {
                s.phase = Phase::Active { level };
                s.alert = Some(AlertState {
                    id: 0,
                    raised_ms: now_ms,
                    level_since_ms: now_ms,
                    last_notice_ms: now_ms,
                    acked: false,
                    acked_level: None,
                    escalated: false,
                    told_level: None,
                });
                actions.push(Action::Raise { level });
            } else if let Some(level) = (0..spec.levels.len()).rev().find(|&i| s.runs[i].is_some())
            {
                let since_ms = s.runs[level].map_or(t_ms, |r| r.since_ms);
                s.phase = Phase::Pending { level, since_ms };
            } else {
                s.phase = Phase::Normal;
            }
        }
        Phase::Active { level: a } | Phase::Clearing { level: a, .. } => {
            if let Some(to) = confirmed.filter(|&c| c > a) {
                s.phase = Phase::Active { level: to };
                if let Some(al) = s.alert.as_mut() {
                    // A more severe level re-arms reminders and escalation, from now.
                    al.acked = al.acked_level.is_some_and(|l| l >= to);
                    al.level_since_ms = now_ms;
                    al.last_notice_ms = now_ms;
                }
                actions.push(Action::Escalate { from: a, to });
                return;
            }
            if spec.levels[a].holds(v) {
                s.phase = Phase::Active { level: a };
                return;
            }
            let since_ms = match s.phase {
                Phase::Clearing { since_ms, .. } => since_ms,
                _ => t_ms,
            };
            s.phase = Phase::Clearing { level: a, since_ms };
            if t_ms - since_ms < spec.levels[a].keep_active_ms {
                return;
            }
            match (0..a).rev().find(|&i| spec.levels[i].holds(v)) {
                Some(to) => {
                    s.phase = Phase::Active { level: to };
                    if let Some(al) = s.alert.as_mut() {
                        al.last_notice_ms = now_ms;
                    }
                    actions.push(Action::DeEscalate { from: a, to });
                }
                None => {
                    s.phase = Phase::Normal;
                    s.alert = None;
                    actions.push(Action::Resolve { from: a });
                }
            }
        }
    }
}

/// Reminders and escalation to the second list, while active and unacknowledged.
fn notice_timers(spec: &Spec, s: &mut State, now_ms: i64, actions: &mut Vec<Action>) {
    let Some(level) = s.active_level() else {
        return;
    };
    let Some(al) = s.alert.as_mut() else { return };
    if al.acked {
        return;
    }
    if let Some(after) = spec.escalate_after_ms {
        let since = if al.level_since_ms == 0 {
            al.raised_ms
        } else {
            al.level_since_ms
        };
        let told = al.told_level.or(al.escalated.then_some(level));
        if told.is_none_or(|t| t < level) && now_ms - since >= after {
            al.escalated = true;
            al.told_level = Some(level);
            actions.push(Action::NotifyEscalation { level });
        }
    }
    if let Some(repeat) = spec.remind_every_ms.filter(|r| *r > 0) {
        let due = now_ms - al.last_notice_ms;
        if due >= repeat {
            // One reminder, however many intervals were missed (e.g. while stopped).
            al.last_notice_ms += repeat * (due / repeat);
            actions.push(Action::Remind { level });
        }
    }
}

#[cfg(test)]
mod tests;
