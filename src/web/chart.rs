//! The one chart of the web pages: a quantity of an instrument or derived object over a
//! period, as the report draws it (its SVG chart), in the site's display units, with the
//! threshold levels of the rules on that quantity shaded beyond their bounds, and optionally a
//! stage gauge's water level on the second axis. The alert page and the instrument page both
//! draw theirs here.
//!
//! Owns the choice of what goes on a page's chart; the drawing is `report::chart`'s.

use crate::config::{Kind, ObjectRef};
use crate::present::units::{measure_of, unit_label, Measure};
use crate::report::chart::{self, Chart, Series};
use crate::store::Store;

use super::Web;

/// What a page plots, read from the store (values in stored SI units): one quantity of one or
/// more objects (the first decides the site), each a line.
#[derive(Debug, Clone)]
pub struct Plot {
    pub objects: Vec<String>,
    pub quantity: String,
    /// One line per object, in `objects`' order.
    pub lines: Vec<Vec<(i64, f64)>>,
    /// Lines are named by their object (else by the quantity).
    pub named_by_object: bool,
    pub unit_si: String,
    /// The stage gauge drawn on the second axis and its water levels (m).
    pub stage: Option<(String, Vec<(i64, f64)>)>,
    pub from_ms: i64,
    pub to_ms: i64,
}

/// Read `quantity` of `object` in `[from_ms, to_ms)`, and the water levels of `stage` (a gauge
/// id) over the same period.
///
/// # Errors
/// SQLite errors.
pub fn read(
    s: &Store,
    object: &str,
    quantity: &str,
    stage: Option<&str>,
    (from_ms, to_ms): (i64, i64),
) -> anyhow::Result<Plot> {
    let mut p = read_many(s, &[object.to_string()], quantity, stage, (from_ms, to_ms))?;
    p.named_by_object = false;
    Ok(p)
}

/// As `read`, for several objects (e.g. the piezometers behind a derived value).
///
/// # Errors
/// SQLite errors.
pub fn read_many(
    s: &Store,
    objects: &[String],
    quantity: &str,
    stage: Option<&str>,
    (from_ms, to_ms): (i64, i64),
) -> anyhow::Result<Plot> {
    let mut lines = Vec::with_capacity(objects.len());
    let mut unit_si = String::new();
    for o in objects {
        let (points, unit) = s.series(o, quantity, from_ms, to_ms)?;
        if unit_si.is_empty() {
            unit_si = unit;
        }
        lines.push(points);
    }
    let stage = match stage {
        Some(g) if !objects.iter().any(|o| o == g) => {
            Some((g.to_string(), s.series(g, "total_head", from_ms, to_ms)?.0))
        }
        _ => None,
    };
    Ok(Plot {
        objects: objects.to_vec(),
        quantity: quantity.into(),
        lines,
        named_by_object: true,
        unit_si,
        stage,
        from_ms,
        to_ms,
    })
}

impl Plot {
    /// Whether nothing of the quantity was stored in the period.
    pub fn is_empty(&self) -> bool {
        self.lines.iter().all(Vec::is_empty)
    }
}

/// The stage gauge whose water level belongs beside `object`'s values: a section's pool gauge,
/// a blanket reach's river gauge, else the first stage gauge of the object's site.
pub fn stage_for(web: &Web, object: &str) -> Option<String> {
    match web.cfg.objects.get(object) {
        Some(ObjectRef::Section(s)) => return Some(s.pool_gauge.clone()),
        Some(ObjectRef::Blanket(b)) => return Some(b.river_gauge.clone()),
        Some(ObjectRef::Nest(_) | ObjectRef::Toe(_)) | None => {}
    }
    let site = web.site_of(object)?;
    let mut gauges: Vec<&String> = web
        .cfg
        .instruments
        .values()
        .filter(|i| i.site == site && matches!(i.kind, Kind::StageGauge(_)))
        .map(|i| &i.id)
        .collect();
    gauges.sort();
    gauges.first().map(|g| (*g).clone())
}

/// The SVG of `p` titled `title`, in the display units of the object's site.
pub fn render(web: &Web, p: Plot, title: String) -> String {
    let first = p.objects.first().cloned().unwrap_or_default();
    let site = web.site_of(&first).unwrap_or_default();
    let units = web.units(&site);
    let m = measure_of(&p.quantity, &p.unit_si);
    let series = p
        .objects
        .iter()
        .zip(p.lines)
        .map(|(o, points)| Series {
            label: if p.named_by_object {
                o.clone()
            } else {
                web.quantity_name(o, &p.quantity)
            },
            points: crate::report::to_display(points, m, units),
        })
        .collect();
    let (stage, stage_axis) = match p.stage {
        Some((g, points)) => (
            Some(Series {
                label: format!("{g} (water level)"),
                points: crate::report::to_display(points, Measure::Length, units),
            }),
            format!(
                "{g} water level ({})",
                unit_label(Measure::Length, units, "m")
            ),
        ),
        None => (None, String::new()),
    };
    chart::render(&Chart {
        title,
        y_label: crate::present::labels::axis_label(
            &web.quantity_name(&first, &p.quantity),
            unit_label(m, units, &p.unit_si),
        ),
        series,
        stage,
        levels: crate::report::level_lines(&web.cfg, &p.objects, (&p.quantity, &p.unit_si), units),
        stage_axis,
        cap: p
            .quantity
            .contains("factor_of_safety")
            .then_some(crate::present::FS_DISPLAY_CAP),
        zero_line: p.quantity.contains("gradient"),
        from_ms: p.from_ms,
        to_ms: p.to_ms,
        tz: web.tz(&site),
    })
}
