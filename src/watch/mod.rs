//! Trends, stage-response and HST residuals, and sensor health, per reading, live and in replay:
//! the health flags a new reading gets, the `rate_*` and `completeness_24h` quantities of its
//! instrument, and the residuals of the models it feeds; plus the no-data hook for alerting.
//!
//! Owns the per-instrument state (rate windows, health tracker, recent reading times), the
//! recent stage of the gauges models use, and the fitted models in use. The engineering is in
//! `domain::{trend, health, response, hst}`; fitting from the store is `fit`, the refit
//! schedule of `seepd run` is `schedule`, start-up state from the store is `seed`. Nothing here
//! reads the clock: times come with the readings, or as parameters.

pub mod fit;
mod models;
pub mod schedule;
pub mod seed;
#[cfg(test)]
mod tests;

use std::collections::{HashMap, VecDeque};
use std::sync::mpsc::Receiver;
use std::sync::Arc;

use crate::config::{Config, Kind, SiteTrends};
use crate::derive::excluding_flags;
use crate::domain::health::{
    self, FlatlineConfig, HealthConfig, HealthFlags, HealthTracker, SpikeConfig, ThermistorConfig,
};
use crate::domain::trend::{RateWindow, TrendError};
use crate::model::{DerivedRow, ReadingRow};
use crate::quality::Flags;

pub use models::{Fitted, LiveModel};
use models::{ModelSlots, StageMemory};

/// Completeness is reported over this trailing period.
pub const COMPLETENESS_MS: i64 = 86_400_000;

/// A rate needs readings spanning at least this fraction of its window.
const MIN_WINDOW_FILL: f64 = 0.25;

/// The trend and health state of one instrument.
struct InstrumentState {
    /// One per configured rate window of the site, shortest first; empty without a head.
    windows: Vec<(String, RateWindow)>,
    /// Spike, flatline and thermistor checks; `None` for instruments without a head.
    health: Option<HealthTracker>,
    /// Distinct reading times within the last [`COMPLETENESS_MS`], sorted.
    recent_times: VecDeque<i64>,
    /// Flags that keep a reading out of derived quantities (none with `use_flagged`).
    exclude: Flags,
    /// Expected interval, ms; and when readings may start (install date), ms.
    interval_ms: i64,
    installed_ms: i64,
    /// The silence after which the instrument counts as silent, in intervals.
    no_data_factor: f64,
    /// First and newest reading time seen (including the store, at start).
    first_ms: Option<i64>,
    last_ms: Option<i64>,
    /// Time and head of the newest health-checked reading (the one a spike verdict concerns).
    last_head: Option<(i64, f64)>,
    /// Reading time the rates were last computed at: readings closer together than the
    /// interval update the windows, but the rates are recomputed at most once per interval.
    last_rate_ms: Option<i64>,
}

/// The watch state of the whole configuration.
pub struct Watcher {
    /// Instrument id → its state.
    instruments: HashMap<String, InstrumentState>,
    /// Models in use and the recent stage they need.
    models: ModelSlots,
    stages: HashMap<String, StageMemory>,
    /// Models fitted elsewhere (the refit schedule), installed at the next reading.
    fitted: Option<Receiver<Fitted>>,
    /// When watching began (start of `run`): silence of a never-read instrument counts from
    /// here or its install date, whichever is later.
    started_ms: Option<i64>,
}

/// The health settings of the domain for one instrument under its site's `[health]`.
fn health_config(st: &SiteTrends, kind: &Kind, interval_ms: i64) -> HealthConfig {
    let h = &st.health;
    HealthConfig {
        range: (f64::MIN, f64::MAX),
        spike: SpikeConfig {
            window: h.spike_window,
            k: h.spike_k,
            floor: h.spike_floor_m,
        },
        flatline: FlatlineConfig {
            count: h.flatline_count,
            tolerance: h.flatline_tolerance_raw,
        },
        interval_ms,
        no_data_factor: h.no_data_factor,
        thermistor: matches!(kind, Kind::VibratingWire(_)).then_some(ThermistorConfig {
            min_c: h.thermistor_range_c.0,
            max_c: h.thermistor_range_c.1,
            max_jump_c: h.thermistor_max_jump_c,
        }),
    }
}

/// The reading flags for the health flags the tracker raised (a confirmed spike comes
/// separately, for the reading before).
fn to_flags(h: HealthFlags) -> Flags {
    let mut f = Flags::empty();
    for (hf, rf) in [
        (HealthFlags::SPIKE, Flags::SPIKE),
        (HealthFlags::FLATLINE, Flags::FLATLINE),
        (HealthFlags::THERMISTOR, Flags::THERMISTOR),
    ] {
        if h.contains(hf) {
            f.insert(rf);
        }
    }
    f
}

fn row(
    object: &str,
    quantity: String,
    t_ms: i64,
    v: Result<f64, String>,
    unit: &'static str,
    inputs: &[&str],
) -> DerivedRow {
    let (value, reason) = match v {
        Ok(x) => (Some(x), None),
        Err(r) => (None, Some(r)),
    };
    DerivedRow {
        object: object.to_string(),
        quantity,
        t_ms,
        value,
        unit,
        reason,
        inputs: inputs.iter().map(|s| s.to_string()).collect(),
    }
}

impl Watcher {
    /// The watch state for `cfg`, empty (see `seed` to fill it from the store).
    pub fn new(cfg: &Arc<Config>) -> Watcher {
        let mut instruments = HashMap::new();
        for i in cfg.instruments.values() {
            let st = cfg.trends.site(&i.site);
            let interval_ms = (i.interval_s as i64).saturating_mul(1000).max(1);
            let has_head = !matches!(i.kind, Kind::Barometer(_));
            let windows = if has_head {
                st.rate_windows
                    .iter()
                    .filter_map(|w| {
                        let win = RateWindow::new(w.span_s * 1000, st.max_points).ok()?;
                        Some((format!("rate_{}", w.label), win))
                    })
                    .collect()
            } else {
                Vec::new()
            };
            let health = has_head
                .then(|| HealthTracker::new(health_config(&st, &i.kind, interval_ms), 0).ok())
                .flatten();
            instruments.insert(
                i.id.clone(),
                InstrumentState {
                    windows,
                    health,
                    recent_times: VecDeque::new(),
                    exclude: excluding_flags(cfg, &i.id),
                    interval_ms,
                    installed_ms: i.installed.timestamp_millis(),
                    no_data_factor: st.health.no_data_factor,
                    first_ms: None,
                    last_ms: None,
                    last_head: None,
                    last_rate_ms: None,
                },
            );
        }
        let models = ModelSlots::new(cfg);
        let stages = models.stage_memories(cfg);
        Watcher {
            instruments,
            models,
            stages,
            fitted: None,
            started_ms: None,
        }
    }

    /// Take models fitted elsewhere (the refit schedule of `seepd run`) from `rx`; each is
    /// installed before the next reading is processed.
    pub fn receive_fits(&mut self, rx: Receiver<Fitted>) {
        self.fitted = Some(rx);
    }

    /// Hand over the channel of models fitted elsewhere (to a rebuilt watcher, on reload).
    pub fn take_fits(&mut self) -> Option<Receiver<Fitted>> {
        self.fitted.take()
    }

    /// Install a fitted model, or record why it could not be fitted.
    pub fn install(&mut self, fitted: Fitted) {
        self.models.install(fitted);
    }

    /// Mark the start of watching (the silence of never-read instruments counts from here).
    pub fn start_watching(&mut self, now_ms: i64) {
        self.started_ms = Some(now_ms);
    }

    /// Health-check a new reading and add the flags it earns to `row.flags`. Only a reading
    /// newer than the instrument's newest is checked (redeliveries and late readings are not).
    /// Returns the time and head of the instrument's previous reading when this one confirms
    /// it an isolated spike (see `domain::health`): the caller rejects that reading.
    pub fn check(&mut self, row: &mut ReadingRow) -> Option<(i64, f64)> {
        let st = self.instruments.get_mut(&row.instrument)?;
        let newer = st.last_ms.is_none_or(|l| row.t_ms > l);
        let (true, Some(h), Some(head)) = (newer, st.health.as_mut(), row.total_head_m) else {
            return None;
        };
        let before = st.last_head;
        let verdict = h.update(row.t_ms, head, row.raw, row.temperature_c);
        row.flags.insert(to_flags(verdict.flags));
        st.last_head = Some((row.t_ms, head));
        let t = verdict.spike_at?;
        // The rejected reading leaves the rate windows and the stage memory it entered.
        for (_, w) in &mut st.windows {
            w.remove(t);
        }
        if let Some(m) = self.stages.get_mut(&row.instrument) {
            m.remove(t);
        }
        Some(before.filter(|b| b.0 == t).unwrap_or((t, f64::NAN)))
    }

    /// Remember a reading from the store without deriving anything (start-up seeding); the
    /// health state learns it, the windows take it when it is not flagged.
    pub fn seed(
        &mut self,
        instrument: &str,
        t_ms: i64,
        head_m: Option<f64>,
        raw: f64,
        temperature_c: Option<f64>,
        flags: Flags,
    ) {
        let Some(st) = self.instruments.get_mut(instrument) else {
            return;
        };
        // A rejected reading (a confirmed spike) stays out of the health window.
        let clean = !flags.contains(Flags::SPIKE);
        if let (Some(h), Some(head), true) = (st.health.as_mut(), head_m, clean) {
            h.update(t_ms, head, raw, temperature_c);
            st.last_head = Some((t_ms, head));
        }
        Self::remember(st, &mut self.stages, instrument, t_ms, head_m, flags);
    }

    /// Note the first stored reading time of an instrument (for "a year of data").
    pub fn seed_first(&mut self, instrument: &str, first_ms: i64) {
        if let Some(st) = self.instruments.get_mut(instrument) {
            st.first_ms = Some(st.first_ms.map_or(first_ms, |f| f.min(first_ms)));
        }
    }

    /// Take a reading into the windows, the completeness times and the stage memory. Returns
    /// the rate-window error (a reading too old for a window), if any.
    fn remember(
        st: &mut InstrumentState,
        stages: &mut HashMap<String, StageMemory>,
        id: &str,
        t_ms: i64,
        head_m: Option<f64>,
        flags: Flags,
    ) -> Option<TrendError> {
        st.first_ms = Some(st.first_ms.map_or(t_ms, |f| f.min(t_ms)));
        st.last_ms = Some(st.last_ms.map_or(t_ms, |l| l.max(t_ms)));
        if let Err(i) = st.recent_times.binary_search(&t_ms) {
            st.recent_times.insert(i, t_ms);
        }
        if let Some(&newest) = st.recent_times.back() {
            while st
                .recent_times
                .front()
                .is_some_and(|&t| t <= newest - COMPLETENESS_MS)
            {
                st.recent_times.pop_front();
            }
        }
        let head = head_m.filter(|_| flags.0 & st.exclude.0 == 0)?;
        if let Some(m) = stages.get_mut(id) {
            m.push(t_ms, head);
        }
        let mut err = None;
        for (_, w) in &mut st.windows {
            if let Err(e) = w.push(t_ms, head) {
                err = Some(e);
            }
        }
        err
    }

    /// The derived quantities of a (health-checked) reading: its instrument's rates and
    /// completeness, and the residuals of the models it feeds.
    pub fn derive(&mut self, row: &ReadingRow) -> Vec<DerivedRow> {
        while let Some(f) = self.fitted.as_ref().and_then(|rx| rx.try_recv().ok()) {
            self.models.install(f);
        }
        let Some(st) = self.instruments.get_mut(&row.instrument) else {
            return Vec::new();
        };
        let id = row.instrument.as_str();
        let late = st.last_ms.is_some_and(|l| row.t_ms < l);
        let pushed = Self::remember(
            st,
            &mut self.stages,
            id,
            row.t_ms,
            row.total_head_m,
            row.flags,
        );
        let mut out = Vec::new();
        // Rates and completeness are reported at most once per interval (dense bursts such as
        // a replay or a catch-up do not pay for them on every reading). A flagged reading moves
        // the clock but reports no rate: the last rate stands and the reading carries its flag.
        let due = !late
            && st
                .last_rate_ms
                .is_none_or(|l| row.t_ms - l >= st.interval_ms || row.t_ms < l);
        if due {
            st.last_rate_ms = Some(row.t_ms);
            let flagged = Flags(row.flags.0 & st.exclude.0);
            if row.total_head_m.is_some() && flagged.is_empty() {
                for (name, w) in &st.windows {
                    let v = match &pushed {
                        Some(e) => Err(e.to_string()),
                        None => rate(w),
                    };
                    out.push(row_of(id, name.clone(), row.t_ms, v, "m/day"));
                }
            }
            let pct = completeness(st, row.t_ms);
            out.push(row_of(id, "completeness_24h".into(), row.t_ms, pct, "%"));
        }
        let first_ms = st.first_ms;
        let excluded = Flags(row.flags.0 & st.exclude.0);
        out.extend(self.models.residuals(row, excluded, first_ms, &self.stages));
        out
    }

    /// Instruments silent for more than `no_data_factor` × their interval at `now_ms`, with the
    /// time of their last reading (`None`: never read since installation or start of watching).
    /// For the alerting timer: call it on the writer's engine (`Engine::watch`).
    pub fn silent_instruments(&self, now_ms: i64) -> Vec<(String, Option<i64>)> {
        let mut out: Vec<(String, Option<i64>)> = self
            .instruments
            .iter()
            .filter(|(_, st)| {
                let since = st
                    .last_ms
                    .unwrap_or_else(|| st.installed_ms.max(self.started_ms.unwrap_or(i64::MIN)));
                health::no_data(since, now_ms, st.interval_ms, st.no_data_factor)
            })
            .map(|(id, st)| (id.clone(), st.last_ms))
            .collect();
        out.sort();
        out
    }
}

fn row_of(
    id: &str,
    quantity: String,
    t_ms: i64,
    v: Result<f64, String>,
    unit: &'static str,
) -> DerivedRow {
    row(id, quantity, t_ms, v, unit, &[id])
}

/// `completeness_24h` at `t_ms`: distinct readings in (t − 24 h, t] (from the install date at
/// the earliest) over those expected at one per interval, capped at 100 % — as
/// `health::completeness_pct`, counted by binary search in the sorted times (O(log n) a reading,
/// however dense the data).
fn completeness(st: &InstrumentState, t_ms: i64) -> Result<f64, String> {
    let (start, end) = ((t_ms - COMPLETENESS_MS + 1).max(st.installed_ms), t_ms + 1);
    let expected = (end - start) / st.interval_ms;
    if expected <= 0 {
        return Err("less than one reading interval since installation".into());
    }
    let t = &st.recent_times;
    let count = t.partition_point(|&x| x < end) - t.partition_point(|&x| x < start);
    Ok((100.0 * count as f64 / expected as f64).min(100.0))
}

/// The Theil–Sen rate of a window in m/day, once its readings span a quarter of it.
fn rate(w: &RateWindow) -> Result<f64, String> {
    let first = w.points().next().map(|p| p.0);
    let last = w.points().last().map(|p| p.0);
    let covered = last.zip(first).map_or(0, |(l, f)| l - f);
    let need = (w.span_ms() as f64 * MIN_WINDOW_FILL) as i64;
    if covered < need {
        return Err(format!(
            "readings span {:.1} h of the window; a rate needs at least {:.1} h",
            covered as f64 / 3.6e6,
            need as f64 / 3.6e6
        ));
    }
    w.rate().map(|r| r.per_day).map_err(|e| e.to_string())
}
