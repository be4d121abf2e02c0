//! The InfluxDB line-protocol schema of seepd (documented in README "InfluxDB export"): stored
//! rows to lines, with the escaping the line-protocol specification asks for.
//!
//! Owns measurement, tag and field names. Pure: no I/O, no clock.
//!
//! - `seepd_reading`: one line per computed quantity of a reading; tags `instrument`, `kind`,
//!   `quantity` (`engineering_value`, `pressure`, `pressure_head`, `total_head`), `reach`,
//!   `section`, `site`, `unit`; field `value`.
//! - `seepd_input`: what the logger sent, one line per reading; tags `instrument`, `kind`,
//!   `reach`, `section`, `site`; fields `raw`, `temperature_c`, `baro_kpa` (when present) and
//!   `flags` (integer bit set).
//! - `seepd_derived`: one line per computed derived value; tags `object`, `object_kind`,
//!   `quantity`, `site`, `unit`; field `value`.
//!
//! Timestamps are milliseconds since the epoch (`precision=ms`). Tags are written in key order;
//! absent or empty tags are left out; non-finite numbers are never written.

use std::collections::HashMap;
use std::fmt::Write as _;

use crate::config::Config;
use crate::store::export::{DerivedPoint, ExportRow, ReadingPoint};

/// Site and kind of each derived-quantity object, from the configuration.
#[derive(Debug, Clone, Default)]
pub struct ObjectTags {
    /// object id → (site, object kind).
    map: HashMap<String, (String, &'static str)>,
}

impl ObjectTags {
    /// The objects of `cfg`.
    pub fn from_config(cfg: &Config) -> ObjectTags {
        let map = cfg
            .objects
            .all()
            .map(|(kind, id, site)| (id.to_string(), (site.to_string(), kind.export_tag())))
            .collect();
        ObjectTags { map }
    }
}

/// Append `s` escaped for a measurement name (comma, space).
fn measurement(out: &mut String, s: &str) {
    escape(out, s, &[',', ' ']);
}

/// Append `s` escaped for a tag key, tag value or field key (comma, equals sign, space; a
/// backslash is doubled so that it stays literal; line breaks, which no escape can carry,
/// become spaces).
fn key(out: &mut String, s: &str) {
    escape(out, s, &[',', '=', ' ']);
}

fn escape(out: &mut String, s: &str, special: &[char]) {
    for c in s.chars() {
        let c = if c == '\n' || c == '\r' { ' ' } else { c };
        if c == '\\' || special.contains(&c) {
            out.push('\\');
        }
        out.push(c);
    }
}

/// One line being written: measurement, tags in key order, fields, timestamp.
struct Line<'o> {
    out: &'o mut String,
    /// Where the line started (to take it back if it gets no field).
    start: usize,
    fields: usize,
}

impl<'o> Line<'o> {
    fn new(out: &'o mut String, name: &str) -> Self {
        let start = out.len();
        measurement(out, name);
        Line {
            out,
            start,
            fields: 0,
        }
    }

    fn tag(&mut self, k: &str, v: Option<&str>) -> &mut Self {
        if let Some(v) = v.filter(|v| !v.is_empty()) {
            self.out.push(',');
            key(self.out, k);
            self.out.push('=');
            key(self.out, v);
        }
        self
    }

    fn float(&mut self, k: &str, v: Option<f64>) -> &mut Self {
        if let Some(v) = v.filter(|v| v.is_finite()) {
            self.out.push(if self.fields == 0 { ' ' } else { ',' });
            key(self.out, k);
            let _ = write!(self.out, "={v}");
            self.fields += 1;
        }
        self
    }

    fn int(&mut self, k: &str, v: i64) -> &mut Self {
        self.out.push(if self.fields == 0 { ' ' } else { ',' });
        key(self.out, k);
        let _ = write!(self.out, "={v}i");
        self.fields += 1;
        self
    }

    /// Finish with the timestamp; returns 1 if a line was written, 0 if it had no field.
    fn end(&mut self, t_ms: i64) -> usize {
        if self.fields == 0 {
            self.out.truncate(self.start);
            return 0;
        }
        let _ = writeln!(self.out, " {t_ms}");
        1
    }
}

/// Append the lines of `row` to `out`; returns how many points were written.
pub fn encode(row: &ExportRow, objects: &ObjectTags, out: &mut String) -> usize {
    match row {
        ExportRow::Reading(r) => encode_reading(r, out),
        ExportRow::Derived(d) => encode_derived(d, objects, out),
    }
}

fn encode_reading(r: &ReadingPoint, out: &mut String) -> usize {
    use crate::model::ReadingQuantity as Q;
    let quantities = [
        (
            Q::EngineeringValue.name(),
            Some(r.eng_value),
            r.eng_unit.as_str(),
        ),
        (Q::Pressure.name(), r.pressure_kpa, "kPa"),
        (Q::PressureHead.name(), r.pressure_head_m, "m"),
        (Q::TotalHead.name(), r.total_head_m, "m"),
    ];
    let mut n = 0;
    for (quantity, value, unit) in quantities {
        if !value.is_some_and(f64::is_finite) {
            continue;
        }
        n += Line::new(out, "seepd_reading")
            .tag("instrument", Some(&r.instrument))
            .tag("kind", r.kind.as_deref())
            .tag("quantity", Some(quantity))
            .tag("reach", r.reach.as_deref())
            .tag("section", r.section.as_deref())
            .tag("site", r.site.as_deref())
            .tag("unit", Some(unit))
            .float("value", value)
            .end(r.t_ms);
    }
    n + Line::new(out, "seepd_input")
        .tag("instrument", Some(&r.instrument))
        .tag("kind", r.kind.as_deref())
        .tag("reach", r.reach.as_deref())
        .tag("section", r.section.as_deref())
        .tag("site", r.site.as_deref())
        .float("raw", Some(r.raw))
        .float("temperature_c", r.temperature_c)
        .float("baro_kpa", r.baro_kpa)
        .int("flags", i64::from(r.flags))
        .end(r.t_ms)
}

fn encode_derived(d: &DerivedPoint, objects: &ObjectTags, out: &mut String) -> usize {
    let (site, kind) = match objects.map.get(&d.object) {
        Some((site, kind)) => (Some(site.as_str()), Some(*kind)),
        None => (None, None),
    };
    Line::new(out, "seepd_derived")
        .tag("object", Some(&d.object))
        .tag("object_kind", kind)
        .tag("quantity", Some(&d.quantity))
        .tag("site", site)
        .tag("unit", Some(&d.unit))
        .float("value", d.value)
        .end(d.t_ms)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reading() -> ReadingPoint {
        ReadingPoint {
            instrument: "AB-PZ-1A".into(),
            site: Some("ash-bend".into()),
            kind: Some("vibrating_wire".into()),
            reach: Some("Upper reach, km 2=3".into()),
            section: None,
            t_ms: 1_772_366_400_123,
            raw: 2801.4,
            temperature_c: Some(11.2),
            baro_kpa: None,
            eng_value: 7847.84,
            eng_unit: "digits".into(),
            pressure_kpa: Some(23.66),
            pressure_head_m: None,
            total_head_m: Some(97.412),
            flags: 2,
        }
    }

    #[test]
    fn a_reading_gives_one_line_per_quantity_and_one_input_line() {
        let mut out = String::new();
        let n = encode(
            &ExportRow::Reading(reading()),
            &ObjectTags::default(),
            &mut out,
        );
        let tags = "instrument=AB-PZ-1A,kind=vibrating_wire";
        let place = r"reach=Upper\ reach\,\ km\ 2\=3,site=ash-bend";
        let expected = format!(
            "seepd_reading,{tags},quantity=engineering_value,{place},unit=digits value=7847.84 1772366400123\n\
             seepd_reading,{tags},quantity=pressure,{place},unit=kPa value=23.66 1772366400123\n\
             seepd_reading,{tags},quantity=total_head,{place},unit=m value=97.412 1772366400123\n\
             seepd_input,{tags},{place} raw=2801.4,temperature_c=11.2,flags=2i 1772366400123\n"
        );
        assert_eq!(out, expected);
        assert_eq!(n, 4);
    }

    #[test]
    fn escaping_follows_the_line_protocol_rules() {
        let mut out = String::new();
        measurement(&mut out, "a b,c=d");
        assert_eq!(out, r"a\ b\,c=d");
        out.clear();
        key(&mut out, "x=1, y\\z\nw");
        assert_eq!(out, r"x\=1\,\ y\\z\ w");
    }

    #[test]
    fn derived_values_carry_their_object_tags_and_nulls_are_skipped() {
        let mut objects = ObjectTags::default();
        objects
            .map
            .insert("AB-TOE-1".into(), ("ash-bend".into(), "toe_check"));
        let mut d = DerivedPoint {
            object: "AB-TOE-1".into(),
            quantity: "exit_gradient".into(),
            t_ms: 5,
            value: Some(0.42),
            unit: "1".into(),
        };
        let mut out = String::new();
        assert_eq!(
            encode(&ExportRow::Derived(d.clone()), &objects, &mut out),
            1
        );
        assert_eq!(
            out,
            "seepd_derived,object=AB-TOE-1,object_kind=toe_check,quantity=exit_gradient,\
             site=ash-bend,unit=1 value=0.42 5\n"
        );
        out.clear();
        d.value = None;
        assert_eq!(
            encode(&ExportRow::Derived(d.clone()), &objects, &mut out),
            0
        );
        d.value = Some(f64::NAN);
        assert_eq!(encode(&ExportRow::Derived(d), &objects, &mut out), 0);
        assert_eq!(out, "");
    }
}
