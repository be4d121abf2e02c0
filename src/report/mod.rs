//! Periodic instrumentation reports for one site and period: a self-contained HTML file
//! (tables, inline SVG time histories and section drawings, caution, sign-off lines) and CSV
//! tables. Used by `seepd report` on demand; the schedule runs the same code.

pub mod alerts;
pub mod chart;
pub mod csv;
pub mod data;
pub mod html;
pub mod schedule;
pub mod scheduler;

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use anyhow::Context as _;
use chrono::{DateTime, Utc};
use chrono_tz::Tz;

use crate::config::{Config, Kind};
use crate::domain::rules::Check;
use crate::store::Store;

use chart::{Chart, LevelLine, Series};
use data::ReportData;

/// The files a report consists of.
#[derive(Debug, Clone)]
pub struct ReportFiles {
    pub html: PathBuf,
    pub csv: Vec<PathBuf>,
}

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
    let mut out = Vec::new();
    for c in o.nests.iter().filter(|c| c.site == site) {
        let stage = o
            .blankets
            .iter()
            .find(|b| b.site == site)
            .map(|b| b.river_gauge.clone())
            .or_else(|| site_stage.clone());
        out.push(Group {
            title: format!("Nest {}", c.id),
            piezometers: c.piezometers.clone(),
            stage,
        });
    }
    for s in o.sections.iter().filter(|s| s.site == site) {
        out.push(Group {
            title: format!("Section {}", s.id),
            piezometers: s.piezometers.clone(),
            stage: Some(s.pool_gauge.clone()),
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

/// Rule levels drawn on a chart of `piezometers`: each level bound of every threshold rule on
/// the total head of one of them, labelled `rule-id: level-name`.
fn level_lines(cfg: &Config, piezometers: &[String]) -> Vec<LevelLine> {
    cfg.alerting
        .rules
        .iter()
        .filter(|r| r.quantity == "total_head" && r.spec.check == Check::Threshold)
        .filter(|r| piezometers.contains(&r.object))
        .flat_map(|r| {
            r.spec.levels.iter().map(|l| LevelLine {
                label: format!("{}: {}", r.id, l.name),
                value: l.bound,
            })
        })
        .collect()
}

/// The times to draw a section at: the period's highest pool, and its end.
fn section_times(store: &Store, pool: &str, from_ms: i64, to_ms: i64) -> Vec<(String, i64)> {
    let peak: Option<i64> = store
        .conn()
        .query_row(
            "SELECT t_ms FROM readings WHERE instrument = ?1 AND t_ms >= ?2 AND t_ms < ?3
             AND total_head_m IS NOT NULL ORDER BY total_head_m DESC, t_ms ASC LIMIT 1",
            rusqlite::params![pool, from_ms, to_ms],
            |r| r.get(0),
        )
        .ok();
    let mut v = Vec::new();
    if let Some(t) = peak {
        v.push(("at the period's highest pool".to_string(), t));
    }
    v.push(("at the end of the period".to_string(), to_ms - 1));
    v
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
    let data = data::gather(cfg, store.conn(), site, from, to, now)?;
    let tz: Tz = data.time_zone.parse().unwrap_or(chrono_tz::UTC);
    let (f, t) = (from.timestamp_millis(), to.timestamp_millis());
    let mut charts = Vec::new();
    for g in groups(cfg, site) {
        let mut series = Vec::new();
        for id in &g.piezometers {
            if let Some(i) = cfg.instruments.get(id) {
                series.push(Series {
                    label: id.clone(),
                    points: data::series(store.conn(), i, f, t)?,
                });
            }
        }
        let stage = match g.stage.as_ref().and_then(|id| cfg.instruments.get(id)) {
            Some(i) => Some(Series {
                label: i.id.clone(),
                points: data::series(store.conn(), i, f, t)?,
            }),
            None => None,
        };
        let chart = Chart {
            title: g.title.clone(),
            y_label: "Total head (m)".into(),
            series,
            stage,
            levels: level_lines(cfg, &g.piezometers),
            from_ms: f,
            to_ms: t,
            tz,
        };
        charts.push((g.title, chart::render(&chart)));
    }
    let mut sections = Vec::new();
    for s in cfg.objects.sections.iter().filter(|s| s.site == site) {
        for (label, at_ms) in section_times(store, &s.pool_gauge, f, t) {
            let at = DateTime::from_timestamp_millis(at_ms).unwrap_or(to);
            let caption = format!("Section {} {label} ({})", s.id, html::local(at_ms, tz));
            let svg = crate::section_cmd::render(cfg, store, &s.id, at)
                .map(|svg| strip_xml_declaration(&svg).to_string())
                .map_err(|e| format!("{e:#}"));
            sections.push((caption, svg));
        }
    }
    let extras = html::Extras {
        charts,
        sections,
        alerts: Some(alerts::rows(cfg, store.conn(), site, f, t, tz)?),
        caution: crate::CAUTION,
        version: env!("CARGO_PKG_VERSION"),
    };
    Ok((data, extras))
}

/// One generated file, in memory: its name (e.g. `SITE_FROM_TO.html`), MIME type and text.
#[derive(Debug, Clone)]
pub struct Document {
    pub name: String,
    pub content_type: &'static str,
    pub text: String,
}

/// Render the report for `site` over [from, to): the HTML document first, then the CSV tables.
///
/// # Errors
/// Unknown site, database errors, or a generated document that is not well-formed.
pub fn render_files(
    cfg: &Config,
    store: &Store,
    site: &str,
    from: DateTime<Utc>,
    to: DateTime<Utc>,
    now: DateTime<Utc>,
) -> anyhow::Result<Vec<Document>> {
    anyhow::ensure!(to > from, "the period is empty: --to must be after --from");
    let (data, extras) = build(cfg, store, site, from, to, now)?;
    let doc = html::render(&data, &extras);
    crate::xml_check::check_xml(&doc)
        .map_err(|e| anyhow::anyhow!("generated HTML is not well-formed: {e}"))?;
    let stem = format!("{}_{}_{}", site, from.format("%Y%m%d"), to.format("%Y%m%d"));
    let mut docs = vec![Document {
        name: format!("{stem}.html"),
        content_type: "text/html; charset=utf-8",
        text: doc,
    }];
    for (name, text) in [
        ("instruments", csv::instruments(&data)),
        ("derived", csv::derived(&data)),
        ("quarantine", csv::quarantine(&data)),
    ] {
        docs.push(Document {
            name: format!("{stem}_{name}.csv"),
            content_type: "text/csv; charset=utf-8",
            text,
        });
    }
    Ok(docs)
}

/// Write rendered documents into `out` (created if needed); returns their paths in order.
///
/// # Errors
/// File errors.
pub fn write_files(docs: &[Document], out: &Path) -> anyhow::Result<Vec<PathBuf>> {
    std::fs::create_dir_all(out).with_context(|| format!("creating {}", out.display()))?;
    let mut paths = Vec::new();
    for d in docs {
        let p = out.join(&d.name);
        std::fs::write(&p, &d.text).with_context(|| format!("writing {}", p.display()))?;
        paths.push(p);
    }
    Ok(paths)
}

/// Generate the report files for `site` over [from, to) into `out`.
///
/// # Errors
/// Unknown site, database or file errors, or a generated document that is not well-formed.
pub fn generate(
    cfg: &Config,
    store: &Store,
    site: &str,
    from: DateTime<Utc>,
    to: DateTime<Utc>,
    now: DateTime<Utc>,
    out: &Path,
) -> anyhow::Result<ReportFiles> {
    let docs = render_files(cfg, store, site, from, to, now)?;
    let mut paths = write_files(&docs, out)?.into_iter();
    let html = paths
        .next()
        .ok_or_else(|| anyhow::anyhow!("no HTML document was rendered"))?;
    Ok(ReportFiles {
        html,
        csv: paths.collect(),
    })
}
