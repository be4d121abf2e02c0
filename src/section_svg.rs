//! A cross-section drawn as a standalone SVG document: ground, pool and tail water, phreatic
//! line, piezometers (tip, riser to the head, label), exit point, axes with ticks and units.
//!
//! Owns: layout, scales and the SVG text, written by hand. Must not: compute engineering
//! quantities (they come from `section::analyse`) or write files. Reused by reports and the
//! status page, so the output is one self-contained string with all text XML-escaped.

use std::fmt::Write;

use crate::config::DisplayUnits;
use crate::domain::section::{
    SectionInput, SectionPiezometer, SectionResult, StationPoint, SAME_STATION_M,
};
use crate::present::format::{shown_bare, ticks_within};
use crate::present::units::{convert, unit_label, Measure};

/// Size and title of the drawing.
#[derive(Debug, Clone, PartialEq)]
pub struct SvgOptions {
    /// Title shown above the plot (escaped before use).
    pub title: String,
    /// Width of the drawing, px.
    pub width_px: f64,
    /// Height of the drawing, px.
    pub height_px: f64,
    /// Units of the axes and labels (the geometry stays in metres).
    pub units: DisplayUnits,
    /// A line under the title (e.g. which heads are stale); empty for none.
    pub note: String,
    /// Instrument id → words added to its label (e.g. "stale, 5.0 h old").
    pub marks: Vec<(String, String)>,
}

impl Default for SvgOptions {
    fn default() -> Self {
        SvgOptions {
            title: "Section".into(),
            width_px: 900.0,
            height_px: 480.0,
            units: DisplayUnits::Si,
            note: String::new(),
            marks: Vec::new(),
        }
    }
}

const LEFT_PX: f64 = 72.0;
const RIGHT_PX: f64 = 24.0;
const TOP_PX: f64 = 58.0;
const BOTTOM_PX: f64 = 56.0;
const GROUND: &str = "#7a5c3a";
const SOIL: &str = "#e8dcc8";
const WATER: &str = "#3a7bd5";
const WATER_FILL: &str = "#cfe0f7";
const PHREATIC: &str = "#1f4e9c";
const EXIT: &str = "#c62828";
const INK: &str = "#222222";
const WHITE: &str = "#ffffff";
const GRID: &str = "#dddddd";

/// Escape text for XML character data and attribute values.
pub fn xml_escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for ch in text.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c if (c as u32) < 0x20 && c != '\n' && c != '\t' => out.push(' '),
            c => out.push(c),
        }
    }
    out
}

/// Linear map from data (station, elevation) to drawing pixels.
struct Frame {
    s_min: f64,
    s_max: f64,
    e_min: f64,
    e_max: f64,
    width_px: f64,
    height_px: f64,
    units: DisplayUnits,
}

impl Frame {
    /// A length (stored m) with its display unit: "97.43 m", "319.64 ft".
    fn len(&self, v_m: f64) -> String {
        format!(
            "{} {}",
            shown_bare(v_m, Measure::Length, self.units),
            unit_label(Measure::Length, self.units, "m")
        )
    }
    /// Display-unit value → metres.
    fn to_m(&self, v: f64) -> f64 {
        v / convert(1.0, Measure::Length, self.units)
    }
    fn x(&self, station_m: f64) -> f64 {
        LEFT_PX + (station_m - self.s_min) / (self.s_max - self.s_min) * self.plot_w()
    }
    fn y(&self, elevation_m: f64) -> f64 {
        TOP_PX + (self.e_max - elevation_m) / (self.e_max - self.e_min) * self.plot_h()
    }
    fn plot_w(&self) -> f64 {
        (self.width_px - LEFT_PX - RIGHT_PX).max(1.0)
    }
    fn plot_h(&self) -> f64 {
        (self.height_px - TOP_PX - BOTTOM_PX).max(1.0)
    }
    fn bottom(&self) -> f64 {
        TOP_PX + self.plot_h()
    }
    /// Pixels per metre vertically over pixels per metre horizontally.
    fn vertical_exaggeration(&self) -> f64 {
        (self.plot_h() / (self.e_max - self.e_min)) / (self.plot_w() / (self.s_max - self.s_min))
    }
    fn points(&self, line: &[StationPoint]) -> String {
        line.iter()
            .map(|p| format!("{:.2},{:.2}", self.x(p.station_m), self.y(p.elevation_m)))
            .collect::<Vec<_>>()
            .join(" ")
    }
}

/// Data ranges with a margin, never empty.
fn frame(input: &SectionInput, result: &SectionResult, options: &SvgOptions) -> Frame {
    let stations = input.ground.iter().map(|p| p.station_m);
    let s_min = stations.clone().fold(f64::INFINITY, f64::min);
    let s_max = stations.fold(f64::NEG_INFINITY, f64::max);
    let mut elevations: Vec<f64> = input.ground.iter().map(|p| p.elevation_m).collect();
    elevations.push(input.pool_m);
    elevations.extend(input.tail_water_m);
    elevations.extend(result.phreatic.iter().map(|p| p.elevation_m));
    for p in &input.piezometers {
        elevations.extend([p.tip_elevation_m, p.head_m]);
    }
    let finite = elevations.iter().copied().filter(|e| e.is_finite());
    let e_lo = finite.clone().fold(f64::INFINITY, f64::min);
    let e_hi = finite.fold(f64::NEG_INFINITY, f64::max);
    let pad = ((e_hi - e_lo) * 0.08).max(0.5);
    Frame {
        s_min,
        s_max: if s_max > s_min { s_max } else { s_min + 1.0 },
        e_min: e_lo - pad,
        e_max: e_hi + pad,
        width_px: options.width_px,
        height_px: options.height_px,
        units: options.units,
    }
}

/// Draw the section as a standalone SVG document. `result` must come from
/// [`crate::domain::section::analyse`] on the same `input`.
pub fn render_section_svg(
    input: &SectionInput,
    result: &SectionResult,
    options: &SvgOptions,
) -> String {
    let f = frame(input, result, options);
    let mut svg = String::new();
    let title = xml_escape(&options.title);
    // `write!` into a String cannot fail; the results are ignored on purpose.
    let _ = writeln!(svg, r#"<?xml version="1.0" encoding="UTF-8"?>"#);
    let _ = writeln!(
        svg,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w:.0}" height="{h:.0}" viewBox="0 0 {w:.0} {h:.0}" font-family="DejaVu Sans, Arial, sans-serif" font-size="12" fill="{INK}">"#,
        w = options.width_px,
        h = options.height_px
    );
    let _ = writeln!(svg, "<title>{title}</title>");
    let _ = writeln!(
        svg,
        r#"<rect x="0" y="0" width="{:.0}" height="{:.0}" fill="{WHITE}"/>"#,
        options.width_px, options.height_px
    );
    let _ = writeln!(
        svg,
        r#"<text x="{LEFT_PX:.0}" y="24" font-size="16" font-weight="bold">{title}</text>"#
    );
    let _ = writeln!(
        svg,
        r#"<text x="{LEFT_PX:.0}" y="42" font-size="11">Vertical exaggeration {:.1}x; pool {}{}</text>"#,
        f.vertical_exaggeration(),
        f.len(input.pool_m),
        if options.note.is_empty() {
            String::new()
        } else {
            format!("; {}", xml_escape(&options.note))
        }
    );
    axes(&mut svg, &f);
    ground_and_water(&mut svg, &f, input, result);
    let _ = writeln!(
        svg,
        r#"<polyline class="phreatic" points="{}" fill="none" stroke="{PHREATIC}" stroke-width="2" stroke-dasharray="8 4"/>"#,
        f.points(&result.phreatic)
    );
    piezometers(&mut svg, &f, input, result, &options.marks);
    if let Some(exit) = result.exit {
        let (x, y) = (f.x(exit.station_m), f.y(exit.elevation_m));
        let _ = writeln!(
            svg,
            r#"<circle class="exit" cx="{x:.2}" cy="{y:.2}" r="6" fill="none" stroke="{EXIT}" stroke-width="2.5"/>"#
        );
        let _ = writeln!(
            svg,
            r#"<text x="{:.2}" y="{:.2}" fill="{EXIT}" font-weight="bold">exit {} at station {}</text>"#,
            x + 10.0,
            y + 20.0,
            f.len(exit.elevation_m),
            f.len(exit.station_m)
        );
    }
    legend(&mut svg, &f);
    svg.push_str("</svg>\n");
    svg
}

fn axes(svg: &mut String, f: &Frame) {
    let (left, right, bottom) = (LEFT_PX, LEFT_PX + f.plot_w(), f.bottom());
    let _ = writeln!(svg, r#"<g class="axes" font-size="11">"#);
    let k = convert(1.0, Measure::Length, f.units);
    for (v, label) in ticks_within(f.s_min * k, f.s_max * k, 8.0).marks {
        let x = f.x(f.to_m(v));
        let _ = writeln!(
            svg,
            r#"<line x1="{x:.2}" y1="{TOP_PX:.2}" x2="{x:.2}" y2="{bottom:.2}" stroke="{GRID}" stroke-width="0.5"/><line x1="{x:.2}" y1="{bottom:.2}" x2="{x:.2}" y2="{:.2}" stroke="{INK}"/><text x="{x:.2}" y="{:.2}" text-anchor="middle">{}</text>"#,
            bottom + 5.0,
            bottom + 18.0,
            label
        );
    }
    for (v, label) in ticks_within(f.e_min * k, f.e_max * k, 6.0).marks {
        let y = f.y(f.to_m(v));
        let _ = writeln!(
            svg,
            r#"<line x1="{left:.2}" y1="{y:.2}" x2="{right:.2}" y2="{y:.2}" stroke="{GRID}" stroke-width="0.5"/><line x1="{:.2}" y1="{y:.2}" x2="{left:.2}" y2="{y:.2}" stroke="{INK}"/><text x="{:.2}" y="{:.2}" text-anchor="end">{}</text>"#,
            left - 5.0,
            left - 8.0,
            y + 4.0,
            label
        );
    }
    let _ = writeln!(
        svg,
        r#"<rect x="{left:.2}" y="{TOP_PX:.2}" width="{:.2}" height="{:.2}" fill="none" stroke="{INK}"/>"#,
        f.plot_w(),
        f.plot_h()
    );
    let _ = writeln!(
        svg,
        r#"<text x="{:.2}" y="{:.2}" text-anchor="middle" font-size="12">Station ({u})</text>"#,
        left + f.plot_w() / 2.0,
        bottom + 40.0,
        u = unit_label(Measure::Length, f.units, "m")
    );
    let _ = writeln!(
        svg,
        r#"<text x="18" y="{y:.2}" text-anchor="middle" font-size="12" transform="rotate(-90 18 {y:.2})">Elevation ({u})</text>"#,
        y = TOP_PX + f.plot_h() / 2.0,
        u = unit_label(Measure::Length, f.units, "m")
    );
    svg.push_str("</g>\n");
}

fn ground_and_water(svg: &mut String, f: &Frame, input: &SectionInput, result: &SectionResult) {
    let ground = &input.ground;
    let (first, last) = (ground[0], ground[ground.len() - 1]);
    // Pool: water surface from the upstream end to the contact, down to the ground.
    let contact_m = result.phreatic[0].station_m;
    let mut pool: Vec<StationPoint> = vec![StationPoint {
        station_m: first.station_m,
        elevation_m: input.pool_m,
    }];
    pool.push(StationPoint {
        station_m: contact_m,
        elevation_m: input.pool_m,
    });
    pool.extend(
        ground
            .iter()
            .rev()
            .filter(|p| p.station_m < contact_m && p.elevation_m < input.pool_m),
    );
    if pool.len() > 2 {
        let _ = writeln!(
            svg,
            r#"<polygon class="pool" points="{}" fill="{WATER_FILL}" stroke="none"/>"#,
            f.points(&pool)
        );
    }
    let _ = writeln!(
        svg,
        r#"<line class="pool-level" x1="{:.2}" y1="{y:.2}" x2="{:.2}" y2="{y:.2}" stroke="{WATER}" stroke-width="2"/><text x="{:.2}" y="{:.2}" fill="{WATER}">pool {}</text>"#,
        f.x(first.station_m),
        f.x(contact_m),
        f.x(first.station_m) + 4.0,
        f.y(input.pool_m) - 5.0,
        f.len(input.pool_m),
        y = f.y(input.pool_m)
    );
    // Ground: soil fill down to the plot bottom, then the surface line.
    let soil = format!(
        "{} {:.2},{:.2} {:.2},{:.2}",
        f.points(ground),
        f.x(last.station_m),
        f.bottom(),
        f.x(first.station_m),
        f.bottom()
    );
    let _ = writeln!(
        svg,
        r#"<polygon class="soil" points="{soil}" fill="{SOIL}" stroke="none"/>"#
    );
    let _ = writeln!(
        svg,
        r#"<polyline class="ground" points="{}" fill="none" stroke="{GROUND}" stroke-width="2"/>"#,
        f.points(ground)
    );
    if let Some(tail_m) = input.tail_water_m {
        let (x1, x2, y) = (f.x(result.toe.station_m), f.x(last.station_m), f.y(tail_m));
        let _ = writeln!(
            svg,
            r#"<line class="tail-water" x1="{x1:.2}" y1="{y:.2}" x2="{x2:.2}" y2="{y:.2}" stroke="{WATER}" stroke-width="2"/><text x="{:.2}" y="{:.2}" text-anchor="end" fill="{WATER}">tail water {}</text>"#,
            x2 - 4.0,
            y - 5.0,
            f.len(tail_m)
        );
    }
}

fn piezometers(
    svg: &mut String,
    f: &Frame,
    input: &SectionInput,
    result: &SectionResult,
    marks: &[(String, String)],
) {
    let _ = writeln!(svg, r#"<g class="piezometers" font-size="11">"#);
    let drawn: Vec<&SectionPiezometer> = input
        .piezometers
        .iter()
        .filter(|p| {
            [p.station_m, p.tip_elevation_m, p.head_m]
                .iter()
                .all(|v| v.is_finite())
        })
        .collect();
    let same_station = |a: &SectionPiezometer, b: &SectionPiezometer| {
        (a.station_m - b.station_m).abs() <= SAME_STATION_M
    };
    for p in &drawn {
        // Labels of a nest stack upward from its highest head, shallowest tip lowest.
        let nest: Vec<&&SectionPiezometer> = drawn.iter().filter(|q| same_station(p, q)).collect();
        let rank = nest
            .iter()
            .filter(|q| q.tip_elevation_m > p.tip_elevation_m)
            .count() as f64;
        let nest_top_m = nest
            .iter()
            .map(|q| q.head_m.max(q.tip_elevation_m))
            .fold(f64::NEG_INFINITY, f64::max);
        let used = result.used.contains(&p.id);
        let dry = p.head_m < p.tip_elevation_m;
        let colour = if used { PHREATIC } else { "#777777" };
        let (x, y_tip, y_head) = (f.x(p.station_m), f.y(p.tip_elevation_m), f.y(p.head_m));
        let mut label = if dry {
            format!("{} dry", p.id)
        } else {
            format!("{} {}", p.id, f.len(p.head_m))
        };
        for (_, m) in marks.iter().filter(|(id, _)| *id == p.id) {
            label = format!("{label} ({m})");
        }
        let label = xml_escape(&label);
        let top = if dry { y_tip } else { y_head };
        let _ = writeln!(
            svg,
            r#"<line class="riser" x1="{x:.2}" y1="{y_tip:.2}" x2="{x:.2}" y2="{top:.2}" stroke="{colour}" stroke-width="1.5"/><rect class="tip" x="{:.2}" y="{:.2}" width="6" height="6" fill="{colour}"/>"#,
            x - 3.0,
            y_tip - 3.0
        );
        if !dry {
            let _ = writeln!(
                svg,
                r#"<path class="head" d="M {:.2} {:.2} L {:.2} {:.2} L {x:.2} {y_head:.2} Z" fill="{colour}"/>"#,
                x - 5.0,
                y_head - 8.0,
                x + 5.0,
                y_head - 8.0
            );
        }
        let _ = writeln!(
            svg,
            r#"<text x="{:.2}" y="{:.2}" fill="{colour}">{label}</text>"#,
            x + 6.0,
            f.y(nest_top_m) - 11.0 - 13.0 * rank
        );
    }
    svg.push_str("</g>\n");
}

fn legend(svg: &mut String, f: &Frame) {
    let x = LEFT_PX + f.plot_w() - 170.0;
    let y = TOP_PX + 14.0;
    let _ = writeln!(
        svg,
        r#"<g class="legend" font-size="11"><rect x="{:.2}" y="{:.2}" width="164" height="52" fill="{WHITE}" fill-opacity="0.85" stroke="{GRID}"/><line x1="{:.2}" y1="{y:.2}" x2="{:.2}" y2="{y:.2}" stroke="{GROUND}" stroke-width="2"/><text x="{:.2}" y="{:.2}">ground</text><line x1="{:.2}" y1="{:.2}" x2="{:.2}" y2="{:.2}" stroke="{PHREATIC}" stroke-width="2" stroke-dasharray="8 4"/><text x="{:.2}" y="{:.2}">phreatic line</text><circle cx="{:.2}" cy="{:.2}" r="5" fill="none" stroke="{EXIT}" stroke-width="2"/><text x="{:.2}" y="{:.2}">exit point</text></g>"#,
        x - 6.0,
        y - 10.0,
        x,
        x + 24.0,
        x + 32.0,
        y + 4.0,
        x,
        y + 16.0,
        x + 24.0,
        y + 16.0,
        x + 32.0,
        y + 20.0,
        x + 12.0,
        y + 32.0,
        x + 32.0,
        y + 36.0
    );
}

mod flownet;
pub use flownet::render_flownet_svg;

#[cfg(test)]
mod tests;
