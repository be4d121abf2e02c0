//! Alert evaluation between the engine and the store: observations from an `Outcome`, each
//! rule stepped through `domain::rules`, actions turned into alert rows and notices, notices
//! grouped into rendered outbox messages after the site's bundle window, silences and
//! acknowledgements applied. Everything it decides comes back as `AlertWrites`, which the
//! caller commits in the same transaction as the readings that caused it.
//!
//! No I/O apart from `load` (which reads the store at start); the time is a parameter.

pub mod commands;
pub mod live;
mod observe;
mod orphans;
pub mod render;

use std::collections::{BTreeMap, HashMap, VecDeque};
use std::sync::Arc;

use crate::config::{Config, Rule};
use crate::derive::is_input_problem;
use crate::domain::rules::{self, Action, Check, Obs, State};
use crate::engine::Outcome;
use crate::store::{
    AckRow, AlertRow, AlertWrites, EventRow, NoticeRow, OutboxRow, SilenceRow, Store, StoreError,
};

use render::Item;

pub use observe::{observations, observations_of, Observation, HEALTH_FLAGS};

/// The thread id of alert `alert`: every message about the alert (raise, level changes,
/// reminders, escalations, all-clear, closure) names it in References and In-Reply-To, so mail
/// clients show one conversation per alert. No message carries it as its own Message-ID; the
/// threading algorithms mail clients use group siblings under a missing parent.
pub fn thread_id(alert: i64, domain: &str) -> String {
    format!("<seepd.alert-thread-{alert}@{domain}>")
}

/// Values kept per watched quantity for messages (last readings, rate).
const RECENT: usize = 6;

/// One rule action, as replay reports it.
#[derive(Debug, Clone, PartialEq)]
pub struct Transition {
    pub alert: i64,
    pub rule: String,
    pub action: Action,
    pub level: String,
    pub previous: Option<String>,
    pub object: String,
    pub quantity: String,
    pub t_ms: i64,
    pub value: Option<f64>,
    pub unit: String,
    pub bound: f64,
    pub direction: &'static str,
}

struct Watched {
    rule: Rule,
    state: State,
    unit: String,
}

/// The rules of a configuration with their states.
pub struct Evaluator {
    cfg: Arc<Config>,
    rules: Vec<Watched>,
    /// (object, quantity) → rule indexes; no-data rules under (object, "no_data").
    index: HashMap<(String, String), Vec<usize>>,
    /// Objects some rule watches: observations of other objects are not built at all.
    watched: std::collections::HashSet<String>,
    recent: HashMap<(String, String), VecDeque<(i64, f64)>>,
    /// Notices waiting out the bundle window.
    waiting: Vec<NoticeRow>,
    silences: Vec<SilenceRow>,
    next_alert: i64,
    next_notice: i64,
    next_message: i64,
    out: AlertWrites,
    transitions: Vec<Transition>,
    /// False in a replay without `--send-email`: notices are recorded as `not_sent`, no
    /// message is composed.
    deliver: bool,
    /// The latest reason a watched derived value had no value, by (object, quantity).
    unavailable_reason: HashMap<(String, String), String>,
    /// Open alerts whose rule is gone from the configuration (id, rule, site, level, unit):
    /// closed at the next evaluation.
    orphans: Vec<crate::store::alerts::OrphanAlert>,
}

/// The history event kind of a rule action.
fn event_kind(a: &Action) -> &'static str {
    match a {
        Action::Raise { .. } => "raised",
        Action::Escalate { .. } => "escalated",
        Action::DeEscalate { .. } => "de_escalated",
        Action::Resolve { .. } => "resolved",
        Action::Remind { .. } => "reminded",
        Action::NotifyEscalation { .. } => "escalation_notified",
    }
}

impl Evaluator {
    /// Fresh states (replay, tests).
    pub fn new(cfg: Arc<Config>) -> Evaluator {
        let mut index: HashMap<(String, String), Vec<usize>> = HashMap::new();
        let mut recent = HashMap::new();
        let rules: Vec<Watched> = cfg
            .alerting
            .rules
            .iter()
            .enumerate()
            .map(|(i, r)| {
                index
                    .entry((r.object.clone(), r.quantity.clone()))
                    .or_default()
                    .push(i);
                let unit = if r.spec.check != Check::Threshold {
                    "s"
                } else {
                    recent.insert((r.object.clone(), r.quantity.clone()), VecDeque::new());
                    ""
                };
                Watched {
                    rule: r.clone(),
                    state: State::default(),
                    unit: unit.into(),
                }
            })
            .collect();
        Evaluator {
            cfg,
            rules,
            watched: index.keys().map(|(o, _)| o.clone()).collect(),
            index,
            recent,
            waiting: Vec::new(),
            silences: Vec::new(),
            next_alert: 1,
            next_notice: 1,
            next_message: 1,
            out: AlertWrites::default(),
            transitions: Vec::new(),
            deliver: true,
            unavailable_reason: HashMap::new(),
            orphans: Vec::new(),
        }
    }

    /// Record notices without composing messages (replay without `--send-email`).
    pub fn set_delivery(&mut self, deliver: bool) {
        self.deliver = deliver;
    }

    /// Resume from the store: rule states, waiting notices, next ids, recent values.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn load(cfg: Arc<Config>, store: &Store) -> Result<Evaluator, StoreError> {
        let mut e = Evaluator::new(cfg);
        let stored: BTreeMap<String, String> = store.rule_states()?.into_iter().collect();
        for w in &mut e.rules {
            let Some(json) = stored.get(&w.rule.id) else {
                continue;
            };
            match serde_json::from_str::<State>(json) {
                Ok(s)
                    if s.active_level()
                        .is_none_or(|l| l < w.rule.spec.levels.len()) =>
                {
                    w.state = s;
                }
                _ => {
                    tracing::warn!(rule = %w.rule.id, "Stored rule state does not fit the rule any more; starting from normal")
                }
            }
            if w.rule.spec.check == Check::Threshold {
                let key = (w.rule.object.clone(), w.rule.quantity.clone());
                let values = store.recent_values(&key.0, &key.1, RECENT)?;
                e.recent.insert(key, values.into_iter().collect());
            }
        }
        let ids: Vec<&str> = e.rules.iter().map(|w| w.rule.id.as_str()).collect();
        e.orphans = store.orphaned_alerts(&ids)?;
        e.out.removed_rules = stored
            .keys()
            .filter(|r| !ids.contains(&r.as_str()))
            .cloned()
            .collect();
        // Notices of removed rules still waiting out their bundle window are not sent: the
        // closing message says what happened to their alert.
        for mut n in store.waiting_notices()? {
            if ids.contains(&n.rule.as_str()) {
                e.waiting.push(n);
            } else {
                n.status = "rule_removed".into();
                e.out.notices.push(n);
            }
        }
        let (a, n, m) = store.alert_max_ids()?;
        (e.next_alert, e.next_notice, e.next_message) = (a + 1, n + 1, m + 1);
        Ok(e)
    }

    /// Whether any rule is configured.
    pub fn is_empty(&self) -> bool {
        self.rules.is_empty()
    }

    /// The silences in force (as last read from the database).
    pub fn silences(&self) -> &[SilenceRow] {
        &self.silences
    }

    /// Replace the silences in force.
    pub fn set_silences(&mut self, s: Vec<SilenceRow>) {
        self.silences = s;
    }

    /// Apply acknowledgements written by `seepd ack`.
    pub fn apply_acks(&mut self, acks: &[AckRow]) {
        for a in acks {
            if let Some(w) = self
                .rules
                .iter_mut()
                .find(|w| w.state.alert.is_some_and(|al| al.id == a.alert))
            {
                w.state = rules::acknowledge(&w.state);
                let json = serde_json::to_string(&w.state).unwrap_or_default();
                self.out.states.push((w.rule.id.clone(), json));
                tracing::info!(alert = a.alert, by = %a.who, rule = %w.rule.id, "Alert acknowledged");
                let level = w
                    .state
                    .active_level()
                    .and_then(|l| w.rule.spec.levels.get(l))
                    .map_or_else(String::new, |l| l.name.clone());
                let last = w.state.last;
                self.out.events.push(EventRow {
                    alert: a.alert,
                    rule: w.rule.id.clone(),
                    site: w.rule.site.clone(),
                    kind: "acknowledged".into(),
                    level,
                    value: last.map(|l| l.1),
                    unit: w.unit.clone(),
                    t_ms: a.t_ms,
                    recorded_ms: a.t_ms,
                    detail: format!("by {}", a.who),
                });
            }
            self.out.acks_applied.push(a.id);
        }
    }

    /// Transitions since the last call (replay's records).
    pub fn take_transitions(&mut self) -> Vec<Transition> {
        std::mem::take(&mut self.transitions)
    }

    /// Whether some rule watches `object`.
    pub fn watches(&self, object: &str) -> bool {
        self.watched.contains(object)
    }

    /// The observations of `out` that some rule watches.
    pub fn observations(&self, out: &Outcome) -> Vec<Observation> {
        observations_of(out, |o| self.watches(o))
    }

    /// Step the rules watching these observations, then every rule's timers at `now_ms`, then
    /// send the notices whose bundle window is over. Returns what to commit.
    pub fn evaluate(&mut self, obs: &[Observation], now_ms: i64) -> AlertWrites {
        self.close_orphans(now_ms);
        for o in obs {
            let key = (o.object.clone(), o.quantity.clone());
            if let (Some(v), Some(q)) = (o.value, self.recent.get_mut(&key)) {
                if q.back().is_none_or(|&(t, _)| o.t_ms > t) {
                    q.push_back((o.t_ms, v));
                    while q.len() > RECENT {
                        q.pop_front();
                    }
                }
            }
            let mut targets = self.index.get(&key).cloned().unwrap_or_default();
            if o.quantity == "engineering_value" {
                let nd = (o.object.clone(), "no_data".to_string());
                targets.extend(self.index.get(&nd).into_iter().flatten());
            }
            for i in targets {
                if self.rules[i].rule.spec.check == Check::Threshold {
                    self.rules[i].unit.clone_from(&o.unit);
                }
                // A safety-value watch hears a value, or a value that does not apply (no upward
                // gradient, no exit point); "no value" because of the inputs is silence to it.
                let value = match self.rules[i].rule.spec.check {
                    Check::Unavailable => {
                        let available = o.value.is_some()
                            || o.reason.as_deref().is_none_or(|r| !is_input_problem(r));
                        if !available {
                            self.unavailable_reason
                                .insert(key.clone(), o.reason.clone().unwrap_or_default());
                        }
                        available.then_some(1.0)
                    }
                    _ => o.value,
                };
                let ob = Obs {
                    t_ms: o.t_ms,
                    value,
                };
                self.step_rule(i, Some(ob), now_ms);
            }
        }
        for i in 0..self.rules.len() {
            self.step_rule(i, None, now_ms);
        }
        self.compose(now_ms, false);
        self.out.now_ms = now_ms;
        std::mem::take(&mut self.out)
    }

    /// Send every waiting notice now, whatever its bundle window (end of a replay).
    pub fn flush(&mut self, now_ms: i64) -> AlertWrites {
        self.compose(now_ms, true);
        self.out.now_ms = now_ms;
        std::mem::take(&mut self.out)
    }

    fn step_rule(&mut self, i: usize, obs: Option<Obs>, now_ms: i64) {
        let w = &self.rules[i];
        let (mut next, actions) = rules::step(&w.rule.spec, &w.state, obs, now_ms);
        let old = w.state.clone();
        for a in actions {
            self.act(i, a, &old, &mut next, now_ms);
        }
        let w = &mut self.rules[i];
        if next != w.state {
            w.state = next;
            let json = serde_json::to_string(&w.state).unwrap_or_default();
            self.out.states.retain(|(r, _)| *r != w.rule.id);
            self.out.states.push((w.rule.id.clone(), json));
        }
    }

    fn act(&mut self, i: usize, a: Action, old: &State, next: &mut State, now_ms: i64) {
        let w = &self.rules[i];
        let rule = &w.rule;
        let level = a.level();
        let (mut t_ms, value) = next
            .last
            .or(old.last)
            .map_or((now_ms, None), |(t, v)| (t, Some(v)));
        // Raises and escalations happen at the value's time. Clearing after a keep-active time
        // happens on the reading clock the rule measured it on (the last value's time plus the
        // evaluation time since it was applied: the value's own time when a value completed
        // it), so a catch-up's all-clear sits in the readings' timeline beside its raise. The
        // notice timers (reminders, escalation to the second list) are evaluation-time events.
        match a {
            Action::Raise { .. } | Action::Escalate { .. } => {}
            Action::DeEscalate { .. } | Action::Resolve { .. } => {
                t_ms = match (next.last.or(old.last), next.applied_ms.or(old.applied_ms)) {
                    (Some((t, _)), Some(applied)) => t + (now_ms - applied).max(0),
                    _ => now_ms,
                };
            }
            _ => t_ms = now_ms,
        }
        let alert_id = match a {
            Action::Raise { .. } => {
                let id = self.next_alert;
                self.next_alert += 1;
                if let Some(al) = next.alert.as_mut() {
                    al.id = id;
                }
                self.out.new_alerts.push(AlertRow {
                    id,
                    rule: rule.id.clone(),
                    site: rule.site.clone(),
                    object: rule.object.clone(),
                    quantity: rule.quantity.clone(),
                    level: rule.spec.levels[level].name.clone(),
                    raised_ms: t_ms,
                    value,
                    unit: w.unit.clone(),
                });
                id
            }
            Action::Resolve { .. } => old.alert.map_or(0, |al| al.id),
            _ => next.alert.map_or(0, |al| al.id),
        };
        match a {
            Action::Escalate { to, .. } | Action::DeEscalate { to, .. } => self
                .out
                .level_changes
                .push((alert_id, rule.spec.levels[to].name.clone())),
            Action::Resolve { .. } => self.out.resolved.push((alert_id, t_ms)),
            _ => {}
        }
        let level_spec = &rule.spec.levels[level];
        let previous = match a {
            Action::Escalate { from, .. } | Action::DeEscalate { from, .. } => {
                Some(rule.spec.levels[from].name.clone())
            }
            _ => None,
        };
        self.transitions.push(Transition {
            alert: alert_id,
            rule: rule.id.clone(),
            action: a,
            level: level_spec.name.clone(),
            previous: previous.clone(),
            object: rule.object.clone(),
            quantity: rule.quantity.clone(),
            t_ms,
            value,
            unit: w.unit.clone(),
            bound: level_spec.bound,
            direction: level_spec.direction.name(),
        });
        let site = self.cfg.alerting.site(&rule.site);
        let escalated = match a {
            Action::Resolve { .. } => old.alert.is_some_and(|al| al.escalated),
            _ => next.alert.is_some_and(|al| al.escalated),
        };
        let recipients = match a {
            Action::NotifyEscalation { .. } => site.recipients(&level_spec.name, false, true),
            _ => site.recipients(&level_spec.name, true, escalated),
        };
        // A silence never holds back the most severe level unless it says so.
        let top = level + 1 == rule.spec.levels.len();
        let silence = self.silences.iter().find(|s| {
            s.until_ms > now_ms
                && (s.all_levels || !top)
                && (s.rule.as_deref().is_some_and(|r| {
                    r == rule.id
                        || rule
                            .id
                            .strip_suffix(crate::config::rules::UNAVAILABLE_SUFFIX)
                            == Some(r)
                }) || s.object.as_deref() == Some(&rule.object))
        });
        let status = if silence.is_some() {
            "silenced"
        } else if recipients.is_empty() {
            "no_recipients"
        } else if !self.deliver {
            "not_sent"
        } else {
            "waiting"
        };
        let event = |kind: &str, detail: String| EventRow {
            alert: alert_id,
            rule: rule.id.clone(),
            site: rule.site.clone(),
            kind: kind.into(),
            level: level_spec.name.clone(),
            value,
            unit: w.unit.clone(),
            t_ms,
            recorded_ms: now_ms,
            detail,
        };
        let detail = match (&previous, &rule.spec.check) {
            (Some(p), _) => format!("from {p}"),
            (None, Check::Unavailable) if matches!(a, Action::Raise { .. }) => format!(
                "safety value unavailable: {}",
                self.unavailable_reason
                    .get(&(rule.object.clone(), rule.quantity.clone()))
                    .map_or("no value computed", String::as_str)
            ),
            _ => String::new(),
        };
        let mut events = vec![event(event_kind(&a), detail)];
        if let Some(s) = silence {
            events.push(event(
                "silenced",
                format!(
                    "{} notice not sent: silence {} by {} ({})",
                    a.name(),
                    s.id,
                    s.who,
                    s.reason
                ),
            ));
        }
        self.out.events.extend(events);
        let notice = NoticeRow {
            id: self.next_notice,
            alert: alert_id,
            rule: rule.id.clone(),
            site: rule.site.clone(),
            kind: a.name().into(),
            level: level_spec.name.clone(),
            value,
            unit: w.unit.clone(),
            t_ms,
            created_ms: now_ms,
            recipients,
            status: status.into(),
            outbox: None,
        };
        self.next_notice += 1;
        if status == "waiting" {
            self.waiting.push(notice.clone());
        }
        self.out.notices.push(notice);
    }

    /// The domain of Message-IDs: the `[smtp] from` address's.
    fn mail_domain(&self) -> String {
        self.cfg
            .alerting
            .smtp
            .as_ref()
            .and_then(|s| s.from.split('@').nth(1).map(str::to_string))
            .unwrap_or_else(|| "seepd.invalid".into())
    }

    /// Turn groups of waiting notices (same site and recipients) whose oldest member has
    /// waited the site's bundle window (or every group, with `force`) into one rendered outbox
    /// message each.
    fn compose(&mut self, now_ms: i64, force: bool) {
        if self.waiting.is_empty() {
            return;
        }
        let mut groups: BTreeMap<(String, String), Vec<NoticeRow>> = BTreeMap::new();
        for n in std::mem::take(&mut self.waiting) {
            groups
                .entry((n.site.clone(), n.recipients.join(",")))
                .or_default()
                .push(n);
        }
        for ((site, _), group) in groups {
            let policy = self.cfg.alerting.site(&site).policy;
            let oldest = group.iter().map(|n| n.created_ms).min().unwrap_or(now_ms);
            if !force && now_ms - oldest < policy.bundle_window_ms {
                self.waiting.extend(group);
                continue;
            }
            let id = self.next_message;
            self.next_message += 1;
            let message = self.message(id, &site, &group, now_ms, &policy.status_url);
            for n in group {
                match self.out.notices.iter_mut().find(|m| m.id == n.id) {
                    // Created in this evaluation: written once, already queued.
                    Some(m) => {
                        m.status = "queued".into();
                        m.outbox = Some(id);
                    }
                    // Written earlier as waiting.
                    None => self.out.composed.push((n.id, id)),
                }
            }
            self.out.messages.push(message);
        }
    }

    fn message(
        &self,
        id: i64,
        site: &str,
        group: &[NoticeRow],
        now_ms: i64,
        status_url: &str,
    ) -> OutboxRow {
        let site_name = self
            .cfg
            .sites
            .iter()
            .find(|s| s.id == site)
            .map_or(site, |s| s.name.as_str());
        let tz: chrono_tz::Tz = self
            .cfg
            .sites
            .iter()
            .find(|s| s.id == site)
            .and_then(|s| s.time_zone.parse().ok())
            .unwrap_or(chrono_tz::UTC);
        let units = self
            .cfg
            .sites
            .iter()
            .find(|s| s.id == site)
            .map_or(crate::config::DisplayUnits::Si, |s| s.display_units);
        let empty = VecDeque::new();
        let recent: Vec<Vec<(i64, f64)>> = group
            .iter()
            .map(|n| {
                let r = self.rules.iter().find(|w| w.rule.id == n.rule);
                let key = r.map(|w| (w.rule.object.clone(), w.rule.quantity.clone()));
                key.and_then(|k| self.recent.get(&k))
                    .unwrap_or(&empty)
                    .iter()
                    .copied()
                    .collect()
            })
            .collect();
        let mut items: Vec<Item<'_>> = group
            .iter()
            .zip(&recent)
            .filter_map(|(n, recent)| {
                let w = self.rules.iter().find(|w| w.rule.id == n.rule)?;
                let severity = w.rule.spec.levels.iter().position(|l| l.name == n.level)?;
                Some(Item {
                    kind: &n.kind,
                    alert: n.alert,
                    rule: &n.rule,
                    site_id: site,
                    site_name,
                    object: &w.rule.object,
                    quantity: &w.rule.quantity,
                    check: &w.rule.spec.check,
                    level: &w.rule.spec.levels[severity],
                    severity,
                    value: n.value,
                    unit: &n.unit,
                    t_ms: n.t_ms,
                    recent,
                    tz,
                    units,
                    instrument_kind: self
                        .cfg
                        .instruments
                        .get(&w.rule.object)
                        .map(|i| i.kind.name()),
                })
            })
            .collect();
        let (subject, text, html) = render::render(&mut items, status_url);
        let domain = self.mail_domain();
        OutboxRow {
            id,
            created_ms: now_ms,
            site: site.to_string(),
            recipients: group
                .first()
                .map(|n| n.recipients.clone())
                .unwrap_or_default(),
            subject,
            text,
            html,
            message_id: format!("<seepd.alert-{id}.{now_ms}@{domain}>"),
            references: thread_ids(group.iter().map(|n| n.alert), &domain),
        }
    }
}

/// The thread ids of `alerts`, each once, in first-seen order.
fn thread_ids(alerts: impl Iterator<Item = i64>, domain: &str) -> Vec<String> {
    let mut seen = Vec::new();
    for a in alerts {
        if !seen.contains(&a) {
            seen.push(a);
        }
    }
    seen.into_iter().map(|a| thread_id(a, domain)).collect()
}
