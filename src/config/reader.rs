//! Typed, located reads from one TOML table of a parsed (span-keeping) document.
//!
//! Owns the generic checks every table gets: unknown keys, missing required keys, a table's
//! located problems, its sub-tables and `[[arrays]]`. Its one typed read, `array`, serves the
//! lists whose elements are located one by one (the object tables' ids and points, `[trends]`'s
//! `rate_windows`); every other value is read through `de`. It does not know what any key means.

use std::ops::Range;

use toml_edit::{Item, TableLike, Value};

use super::problem::Cx;
use super::renamed;

/// One table being read: the table, where it starts, and how messages name it.
pub(crate) struct Tbl<'t> {
    table: &'t dyn TableLike,
    /// Span of the table header (or inline table), for "missing key" problems.
    span: Option<Range<usize>>,
    /// How messages name what this table describes, e.g. `instrument "AB-PZ-1A"` or `[mqtt]`.
    pub what: String,
    /// The table's name as written in the file, e.g. `[instrument.vibrating_wire]`.
    pub header: String,
}

/// How a value is described in a message: strings quoted, numbers as written, others by type.
pub(crate) fn found(v: &Value) -> String {
    match v {
        Value::String(s) => format!("{:?}", s.value()),
        Value::Integer(_) | Value::Float(_) | Value::Boolean(_) | Value::Datetime(_) => {
            v.to_string().trim().to_string()
        }
        Value::Array(_) => "an array".into(),
        Value::InlineTable(_) => "a table".into(),
    }
}

/// A finite number (integers are accepted as numbers).
pub(crate) fn finite(v: &Value) -> Option<f64> {
    number(v).filter(|n| n.is_finite())
}

pub(crate) fn found_item(item: &Item) -> String {
    match item {
        Item::Value(v) => found(v),
        Item::Table(_) => "a table".into(),
        Item::ArrayOfTables(_) => "an array of tables".into(),
        Item::None => "nothing".into(),
    }
}

/// A number (integers are accepted as numbers), finite or not.
fn number(v: &Value) -> Option<f64> {
    match v {
        Value::Float(f) => Some(*f.value()),
        Value::Integer(i) => Some(*i.value() as f64),
        _ => None,
    }
}

impl<'t> Tbl<'t> {
    /// Read `item` as a table; `None` (with a problem) if it is something else.
    pub fn new(
        cx: &mut Cx<'_>,
        item: &'t Item,
        what: impl Into<String>,
        header: impl Into<String>,
    ) -> Option<Self> {
        let what = what.into();
        let header = header.into();
        match item.as_table_like() {
            Some(table) => Some(Tbl {
                table,
                span: item.span(),
                what,
                header,
            }),
            None => {
                cx.at(
                    item.span(),
                    format!("{header} is {}, expected a table", found_item(item)),
                );
                None
            }
        }
    }

    /// Span of the table header, for problems about the table as a whole.
    pub fn span(&self) -> Option<Range<usize>> {
        self.span.clone()
    }

    /// The keys and items of the table, in file order.
    pub fn entries(&self) -> impl Iterator<Item = (&'t str, &'t Item)> + 't {
        self.table.iter()
    }

    /// A required value, or a "missing key" problem at the table header.
    pub fn need<T>(&self, cx: &mut Cx<'_>, key: &str, value: Option<T>) -> Option<T> {
        if value.is_none() && !self.has(key) {
            self.missing(cx, key, "");
        }
        value
    }

    /// A "missing key" problem at the table header for each of `keys` not written.
    pub fn require(&self, cx: &mut Cx<'_>, keys: &[&str]) {
        for key in keys.iter().filter(|k| !self.has(k)) {
            self.missing(cx, key, "");
        }
    }

    /// A problem when the lower bound `(min_key, min)` is above the upper `(max_key, max)`,
    /// located at the one of the two keys written (the lower when both are).
    pub fn min_max(
        &self,
        cx: &mut Cx<'_>,
        (min_key, min): (&str, u64),
        (max_key, max): (&str, u64),
    ) {
        if min > max {
            let at = if self.has(min_key) || !self.has(max_key) {
                min_key
            } else {
                max_key
            };
            let message = format!("{min_key} is {min} but {max_key} is {max}; expected min <= max");
            self.problem_at(cx, at, message);
        }
    }

    /// Whether a key is present.
    pub fn has(&self, key: &str) -> bool {
        self.table.contains_key(key)
    }

    /// A string value, if the key holds one (no problem reported either way).
    pub fn peek_str(&self, key: &str) -> Option<&'t str> {
        self.table.get(key)?.as_str()
    }

    /// Span of a key's value (or of the table when the key is absent).
    pub fn value_span(&self, key: &str) -> Option<Range<usize>> {
        self.table
            .get(key)
            .and_then(Item::span)
            .or_else(|| self.key_span(key))
    }

    /// Span of a key itself (or of the table when the key is absent).
    pub fn key_span(&self, key: &str) -> Option<Range<usize>> {
        self.table
            .key(key)
            .and_then(|k| k.span())
            .or_else(|| self.span())
    }

    /// Record a problem about this table (at its header), prefixed with `what`.
    pub fn problem(&self, cx: &mut Cx<'_>, message: impl AsRef<str>) {
        cx.at(self.span(), format!("{}: {}", self.what, message.as_ref()));
    }

    /// Record a problem at a key's value, prefixed with `what`.
    pub fn problem_at(&self, cx: &mut Cx<'_>, key: &str, message: impl AsRef<str>) {
        cx.at(
            self.value_span(key),
            format!("{}: {}", self.what, message.as_ref()),
        );
    }

    /// Report every key not in `allowed`: an old name with the name that replaced it, any other
    /// with a "did you mean" hint when one is close.
    pub fn check_keys(&self, cx: &mut Cx<'_>, allowed: &[&str]) {
        for (key, _) in self.table.iter() {
            if allowed.contains(&key) {
                continue;
            }
            if let Some(why) = renamed::refusal(key, allowed) {
                cx.at(self.key_span(key), format!("{}: {why}", self.what));
                continue;
            }
            let close = allowed
                .iter()
                .map(|a| (strsim::levenshtein(key, a), *a))
                .filter(|(d, _)| *d <= 2)
                .min();
            let hint = match close {
                Some((_, a)) => format!("did you mean \"{a}\"?"),
                None => format!("expected one of: {}", allowed.join(", ")),
            };
            cx.at(
                self.key_span(key),
                format!(
                    "{}: unknown key \"{key}\" in {}; {hint}",
                    self.what, self.header
                ),
            );
        }
    }

    /// Report a missing required key at the table header.
    pub fn missing(&self, cx: &mut Cx<'_>, key: &str, why: &str) {
        self.problem(cx, format!("missing key \"{key}\" in {}{why}", self.header));
    }

    /// An array (`expected` describes it) whose every element `conv` accepts, each element with
    /// its span (`req`: required). A problem names the first element `conv` rejects and what
    /// each `element` should be.
    pub fn array<T>(
        &self,
        cx: &mut Cx<'_>,
        key: &str,
        req: bool,
        (expected, element): (&str, &str),
        conv: impl Fn(&Value) -> Option<T>,
    ) -> Option<Vec<(T, Option<Range<usize>>)>> {
        let Some(item) = self.table.get(key) else {
            if req {
                self.missing(cx, key, "");
            }
            return None;
        };
        let Some(array) = item.as_array() else {
            let found = found_item(item);
            let message = format!("key \"{key}\" is {found}, expected {expected}");
            self.problem_at(cx, key, message);
            return None;
        };
        let mut out = Vec::with_capacity(array.len());
        for (i, v) in array.iter().enumerate() {
            let Some(t) = conv(v) else {
                cx.at(
                    v.span().or_else(|| self.value_span(key)),
                    format!(
                        "{}: key \"{key}\" element {} is {}, expected {element}",
                        self.what,
                        i + 1,
                        found(v)
                    ),
                );
                return None;
            };
            out.push((t, v.span()));
        }
        Some(out)
    }

    /// A sub-table, if present (a problem if `key` holds something else).
    pub fn sub(&self, cx: &mut Cx<'_>, key: &str, header: &str) -> Option<Tbl<'t>> {
        let item = self.table.get(key)?;
        Tbl::new(cx, item, self.what.clone(), header)
    }

    /// A sub-table that messages name by its own header (`[mqtt.tls]`), if present.
    pub fn part(&self, cx: &mut Cx<'_>, key: &str, header: &str) -> Option<Tbl<'t>> {
        let item = self.table.get(key)?;
        Tbl::new(cx, item, header, header)
    }

    /// The `[[key]]` tables, named `key #1`, `key #2`... in messages (callers rename them once
    /// they know an id). A problem if `key` holds something else; empty when absent.
    pub fn tables(&self, cx: &mut Cx<'_>, key: &str) -> Vec<Tbl<'t>> {
        let Some(item) = self.table.get(key) else {
            return Vec::new();
        };
        let Some(aot) = item.as_array_of_tables() else {
            cx.at(
                item.span(),
                format!(
                    "key \"{key}\" is {}, expected [[{key}]] tables",
                    found_item(item)
                ),
            );
            return Vec::new();
        };
        aot.iter()
            .enumerate()
            .map(|(i, table)| Tbl {
                table,
                span: table.span(),
                what: format!("{key} #{}", i + 1),
                header: format!("[[{key}]]"),
            })
            .collect()
    }
}
