//! Derived quantities, computed live and in replay as readings arrive: vertical gradients of
//! nested piezometers, toe checks, blanket-theory expectations and section phreatic lines.
//!
//! Owns input alignment (each input's latest head within the object's tolerance window; no
//! value, with a reason, when an input is missing, stale or rejected; the value with a note
//! naming the suspect inputs when an input carries a soft flag) and the naming of derived
//! quantities. The engineering is in `domain`; nothing here does I/O or reads the clock.

pub mod calibration;
pub mod flownet;
pub mod model_live;
mod objects;
#[cfg(test)]
mod tests;

use std::collections::HashMap;
use std::sync::Arc;

use crate::config::{Config, Level, Objects};
use crate::model::{DerivedRow, ReadingRow};
use crate::objkind::ObjectKind;
use crate::quality::Flags;

pub use objects::{blanket_ratio, section_input};

/// Reading flags that **reject** a head: it is left out of derived quantities, which then have
/// no value with the reason (unless the site's `[health]` says `use_flagged = true`). Only a
/// confirmed spike rejects.
pub const EXCLUDING_FLAGS: Flags = Flags::SPIKE;

/// Reading flags that make a head **suspect**: it is kept in every derived quantity, and the
/// value carries a note naming the input and its flags. No safety value is lost to these.
pub const SUSPECT_FLAGS: Flags =
    Flags(Flags::BARO_MISSING.0 | Flags::TEMP_MISSING.0 | Flags::FLATLINE.0 | Flags::THERMISTOR.0);

/// The start of every reason that says a derived value has no value because of its inputs
/// (missing, stale, rejected), as opposed to a value that does not apply (no upward gradient,
/// no exit point): the "safety value unavailable" alert watches for it.
pub const INPUT_PROBLEM: &str = "input ";

/// Whether a derived value's reason says its inputs made it unavailable.
pub fn is_input_problem(reason: &str) -> bool {
    reason.starts_with(INPUT_PROBLEM)
}

/// The flags that keep `instrument`'s readings out of derived quantities under `cfg`: none when
/// its site sets `use_flagged = true`, else [`EXCLUDING_FLAGS`].
pub fn excluding_flags(cfg: &Config, instrument: &str) -> Flags {
    let site = cfg.instruments.get(instrument).map(|i| i.site.as_str());
    let use_flagged = cfg
        .trends
        .sites
        .iter()
        .any(|s| Some(s.site.as_str()) == site && s.health.use_flagged);
    if use_flagged {
        Flags::empty()
    } else {
        EXCLUDING_FLAGS
    }
}

/// The latest usable state of one instrument.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Head {
    pub t_ms: i64,
    /// Total head (piezometric elevation) or water-surface elevation, m.
    pub head_m: f64,
    pub flags: Flags,
}

/// Which object an instrument feeds: its kind and its place in the kind's list.
type ObjRef = (ObjectKind, usize);

/// The derived-quantity state: latest heads and which objects depend on which instruments.
pub struct Deriver {
    cfg: Arc<Config>,
    /// Latest head by instrument id (the newest by reading time).
    latest: HashMap<String, Head>,
    /// Instrument id → the objects it is an input of.
    dependents: HashMap<String, Vec<ObjRef>>,
}

/// The instruments each object of `kind` reads (a gauge only when a level is measured),
/// in configuration order.
fn inputs(objs: &Objects, kind: ObjectKind) -> Vec<Vec<&str>> {
    fn gauge(l: Option<&Level>) -> Option<&str> {
        match l {
            Some(Level::Gauge(g)) => Some(g),
            _ => None,
        }
    }
    fn strs(v: &[String]) -> Vec<&str> {
        v.iter().map(String::as_str).collect()
    }
    match kind {
        ObjectKind::Nest => objs.nests.iter().map(|c| strs(&c.piezometers)).collect(),
        ObjectKind::Toe => objs
            .toes
            .iter()
            .map(|t| {
                let mut v = vec![t.piezometer.as_str()];
                v.extend(gauge(t.water.as_ref()));
                v
            })
            .collect(),
        ObjectKind::Blanket => objs
            .blankets
            .iter()
            .map(|b| {
                let mut v = vec![b.river_gauge.as_str()];
                v.extend(gauge(Some(&b.landside_level)));
                v.extend(b.toe_piezometer.as_deref());
                v
            })
            .collect(),
        ObjectKind::Section => objs
            .sections
            .iter()
            .map(|s| {
                let mut v = vec![s.pool_gauge.as_str()];
                v.extend(gauge(s.tail.as_ref()));
                v.extend(strs(&s.piezometers));
                v
            })
            .collect(),
    }
}

/// One computed quantity before it becomes a row.
pub(crate) struct Quantity {
    pub name: String,
    pub value: Option<f64>,
    pub unit: &'static str,
    pub reason: Option<String>,
}

impl Quantity {
    pub(crate) fn some(name: impl Into<String>, value: f64, unit: &'static str) -> Quantity {
        Quantity {
            name: name.into(),
            value: Some(value),
            unit,
            reason: None,
        }
    }
    pub(crate) fn none(
        name: impl Into<String>,
        unit: &'static str,
        reason: impl Into<String>,
    ) -> Quantity {
        Quantity {
            name: name.into(),
            value: None,
            unit,
            reason: Some(reason.into()),
        }
    }
}

impl Deriver {
    pub fn new(cfg: Arc<Config>) -> Deriver {
        let mut dependents: HashMap<String, Vec<ObjRef>> = HashMap::new();
        for kind in ObjectKind::ALL {
            for (k, inputs) in inputs(&cfg.objects, kind).into_iter().enumerate() {
                for id in inputs {
                    dependents
                        .entry(id.to_string())
                        .or_default()
                        .push((kind, k));
                }
            }
        }
        Deriver {
            cfg,
            latest: HashMap::new(),
            dependents,
        }
    }

    /// Whether any object uses this instrument.
    pub fn is_input(&self, instrument: &str) -> bool {
        self.dependents.contains_key(instrument)
    }

    /// Remember a head without computing anything (seeding from the store at start).
    pub fn seed(&mut self, instrument: &str, head: Head) {
        self.remember(instrument, head);
    }

    /// The latest head known for `instrument`.
    pub fn latest(&self, instrument: &str) -> Option<Head> {
        self.latest.get(instrument).copied()
    }

    fn remember(&mut self, instrument: &str, head: Head) {
        match self.latest.get(instrument) {
            Some(h) if h.t_ms > head.t_ms => {}
            _ => {
                self.latest.insert(instrument.to_string(), head);
            }
        }
    }

    /// A new reading: remember it and recompute every object it feeds, at its time.
    pub fn on_reading(&mut self, row: &ReadingRow) -> Vec<DerivedRow> {
        let Some(head_m) = row.total_head_m else {
            return Vec::new();
        };
        let head = Head {
            t_ms: row.t_ms,
            head_m,
            flags: row.flags,
        };
        self.remember(&row.instrument, head);
        self.compute(&row.instrument, head)
    }

    /// A reading stored earlier turned out to be a spike: reject it (remembered with `flags`
    /// added, if it is still the latest) and recompute, at its time, every object it feeds —
    /// the rows replace the ones computed with it.
    pub fn reject(
        &mut self,
        instrument: &str,
        t_ms: i64,
        head_m: f64,
        flags: Flags,
    ) -> Vec<DerivedRow> {
        let mut head = match self.latest.get_mut(instrument) {
            Some(h) if h.t_ms == t_ms => {
                h.flags.insert(flags);
                *h
            }
            _ => Head {
                t_ms,
                head_m,
                flags,
            },
        };
        head.flags.insert(flags);
        self.compute(instrument, head)
    }

    /// Every object `instrument` feeds, at the time of `head`, with `head` as its input.
    fn compute(&self, instrument: &str, head: Head) -> Vec<DerivedRow> {
        let Some(objs) = self.dependents.get(instrument) else {
            return Vec::new();
        };
        let mut out = Vec::new();
        for &o in objs {
            let inputs = Inputs {
                deriver: self,
                trigger: (instrument, head),
                t_ms: head.t_ms,
                suspect: std::cell::RefCell::new(Vec::new()),
            };
            let (cfg, objs) = (&self.cfg, &self.cfg.objects);
            let (id, names, mut qs) = match o {
                (ObjectKind::Nest, k) => objects::nest(&objs.nests[k], &inputs),
                (ObjectKind::Toe, k) => objects::toe(cfg, &objs.toes[k], &inputs),
                (ObjectKind::Blanket, k) => objects::blanket(&objs.blankets[k], &inputs),
                (ObjectKind::Section, k) => objects::section(cfg, &objs.sections[k], &inputs),
            };
            let suspect = inputs.suspect.into_inner();
            if !suspect.is_empty() {
                let note = format!("suspect input {}", suspect.join("; "));
                for q in qs.iter_mut().filter(|q| q.value.is_some()) {
                    q.reason = Some(match q.reason.take() {
                        Some(r) => format!("{note}; {r}"),
                        None => note.clone(),
                    });
                }
            }
            out.extend(qs.into_iter().map(|q| DerivedRow {
                object: id.clone(),
                quantity: q.name,
                t_ms: head.t_ms,
                value: q.value,
                unit: q.unit,
                reason: q.reason,
                inputs: names.clone(),
            }));
        }
        out
    }
}

/// Input lookup for one recomputation at time `t_ms`.
pub(crate) struct Inputs<'a> {
    deriver: &'a Deriver,
    /// The reading that triggered it (used as is, even if older than the latest).
    trigger: (&'a str, Head),
    t_ms: i64,
    /// Inputs used that carry a soft flag: "ID: flags", one each.
    suspect: std::cell::RefCell<Vec<String>>,
}

impl Inputs<'_> {
    /// The head of `id` aligned to the computation time, or why there is none.
    pub(crate) fn head(&self, id: &str, tolerance_s: i64) -> Result<f64, String> {
        let h = if id == self.trigger.0 {
            self.trigger.1
        } else {
            *self
                .deriver
                .latest
                .get(id)
                .ok_or_else(|| format!("input {id} has no reading yet"))?
        };
        let dt_s = (h.t_ms - self.t_ms).abs() / 1000;
        if dt_s > tolerance_s {
            return Err(format!(
                "input {id} is stale ({dt_s} s from this time; tolerance {tolerance_s} s)"
            ));
        }
        let bad = Flags(h.flags.0 & excluding_flags(&self.deriver.cfg, id).0);
        if !bad.is_empty() {
            return Err(format!(
                "input {id} is rejected: {} (an isolated excursion, confirmed by the next reading)",
                bad.names().join(",")
            ));
        }
        let soft = Flags(h.flags.0 & (SUSPECT_FLAGS.0 | EXCLUDING_FLAGS.0));
        if !soft.is_empty() {
            let note = format!("{id}: {}", soft.names().join(","));
            let mut s = self.suspect.borrow_mut();
            if !s.contains(&note) {
                s.push(note);
            }
        }
        Ok(h.head_m)
    }

    /// A water level: a fixed elevation or a gauge's aligned elevation.
    pub(crate) fn level(&self, level: &Level, tolerance_s: i64) -> Result<f64, String> {
        match level {
            Level::Fixed(m) => Ok(*m),
            Level::Gauge(g) => self.head(g, tolerance_s),
        }
    }
}
