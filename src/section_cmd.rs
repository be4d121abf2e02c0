//! `seepd section`: draw an instrumented cross-section as SVG from the stored heads at a time
//! (the latest by default), with the phreatic line and the seepage-face exit point. Each input
//! uses its newest head at or before the time; a head older than the section's tolerance is
//! still drawn, marked "stale" with its age, so a silent gauge never hides the drawing. A
//! section with a seepage model is drawn as its flow net at those levels, with the measured
//! heads beside the modelled ones, solved with the section's calibration in use (named in the
//! drawing's note).

use std::cell::RefCell;

use chrono::{DateTime, Utc};

use crate::command::{write_or_emit, ConfigDb, Run};
use crate::config::{Config, Section};
use crate::derive::calibration::{in_use, SectionFit, KIND};
use crate::derive::flownet::{solve_calibrated, FlowNet};
use crate::derive::section_input;
use crate::domain::section::analyse;
use crate::section_svg::{render_flownet_svg, render_section_svg, SvgOptions};
use crate::seepage::Point;
use crate::store::Store;

/// `seepd section`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Args {
    #[command(flatten)]
    on: ConfigDb,
    /// Section id.
    #[arg(long)]
    id: String,
    /// Time (RFC 3339 or YYYY-MM-DD, UTC); default: now (the latest heads).
    #[arg(long, value_name = "TIME", value_parser = crate::timetext::instant)]
    at: Option<DateTime<Utc>>,
    /// Output file (default: standard output).
    #[arg(long, value_name = "FILE")]
    out: Option<std::path::PathBuf>,
}

impl Run for Args {
    fn run(self, now: DateTime<Utc>) -> anyhow::Result<()> {
        let cfg = self.on.load()?;
        let svg = render(&cfg, &self.on.open(&cfg)?, &self.id, self.at.unwrap_or(now))?;
        write_or_emit(self.out.as_deref(), &svg)
    }
}

fn units_of(cfg: &Config, s: &Section) -> crate::config::DisplayUnits {
    cfg.sites
        .iter()
        .find(|x| x.id == s.site)
        .map_or(crate::config::DisplayUnits::Si, |x| x.display_units)
}

/// The calibration in use for `section`: the newest applied fit in the model history.
///
/// # Errors
/// Database errors.
pub fn fit_in_use(store: &Store, section: &str) -> anyhow::Result<Option<SectionFit>> {
    Ok(in_use(&store.models_of_kind(KIND)?).remove(section))
}

/// A solved section drawn as a flow net, titled with its levels.
#[must_use]
pub fn flownet_svg(cfg: &Config, s: &Section, net: &FlowNet) -> String {
    render_flownet_svg(
        net,
        &SvgOptions {
            title: format!("Section {}: flow net", s.id),
            units: units_of(cfg, s),
            ..SvgOptions::default()
        },
    )
}

/// Render section `id` at time `at` from `store`: the flow net when the section has a seepage
/// model, else the phreatic line through the piezometer heads.
///
/// # Errors
/// Unknown section, an input with no reading at or before the time, database errors, a model
/// that cannot be solved.
pub fn render(cfg: &Config, store: &Store, id: &str, at: DateTime<Utc>) -> anyhow::Result<String> {
    let s = cfg
        .objects
        .section(id)
        .ok_or_else(|| anyhow::anyhow!("no section {id:?} in the configuration"))?;
    let units = units_of(cfg, s);
    let t_ms = at.timestamp_millis();
    let stale: RefCell<Vec<(String, String)>> = RefCell::new(Vec::new());
    let head = |inst: &str| -> Result<f64, String> {
        match store.head_at(inst, t_ms) {
            Ok(Some((t, h, _))) => {
                let age_s = (t_ms - t) / 1000;
                if age_s > s.tolerance_s {
                    let mut st = stale.borrow_mut();
                    if !st.iter().any(|(i, _)| i == inst) {
                        st.push((inst.to_string(), crate::present::format::duration(age_s)));
                    }
                }
                Ok(h)
            }
            Ok(None) => Err(format!("input {inst} has no reading at or before the time")),
            Err(e) => Err(e.to_string()),
        }
    };
    let input = section_input(cfg, s, head).map_err(|e| anyhow::anyhow!("section {id}: {e}"))?;
    let net = match &s.model {
        Some(spec) => {
            let piezometers: Vec<_> = input
                .piezometers
                .iter()
                .map(|p| {
                    let tip = Point::new(p.station_m, p.tip_elevation_m);
                    (p.id.clone(), tip, Some(p.head_m))
                })
                .collect();
            let fit = fit_in_use(store, id)?;
            let net = solve_calibrated(
                spec,
                fit.as_ref(),
                input.pool_m,
                input.tail_water_m,
                &piezometers,
            )
            .map_err(|e| anyhow::anyhow!("section {id}: {e}"))?;
            Some((net, fit))
        }
        None => None,
    };
    let ages = stale.into_inner();
    let note = if ages.is_empty() {
        String::new()
    } else {
        let list: Vec<String> = ages.iter().map(|(i, a)| format!("{i} {a}")).collect();
        format!("stale heads drawn, with their age: {}", list.join(", "))
    };
    let marks = ages
        .into_iter()
        .map(|(i, a)| (i, format!("stale, {a} old")))
        .collect();
    let title = format!("Section {id} at {}", at.format("%Y-%m-%d %H:%M UTC"));
    if let Some((net, fit)) = net {
        let permeabilities = fit.as_ref().map_or_else(
            || "model as written".to_string(),
            crate::derive::calibration::SectionFit::label,
        );
        let note = if note.is_empty() {
            permeabilities
        } else {
            format!("{permeabilities}; {note}")
        };
        return Ok(render_flownet_svg(
            &net,
            &SvgOptions {
                title: format!("{title}: flow net"),
                units,
                note,
                marks,
                ..SvgOptions::default()
            },
        ));
    }
    let result = analyse(&input).map_err(|e| anyhow::anyhow!("section {id}: {e}"))?;
    Ok(render_section_svg(
        &input,
        &result,
        &SvgOptions {
            title,
            units,
            note,
            marks,
            ..SvgOptions::default()
        },
    ))
}
