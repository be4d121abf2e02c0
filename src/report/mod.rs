//! Periodic instrumentation reports for one site and period: a self-contained HTML file
//! (tables, inline SVG time histories and section drawings, caution, sign-off lines) and CSV
//! tables (`files`: the formats asked for). Used by `seepd report` on demand; the schedule runs the same code.

pub mod alerts;
pub mod chart;
pub mod csv;
pub mod data;
mod files;
pub mod html;
pub mod parts;
#[cfg(feature = "pdf")]
pub mod pdf;
mod places;
#[cfg(feature = "pdf")]
pub mod raster;
pub mod schedule;
pub mod scheduler;
pub mod summary;

use chrono::{DateTime, Utc};
use chrono_tz::Tz;
use std::collections::BTreeSet;

use crate::config::{Config, DisplayUnits, Kind, ObjectRef};
use crate::domain::rules::{Check, Direction};
use crate::objkind::ObjectKind;
use crate::present::units::{convert, unit_label};
use crate::present::{measure_of, Measure, FS_DISPLAY_CAP};
use crate::store::Store;

use chart::{Beyond, Chart, LevelLine, Series};
use data::{Readings, ReportData};
pub use files::{generate, render_report, write_files, Args, Document};

/// A chart group: a title and its piezometers, with the stage gauge drawn on the second axis.
struct Group {
    title: String,
    piezometers: Vec<String>,
    stage: Option<String>,
}

/// Plot groups of a site: each nest, each section, then the remaining piezometers.
fn groups(cfg: &Config, site: &str) -> Vec<Group> {
    let o = &cfg.objects;
    let site_stage = cfg
        .instruments
        .values()
        .find(|i| i.site == site && matches!(i.kind, Kind::StageGauge(_)))
        .map(|i| i.id.clone());
    let river = o.blankets.iter().find(|b| b.site == site);
    let river = river
        .map(|b| b.river_gauge.clone())
        .or_else(|| site_stage.clone());
    // Which kinds have a group of piezometers to plot: one match, so a new kind must say.
    let mut out = Vec::new();
    for x in o.iter().filter(|x| x.site() == site) {
        let (title, piezometers, stage) = match x {
            ObjectRef::Nest(c) => (format!("Nest {}", c.id), &c.piezometers, river.clone()),
            ObjectRef::Section(s) => (
                format!("Section {}", s.id),
                &s.piezometers,
                Some(s.pool_gauge.clone()),
            ),
            ObjectRef::Toe(_) | ObjectRef::Blanket(_) => continue,
        };
        let piezometers = piezometers.clone();
        out.push(Group {
            title,
            piezometers,
            stage,
        });
    }
    let grouped: BTreeSet<&String> = out.iter().flat_map(|g| g.piezometers.iter()).collect();
    let rest: Vec<String> = cfg
        .instruments
        .values()
        .filter(|i| i.site == site && i.tip_elevation_m.is_some() && !grouped.contains(&i.id))
        .filter(|i| !matches!(i.kind, Kind::StageGauge(_) | Kind::Barometer(_)))
        .map(|i| i.id.clone())
        .collect();
    if !rest.is_empty() {
        out.push(Group {
            title: "Other piezometers".into(),
            piezometers: rest,
            stage: site_stage,
        });
    }
    out
}

/// Rule levels drawn on a chart of `quantity` for `objects`: each level bound of every
/// threshold rule on one of them, in display units, labelled `rule-id: level-name`, the side
/// beyond the bound shaded.
pub(crate) fn level_lines(
    cfg: &Config,
    objects: &[String],
    (quantity, unit_si): (&str, &str),
    units: DisplayUnits,
) -> Vec<LevelLine> {
    let m = measure_of(quantity, unit_si);
    cfg.alerting
        .rules
        .iter()
        .filter(|r| r.quantity == quantity && r.spec.check == Check::Threshold)
        .filter(|r| objects.contains(&r.object))
        .flat_map(|r| {
            r.spec.levels.iter().map(|l| LevelLine {
                label: format!("{}: {}", r.id, l.name),
                value: convert(l.bound, m, units),
                beyond: match l.direction {
                    Direction::Above => Beyond::Above,
                    Direction::Below => Beyond::Below,
                },
            })
        })
        .collect()
}

/// Points of a stored SI series in display units.
pub(crate) fn to_display(
    points: Vec<(i64, f64)>,
    m: Measure,
    units: DisplayUnits,
) -> Vec<(i64, f64)> {
    points
        .into_iter()
        .map(|(t, v)| (t, convert(v, m, units)))
        .collect()
}

/// A chart's frame: title, axis label and the period; series and levels are filled in.
fn chart(title: String, y_label: String, f: i64, t: i64, tz: Tz) -> Chart {
    Chart {
        title,
        y_label,
        series: Vec::new(),
        stage: None,
        levels: Vec::new(),
        stage_axis: String::new(),
        cap: None,
        zero_line: false,
        from_ms: f,
        to_ms: t,
        tz,
    }
}

/// The stage series of gauge `id` in display units, with its axis title.
fn stage_of(
    cfg: &Config,
    (store, readings): (&Store, &Readings),
    id: Option<&String>,
    units: DisplayUnits,
) -> anyhow::Result<(Option<Series>, String)> {
    let Some(i) = id.and_then(|id| cfg.instruments.get(id)) else {
        return Ok((None, String::new()));
    };
    let points = to_display(readings.series(store, i)?, Measure::Length, units);
    let axis = format!("{} water level ({})", i.id, length_unit(units));
    Ok((
        Some(Series {
            label: format!("{} (water level)", i.id),
            points,
        }),
        axis,
    ))
}

fn length_unit(units: DisplayUnits) -> &'static str {
    unit_label(Measure::Length, units, "m")
}

/// The safety plots of a site: factor of safety and exit gradient at the toes against their
/// rule levels, vertical gradients with the flow direction marked, and each blanket reach's
/// measured excess head against the blanket-theory expectation with the river on a second
/// axis.
fn safety_charts(
    cfg: &Config,
    (store, readings): (&Store, &Readings),
    site: &str,
    (f, t): (i64, i64),
    tz: Tz,
    units: DisplayUnits,
) -> anyhow::Result<Vec<(String, Chart)>> {
    let o = &cfg.objects;
    let mut out = Vec::new();
    let derived = |objects: &[String], q: &str, m: Measure| -> anyhow::Result<Vec<Series>> {
        let mut v = Vec::new();
        for id in objects {
            v.push(Series {
                label: id.clone(),
                points: to_display(store.derived_points(id, q, f, t)?, m, units),
            });
        }
        Ok(v)
    };
    // Each kind's charts, in the order they appear: matches, so a new kind must say.
    let mut kinds = ObjectKind::ALL;
    kinds.sort_by_key(|k| match k {
        ObjectKind::Toe => 0,
        ObjectKind::Nest => 1,
        ObjectKind::Blanket => 2,
        ObjectKind::Section => 3,
    });
    for kind in kinds {
        let ids: Vec<String> = o
            .of(kind)
            .into_iter()
            .filter(|(_, s)| *s == site)
            .map(|(id, _)| id.to_string())
            .collect();
        match kind {
            _ if ids.is_empty() => {}
            ObjectKind::Toe => {
                let toes = ids;
                let mut c = chart(
                    "Factor of safety against heave at the toes".into(),
                    "Factor of safety".into(),
                    f,
                    t,
                    tz,
                );
                c.series = derived(&toes, "factor_of_safety", Measure::FactorOfSafety)?;
                c.levels = level_lines(cfg, &toes, ("factor_of_safety", "-"), units);
                if c.levels.is_empty() {
                    c.levels.push(LevelLine {
                        label: "FS = 1".into(),
                        value: 1.0,
                        beyond: Beyond::Below,
                    });
                }
                c.cap = Some(FS_DISPLAY_CAP);
                out.push(("Factor of safety".to_string(), c));
                let mut c = chart(
                    "Exit gradient at the toes".into(),
                    "Exit gradient (+ upward)".into(),
                    f,
                    t,
                    tz,
                );
                c.series = derived(&toes, "exit_gradient", Measure::Gradient)?;
                c.levels = level_lines(cfg, &toes, ("exit_gradient", "-"), units);
                out.push(("Exit gradient".to_string(), c));
            }
            ObjectKind::Nest => {
                let nests = ids;
                let mut c = chart(
                    "Vertical gradients in the nests".into(),
                    "Vertical gradient (+ upward)".into(),
                    f,
                    t,
                    tz,
                );
                c.series = derived(&nests, "vertical_gradient", Measure::Gradient)?;
                c.levels = level_lines(cfg, &nests, ("vertical_gradient", "-"), units);
                c.zero_line = true;
                out.push(("Vertical gradients".to_string(), c));
            }
            ObjectKind::Blanket => {
                for b in o.blankets.iter().filter(|x| x.site == site) {
                    let mut c = chart(
                        format!(
                            "Excess head at the toe of {}: measured and expected (blanket theory)",
                            b.id
                        ),
                        format!("Excess head ({})", length_unit(units)),
                        f,
                        t,
                        tz,
                    );
                    for (q, label) in [
                        ("measured_excess_head", "measured"),
                        ("expected_excess_head", "expected"),
                    ] {
                        c.series.push(Series {
                            label: label.into(),
                            points: to_display(
                                store.derived_points(&b.id, q, f, t)?,
                                Measure::Length,
                                units,
                            ),
                        });
                    }
                    let (stage, axis) =
                        stage_of(cfg, (store, readings), Some(&b.river_gauge), units)?;
                    c.stage = stage;
                    c.stage_axis = axis;
                    out.push((format!("Excess head {}", b.id), c));
                }
            }
            // Sections are drawn, not charted (the report's sections part).
            ObjectKind::Section => {}
        }
    }
    Ok(out)
}

/// The times to draw a section at: the period's highest pool, and its end.
fn section_times(
    store: &Store,
    pool: &str,
    from_ms: i64,
    to_ms: i64,
) -> Result<Vec<(String, i64)>, crate::store::StoreError> {
    let peak = store.highest_head_time(pool, from_ms, to_ms)?;
    let mut v = Vec::new();
    if let Some(t) = peak {
        v.push(("at the period's highest pool".to_string(), t));
    }
    v.push(("at the end of the period".to_string(), to_ms - 1));
    Ok(v)
}

/// An SVG document without its XML declaration, for embedding in HTML.
fn strip_xml_declaration(svg: &str) -> &str {
    match svg.strip_prefix("<?xml") {
        Some(rest) => rest
            .split_once("?>")
            .map_or(svg, |(_, body)| body.trim_start()),
        None => svg,
    }
}

/// Build the report content and its drawings.
///
/// # Errors
/// Unknown site; database errors.
pub fn build(
    cfg: &Config,
    store: &Store,
    site: &str,
    from: DateTime<Utc>,
    to: DateTime<Utc>,
    now: DateTime<Utc>,
) -> anyhow::Result<(ReportData, html::Extras)> {
    let (f, t) = (from.timestamp_millis(), to.timestamp_millis());
    // Each instrument's readings are read once, for its table row and its plots.
    let readings = Readings::new(f, t);
    let data = data::gather_from(cfg, store, site, (from, to), now, &readings)?;
    let units = data.units;
    let tz: Tz = data.time_zone.parse().unwrap_or(chrono_tz::UTC);
    let mut charts = Vec::new();
    for (title, c) in safety_charts(cfg, (store, &readings), site, (f, t), tz, units)? {
        charts.push((title, chart::render(&c)));
    }
    for g in groups(cfg, site) {
        let mut c = chart(
            g.title.clone(),
            format!("Total head ({})", length_unit(units)),
            f,
            t,
            tz,
        );
        for id in &g.piezometers {
            if let Some(i) = cfg.instruments.get(id) {
                c.series.push(Series {
                    label: id.clone(),
                    points: to_display(readings.series(store, i)?, Measure::Length, units),
                });
            }
        }
        (c.stage, c.stage_axis) = stage_of(cfg, (store, &readings), g.stage.as_ref(), units)?;
        c.levels = level_lines(cfg, &g.piezometers, ("total_head", "m"), units);
        charts.push((g.title, chart::render(&c)));
    }
    let mut sections = Vec::new();
    for s in cfg.objects.sections.iter().filter(|s| s.site == site) {
        for (label, at_ms) in section_times(store, &s.pool_gauge, f, t)? {
            let at = DateTime::from_timestamp_millis(at_ms).unwrap_or(to);
            let caption = format!("Section {} {label} ({})", s.id, html::local(at_ms, tz));
            let svg = crate::section_cmd::render(cfg, store, &s.id, at)
                .map(|svg| strip_xml_declaration(&svg).to_string())
                .map_err(|e| format!("{e:#}"));
            sections.push((caption, svg));
        }
    }
    let alerts = alerts::rows(cfg, store, site, f, t, tz, units)?;
    let previous = data::gather(cfg, store, site, from - (to - from), from, now)?;
    let summary = summary::lines(cfg, &data, &previous, &alerts);
    let extras = html::Extras {
        charts,
        sections,
        alerts: Some(alerts),
        summary,
        caution: crate::CAUTION,
        version: env!("CARGO_PKG_VERSION"),
    };
    Ok((data, extras))
}
