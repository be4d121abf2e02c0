//! The report's content, gathered from the database for one site and period: per-instrument
//! statistics, stage summary, toe checks, sections, quarantine and health flags. No formatting
//! here (see `html`, `csv`, `chart`).

use crate::config::{
    Config, DisplayUnits, Instrument, Kind, LandwardDistance, Location, ObjectRef,
};
use crate::model::ReadingQuantity;
use crate::quality::Flags;
use crate::store::{Store, StoreError};
use chrono::{DateTime, Utc};
use std::cell::RefCell;
use std::collections::HashMap;
use std::rc::Rc;

/// Statistics of one instrument's main quantity over the period.
#[derive(Debug, Clone, PartialEq)]
pub struct InstrumentStats {
    pub id: String,
    pub kind: &'static str,
    /// `total_head` (piezometers, standpipes), `water_elevation` (gauges) or `pressure`.
    pub quantity: &'static str,
    pub unit: &'static str,
    pub readings: i64,
    /// Readings expected in the period from the instrument's interval.
    pub expected: i64,
    /// (time ms, value)
    pub first: Option<(i64, f64)>,
    pub latest: Option<(i64, f64)>,
    pub min: Option<(i64, f64)>,
    pub max: Option<(i64, f64)>,
    /// Readings carrying any quality flag.
    pub flagged: i64,
    /// Where it is (reach, section, station, offset), as configured.
    pub location: Location,
    pub tip_elevation_m: Option<f64>,
    pub installed_ms: i64,
    /// Date of the last calibration, as configured.
    pub calibrated_ms: Option<i64>,
    pub interval_s: u64,
    /// Flag name → count.
    pub flag_counts: Vec<(&'static str, i64)>,
}

impl InstrumentStats {
    /// Completeness, % of expected readings (capped at 100), or None when none were expected.
    pub fn completeness_pct(&self) -> Option<f64> {
        (self.expected > 0)
            .then(|| (100.0 * self.readings as f64 / self.expected as f64).min(100.0))
    }
    /// Change over the period: latest − first.
    pub fn change(&self) -> Option<f64> {
        Some(self.latest?.1 - self.first?.1)
    }
    /// A one-word status for the summary table.
    pub fn status(&self) -> &'static str {
        match (self.readings, self.completeness_pct()) {
            (0, _) => "no data",
            (_, Some(c)) if c < 90.0 => "gaps",
            _ if self.flagged > 0 => "flagged",
            _ => "ok",
        }
    }
}

/// One derived quantity's summary over the period.
#[derive(Debug, Clone, PartialEq)]
pub struct DerivedStats {
    pub object: String,
    pub quantity: String,
    pub unit: String,
    pub latest: Option<(i64, f64)>,
    pub min: Option<(i64, f64)>,
    pub max: Option<(i64, f64)>,
}

/// Everything a report shows.
#[derive(Debug, Clone)]
pub struct ReportData {
    pub site_id: String,
    pub site_name: String,
    pub time_zone: String,
    pub from: DateTime<Utc>,
    pub to: DateTime<Utc>,
    pub generated: DateTime<Utc>,
    /// The site's display system.
    pub units: DisplayUnits,
    /// Piezometers and standpipes.
    pub piezometers: Vec<InstrumentStats>,
    /// Stage gauges.
    pub stages: Vec<InstrumentStats>,
    /// Barometers.
    pub others: Vec<InstrumentStats>,
    /// Toe-check quantities (exit gradient, factor of safety) per toe.
    pub toes: Vec<DerivedStats>,
    /// Section quantities (exit elevation, seepage-face height) per section.
    pub sections: Vec<DerivedStats>,
    /// Nest gradients.
    pub gradients: Vec<DerivedStats>,
    /// Blanket-theory reaches: net head, expected and measured excess heads (also landward of
    /// the toe), expected exit gradient and underseepage.
    pub blankets: Vec<DerivedStats>,
    /// Quarantine in the period (whole service): reason → count.
    pub quarantine: Vec<(String, i64)>,
}

impl ReportData {
    /// Overall completeness of the site's instruments, %.
    pub fn completeness_pct(&self) -> Option<f64> {
        let all = self
            .piezometers
            .iter()
            .chain(&self.stages)
            .chain(&self.others);
        let (got, want) = all.fold((0i64, 0i64), |(g, w), s| {
            (g + s.readings.min(s.expected), w + s.expected)
        });
        (want > 0).then(|| 100.0 * got as f64 / want as f64)
    }

    /// Whether the period holds no reading at all.
    pub fn is_empty(&self) -> bool {
        self.piezometers
            .iter()
            .chain(&self.stages)
            .chain(&self.others)
            .all(|s| s.readings == 0)
    }
}

/// An instrument's main quantity: its name in the CSV, SI unit, and the reading quantity.
fn main_quantity(i: &Instrument) -> (&'static str, &'static str, ReadingQuantity) {
    match i.kind {
        Kind::StageGauge(_) => ("water_elevation", "m", ReadingQuantity::TotalHead),
        Kind::Barometer(_) => ("pressure", "kPa", ReadingQuantity::Pressure),
        _ => ("total_head", "m", ReadingQuantity::TotalHead),
    }
}

/// One instrument's readings of the period: (time ms, value, quality flags), oldest first.
type Points = Rc<Vec<(i64, f64, u32)>>;

/// Readings of one period, read from the database once per instrument and kept for the
/// report's tables and plots (each piezometer is in a table and a plot; the stage gauge is
/// drawn on every group's chart).
#[derive(Debug)]
pub struct Readings {
    from_ms: i64,
    to_ms: i64,
    read: RefCell<HashMap<String, Points>>,
}

impl Readings {
    /// Readings in [from, to), none read yet.
    pub fn new(from_ms: i64, to_ms: i64) -> Readings {
        Readings {
            from_ms,
            to_ms,
            read: RefCell::default(),
        }
    }

    /// `i`'s main quantity in the period, oldest first, each with its quality flags.
    fn of(&self, store: &Store, i: &Instrument) -> Result<Points, StoreError> {
        if let Some(p) = self.read.borrow().get(&i.id) {
            return Ok(Rc::clone(p));
        }
        let (_, _, q) = main_quantity(i);
        let p = Rc::new(store.reading_points(&i.id, q, self.from_ms, self.to_ms)?);
        self.read.borrow_mut().insert(i.id.clone(), Rc::clone(&p));
        Ok(p)
    }

    /// `i`'s main quantity in the period, time ms and value, for plots.
    ///
    /// # Errors
    /// SQLite errors.
    pub fn series(&self, store: &Store, i: &Instrument) -> Result<Vec<(i64, f64)>, StoreError> {
        Ok(self.of(store, i)?.iter().map(|&(t, v, _)| (t, v)).collect())
    }
}

/// Statistics of one instrument's main quantity in [from, to).
///
/// # Errors
/// SQLite errors.
pub fn instrument_stats(
    store: &Store,
    i: &Instrument,
    from_ms: i64,
    to_ms: i64,
) -> Result<InstrumentStats, StoreError> {
    stats_in(store, i, &Readings::new(from_ms, to_ms))
}

/// Statistics of one instrument's main quantity over the period of `readings`.
fn stats_in(
    store: &Store,
    i: &Instrument,
    readings: &Readings,
) -> Result<InstrumentStats, StoreError> {
    let (from_ms, to_ms) = (readings.from_ms, readings.to_ms);
    let (quantity, unit, _) = main_quantity(i);
    let mut s = InstrumentStats {
        id: i.id.clone(),
        kind: i.kind.name(),
        quantity,
        unit,
        readings: 0,
        expected: (to_ms - from_ms).max(0) / 1000 / (i.interval_s.max(1) as i64),
        first: None,
        latest: None,
        min: None,
        max: None,
        flagged: 0,
        location: i.location.clone(),
        tip_elevation_m: i.tip_elevation_m,
        installed_ms: i.installed.timestamp_millis(),
        calibrated_ms: i.calibrated.map(|t| t.timestamp_millis()),
        interval_s: i.interval_s,
        flag_counts: Flags::NAMES.iter().map(|(_, n)| (*n, 0)).collect(),
    };
    for &(t, v, flags) in readings.of(store, i)?.iter() {
        s.readings += 1;
        s.first.get_or_insert((t, v));
        s.latest = Some((t, v));
        if s.min.is_none_or(|(_, m)| v < m) {
            s.min = Some((t, v));
        }
        if s.max.is_none_or(|(_, m)| v > m) {
            s.max = Some((t, v));
        }
        let f = Flags(flags);
        if !f.is_empty() {
            s.flagged += 1;
            for (k, (flag, _)) in Flags::NAMES.iter().enumerate() {
                if f.contains(*flag) {
                    s.flag_counts[k].1 += 1;
                }
            }
        }
    }
    s.flag_counts.retain(|(_, n)| *n > 0);
    Ok(s)
}

/// Summary of one derived quantity in [from, to).
///
/// # Errors
/// SQLite errors.
pub fn derived_stats(
    store: &Store,
    object: &str,
    quantity: &str,
    from_ms: i64,
    to_ms: i64,
) -> Result<DerivedStats, StoreError> {
    let x = store.derived_extremes(object, quantity, from_ms, to_ms)?;
    Ok(DerivedStats {
        object: object.to_string(),
        quantity: quantity.to_string(),
        unit: x.unit,
        latest: x.latest,
        min: x.min,
        max: x.max,
    })
}

/// Quantity names as owned strings.
fn names(q: &[&str]) -> Vec<String> {
    q.iter().map(|q| (*q).to_string()).collect()
}

/// Gather a site's report data for [from, to).
///
/// # Errors
/// Unknown site; SQLite errors.
pub fn gather(
    cfg: &Config,
    store: &Store,
    site: &str,
    from: DateTime<Utc>,
    to: DateTime<Utc>,
    now: DateTime<Utc>,
) -> anyhow::Result<ReportData> {
    let readings = Readings::new(from.timestamp_millis(), to.timestamp_millis());
    gather_from(cfg, store, site, (from, to), now, &readings)
}

/// Gather a site's report data for [from, to), the period of `readings`, keeping the readings
/// read there for the plots.
///
/// # Errors
/// Unknown site; SQLite errors.
pub fn gather_from(
    cfg: &Config,
    store: &Store,
    site: &str,
    (from, to): (DateTime<Utc>, DateTime<Utc>),
    now: DateTime<Utc>,
    readings: &Readings,
) -> anyhow::Result<ReportData> {
    let s = cfg
        .sites
        .iter()
        .find(|s| s.id == site)
        .ok_or_else(|| anyhow::anyhow!("no site {site:?} in the configuration"))?;
    let (f, t) = (from.timestamp_millis(), to.timestamp_millis());
    let mut data = ReportData {
        site_id: s.id.clone(),
        site_name: s.name.clone(),
        time_zone: s.time_zone.clone(),
        from,
        to,
        generated: now,
        units: s.display_units,
        piezometers: Vec::new(),
        stages: Vec::new(),
        others: Vec::new(),
        toes: Vec::new(),
        sections: Vec::new(),
        gradients: Vec::new(),
        blankets: Vec::new(),
        quarantine: Vec::new(),
    };
    for i in cfg.instruments.values().filter(|i| i.site == site) {
        let stats = stats_in(store, i, readings)?;
        match i.kind {
            Kind::StageGauge(_) => data.stages.push(stats),
            Kind::Barometer(_) => data.others.push(stats),
            _ => data.piezometers.push(stats),
        }
    }
    // What each kind shows in the tables: one match, so a new kind must say.
    for o in cfg.objects.iter().filter(|o| o.site() == site) {
        let (rows, quantities): (_, Vec<String>) = match o {
            ObjectRef::Nest(_) => (&mut data.gradients, names(&["vertical_gradient"])),
            ObjectRef::Toe(_) => (
                &mut data.toes,
                names(&["exit_gradient", "factor_of_safety", "excess_head"]),
            ),
            ObjectRef::Blanket(b) => {
                let mut q = names(&[
                    "net_head",
                    "expected_excess_head",
                    "measured_excess_head",
                    "expected_exit_gradient",
                    "expected_flow",
                ]);
                q.extend(b.distances.iter().map(LandwardDistance::quantity));
                (&mut data.blankets, q)
            }
            ObjectRef::Section(_) => (
                &mut data.sections,
                names(&["exit_elevation", "seepage_face_height", "min_cover"]),
            ),
        };
        for q in quantities {
            rows.push(derived_stats(store, o.id(), &q, f, t)?);
        }
    }
    data.quarantine = store.quarantine_by_reason(f, t)?;
    Ok(data)
}
