//! One TOML table deserialized into a `#[derive(Deserialize)]` model type or raw struct, every
//! problem located.
//!
//! Owns the bridge from serde to our located problems: unknown keys (old names refused through
//! `renamed`, others with a "did you mean"), wrong types and the checks the value types below
//! carry (non-empty text, integer ranges, finite numbers), each reported at its key with
//! file:line:column, all keys of a table at once. The raw structs and their validation live
//! with their tables; a table declares each key once, with its type, bound and default.
//!
//! Value types beside `Int`/`Text`/`Num`: `Strings` (non-blank strings), `Bounded` (`Above`,
//! `AtLeast`, `Within`), `Pair` (`[low, high]`), `Label` (a string or an integer), `DateText` (a
//! string or a TOML date), `Nested` (a sub-table read on its own). A model field of a plain type
//! is read through one of them with `via`/`via_opt` (`de::ms` for seconds kept in milliseconds).
//!
//! Every field optional (`Option<T>`, or `#[serde(default)]` on the struct with its `Default`
//! holding the defaults), required keys asked for in validation with `Tbl::need`/`Tbl::require`;
//! no `#[serde(flatten)]` (the key list is read from the derive): `table2` reads a table whose
//! keys are split between a model type and the keys it does not keep.

use serde::de::{self, DeserializeOwned, IntoDeserializer};
use serde::{Deserialize, Deserializer};
use toml_edit::{InlineTable, Item, Value};

use super::problem::Cx;
use super::reader::{found_item, Tbl};

/// Deserialize table `t` into `T`, reporting (at once, located) unknown keys, wrong types and
/// failed value checks. A key at fault is left out, as if absent, so that validation still runs
/// and reports its own problems; callers judge the table by the problem count, as before.
pub(crate) fn table<T: DeserializeOwned>(cx: &mut Cx<'_>, t: &Tbl<'_>) -> Option<T> {
    t.check_keys(cx, fields::<T>());
    keys_of(cx, t)
}

/// `table` for a table whose keys are shared by two structs: a model type read straight from
/// the table, and `U`, the keys it does not keep (secrets, sub-tables read on their own).
pub(crate) fn table2<T: DeserializeOwned, U: DeserializeOwned>(
    cx: &mut Cx<'_>,
    t: &Tbl<'_>,
) -> Option<(T, U)> {
    t.check_keys(cx, &[fields::<T>(), fields::<U>()].concat());
    let u = keys_of(cx, t);
    Some((keys_of(cx, t)?, u?))
}

/// `T` from the keys of `t` it declares, each key at fault reported and left out.
fn keys_of<T: DeserializeOwned>(cx: &mut Cx<'_>, t: &Tbl<'_>) -> Option<T> {
    let keys = fields::<T>();
    let mut known: Vec<(&str, &Item)> = t.entries().filter(|(k, _)| keys.contains(k)).collect();
    if let Ok(v) = from_entries::<T>(&known) {
        return Some(v);
    }
    // Judge each key alone (every field is optional) and leave out those at fault.
    known.retain(|(key, item)| {
        let Err(e) = from_entries::<T>(&[(key, item)]) else {
            return true;
        };
        let whole = e.span().is_none() || e.span() == item.span();
        let tail = tail(e.message(), whole.then(|| found_item(item)));
        let span = e.span().or_else(|| t.value_span(key));
        cx.at(span, format!("{}: key \"{key}\" {tail}", t.what));
        false
    });
    from_entries::<T>(&known).ok()
}

/// `table` for one of several tables told apart by a key (`[[rule]]` by its `id`): messages
/// name it `noun "value"` once the key holds text; a table with problems reads as the default.
pub(crate) fn named<T: DeserializeOwned + Default>(
    cx: &mut Cx<'_>,
    t: &mut Tbl<'_>,
    (noun, key): (&str, &str),
) -> T {
    if let Some(v) = t.peek_str(key).filter(|v| !v.trim().is_empty()) {
        t.what = format!("{noun} {v:?}");
    }
    table(cx, t).unwrap_or_default()
}

/// `T` from some entries of a table (values keep their spans).
fn from_entries<T: DeserializeOwned>(entries: &[(&str, &Item)]) -> Result<T, toml_edit::de::Error> {
    let mut inline = InlineTable::new();
    for (key, item) in entries {
        if let Ok(v) = (*item).clone().into_value() {
            inline.insert(*key, v);
        }
    }
    T::deserialize(Value::InlineTable(inline).into_deserializer())
}

/// The rest of a problem after `key "name" `, in our words: serde's "invalid type: string "x",
/// expected i64" becomes `is "x", expected an integer`; our value types already speak so.
fn tail(message: &str, found: Option<String>) -> String {
    if message == "wanted string or table" {
        // toml_edit's word for a choice (an enum) written as something other than a string.
        return format!("is {}, expected a string", found.unwrap_or_default());
    }
    let prefixes = ["invalid type: ", "invalid value: ", "unknown variant "];
    let Some((kind, rest)) = prefixes
        .iter()
        .find_map(|p| Some((*p, message.strip_prefix(p)?)))
    else {
        return message.to_string();
    };
    let (unexpected, expected) = rest.rsplit_once(", expected ").unwrap_or((rest, ""));
    let found = found.unwrap_or_else(|| serde_found(unexpected));
    let expected = if kind == "unknown variant " {
        let names = expected.trim_start_matches("one of ").replace('`', "");
        format!("one of: {}", names.replace(" or ", ", "))
    } else {
        plain(expected).to_string()
    };
    format!("is {found}, expected {expected}")
}

/// Serde's name for an expected type, in our words.
fn plain(expected: &str) -> &str {
    match expected {
        "i8" | "i16" | "i32" | "i64" | "u8" | "u16" | "u32" | "u64" | "usize" => "an integer",
        "f32" | "f64" => "a number",
        "a boolean" => "true or false",
        "a sequence" => "an array",
        "a map" | "struct" => "a table",
        e => e,
    }
}

/// Serde's description of a found value (`string "x"`, ``integer `3` ``), in our words.
fn serde_found(unexpected: &str) -> String {
    let inner = |s: &str| {
        s.split_once('`')
            .map(|(_, r)| r.trim_end_matches('`').to_string())
    };
    match unexpected.split_once(' ') {
        Some(("string", s)) => s.to_string(),
        Some(("integer" | "floating" | "boolean", _)) => inner(unexpected).unwrap_or_default(),
        _ if unexpected == "sequence" => "an array".into(),
        _ if unexpected == "map" => "a table".into(),
        _ => unexpected.to_string(),
    }
}

/// The keys `T` accepts, as its derive lists them.
pub(crate) fn fields<T: DeserializeOwned>() -> &'static [&'static str] {
    let mut probe = Fields(&[]);
    let _ = T::deserialize(&mut probe);
    probe.0
}

/// The names of a derived enum's variants as written, in declaration order (`Kind::X as usize`
/// indexes them).
pub(crate) fn variants<T: DeserializeOwned>() -> &'static [&'static str] {
    fields::<T>()
}

/// A deserializer that only records the field (or variant) list a derived type asks for.
struct Fields(&'static [&'static str]);

impl<'de> Deserializer<'de> for &mut Fields {
    type Error = de::value::Error;

    fn deserialize_any<V: de::Visitor<'de>>(self, _: V) -> Result<V::Value, Self::Error> {
        Err(de::Error::custom("not a struct"))
    }

    fn deserialize_struct<V: de::Visitor<'de>>(
        self,
        _: &'static str,
        fields: &'static [&'static str],
        _: V,
    ) -> Result<V::Value, Self::Error> {
        self.0 = fields;
        Err(de::Error::custom("fields recorded"))
    }

    fn deserialize_enum<V: de::Visitor<'de>>(
        self,
        _: &'static str,
        variants: &'static [&'static str],
        _: V,
    ) -> Result<V::Value, Self::Error> {
        self.0 = variants;
        Err(de::Error::custom("variants recorded"))
    }

    serde::forward_to_deserialize_any! {
        bool i8 i16 i32 i64 i128 u8 u16 u32 u64 u128 f32 f64 char str string bytes byte_buf
        option unit unit_struct newtype_struct seq tuple tuple_struct map identifier
        ignored_any
    }
}

/// A sub-table read as a table of its own (`Tbl::sub`, then `table`), so its problems carry its
/// own name: accepted here as a key, not read.
#[derive(Debug)]
pub(crate) struct Nested;

impl<'de> Deserialize<'de> for Nested {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        de::IgnoredAny::deserialize(d).map(|_| Nested)
    }
}

/// A value read after the table through `Tbl`'s reads (an array whose elements are located one
/// by one): accepted here as a key, not read.
pub(crate) type Later = Nested;

/// An integer within `LO..=HI` ("is 0, expected between 1 and 65535" otherwise).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Int<const LO: i64, const HI: i64>(pub i64);

impl<const LO: i64, const HI: i64> Int<LO, HI> {
    /// The value, for a `u64` field.
    pub fn u64(self) -> u64 {
        self.0 as u64
    }
}

impl<'de, const LO: i64, const HI: i64> Deserialize<'de> for Int<LO, HI> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let n = i64::deserialize(d)?;
        if (LO..=HI).contains(&n) {
            return Ok(Int(n));
        }
        Err(de::Error::custom(if HI == i64::MAX {
            format!("is {n}, expected at least {LO}")
        } else {
            format!("is {n}, expected between {LO} and {HI}")
        }))
    }
}

/// A model field read through the checking type `C` (`Int`, `Text`...):
/// `#[serde(deserialize_with = "de::via::<Int<1, 65535>, _, _>")]` on a plain `u16`.
pub(crate) fn via<'de, C: Deserialize<'de> + Into<T>, T, D: Deserializer<'de>>(
    d: D,
) -> Result<T, D::Error> {
    C::deserialize(d).map(Into::into)
}

/// `via` for an optional model field (absent stays `None`, with `#[serde(default)]`).
pub(crate) fn via_opt<'de, C: Deserialize<'de> + Into<T>, T, D: Deserializer<'de>>(
    d: D,
) -> Result<Option<T>, D::Error> {
    C::deserialize(d).map(|c| Some(c.into()))
}

/// Seconds as written (0 to `HI`), in milliseconds.
pub(crate) fn ms<'de, const HI: i64, D: Deserializer<'de>>(d: D) -> Result<i64, D::Error> {
    Int::<0, HI>::deserialize(d).map(|s| s.0 * 1000)
}

/// Seconds as written (at most a year), in milliseconds; 0 is never (`None`).
pub(crate) fn ms_or_never<'de, D: Deserializer<'de>>(d: D) -> Result<Option<i64>, D::Error> {
    ms::<{ super::limits::YEAR_S }, D>(d).map(|ms| Some(ms).filter(|ms| *ms > 0))
}

macro_rules! int_into {
    ($($t:ty),*) => {$(
        impl<const LO: i64, const HI: i64> From<Int<LO, HI>> for $t {
            /// In range by construction (`LO..=HI` fits the field's type).
            fn from(n: Int<LO, HI>) -> $t {
                n.0 as $t
            }
        }
    )*};
}
int_into!(u8, u16, u32, u64, usize, i64);

impl From<Pair> for (f64, f64) {
    fn from(p: Pair) -> (f64, f64) {
        (p.0, p.1)
    }
}

impl From<Text> for String {
    fn from(t: Text) -> String {
        t.0
    }
}

impl From<Text> for std::path::PathBuf {
    fn from(t: Text) -> std::path::PathBuf {
        t.0.into()
    }
}

/// A string that is not blank ("is empty" otherwise).
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct Text(pub String);

impl<'de> Deserialize<'de> for Text {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let s = String::deserialize(d)?;
        if s.trim().is_empty() {
            return Err(de::Error::custom("is empty"));
        }
        Ok(Text(s))
    }
}

/// A list of non-blank strings, not empty when `NONEMPTY`.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub(crate) struct Strings<const NONEMPTY: bool>(pub Vec<String>);

impl<'de, const NONEMPTY: bool> Deserialize<'de> for Strings<NONEMPTY> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let v = Vec::<String>::deserialize(d)?;
        if v.iter().any(|s| s.trim().is_empty()) || (NONEMPTY && v.is_empty()) {
            let message = "has an empty entry or is empty; expected non-empty strings";
            return Err(de::Error::custom(message));
        }
        Ok(Strings(v))
    }
}

impl<const NONEMPTY: bool> From<Strings<NONEMPTY>> for Vec<String> {
    fn from(s: Strings<NONEMPTY>) -> Vec<String> {
        s.0
    }
}

/// A finite number; integers are numbers too ("is inf, expected a finite number" otherwise).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Num(pub f64);

impl<'de> Deserialize<'de> for Num {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let n = f64::deserialize(d)?;
        if !n.is_finite() {
            let message = format!("is {n}, expected a finite number");
            return Err(de::Error::custom(message));
        }
        Ok(Num(n))
    }
}

/// `[low, high]`: two finite numbers with low < high.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Pair(pub f64, pub f64);

impl<'de> Deserialize<'de> for Pair {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> de::Visitor<'de> for V {
            type Value = Pair;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("[low, high] (two numbers)")
            }
            fn visit_seq<A: de::SeqAccess<'de>>(self, mut seq: A) -> Result<Pair, A::Error> {
                let bad = || de::Error::custom("is an array, expected [low, high] (two numbers)");
                let mut n = Vec::new();
                while let Some(x) = seq.next_element::<f64>().map_err(|_| bad())? {
                    n.push(x);
                }
                let &[lo, hi] = n.as_slice() else {
                    return Err(bad());
                };
                if !(lo.is_finite() && hi.is_finite() && lo < hi) {
                    return Err(de::Error::custom(format!(
                        "is [{lo}, {hi}], expected finite [low, high] with low < high"
                    )));
                }
                Ok(Pair(lo, hi))
            }
        }
        d.deserialize_seq(V)
    }
}

/// A non-empty label written as a string or an integer (`channel = 3` means `"3"`).
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct Label(pub String);

impl<'de> Deserialize<'de> for Label {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let s = d.deserialize_any(TextOf("a string or an integer"))?;
        if s.trim().is_empty() {
            return Err(de::Error::custom("is empty"));
        }
        Ok(Label(s))
    }
}

/// A date or date-time as text: a TOML string or a TOML date/date-time value (the caller
/// parses it and says what it expected).
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct DateText(pub String);

impl<'de> Deserialize<'de> for DateText {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(TextOf(DATE)).map(DateText)
    }
}

const DATE: &str = "an RFC 3339 date or date-time";

/// Text written as a string, or as what `.0` (the expected, in messages) says: an integer for
/// a label, a TOML date-time for a date.
struct TextOf(&'static str);

impl<'de> de::Visitor<'de> for TextOf {
    type Value = String;
    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str(self.0)
    }
    fn visit_str<E: de::Error>(self, s: &str) -> Result<String, E> {
        Ok(s.to_string())
    }
    fn visit_i64<E: de::Error>(self, i: i64) -> Result<String, E> {
        match self.0 {
            DATE => Err(de::Error::invalid_type(de::Unexpected::Signed(i), &self)),
            _ => Ok(i.to_string()),
        }
    }
    fn visit_map<A: de::MapAccess<'de>>(self, mut map: A) -> Result<String, A::Error> {
        // A TOML date-time reaches serde as a one-entry map holding its text.
        match (self.0, map.next_key::<de::IgnoredAny>()?) {
            (DATE, Some(_)) => map.next_value(),
            _ => Err(de::Error::invalid_type(de::Unexpected::Map, &self)),
        }
    }
}

/// A finite number above `LO` (`OPEN`) or of at least `LO`, and at most `HI` (unbounded at
/// `i64::MAX`): "is 0, expected a number > 0" (`Above`), "is -1, expected a number >= 0"
/// (`AtLeast`), "is 0, expected a number > 0 and at most 8784" (`Within`) otherwise.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Bounded<const LO: i64, const HI: i64, const OPEN: bool>(pub f64);

/// A finite number above `LO`.
pub(crate) type Above<const LO: i64> = Bounded<LO, { i64::MAX }, true>;
/// A finite number of at least `LO`.
pub(crate) type AtLeast<const LO: i64> = Bounded<LO, { i64::MAX }, false>;
/// A finite number above `LO` and at most `HI`.
pub(crate) type Within<const LO: i64, const HI: i64> = Bounded<LO, HI, true>;

impl<'de, const LO: i64, const HI: i64, const OPEN: bool> Deserialize<'de>
    for Bounded<LO, HI, OPEN>
{
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let Num(n) = Num::deserialize(d)?;
        let (lo, hi) = (LO as f64, HI as f64);
        if (n > lo || (!OPEN && n == lo)) && (HI == i64::MAX || n <= hi) {
            return Ok(Bounded(n));
        }
        let above = if OPEN { ">" } else { ">=" };
        let most = if HI == i64::MAX {
            String::new()
        } else {
            format!(" and at most {HI}")
        };
        let message = format!("is {n}, expected a number {above} {LO}{most}");
        Err(de::Error::custom(message))
    }
}

impl<const LO: i64, const HI: i64, const OPEN: bool> From<Bounded<LO, HI, OPEN>> for f64 {
    fn from(n: Bounded<LO, HI, OPEN>) -> f64 {
        n.0
    }
}

impl From<Num> for f64 {
    fn from(n: Num) -> f64 {
        n.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn serde_words_become_ours() {
        assert_eq!(
            tail("invalid type: string \"x\", expected i64", None),
            "is \"x\", expected an integer"
        );
        assert_eq!(
            tail("invalid type: integer `3`, expected a boolean", None),
            "is 3, expected true or false"
        );
        assert_eq!(
            tail(
                "unknown variant `ssl`, expected one of `starttls`, `tls`, `plain`",
                Some("\"ssl\"".into())
            ),
            "is \"ssl\", expected one of: starttls, tls, plain"
        );
        assert_eq!(tail("is empty", None), "is empty");
        assert_eq!(
            tail("wanted string or table", Some("3".into())),
            "is 3, expected a string"
        );
    }

    #[test]
    fn every_key_at_fault_is_reported_located_and_the_rest_kept() {
        #[derive(Deserialize)]
        struct Raw {
            port: Option<Int<1, 65535>>,
            name: Option<Text>,
            on: Option<bool>,
            kept: Option<i64>,
        }
        let text = "[t]\nport = 0\nname = \" \"\non = \"yes\"\nkept = 4\nnmae = 1\n";
        let doc = text.parse::<toml_edit::ImDocument<String>>().unwrap();
        let (lines, mut problems) = (super::super::problem::LineIndex::new(text), Vec::new());
        let file = std::path::Path::new("s.toml");
        let mut cx = Cx {
            file,
            text,
            lines: &lines,
            problems: &mut problems,
        };
        let item = doc.as_table().get("t").unwrap();
        let t = Tbl::new(&mut cx, item, "[t]", "[t]").unwrap();
        let raw: Raw = table(&mut cx, &t).unwrap();
        assert_eq!(
            (raw.port, raw.name, raw.on, raw.kept),
            (None, None, None, Some(4))
        );
        let shown: Vec<String> = problems.iter().map(ToString::to_string).collect();
        assert_eq!(
            shown,
            [
                "s.toml:6:1: [t]: unknown key \"nmae\" in [t]; did you mean \"name\"?",
                "s.toml:2:8: [t]: key \"port\" is 0, expected between 1 and 65535",
                "s.toml:3:8: [t]: key \"name\" is empty",
                "s.toml:4:6: [t]: key \"on\" is \"yes\", expected true or false",
            ]
        );
    }

    #[test]
    fn field_names_come_from_the_derive() {
        #[derive(Deserialize)]
        #[allow(dead_code)]
        struct Raw {
            a: Option<i64>,
            b_c: Option<String>,
        }
        assert_eq!(fields::<Raw>(), ["a", "b_c"]);
        #[derive(Deserialize)]
        #[serde(rename_all = "snake_case")]
        #[allow(dead_code)]
        enum Choice {
            One,
            TwoWords,
        }
        assert_eq!(variants::<Choice>(), ["one", "two_words"]);
    }
}
