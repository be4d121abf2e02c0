//! Typed reads of object values on top of `reader::Tbl`: numbers with a range rule, lengths in
//! metres, instrument references (recorded for `refs`), levels from a gauge or a fixed
//! elevation, and lengths that a case needs or excludes.
//!
//! Owns those messages. Must not know which keys a table has (that is `objects`).

use super::{Ref, Want};
use crate::config::model::Level;
use crate::config::problem::Cx;
use crate::config::reader::Tbl;

/// The spelling of a case, for messages.
pub(super) fn name<T: PartialEq>(options: &[(&'static str, T)], case: &T) -> &'static str {
    options
        .iter()
        .find(|(_, o)| o == case)
        .map_or("", |(n, _)| *n)
}

/// What a number must be.
#[derive(Clone, Copy)]
pub(super) enum Rule {
    Any,
    Positive,
    NonNegative,
    Above(f64),
}

impl Rule {
    fn admits(self, v: f64) -> bool {
        match self {
            Rule::Any => true,
            Rule::Positive => v > 0.0,
            Rule::NonNegative => v >= 0.0,
            Rule::Above(lo) => v > lo,
        }
    }

    fn text(self) -> String {
        match self {
            Rule::Any => "a number".into(),
            Rule::Positive => "a number > 0".into(),
            Rule::NonNegative => "a number >= 0".into(),
            Rule::Above(lo) => format!("a number > {lo}"),
        }
    }
}

/// One object table being read, with the references found so far.
pub(super) struct Reader<'t> {
    pub t: Tbl<'t>,
    /// Metres per unit of the site's `length_unit`.
    pub m: f64,
    pub refs: Vec<Ref>,
}

impl Reader<'_> {
    /// A finite number obeying `rule`, as written (no unit conversion).
    pub(super) fn number(&self, cx: &mut Cx<'_>, key: &str, req: bool, rule: Rule) -> Option<f64> {
        let v = self.t.number(cx, key, req)?;
        if !rule.admits(v) {
            let expected = rule.text();
            self.t.problem_at(
                cx,
                key,
                format!("key \"{key}\" is {v}, expected {expected}"),
            );
            return None;
        }
        Some(v)
    }

    /// A length in the site's unit obeying `rule`, in metres.
    pub(super) fn length(&self, cx: &mut Cx<'_>, key: &str, req: bool, rule: Rule) -> Option<f64> {
        self.number(cx, key, req, rule).map(|v| v * self.m)
    }

    /// One instrument id under `key`, recorded as a reference.
    pub(super) fn reference(
        &mut self,
        cx: &mut Cx<'_>,
        key: &'static str,
        req: bool,
        want: Want,
    ) -> Option<String> {
        if req && !self.t.has(key) {
            self.t.missing(cx, key, "");
            return None;
        }
        let id = self.t.nonempty(cx, key)?;
        let pos = cx.pos(self.t.value_span(key));
        self.refs.push(Ref {
            key,
            id: id.clone(),
            pos,
            want,
        });
        Some(id)
    }

    /// A list of at least `min` distinct instrument ids under `key` (`noun`: what each is, for
    /// messages), each recorded as a reference.
    pub(super) fn references(
        &mut self,
        cx: &mut Cx<'_>,
        key: &'static str,
        min: usize,
        noun: &str,
        want: Want,
    ) -> Option<Vec<String>> {
        let ids = self.t.array(
            cx,
            key,
            true,
            (
                "an array of instrument ids",
                "an instrument id (a non-empty string)",
            ),
            |v| {
                v.as_str()
                    .filter(|s| !s.trim().is_empty())
                    .map(String::from)
            },
        )?;
        let before = cx.problems.len();
        if ids.len() < min {
            self.t.problem_at(
                cx,
                key,
                format!(
                    "key \"{key}\" lists {} {noun}(s), expected at least {min}",
                    ids.len()
                ),
            );
        }
        for (i, (id, span)) in ids.iter().enumerate() {
            if ids[..i].iter().any(|(earlier, _)| earlier == id) {
                cx.at(
                    span.clone(),
                    format!(
                        "{}: key \"{key}\" lists {id:?} twice; expected distinct {noun}s",
                        self.t.what
                    ),
                );
                continue;
            }
            let pos = cx.pos(span.clone().or_else(|| self.t.value_span(key)));
            self.refs.push(Ref {
                key,
                id: id.clone(),
                pos,
                want,
            });
        }
        let ids = ids.into_iter().map(|(id, _)| id).collect();
        Some(ids).filter(|_| cx.problems.len() == before)
    }

    /// A level from a stage gauge (`gauge_key`) or a fixed elevation (`level_key`): never both;
    /// one of them when `req`. `None` when neither is written (or after a problem).
    pub(super) fn level(
        &mut self,
        cx: &mut Cx<'_>,
        gauge_key: &'static str,
        level_key: &str,
        req: bool,
    ) -> Option<Level> {
        let (g, l) = (self.t.has(gauge_key), self.t.has(level_key));
        if g && l {
            self.t.problem_at(
                cx,
                level_key,
                format!(
                    "both \"{gauge_key}\" and \"{level_key}\" are set; expected only one \
                     (a stage gauge for a measured level, or a fixed elevation)"
                ),
            );
        } else if req && !g && !l {
            self.t.problem(
                cx,
                format!(
                    "missing key \"{level_key}\" or \"{gauge_key}\" in {}; expected a fixed \
                     elevation or a stage gauge",
                    self.t.header
                ),
            );
        }
        let gauge = self.reference(cx, gauge_key, false, Want::StageGauge);
        let fixed = self.length(cx, level_key, false, Rule::Any);
        match (gauge, fixed) {
            (Some(id), None) => Some(Level::Gauge(id)),
            (None, Some(m)) => Some(Level::Fixed(m)),
            _ => None,
        }
    }

    /// A length that `case` needs (`needed`) or that does not apply to it.
    pub(super) fn case_length(
        &self,
        cx: &mut Cx<'_>,
        key: &str,
        case_key: &str,
        case: &str,
        needed: bool,
    ) -> Option<f64> {
        if needed && !self.t.has(key) {
            self.t
                .missing(cx, key, &format!(" (required for {case_key} = \"{case}\")"));
        } else if !needed && self.t.has(key) {
            self.t.problem_at(
                cx,
                key,
                format!("key \"{key}\" does not apply to {case_key} = \"{case}\"; remove it or change {case_key}"),
            );
        }
        self.length(cx, key, false, Rule::Positive)
    }
}
