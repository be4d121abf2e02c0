//! Live use of the sections' seepage models: when to re-solve (a driving water level moved by
//! more than the section's `resolve_change`, or `resolve_every_s` passed since the last solve,
//! by reading time), the request handed to the solver thread, and the derived rows made of its
//! answer — per section `model_exit_station`, `model_exit_elevation`,
//! `model_seepage_face_height`, `model_max_exit_gradient`, `model_flow`; per piezometer
//! `model_head` and `model_residual` (measured − modelled), the residual also on every later
//! reading of the piezometer against the latest solve. A section with a calibration in use
//! (`derive::calibration`, seeded from the model history at start and on a reload) is solved
//! with its fitted zone factors.
//!
//! Owns those decisions and names. Must not solve on the caller's thread or wait: requests go
//! out with `send` and answers are taken with `try_recv` (the solver thread is
//! `seepage_worker`'s), so the commit of readings never waits for a solve.

use std::collections::HashMap;
use std::sync::mpsc::{Receiver, Sender};
use std::sync::Arc;

use super::calibration::SectionFit;
use super::flownet::{tips, FlowNet};
use super::Deriver;
use crate::config::{Config, Level};
use crate::model::{DerivedRow, ReadingRow};
use crate::seepage::Point;

/// Section quantities of a solve: (name, unit).
pub const SECTION_MODEL_QUANTITIES: [(&str, &str); 5] = [
    ("model_exit_station", "m"),
    ("model_exit_elevation", "m"),
    ("model_seepage_face_height", "m"),
    ("model_max_exit_gradient", "-"),
    ("model_flow", "m2/s"),
];

/// A solve to do: section `section` of `cfg` at these levels.
pub struct SolveRequest {
    /// The configuration the request was made under (a reload may change the model).
    pub cfg: Arc<Config>,
    /// Index into `cfg.objects.sections`.
    pub section: usize,
    /// Reading time the levels are from, ms.
    pub t_ms: i64,
    pub pool_m: f64,
    pub tail_m: Option<f64>,
    /// (piezometer id, tip, latest measured head).
    pub piezometers: Vec<(String, Point, Option<f64>)>,
    /// The calibration to solve with (none: the permeabilities as written).
    pub fit: Option<Arc<SectionFit>>,
}

/// What a solve found, reduced to what is stored.
#[derive(Debug, Clone, PartialEq)]
pub struct SolveSummary {
    pub exit: Option<Point>,
    pub face_height_m: f64,
    pub max_exit_gradient: f64,
    pub flow_m2_per_s: f64,
    /// (piezometer id, measured, modelled).
    pub heads: Vec<(String, Option<f64>, Option<f64>)>,
}

impl SolveSummary {
    /// The stored part of a flow net.
    #[must_use]
    pub fn of(net: &FlowNet) -> Self {
        SolveSummary {
            exit: net.exit.as_ref().map(|e| e.exit),
            face_height_m: net.exit.as_ref().map_or(0.0, |e| e.face_height_m),
            max_exit_gradient: net.max_exit_gradient(),
            flow_m2_per_s: net.flow_m2_per_s,
            heads: net
                .piezometers
                .iter()
                .map(|p| (p.id.clone(), p.measured_m, p.modelled_m))
                .collect(),
        }
    }
}

/// The answer to a [`SolveRequest`].
pub struct SolveAnswer {
    pub section_id: String,
    pub t_ms: i64,
    /// The summary, or why the solve failed.
    pub result: Result<SolveSummary, String>,
}

/// The levels of the last solve requested for a section.
#[derive(Debug, Clone, Copy)]
struct Last {
    t_ms: i64,
    pool_m: f64,
    tail_m: Option<f64>,
}

/// The live-model state of the engine.
#[derive(Default)]
pub struct LiveModels {
    /// Requests to the solver thread and its answers; `None`: no live solving (replay).
    link: Option<(Sender<SolveRequest>, Receiver<SolveAnswer>)>,
    /// Section id → the levels of its last request.
    last: HashMap<String, Last>,
    /// Section id → a request is out and not yet answered.
    in_flight: HashMap<String, bool>,
    /// Piezometer id → modelled head of the latest solve, m.
    modelled: HashMap<String, f64>,
    /// Answers taken from the channel, not yet turned into rows.
    ready: Vec<SolveAnswer>,
    /// Section id → the calibration in use.
    fits: HashMap<String, Arc<SectionFit>>,
}

impl LiveModels {
    /// Solve through this channel pair from now on.
    pub fn connect(&mut self, tx: Sender<SolveRequest>, rx: Receiver<SolveAnswer>) {
        self.link = Some((tx, rx));
    }

    /// Solve each section in `fits` with its calibration from now on (the others with the
    /// permeabilities as written).
    pub fn use_fits(&mut self, fits: HashMap<String, SectionFit>) {
        for (id, f) in &fits {
            tracing::info!(section = %id, calibration = %f.label(), "Seepage calibration in use");
        }
        self.fits = fits.into_iter().map(|(k, v)| (k, Arc::new(v))).collect();
    }

    /// Hand the channel pair over (to a rebuilt engine, on reload).
    pub fn take_link(&mut self) -> Option<(Sender<SolveRequest>, Receiver<SolveAnswer>)> {
        self.link.take()
    }

    /// Whether answers are waiting to become rows (takes them from the channel).
    pub fn answers_waiting(&mut self) -> bool {
        if let Some((_, rx)) = &self.link {
            while let Ok(a) = rx.try_recv() {
                self.ready.push(a);
            }
        }
        !self.ready.is_empty()
    }

    /// After `row` was taken by `deriver`: request a solve of each section it drives when its
    /// levels moved enough or the schedule says so, and the residual of a modelled piezometer.
    pub fn on_reading(
        &mut self,
        cfg: &Arc<Config>,
        row: &ReadingRow,
        deriver: &Deriver,
    ) -> Vec<DerivedRow> {
        let mut out = Vec::new();
        let Some(head_m) = row.total_head_m else {
            return out;
        };
        if self.link.is_none() {
            return out;
        }
        if let Some(m) = self.modelled.get(&row.instrument) {
            out.push(row_of(
                &row.instrument,
                "model_residual",
                row.t_ms,
                Some(head_m - m),
                "m",
                None,
            ));
        }
        for (k, s) in cfg.objects.sections.iter().enumerate() {
            let Some(spec) = &s.model else { continue };
            let tail_gauge = match &s.tail {
                Some(Level::Gauge(g)) => Some(g.as_str()),
                _ => None,
            };
            let drives = s.pool_gauge == row.instrument || tail_gauge == Some(&row.instrument);
            if !drives || self.in_flight.get(&s.id).copied().unwrap_or(false) {
                continue;
            }
            let Some(pool) = deriver.latest(&s.pool_gauge) else {
                continue;
            };
            let tail_m = match &s.tail {
                Some(Level::Fixed(m)) => Some(*m),
                Some(Level::Gauge(g)) => match deriver.latest(g) {
                    Some(h) => Some(h.head_m),
                    None if spec.uses_tail() => continue,
                    None => None,
                },
                None => None,
            };
            let due = match self.last.get(&s.id) {
                None => true,
                Some(l) => {
                    let moved = |a: Option<f64>, b: Option<f64>| match (a, b) {
                        (Some(a), Some(b)) => (a - b).abs() > spec.resolve_change_m,
                        (None, None) => false,
                        _ => true,
                    };
                    moved(Some(pool.head_m), Some(l.pool_m))
                        || moved(tail_m, l.tail_m)
                        || row.t_ms - l.t_ms >= spec.resolve_every_s * 1000
                }
            };
            if !due {
                continue;
            }
            let piezometers = tips(cfg, s)
                .into_iter()
                .map(|(id, tip)| {
                    let h = deriver.latest(&id).map(|h| h.head_m);
                    (id, tip, h)
                })
                .collect();
            let request = SolveRequest {
                cfg: Arc::clone(cfg),
                section: k,
                t_ms: row.t_ms,
                pool_m: pool.head_m,
                tail_m,
                piezometers,
                fit: self.fits.get(&s.id).cloned(),
            };
            if let Some((tx, _)) = &self.link {
                if tx.send(request).is_ok() {
                    self.in_flight.insert(s.id.clone(), true);
                    self.last.insert(
                        s.id.clone(),
                        Last {
                            t_ms: row.t_ms,
                            pool_m: pool.head_m,
                            tail_m,
                        },
                    );
                }
            }
        }
        out
    }

    /// Rows of the answers that came back since the last call.
    pub fn drain(&mut self) -> Vec<DerivedRow> {
        self.answers_waiting();
        let mut out = Vec::new();
        for a in std::mem::take(&mut self.ready) {
            self.in_flight.insert(a.section_id.clone(), false);
            match a.result {
                Ok(s) => {
                    let no_exit = "no seepage face: the free surface stays inside the ground";
                    let values = [
                        s.exit.map(|p| p.x),
                        s.exit.map(|p| p.y),
                        Some(s.face_height_m),
                        Some(s.max_exit_gradient),
                        Some(s.flow_m2_per_s),
                    ];
                    for ((name, unit), v) in SECTION_MODEL_QUANTITIES.iter().zip(values) {
                        let reason = v.is_none().then(|| no_exit.to_string());
                        out.push(row_of(&a.section_id, name, a.t_ms, v, unit, reason));
                    }
                    for (id, measured, modelled) in &s.heads {
                        match modelled {
                            Some(m) => self.modelled.insert(id.clone(), *m),
                            None => self.modelled.remove(id),
                        };
                        let outside = "the tip is outside the model's mesh".to_string();
                        out.push(row_of(
                            id,
                            "model_head",
                            a.t_ms,
                            *modelled,
                            "m",
                            modelled.is_none().then(|| outside.clone()),
                        ));
                        let residual = measured.zip(*modelled).map(|(a, b)| a - b);
                        let why = if modelled.is_none() {
                            outside
                        } else {
                            "input has no measured head yet".into()
                        };
                        out.push(row_of(
                            id,
                            "model_residual",
                            a.t_ms,
                            residual,
                            "m",
                            residual.is_none().then_some(why),
                        ));
                    }
                }
                Err(e) => {
                    tracing::warn!(section = %a.section_id, error = %e, "Seepage model not solved");
                    for (name, unit) in SECTION_MODEL_QUANTITIES {
                        out.push(row_of(
                            &a.section_id,
                            name,
                            a.t_ms,
                            None,
                            unit,
                            Some(format!("model not solved: {e}")),
                        ));
                    }
                }
            }
        }
        out
    }
}

fn row_of(
    object: &str,
    quantity: &str,
    t_ms: i64,
    value: Option<f64>,
    unit: &'static str,
    reason: Option<String>,
) -> DerivedRow {
    DerivedRow {
        object: object.to_string(),
        quantity: quantity.to_string(),
        t_ms,
        value,
        unit,
        reason,
        inputs: Vec::new(),
    }
}

#[cfg(test)]
mod tests {
    //! When a re-solve is requested, and the rows made of an answer, on the example dam.

    use std::sync::mpsc::channel;

    use super::*;
    use crate::quality::Flags;

    fn reading(id: &str, t_ms: i64, head_m: f64) -> ReadingRow {
        ReadingRow {
            instrument: id.into(),
            t_ms,
            arrival_ms: t_ms,
            raw: head_m,
            temperature_c: None,
            baro_kpa: None,
            eng_value: head_m,
            eng_unit: "m",
            pressure_kpa: None,
            pressure_head_m: None,
            total_head_m: Some(head_m),
            flags: Flags::empty(),
        }
    }

    #[test]
    fn a_solve_is_requested_when_the_pool_moves_enough_or_the_schedule_says_so() {
        let dir = tempfile::tempdir().unwrap();
        let cfg = Arc::new(crate::scenario::example_config(dir.path()).unwrap());
        let mut deriver = Deriver::new(Arc::clone(&cfg));
        let mut live = LiveModels::default();
        let (tx, requests) = channel();
        let (answer_tx, rx) = channel();
        live.connect(tx, rx);
        let h = 3_600_000;
        let mut feed = |live: &mut LiveModels, id: &str, t: i64, v: f64| {
            let row = reading(id, t, v);
            deriver.on_reading(&row);
            live.on_reading(&cfg, &row, &deriver)
        };
        // No tail level yet: the model needs one, so nothing is asked.
        feed(&mut live, "TH-POOL", 0, 214.0);
        assert!(requests.try_recv().is_err());
        feed(&mut live, "TH-TAIL", 0, 199.5);
        let first = requests.try_recv().expect("first solve");
        assert_eq!((first.pool_m, first.tail_m), (214.0, Some(199.5)));
        // While it is out, nothing more is asked; its answer frees the section.
        feed(&mut live, "TH-POOL", h, 215.0);
        assert!(requests.try_recv().is_err());
        answer_tx
            .send(SolveAnswer {
                section_id: "TH-S1".into(),
                t_ms: 0,
                result: Ok(SolveSummary {
                    exit: None,
                    face_height_m: 0.0,
                    max_exit_gradient: 0.4,
                    flow_m2_per_s: 1e-6,
                    heads: vec![("TH-PZ-3".into(), Some(202.0), Some(201.5))],
                }),
            })
            .unwrap();
        let rows = live.drain();
        let exit = rows
            .iter()
            .find(|r| r.quantity == "model_exit_elevation")
            .unwrap();
        assert!(exit.value.is_none() && exit.reason.is_some());
        let res = rows
            .iter()
            .find(|r| r.object == "TH-PZ-3" && r.quantity == "model_residual")
            .unwrap();
        assert_eq!(res.value, Some(0.5));
        // A later piezometer reading gets its residual against that solve.
        let rows = feed(&mut live, "TH-PZ-3", 2 * h, 203.0);
        assert_eq!(rows.len(), 1);
        assert_eq!(rows[0].value, Some(1.5));
        // 0.05 m of pool since the last request (214.0): not enough (0.1 m); 0.15 m is.
        feed(&mut live, "TH-POOL", 2 * h, 214.05);
        assert!(requests.try_recv().is_err());
        feed(&mut live, "TH-POOL", 3 * h, 214.15);
        let second = requests.try_recv().expect("second solve");
        assert_eq!(second.pool_m, 214.15);
        live.in_flight.insert("TH-S1".into(), false);
        // Six hours later without any change: the schedule asks again.
        feed(&mut live, "TH-POOL", 9 * h, 214.15);
        assert!(requests.try_recv().is_ok());
    }
}
