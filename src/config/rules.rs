//! Reading a site file's alerting tables: `[alerting]` (notification policy), `[[contacts]]`
//! (who receives which levels; escalation lists) and `[[rule]]` (with `[[rule.level]]`).
//!
//! Owns those keys, their defaults and the checks within one rule (level order, directions,
//! deadbands, persistence). Checks across files (unique rule ids, the watched object exists,
//! no-data bounds from the instrument's interval) are in `cross_check` and `finish`, called by
//! `load`.

use std::collections::BTreeSet;
use std::path::PathBuf;

use serde::Deserialize;

use crate::domain::rules::{Check, Direction, LevelSpec, Spec};

use super::alerting::{Contacts, Policy, Rule, SiteAlerting};
use super::de::{self, Int, Nested, Num, Text};
use super::limits;
use super::model::{Config, Instrument};
use super::problem::{again, Cx, FirstSeen, Problem};
use super::reader::{found_item, Tbl};
use super::site::Pos;
use super::smtp::plain_address;

/// Top-level keys of a site file that this module reads.
pub(crate) const KEYS: [&str; 3] = ["alerting", "contacts", "rule"];

/// Quantities every reading has (the data model's).
pub use crate::model::READING_QUANTITIES;

/// Derived quantities every instrument has (its own id is the object): data completeness and
/// the count of sensor-health flags on the latest reading; rates are `rate_<window>`; a
/// piezometer on a section with a seepage model also has its modelled head and residual.
pub const INSTRUMENT_DERIVED: [&str; 4] = [
    "completeness_24h",
    "health_flags",
    "model_head",
    "model_residual",
];

/// Whether `q` is a quantity a rule on an instrument may watch.
fn is_instrument_quantity(q: &str) -> bool {
    READING_QUANTITIES.contains(&q) || INSTRUMENT_DERIVED.contains(&q) || q.starts_with("rate_")
}

/// A rule on an id that is neither an instrument nor a configured object is a problem.
const CHECK_OBJECT_IDS: bool = true;

/// One `[[rule]]` as read, with what the cross-file checks need.
pub(crate) struct RuleEntry {
    pub rule: Option<Rule>,
    pub id: Option<(String, Pos)>,
    pub object: Option<(String, Pos)>,
    /// Quantity as written (instrument quantities are checked across files).
    pub quantity: Option<String>,
    /// No-data rules: k, the bound being k × the instrument's interval.
    pub no_data_factor: Option<f64>,
}

/// The alerting part of one site file.
pub(crate) struct SiteRules {
    pub rules: Vec<RuleEntry>,
    pub alerting: SiteAlerting,
}

/// Read `[alerting]`, `[[contacts]]` and `[[rule]]` of a site file. A contact list may name
/// only levels some rule of the site defines (a problem otherwise: that list would never hear
/// of the level it meant); a rule level no contact list receives is a warning.
pub(crate) fn read(cx: &mut Cx<'_>, root: &Tbl<'_>, site: &str) -> SiteRules {
    let policy = match root.part(cx, "alerting", "[alerting]") {
        Some(t) => de::table(cx, &t).unwrap_or_default(),
        None => Policy::default(),
    };
    let rule_tables = root.tables(cx, "rule");
    let rules: Vec<RuleEntry> = rule_tables
        .into_iter()
        .map(|mut t| read_rule(cx, &mut t, site, &policy))
        .collect();
    let defined: BTreeSet<&str> = rules
        .iter()
        .filter_map(|e| e.rule.as_ref())
        .flat_map(|r| r.spec.levels.iter().map(|l| l.name.as_str()))
        .collect();
    let mut contacts = Vec::new();
    for mut t in root.tables(cx, "contacts") {
        let Some(c) = read_contacts(cx, &mut t) else {
            continue;
        };
        for l in c.levels.iter().filter(|l| !defined.contains(l.as_str())) {
            let known: Vec<&str> = defined.iter().copied().collect();
            t.problem_at(
                cx,
                "levels",
                format!(
                    "level {l:?} is not a level of any rule of this site; expected one of: {}",
                    if known.is_empty() {
                        "(no rules)".to_string()
                    } else {
                        known.join(", ")
                    }
                ),
            );
        }
        contacts.push(c);
    }
    let mut warnings = Vec::new();
    for e in &rules {
        let (Some(r), Some((_, pos))) = (&e.rule, &e.id) else {
            continue;
        };
        for l in &r.spec.levels {
            if !contacts.iter().any(|c: &Contacts| c.receives(&l.name)) {
                warnings.push(format!(
                    "{}:{}:{}: rule {:?} level {:?}: no contact list receives it (its notices are recorded, not sent)",
                    cx.file.display(),
                    pos.0,
                    pos.1,
                    r.id,
                    l.name
                ));
            }
        }
    }
    SiteRules {
        rules,
        alerting: SiteAlerting {
            policy,
            contacts,
            warnings,
        },
    }
}

fn read_contacts(cx: &mut Cx<'_>, t: &mut Tbl<'_>) -> Option<Contacts> {
    let before = cx.problems.len();
    let c: Contacts = de::named(cx, t, ("contacts", "name"));
    t.require(cx, &["name", "emails"]);
    for e in c.emails.iter().filter(|e| !plain_address(e)) {
        t.problem_at(
            cx,
            "emails",
            format!("address {e:?} is not a plain address; expected e.g. oncall@example.org"),
        );
    }
    (cx.problems.len() == before).then_some(c)
}

/// A count of readings a level must hold for.
type Readings = Int<1, { u32::MAX as i64 }>;
/// A duration in seconds.
type Secs = Int<0, { limits::YEAR_S }>;

/// `kind` of a rule as written.
#[derive(Deserialize, Clone, Copy, PartialEq, Eq)]
#[serde(rename_all = "snake_case")]
enum RuleKind {
    Threshold,
    NoData,
}

/// `[[rule]]` as written; its `deadband` … `response` are the defaults of its levels.
#[derive(Deserialize, Default)]
struct RawRule {
    id: Option<Text>,
    kind: Option<RuleKind>,
    object: Option<Text>,
    quantity: Option<Text>,
    /// `[[rule.level]]` tables (read on their own), or a no-data rule's level name.
    #[serde(rename = "level")]
    _level: Option<Nested>,
    factor: Option<Num>,
    deadband: Option<Num>,
    persist_readings: Option<Readings>,
    persist_s: Option<Secs>,
    keep_active_s: Option<Secs>,
    response: Option<Text>,
}

/// `[[rule.level]]` as written; an absent setting is the rule's.
#[derive(Deserialize, Default)]
struct RawLevel {
    name: Option<Text>,
    above: Option<Num>,
    below: Option<Num>,
    deadband: Option<Num>,
    persist_readings: Option<Readings>,
    persist_s: Option<Secs>,
    keep_active_s: Option<Secs>,
    response: Option<Text>,
}

fn read_rule(cx: &mut Cx<'_>, t: &mut Tbl<'_>, site: &str, policy: &Policy) -> RuleEntry {
    let before = cx.problems.len();
    let r: RawRule = de::named(cx, t, ("rule", "id"));
    let id = t.need(cx, "id", r.id.clone().map(|s| s.0));
    let id_pos = cx.pos(t.value_span("id"));
    let no_data = r.kind == Some(RuleKind::NoData);
    if !t.has("object") {
        t.missing(cx, "object", " (an instrument or derived-object id)");
    }
    let object = r.object.clone().map(|s| s.0);
    let object_pos = cx.pos(t.value_span("object"));
    let (quantity, levels, factor) = if no_data {
        for key in ["quantity", "deadband", "persist_readings", "persist_s"] {
            if t.has(key) {
                let message = format!("key \"{key}\" does not apply to kind = \"no_data\"");
                t.problem_at(cx, key, message);
            }
        }
        let factor = t.need(cx, "factor", r.factor).map(|f| f.0);
        if let Some(f) = factor.filter(|f| *f <= 1.0) {
            t.problem_at(cx, "factor", format!("key \"factor\" is {f}, expected more than 1 (silent for more than factor × interval_s)"));
        }
        if !t.has("level") {
            t.missing(cx, "level", " (the level name of the no-data alert)");
        }
        let name = match t.peek_str("level") {
            Some(s) if s.trim().is_empty() => {
                t.problem_at(cx, "level", "key \"level\" is empty");
                None
            }
            Some(s) => Some(s),
            None => {
                if let Some((_, item)) = t.entries().find(|(k, _)| *k == "level") {
                    let message =
                        format!("key \"level\" is {}, expected a string", found_item(item));
                    t.problem_at(cx, "level", message);
                }
                None
            }
        };
        let level = name.map(|name| LevelSpec {
            name: name.to_string(),
            direction: Direction::Above,
            bound: f64::INFINITY, // set from the instrument's interval in `finish`
            deadband: 0.0,
            persist_readings: 1,
            persist_ms: 0,
            keep_active_ms: r.keep_active_s.map_or(0, |s| s.0 * 1000),
            response: r.response.clone().map(|s| s.0).unwrap_or_default(),
        });
        if r.response.is_none() {
            t.missing(cx, "response", " (what the on-call should do)");
        }
        (Some("no_data".to_string()), level.map(|l| vec![l]), factor)
    } else {
        if t.has("factor") {
            let message = "key \"factor\" applies only to kind = \"no_data\"";
            t.problem_at(cx, "factor", message);
        }
        if !t.has("quantity") {
            let why = " (e.g. \"total_head\", \"factor_of_safety\")";
            t.missing(cx, "quantity", why);
        }
        let quantity = r.quantity.clone().map(|s| s.0);
        (quantity, read_levels(cx, t, &r), None)
    };
    let rule = match (&id, &object, &quantity, levels) {
        (Some(id), Some(object), Some(quantity), Some(levels)) if cx.problems.len() == before => {
            Some(Rule {
                id: id.clone(),
                site: site.to_string(),
                object: object.clone(),
                quantity: quantity.clone(),
                spec: Spec {
                    check: if no_data {
                        Check::NoData
                    } else {
                        Check::Threshold
                    },
                    levels,
                    remind_every_ms: policy.remind_every_ms,
                    escalate_after_ms: policy.escalate_after_ms,
                },
            })
        }
        _ => None,
    };
    RuleEntry {
        rule,
        id: id.map(|s| (s, id_pos)),
        object: object.map(|s| (s, object_pos)),
        quantity,
        no_data_factor: factor,
    }
}

fn read_levels(cx: &mut Cx<'_>, t: &Tbl<'_>, d: &RawRule) -> Option<Vec<LevelSpec>> {
    let tables = t.tables(cx, "level");
    if tables.is_empty() {
        if !t.has("level") {
            t.problem(
                cx,
                "no [[rule.level]] tables; expected one per level, least severe first",
            );
        }
        return None;
    }
    let before = cx.problems.len();
    let mut levels: Vec<LevelSpec> = Vec::new();
    let mut names = BTreeSet::new();
    for (i, mut l) in tables.into_iter().enumerate() {
        l.what = format!("{} level #{}", t.what, i + 1);
        l.header = "[[rule.level]]".into();
        let r: RawLevel = de::table(cx, &l).unwrap_or_default();
        let name = r.name.map(|n| n.0);
        if !l.has("name") {
            l.missing(cx, "name", " (your name for the level, e.g. \"watch\")");
        }
        if let Some(n) = name.as_ref().filter(|n| !names.insert(n.to_string())) {
            let message = format!("level name {n:?} is used twice in this rule");
            l.problem_at(cx, "name", message);
        }
        let bound = match (r.above, r.below) {
            (Some(b), None) => Some((Direction::Above, b.0)),
            (None, Some(b)) => Some((Direction::Below, b.0)),
            (Some(_), Some(_)) => {
                let message = "both \"above\" and \"below\" are set; expected one bound per level";
                l.problem(cx, message);
                None
            }
            (None, None) => {
                if !l.has("above") && !l.has("below") {
                    let message = "no bound; expected \"above = <value>\" or \"below = <value>\"";
                    l.problem(cx, message);
                }
                None
            }
        };
        let deadband = r.deadband.or(d.deadband).map_or(0.0, |b| b.0);
        if deadband < 0.0 {
            let message = format!("deadband is {deadband}, expected 0 or more");
            l.problem_at(cx, "deadband", message);
        }
        let persist = r.persist_readings.or(d.persist_readings).map_or(1, |p| p.0);
        let secs = |v: Option<Secs>| v.map_or(0, |s| s.0 * 1000);
        let persist_ms = secs(r.persist_s.or(d.persist_s));
        let keep_active_ms = secs(r.keep_active_s.or(d.keep_active_s));
        let response = r.response.or_else(|| d.response.clone()).map(|s| s.0);
        if response.is_none() {
            let why = " (or in the [[rule]]: what the on-call should do)";
            l.missing(cx, "response", why);
        }
        if let (Some((dir, b)), Some(prev)) = (bound, levels.last()) {
            let ordered = match dir {
                Direction::Above => b > prev.bound,
                Direction::Below => b < prev.bound,
            };
            if dir != prev.direction {
                l.problem(
                    cx,
                    format!(
                        "bound is {} but the level before is {}; expected one direction per rule",
                        dir.name(),
                        prev.direction.name()
                    ),
                );
            } else if !ordered {
                l.problem(cx, format!("{} {b} is not beyond the level before ({}); expected levels least severe first", dir.name(), prev.bound));
            }
        }
        if let (Some(name), Some((direction, bound)), Some(response)) = (name, bound, response) {
            levels.push(LevelSpec {
                name,
                direction,
                bound,
                deadband,
                persist_readings: persist as u32,
                persist_ms,
                keep_active_ms,
                response,
            });
        }
    }
    (cx.problems.len() == before).then_some(levels)
}

/// Checks across site files: rule ids unique; the object of a rule exists (an instrument, or
/// — once objects are loaded, see `CHECK_OBJECT_IDS` — a derived object); an instrument rule
/// names a reading quantity; a no-data rule watches an instrument.
pub(crate) fn cross_check(
    files: &[(PathBuf, &SiteRules)],
    instruments: &BTreeSet<String>,
    objects: &BTreeSet<String>,
    problems: &mut Vec<Problem>,
) {
    let mut ids = FirstSeen::new();
    for (file, sr) in files {
        for e in &sr.rules {
            if let Some((id, pos)) = &e.id {
                if let Some((at, ())) = again(&mut ids, id, (file, *pos), ()) {
                    problems.push(Problem::at(file, *pos, format!("rule id {id:?} is already used at {at}; expected rule ids unique across all sites")));
                }
            }
            let (Some((object, pos)), Some(q)) = (&e.object, &e.quantity) else {
                continue;
            };
            let is_instrument = instruments.contains(object);
            let message = if e.no_data_factor.is_some() || q == "no_data" {
                (!is_instrument).then(|| format!("rule object {object:?} is not an instrument; expected the id of the instrument a no-data rule watches"))
            } else if is_instrument {
                (!is_instrument_quantity(q)).then(|| format!("rule on instrument {object:?}: quantity {q:?} is not a quantity of an instrument; expected one of: {}, {}, rate_<window> (e.g. rate_24h)", READING_QUANTITIES.join(", "), INSTRUMENT_DERIVED.join(", ")))
            } else if CHECK_OBJECT_IDS && !objects.contains(object) {
                Some(format!("rule object {object:?} is neither an instrument nor a configured object (nest, toe, blanket, section)"))
            } else {
                None
            };
            if let Some(m) = message {
                problems.push(Problem::at(file, *pos, m));
            }
        }
    }
}

/// The "safety value unavailable" watch of a threshold rule on a derived object: its id is the
/// rule's with `:unavailable`, its one level the rule's least severe level's name (so the same
/// contact lists hear of it), its bound the site's `unavailable_after_s`.
fn unavailable_companion(rule: &Rule, cfg: &Config, policy: &Policy) -> Option<Rule> {
    let after_ms = policy.unavailable_after_ms?;
    let first = rule.spec.levels.first()?;
    if rule.spec.check != Check::Threshold || cfg.instruments.contains_key(&rule.object) {
        return None;
    }
    Some(Rule {
        id: format!("{}{UNAVAILABLE_SUFFIX}", rule.id),
        site: rule.site.clone(),
        object: rule.object.clone(),
        quantity: rule.quantity.clone(),
        spec: Spec {
            check: Check::Unavailable,
            levels: vec![LevelSpec {
                name: first.name.clone(),
                direction: Direction::Above,
                bound: after_ms as f64 / 1000.0,
                deadband: 0.0,
                persist_readings: 1,
                persist_ms: 0,
                keep_active_ms: 0,
                response: format!(
                    "{} {} has had no value for too long because its inputs could not be used: read its instruments by hand and check them until it returns.",
                    rule.object, rule.quantity
                ),
            }],
            remind_every_ms: rule.spec.remind_every_ms,
            escalate_after_ms: rule.spec.escalate_after_ms,
        },
    })
}

/// The id suffix of a rule's "safety value unavailable" watch.
pub const UNAVAILABLE_SUFFIX: &str = ":unavailable";

/// Put a site file's alerting into the configuration: no-data bounds from the instrument's
/// interval (k × interval_s), then the rules and the site's policy and contacts.
pub(crate) fn finish(cfg: &mut Config, site: &str, sr: SiteRules) {
    for e in sr.rules {
        let Some(mut rule) = e.rule else { continue };
        if let (Some(k), Some(i)) = (e.no_data_factor, cfg.instruments.get(&rule.object)) {
            let i: &Instrument = i;
            if let Some(l) = rule.spec.levels.first_mut() {
                l.bound = k * i.interval_s as f64;
            }
        }
        let companion = unavailable_companion(&rule, cfg, &sr.alerting.policy);
        cfg.alerting.rules.push(rule);
        cfg.alerting.rules.extend(companion);
    }
    cfg.alerting.sites.insert(site.to_string(), sr.alerting);
}
