//! `seepd flownet`: solve a section's seepage model once, at the levels stored at a time or at
//! levels given on the command line, and print the results (text, or one JSON object in SI),
//! optionally drawing the flow net as SVG. A section with a calibration in use (the newest
//! applied fit in the model history) is solved with its zone factors, and the output says so.
//!
//! Owns the command's output. Must not compute engineering quantities (`derive::flownet` does).

use std::time::Instant;

use chrono::{DateTime, Utc};
use serde_json::{json, Value};

use crate::command::{emit, write_or_emit, ConfigDb, Run};
use crate::config::{Config, Level, Section};
use crate::derive::calibration::SectionFit;
use crate::derive::flownet::{solve_calibrated, tips, FlowNet};
use crate::section_cmd::{fit_in_use, flownet_svg};
use crate::store::Store;

/// `seepd flownet`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Args {
    #[command(flatten)]
    on: ConfigDb,
    /// Section id.
    #[arg(long)]
    id: String,
    /// Solve at the levels stored at this time (RFC 3339 or YYYY-MM-DD, UTC); default: now.
    #[arg(long, value_name = "TIME", value_parser = crate::timetext::instant, conflicts_with = "upstream")]
    at: Option<DateTime<Utc>>,
    /// Upstream (pool) level, m, instead of the stored one.
    #[arg(long, value_name = "LEVEL", allow_negative_numbers = true)]
    upstream: Option<f64>,
    /// Downstream (tail-water) level, m, with --upstream.
    #[arg(
        long,
        value_name = "LEVEL",
        allow_negative_numbers = true,
        requires = "upstream"
    )]
    downstream: Option<f64>,
    /// Print one JSON object (SI units).
    #[arg(long)]
    json: bool,
    /// Also draw the flow net as SVG into this file.
    #[arg(long, value_name = "FILE")]
    out: Option<std::path::PathBuf>,
}

impl Run for Args {
    fn run(self, now: DateTime<Utc>) -> anyhow::Result<()> {
        let cfg = self.on.load()?;
        let levels = match self.upstream {
            Some(pool_m) => Levels::Given {
                pool_m,
                tail_m: self.downstream,
            },
            None => Levels::At(self.at.unwrap_or(now)),
        };
        let (s, solved) = run(&cfg, self.on.path(&cfg), &self.id, &levels)?;
        if let Some(path) = &self.out {
            write_or_emit(Some(path), &flownet_svg(&cfg, s, &solved.net))?;
        }
        emit(&printed(&self.id, &solved, self.json))
    }
}

/// The water levels to solve at.
pub enum Levels {
    /// The stored levels (and piezometer heads) at this time.
    At(DateTime<Utc>),
    /// Pool and tail levels, m (no measured heads).
    Given { pool_m: f64, tail_m: Option<f64> },
}

/// A solved flow net with the time the solve took.
pub struct Solved {
    pub net: FlowNet,
    pub solve_ms: f64,
    /// The calibration solved with (none: the model as written).
    pub fit: Option<SectionFit>,
}

/// The water levels and piezometer heads stored at a time.
pub struct StoredLevels {
    pub pool_m: f64,
    pub tail_m: Option<f64>,
    /// Per piezometer of the section, in its order: (id, (reading time ms, head m)), none when
    /// it has no reading at or before the time.
    pub heads: Vec<(String, Option<(i64, f64)>)>,
}

/// The levels of section `s` and its piezometers' heads stored at or before `t_ms`.
///
/// # Errors
/// A level with no reading at or before the time; database errors.
pub fn stored_levels(store: &Store, s: &Section, t_ms: i64) -> anyhow::Result<StoredLevels> {
    let head = |id: &str| -> anyhow::Result<f64> {
        store.head_at(id, t_ms)?.map(|(_, h, _)| h).ok_or_else(|| {
            anyhow::anyhow!(
                "input {id} has no reading at or before {}",
                DateTime::from_timestamp_millis(t_ms).map_or(t_ms.to_string(), |t| t.to_string())
            )
        })
    };
    let tail_m = match &s.tail {
        Some(Level::Fixed(m)) => Some(*m),
        Some(Level::Gauge(g)) => Some(head(g)?),
        None => None,
    };
    let heads = s
        .piezometers
        .iter()
        .map(|id| Ok((id.clone(), store.head_at(id, t_ms)?.map(|(t, h, _)| (t, h)))))
        .collect::<anyhow::Result<_>>()?;
    Ok(StoredLevels {
        pool_m: head(&s.pool_gauge)?,
        tail_m,
        heads,
    })
}

/// The section `id` of `cfg`, with a model.
///
/// # Errors
/// Unknown section, or a section without `[section.model]`.
pub fn section<'a>(cfg: &'a Config, id: &str) -> anyhow::Result<&'a Section> {
    let s = cfg
        .objects
        .section(id)
        .ok_or_else(|| anyhow::anyhow!("no section {id:?} in the configuration"))?;
    if s.model.is_none() {
        anyhow::bail!("section {id:?} has no [section.model]");
    }
    Ok(s)
}

/// `seepd flownet`: section `id` of `cfg` solved at `levels`. Stored levels are read from the
/// database `db`; given levels still take the calibration in use when the database exists.
///
/// # Errors
/// As [`section`] and [`solve`]; database errors.
pub fn run<'a>(
    cfg: &'a Config,
    db: &std::path::Path,
    id: &str,
    levels: &Levels,
) -> anyhow::Result<(&'a Section, Solved)> {
    let s = section(cfg, id)?;
    let store = match levels {
        Levels::At(_) => Some(Store::open(db)?),
        Levels::Given { .. } if db.exists() => Some(Store::open(db)?),
        Levels::Given { .. } => None,
    };
    let solved = solve(cfg, store.as_ref(), s, levels)?;
    Ok((s, solved))
}

/// The command's output: one JSON object, or the text.
#[must_use]
pub fn printed(id: &str, solved: &Solved, as_json: bool) -> String {
    if as_json {
        format!("{}\n", json(id, solved))
    } else {
        text(id, solved)
    }
}

/// Solve section `s` at `levels`, reading stored heads from `store` for `Levels::At`.
///
/// # Errors
/// No model, a level with no reading at or before the time, database errors, solve failures.
pub fn solve(
    cfg: &Config,
    store: Option<&Store>,
    s: &Section,
    levels: &Levels,
) -> anyhow::Result<Solved> {
    let spec = s
        .model
        .as_ref()
        .ok_or_else(|| anyhow::anyhow!("section {:?} has no [section.model]", s.id))?;
    let (pool_m, tail_m, measured): (f64, Option<f64>, Vec<Option<f64>>) = match levels {
        Levels::Given { pool_m, tail_m } => {
            if spec.uses_tail() && tail_m.is_none() {
                anyhow::bail!("section {:?}: the model needs --downstream", s.id);
            }
            (*pool_m, *tail_m, vec![None; s.piezometers.len()])
        }
        Levels::At(at) => {
            let store = store.ok_or_else(|| anyhow::anyhow!("no database"))?;
            let l = stored_levels(store, s, at.timestamp_millis())?;
            let measured = l.heads.iter().map(|h| h.1.map(|(_, v)| v)).collect();
            (l.pool_m, l.tail_m, measured)
        }
    };
    let tip_list = tips(cfg, s);
    let piezometers: Vec<_> = tip_list
        .into_iter()
        .map(|(id, tip)| {
            let k = s.piezometers.iter().position(|p| *p == id);
            let m = k.and_then(|k| measured.get(k).copied().flatten());
            (id, tip, m)
        })
        .collect();
    let fit = match store {
        Some(store) => fit_in_use(store, &s.id)?,
        None => None,
    };
    let started = Instant::now();
    let net = solve_calibrated(spec, fit.as_ref(), pool_m, tail_m, &piezometers)
        .map_err(|e| anyhow::anyhow!("section {:?}: {e}", s.id))?;
    let solve_ms = started.elapsed().as_secs_f64() * 1000.0;
    Ok(Solved { net, solve_ms, fit })
}

/// The JSON object of `seepd flownet --json` (SI units).
#[must_use]
pub fn json(id: &str, solved: &Solved) -> Value {
    let n = &solved.net;
    let pairs = |v: &[(f64, f64)]| -> Vec<[f64; 2]> { v.iter().map(|&(a, b)| [a, b]).collect() };
    json!({
        "section": id,
        "pool_m": n.pool_m,
        "tail_m": n.tail_m,
        "flow_m2_per_s": n.flow_m2_per_s,
        "exit_station": n.exit.as_ref().map(|e| e.exit.x),
        "exit_elevation": n.exit.as_ref().map(|e| e.exit.y),
        "seepage_face_height": n.exit.as_ref().map_or(0.0, |e| e.face_height_m),
        "max_exit_gradient": n.max_exit_gradient(),
        "exit_gradients": pairs(&n.exit_gradients),
        "phreatic": pairs(&n.phreatic),
        "piezometers": n.piezometers.iter().map(|p| json!({
            "id": p.id,
            "station": p.tip.x,
            "tip_elevation": p.tip.y,
            "measured": p.measured_m,
            "modelled": p.modelled_m,
            "residual": p.residual_m(),
        })).collect::<Vec<_>>(),
        "nodes": n.mesh.nodes.len(),
        "elements": n.mesh.triangles.len(),
        "iterations": n.solution.iterations,
        "converged": n.solution.converged,
        "solve_ms": solved.solve_ms,
        "calibration": solved.fit.as_ref().map(|f| json!({
            "fitted": DateTime::from_timestamp_millis(f.fitted_ms).map(|t| t.to_rfc3339()),
            "rms_m": f.rms_calibrated_m,
            "rms_written_m": f.rms_written_m,
            "factors": f.factors.iter().map(|z| json!({
                "zone": z.zone,
                "factor": z.factor(),
                "log10_factor": z.log10_factor,
                "std_error": z.std_error,
            })).collect::<Vec<_>>(),
            "boundary_offsets": f.boundary_offsets.iter().map(|o| json!({
                "boundary": o.boundary,
                "offset_m": o.offset_m,
                "std_error_m": o.std_error_m,
            })).collect::<Vec<_>>(),
        })),
    })
}

/// The plain-text summary of a solve.
#[must_use]
pub fn text(id: &str, solved: &Solved) -> String {
    let n = &solved.net;
    let mut s = format!(
        "section {id}: pool {:.2} m, tail {}\n",
        n.pool_m,
        n.tail_m.map_or("none".into(), |t| format!("{t:.2} m"))
    );
    s += &format!(
        "model: {}\n",
        solved.fit.as_ref().map_or_else(
            || "as written (no calibration in use)".into(),
            SectionFit::label
        )
    );
    s += &format!(
        "flow {:.3e} m3/s per m; max exit gradient {:.3}\n",
        n.flow_m2_per_s,
        n.max_exit_gradient()
    );
    match &n.exit {
        Some(e) => {
            s += &format!(
                "exit point at station {:.2} m, elevation {:.2} m; seepage face {:.2} m high\n",
                e.exit.x, e.exit.y, e.face_height_m
            );
        }
        None => s += "no seepage face: the phreatic surface does not reach a possible face\n",
    }
    for p in &n.piezometers {
        let f = |v: Option<f64>| v.map_or("-".into(), |v| format!("{v:.2}"));
        s += &format!(
            "{}: measured {} m, modelled {} m, residual {} m\n",
            p.id,
            f(p.measured_m),
            f(p.modelled_m),
            f(p.residual_m())
        );
    }
    s += &format!(
        "{} nodes, {} elements, {} iterations, {:.0} ms\n",
        n.mesh.nodes.len(),
        n.mesh.triangles.len(),
        n.solution.iterations,
        solved.solve_ms
    );
    s += "A screening model: verify in the field; it does not replace the engineer of record's analysis.\n";
    s
}
