//! Checks of object values shared by every kind, on top of the raw values `de::table` read:
//! required numbers, lengths in metres, instrument references (recorded for `refs`),
//! levels from a gauge or a fixed elevation, and lengths that a case needs or excludes; lists
//! of instrument ids, whose elements are located one by one, read through `reader::Tbl`.
//!
//! Owns those messages. Must not know which keys a table has (each kind's raw struct does).

use super::{Ref, Want};
use crate::config::de::{Above, Num, Text};
use crate::config::model::Level;
use crate::config::problem::Cx;
use crate::config::reader::Tbl;

/// One object table being read, with the references found so far.
pub(crate) struct Reader<'t> {
    pub t: Tbl<'t>,
    /// Metres per unit of the site's `length_unit`.
    pub m: f64,
    pub refs: Vec<Ref>,
}

impl Reader<'_> {
    /// A number as written; `req`: a missing key is a problem.
    pub(super) fn number<N: Into<f64>>(
        &self,
        cx: &mut Cx<'_>,
        key: &str,
        v: Option<N>,
        req: bool,
    ) -> Option<f64> {
        let v = if req { self.t.need(cx, key, v) } else { v };
        v.map(Into::into)
    }

    /// A length in the site's unit, in metres; `req`: a missing key is a problem.
    pub(super) fn length<N: Into<f64>>(
        &self,
        cx: &mut Cx<'_>,
        key: &str,
        v: Option<N>,
        req: bool,
    ) -> Option<f64> {
        self.number(cx, key, v, req).map(|v| v * self.m)
    }

    /// One instrument id under `key`, recorded as a reference.
    pub(crate) fn reference(
        &mut self,
        cx: &mut Cx<'_>,
        key: &'static str,
        v: Option<Text>,
        req: bool,
        want: Want,
    ) -> Option<String> {
        let v = if req { self.t.need(cx, key, v) } else { v };
        let Text(id) = v?;
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

    /// A level from a stage gauge (`gauge`) or a fixed elevation (`level`): never both; one
    /// of them when `req`. `None` when neither is written (or after a problem).
    pub(super) fn level(
        &mut self,
        cx: &mut Cx<'_>,
        (gauge_key, gauge): (&'static str, Option<Text>),
        (level_key, level): (&str, Option<Num>),
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
        let gauge = self.reference(cx, gauge_key, gauge, false, Want::StageGauge);
        let fixed = self.length(cx, level_key, level, false);
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
        (key, v): (&str, Option<Above<0>>),
        (case_key, case): (&str, &str),
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
        self.length(cx, key, v, false)
    }
}
