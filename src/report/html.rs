//! The report as one self-contained HTML file: inline SVG, print-friendly CSS, no external
//! assets. Written XHTML-style (every element closed) so it can be checked for well-formedness.

use std::fmt::Write as _;

use chrono::{TimeZone, Utc};
use chrono_tz::Tz;

use super::data::{DerivedStats, InstrumentStats, ReportData};
use super::parts::{self, Part};
use crate::config::DisplayUnits;
use crate::present::format::{digits, fixed, shown, shown_bare, with_digits};
use crate::present::labels::system_name;
use crate::present::units::{convert_difference, unit_label};
use crate::present::{kind_name, measure_of, quantity_name, Measure};
use crate::section_svg::xml_escape as esc;

const CSS: &str = "body{font-family:'DejaVu Sans',Arial,sans-serif;font-size:12px;color:#111;margin:24px;max-width:1000px}\
h1{font-size:20px;margin:0 0 4px 0}h2{font-size:15px;margin:22px 0 6px 0;border-bottom:1px solid #999}\
table{border-collapse:collapse;margin:6px 0;width:100%;font-size:11px}th,td{border:1px solid #bbb;padding:3px 6px;text-align:right}\
th{background:#eee}td.l,th.l{text-align:left}.caution{border:2px solid #b00;padding:6px 10px;margin:10px 0;background:#fff6f6}\
.ids{font-size:9px;color:#666}.summary li{margin:2px 0}.meta td{border:none;text-align:left;padding:1px 8px 1px 0}.note{color:#555}.sign td{border:none;padding:18px 12px 2px 0;text-align:left}\
svg{max-width:100%;height:auto}@media print{body{margin:10mm}h2{break-after:avoid}svg,table{break-inside:avoid}}";

/// A part's heading.
fn heading(s: &mut String, part: Part) {
    let _ = writeln!(s, "<h2>{}</h2>", esc(part.title()));
}

/// A table of text cells: the columns in `left` aligned left, the rest right.
fn text_table(s: &mut String, header: &[&str], rows: &[Vec<String>], left: &[usize]) {
    let class = |k: usize| {
        if left.contains(&k) {
            " class=\"l\""
        } else {
            ""
        }
    };
    s.push_str("<table><tr>");
    for (k, h) in header.iter().enumerate() {
        let _ = write!(s, "<th{}>{}</th>", class(k), esc(h));
    }
    s.push_str("</tr>\n");
    for r in rows {
        s.push_str("<tr>");
        for (k, c) in r.iter().enumerate() {
            let _ = write!(s, "<td{}>{}</td>", class(k), esc(c));
        }
        s.push_str("</tr>\n");
    }
    s.push_str("</table>\n");
}

/// Format a UTC millisecond time in the report's time zone.
pub fn local(t_ms: i64, tz: Tz) -> String {
    Utc.timestamp_millis_opt(t_ms)
        .single()
        .map(|t| t.with_timezone(&tz).format("%Y-%m-%d %H:%M").to_string())
        .unwrap_or_default()
}

fn when(v: Option<(i64, f64)>, tz: Tz) -> String {
    v.map(|(t, _)| local(t, tz)).unwrap_or_else(|| "—".into())
}

/// The pieces the HTML needs besides the data.
pub struct Extras {
    /// (title, inline SVG) charts: safety plots first, then time histories.
    pub charts: Vec<(String, String)>,
    /// (caption, inline SVG or an explanation) section drawings.
    pub sections: Vec<(String, Result<String, String>)>,
    /// Alerts, acknowledgements and silences in the period, as table rows (already text).
    pub alerts: Option<Vec<[String; 5]>>,
    /// Summary sentences (also in the report email's body).
    pub summary: Vec<String>,
    pub caution: &'static str,
    pub version: &'static str,
}

/// A value of an instrument's main quantity, number only (the unit is in the header).
fn bare(v: Option<f64>, i: &InstrumentStats, u: DisplayUnits) -> String {
    v.map_or_else(
        || "—".into(),
        |v| shown_bare(v, measure_of(i.quantity, i.unit), u),
    )
}

fn stats_table(s: &mut String, rows: &[InstrumentStats], tz: Tz, u: DisplayUnits) {
    let unit = rows
        .first()
        .map(|i| unit_label(measure_of(i.quantity, i.unit), u, i.unit))
        .unwrap_or("");
    let what = rows
        .first()
        .map(|i| quantity_name(i.quantity, Some(i.kind)))
        .unwrap_or_default();
    let _ = writeln!(
        s,
        "<table><tr><th class=\"l\">Instrument</th><th class=\"l\">Kind</th><th>Latest ({unit})</th><th>at</th><th>Minimum ({unit})</th><th>at</th><th>Maximum ({unit})</th><th>at</th><th>Change ({unit})</th><th>Readings</th><th>Complete %</th><th class=\"l\">Status</th></tr>"
    );
    for i in rows {
        let m = measure_of(i.quantity, i.unit);
        let change = i.change().map_or_else(
            || "—".into(),
            |c| with_digits(convert_difference(c, m, u), digits(m, u)),
        );
        let _ = writeln!(
            s,
            "<tr><td class=\"l\">{}</td><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"l\">{}</td></tr>",
            esc(&i.id),
            esc(&kind_name(i.kind)),
            bare(i.latest.map(|x| x.1), i, u),
            when(i.latest, tz),
            bare(i.min.map(|x| x.1), i, u),
            when(i.min, tz),
            bare(i.max.map(|x| x.1), i, u),
            when(i.max, tz),
            change,
            i.readings,
            i.completeness_pct().map_or_else(|| "—".into(), |c| fixed(c, 1)),
            i.status()
        );
    }
    s.push_str("</table>\n");
    if !rows.is_empty() {
        let _ = writeln!(
            s,
            "<p class=\"note\">Values: {} ({unit}). Change = last − first reading in the period.</p>",
            esc(&what.to_lowercase())
        );
    }
}

/// Where the instruments are (`places`: kind, reach, section, station, offset, tip elevation,
/// installed, last calibration, reading interval).
fn locations_table(s: &mut String, d: &ReportData, tz: Tz) {
    let cols = super::places::columns(d, tz);
    let class = |c: &super::places::Column| if c.left { " class=\"l\"" } else { "" };
    s.push_str("<table><tr>");
    for c in &cols {
        let _ = write!(s, "<th{}>{}</th>", class(c), esc(&c.header));
    }
    s.push_str("</tr>\n");
    for k in 0..cols.first().map_or(0, |c| c.cells.len()) {
        s.push_str("<tr>");
        for c in &cols {
            let _ = write!(s, "<td{}>{}</td>", class(c), esc(&c.cells[k]));
        }
        s.push_str("</tr>\n");
    }
    s.push_str("</table>\n");
}

fn derived_table(s: &mut String, rows: &[DerivedStats], tz: Tz, u: DisplayUnits) {
    s.push_str("<table><tr><th class=\"l\">Object</th><th class=\"l\">Quantity</th><th>Latest</th><th>at</th><th>Minimum</th><th>at</th><th>Maximum</th><th>at</th><th class=\"l ids\">ids</th></tr>\n");
    for d in rows {
        let v = |x: Option<(i64, f64)>| {
            x.map_or_else(
                || "—".into(),
                |(_, v)| esc(&shown(v, &d.quantity, &d.unit, u)),
            )
        };
        // The largest factor of safety of a period says nothing about safety: not shown.
        let fs = measure_of(&d.quantity, &d.unit) == Measure::FactorOfSafety;
        let (max, max_at) = if fs {
            ("not shown".to_string(), String::new())
        } else {
            (v(d.max), when(d.max, tz))
        };
        let _ = writeln!(
            s,
            "<tr><td class=\"l\">{}</td><td class=\"l\">{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"l ids\">{}</td></tr>",
            esc(&d.object),
            esc(&quantity_name(&d.quantity, None)),
            v(d.latest),
            when(d.latest, tz),
            v(d.min),
            when(d.min, tz),
            max,
            max_at,
            esc(&d.quantity),
        );
    }
    s.push_str("</table>\n");
}

/// Render the whole document.
pub fn render(d: &ReportData, x: &Extras) -> String {
    let tz: Tz = d.time_zone.parse().unwrap_or(chrono_tz::UTC);
    let mut s = String::with_capacity(64 * 1024);
    let title = format!("Instrumentation report: {}", d.site_name);
    let _ = writeln!(s, "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"/><title>{}</title><style>{CSS}</style></head><body>", esc(&title));
    let _ = writeln!(s, "<h1>{}</h1>", esc(&title));
    let _ = writeln!(
        s,
        "<table class=\"meta\"><tr><td>Site</td><td>{} ({})</td></tr><tr><td>Period</td><td>{} to {}</td></tr><tr><td>Time zone</td><td>{}</td></tr><tr><td>Generated</td><td>{}</td></tr><tr><td>Units</td><td>{}</td></tr><tr><td>Data completeness</td><td>{}</td></tr></table>",
        esc(&d.site_name),
        esc(&d.site_id),
        local(d.from.timestamp_millis(), tz),
        local(d.to.timestamp_millis(), tz),
        esc(&d.time_zone),
        local(d.generated.timestamp_millis(), tz),
        system_name(d.units),
        d.completeness_pct().map(|c| format!("{c:.1} % of expected readings")).unwrap_or_else(|| "no readings expected".into())
    );
    let _ = writeln!(
        s,
        "<div class=\"caution\"><b>Caution.</b> {}</div>",
        esc(x.caution)
    );
    heading(&mut s, Part::Summary);
    s.push_str("<ul class=\"summary\">\n");
    for line in &x.summary {
        let _ = writeln!(s, "<li>{}</li>", esc(line));
    }
    s.push_str("</ul>\n");
    if d.is_empty() {
        s.push_str("<p><b>No readings were stored for this site in this period.</b> The tables below are empty; check the loggers, the broker and the quarantine summary.</p>\n");
    }
    heading(&mut s, Part::Places);
    locations_table(&mut s, d, tz);
    let u = d.units;
    heading(&mut s, Part::Piezometers);
    stats_table(&mut s, &d.piezometers, tz, u);
    heading(&mut s, Part::Stages);
    stats_table(&mut s, &d.stages, tz, u);
    if !d.others.is_empty() {
        heading(&mut s, Part::Others);
        stats_table(&mut s, &d.others, tz, u);
    }
    heading(&mut s, Part::Plots);
    for (t, svg) in &x.charts {
        let _ = writeln!(s, "<div title=\"{}\">{svg}</div>", esc(t));
    }
    for (part, rows) in parts::derived(d) {
        heading(&mut s, part);
        derived_table(&mut s, rows, tz, u);
        if let Some(n) = part.note() {
            let _ = writeln!(s, "<p class=\"note\">{}</p>", esc(&n));
        }
    }
    if !d.sections.is_empty() {
        for (caption, svg) in &x.sections {
            let _ = writeln!(s, "<h3>{}</h3>", esc(caption));
            match svg {
                Ok(svg) => s.push_str(svg),
                Err(why) => {
                    let _ = writeln!(s, "<p class=\"note\">Not drawn: {}</p>", esc(why));
                }
            }
        }
    }
    heading(&mut s, Part::Alerts);
    match &x.alerts {
        None => s.push_str("<p class=\"note\">This database holds no alert records.</p>\n"),
        Some(rows) if rows.is_empty() => s.push_str("<p>None in this period.</p>\n"),
        Some(rows) => {
            let rows: Vec<Vec<String>> = rows.iter().map(|r| r.to_vec()).collect();
            text_table(
                &mut s,
                &["Time", "Event", "Object / rule", "Level", "Detail"],
                &rows,
                &[0, 1, 2, 3, 4],
            );
        }
    }
    heading(&mut s, Part::Quality);
    for (part, header, rows, left) in [
        (
            Part::Quarantine,
            &parts::QUARANTINE_HEADER[..],
            parts::quarantine_rows(d),
            &[0][..],
        ),
        (
            Part::Flagged,
            &parts::FLAGGED_HEADER[..],
            parts::flagged_rows(d),
            &[0, 1][..],
        ),
    ] {
        let _ = writeln!(s, "<h3>{}</h3>", esc(part.title()));
        if rows.is_empty() {
            s.push_str("<p>None in this period.</p>\n");
        } else {
            text_table(&mut s, header, &rows, left);
        }
    }
    let _ = writeln!(
        s,
        "<div class=\"caution\"><b>Caution.</b> {}</div>",
        esc(x.caution)
    );
    s.push_str("<table class=\"sign\"><tr><td>Reviewed by: ______________________</td><td>Signature: ______________________</td><td>Date: ____________</td></tr></table>\n");
    let _ = writeln!(
        s,
        "<p class=\"note\">Prepared automatically by seepd {}.</p>\n</body></html>",
        esc(x.version)
    );
    s
}
