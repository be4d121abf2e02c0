//! The report as PDF (cargo feature `pdf`): the same content as the HTML — caution, summary,
//! instrument locations, statistics, safety and time-history plots, section drawings, alert
//! history, sign-off block — laid out by a small page layout of our own on A4 (SI sites) or
//! US Letter (US sites), with a page header, a footer with page numbers, and DejaVu Sans
//! embedded. Drawn with krilla; the SVG plots go through krilla-svg.
//!
//! Layout is pure (`Layout` collects pages of drawing operations); `render` draws them.

use krilla::color::rgb;
use krilla::geom::{PathBuilder, Point, Rect, Size};
use krilla::num::NormalizedF32;
use krilla::page::PageSettings;
use krilla::paint::{Fill, Stroke};
use krilla::text::{Font, TextDirection};
use krilla::Document;
use krilla_svg::{SurfaceExt, SvgSettings};

use super::data::{DerivedStats, InstrumentStats, ReportData};
use super::html::{local, Extras};
use super::parts::{self, Part};
use super::raster::{svg_options, FONT};
use crate::config::DisplayUnits;
use crate::present::format::shown_bare;
use crate::present::labels::system_name;
use crate::present::units::unit_label;
use crate::present::{kind_name, measure_of, quantity_name, Measure};

/// Average advance of DejaVu Sans, em (for a character the font lacks).
const ADVANCE_EM: f32 = 0.56;
const MARGIN: f32 = 42.0;
const BODY: f32 = 8.0;
/// Height of a table row, em.
const ROW_EM: f32 = 1.6;

/// One drawing operation on a page (points, origin top left).
#[derive(Debug, Clone)]
enum Op {
    Text {
        x: f32,
        y: f32,
        size: f32,
        text: String,
        red: bool,
    },
    Line {
        x1: f32,
        y1: f32,
        x2: f32,
        y2: f32,
    },
    Frame {
        x: f32,
        y: f32,
        w: f32,
        h: f32,
    },
    Svg {
        x: f32,
        y: f32,
        w: f32,
        h: f32,
        svg: usize,
    },
}

/// Pages being filled top to bottom.
struct Layout {
    w: f32,
    h: f32,
    pages: Vec<Vec<Op>>,
    y: f32,
    svgs: Vec<String>,
}

/// The embedded font's face, parsed once (for glyph advances).
fn face() -> Option<&'static ttf_parser::Face<'static>> {
    static FACE: std::sync::OnceLock<Option<ttf_parser::Face<'static>>> =
        std::sync::OnceLock::new();
    FACE.get_or_init(|| ttf_parser::Face::parse(FONT, 0).ok())
        .as_ref()
}

/// Advance of a character of the embedded DejaVu Sans, em (an average if the font lacks it).
fn advance(c: char) -> f32 {
    face()
        .and_then(|f| {
            let g = f.glyph_index(c)?;
            Some(f32::from(f.glyph_hor_advance(g)?) / f32::from(f.units_per_em()))
        })
        .unwrap_or(ADVANCE_EM)
}

fn width(text: &str, size: f32) -> f32 {
    text.chars().map(advance).sum::<f32>() * size
}

/// `text` cut to fit `w` points, with an ellipsis.
fn fit(text: &str, size: f32, w: f32) -> String {
    if width(text, size) <= w {
        return text.to_string();
    }
    let mut s = String::new();
    for c in text.chars() {
        if width(&s, size) + (advance(c) + 1.0) * size > w {
            break;
        }
        s.push(c);
    }
    s.push('…');
    s
}

/// Words of `text` in lines of at most `w` points.
fn wrap(text: &str, size: f32, w: f32) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        let candidate = if line.is_empty() {
            word.to_string()
        } else {
            format!("{line} {word}")
        };
        if width(&candidate, size) > w && !line.is_empty() {
            lines.push(std::mem::take(&mut line));
            line = word.to_string();
        } else {
            line = candidate;
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

impl Layout {
    fn new(units: DisplayUnits) -> Layout {
        // A4 for SI sites, US Letter for US customary ones.
        let (w, h) = match units {
            DisplayUnits::Si => (595.28, 841.89),
            DisplayUnits::Us => (612.0, 792.0),
        };
        Layout {
            w,
            h,
            pages: vec![Vec::new()],
            y: MARGIN + 14.0,
            svgs: Vec::new(),
        }
    }
    fn inner(&self) -> f32 {
        self.w - 2.0 * MARGIN
    }
    fn op(&mut self, op: Op) {
        if let Some(p) = self.pages.last_mut() {
            p.push(op);
        }
    }
    /// Make room for `h` points, starting a new page when needed.
    fn room(&mut self, h: f32) {
        if self.y + h > self.h - MARGIN - 14.0 {
            self.pages.push(Vec::new());
            self.y = MARGIN + 14.0;
        }
    }
    fn text(&mut self, x: f32, size: f32, text: &str) {
        let y = self.y + size;
        self.op(Op::Text {
            x,
            y,
            size,
            text: text.to_string(),
            red: false,
        });
    }
    fn heading(&mut self, text: &str) {
        self.room(40.0);
        self.y += 8.0;
        self.text(MARGIN, 11.0, text);
        self.y += 14.0;
        let y = self.y;
        self.op(Op::Line {
            x1: MARGIN,
            y1: y,
            x2: self.w - MARGIN,
            y2: y,
        });
        self.y += 4.0;
    }
    fn paragraph(&mut self, size: f32, text: &str, indent: f32) {
        for line in wrap(text, size, self.inner() - indent) {
            self.room(size * 1.35);
            self.text(MARGIN + indent, size, &line);
            self.y += size * 1.35;
        }
    }
    /// A boxed paragraph in red ink (the caution).
    fn boxed(&mut self, text: &str) {
        let lines = wrap(text, BODY, self.inner() - 24.0);
        let h = lines.len() as f32 * BODY * 1.35 + 10.0;
        self.room(h + 6.0);
        let top = self.y;
        self.op(Op::Frame {
            x: MARGIN,
            y: top,
            w: self.inner(),
            h,
        });
        self.y += 5.0;
        for line in lines {
            let y = self.y + BODY;
            self.op(Op::Text {
                x: MARGIN + 6.0,
                y,
                size: BODY,
                text: line,
                red: true,
            });
            self.y += BODY * 1.35;
        }
        self.y = top + h + 6.0;
    }
    /// A table: headers and rows; column widths as fractions of the text width; the first
    /// `left` columns left-aligned, the rest right-aligned. Headers repeat on a new page.
    fn table(&mut self, headers: &[&str], widths: &[f32], left: usize, rows: &[Vec<String>]) {
        let size = 6.8;
        let row_h = size * ROW_EM;
        let total: f32 = widths.iter().sum();
        let xs: Vec<(f32, f32)> = widths
            .iter()
            .scan(MARGIN, |x, w| {
                let cw = w / total * self.inner();
                let start = *x;
                *x += cw;
                Some((start, cw))
            })
            .collect();
        let head = |l: &mut Layout| {
            l.room(row_h * 2.0);
            l.table_row(headers.iter().copied(), &xs, left, size);
            let y = l.y - 2.0;
            l.op(Op::Line {
                x1: MARGIN,
                y1: y,
                x2: l.w - MARGIN,
                y2: y,
            });
        };
        head(self);
        for r in rows {
            if self.y + row_h > self.h - MARGIN - 14.0 {
                self.room(f32::MAX / 4.0);
                head(self);
            }
            self.table_row(r.iter().map(String::as_str), &xs, left, size);
        }
        self.y += 6.0;
    }
    /// One row of a table (headers or cells) in columns `xs` (start, width): each text fitted
    /// to its column, the first `left` left-aligned, the rest right-aligned; moves down a row.
    fn table_row<'a>(
        &mut self,
        cells: impl Iterator<Item = &'a str>,
        xs: &[(f32, f32)],
        left: usize,
        size: f32,
    ) {
        for (k, (cell, &(x, cw))) in cells.zip(xs).enumerate() {
            let t = fit(cell, size, cw - 4.0);
            let tx = if k < left {
                x + 2.0
            } else {
                x + cw - 2.0 - width(&t, size)
            };
            let y = self.y + size;
            self.op(Op::Text {
                x: tx,
                y,
                size,
                text: t,
                red: false,
            });
        }
        self.y += size * ROW_EM;
    }
    /// An SVG drawing scaled to the text width.
    fn svg(&mut self, svg: &str, w_px: f32, h_px: f32) {
        let w = self.inner();
        let h = w * h_px / w_px;
        self.room(h + 6.0);
        self.svgs.push(svg.to_string());
        let (x, y, svg) = (MARGIN, self.y, self.svgs.len() - 1);
        self.op(Op::Svg { x, y, w, h, svg });
        self.y += h + 6.0;
    }
}

fn stats_rows(rows: &[InstrumentStats], d: &ReportData) -> Vec<Vec<String>> {
    let tz = d.time_zone.parse().unwrap_or(chrono_tz::UTC);
    let u = d.units;
    rows.iter()
        .map(|i| {
            let m = measure_of(i.quantity, i.unit);
            let v = |x: Option<(i64, f64)>| x.map_or_else(|| "—".into(), |x| shown_bare(x.1, m, u));
            let at = |x: Option<(i64, f64)>| x.map_or_else(|| "—".into(), |x| local(x.0, tz));
            vec![
                i.id.clone(),
                kind_name(i.kind),
                v(i.latest),
                at(i.latest),
                v(i.min),
                v(i.max),
                at(i.max),
                i.readings.to_string(),
                i.completeness_pct()
                    .map_or_else(|| "—".into(), |c| format!("{c:.1}")),
                i.status().to_string(),
            ]
        })
        .collect()
}

fn stats_table(l: &mut Layout, rows: &[InstrumentStats], d: &ReportData) {
    let unit = rows
        .first()
        .map(|i| unit_label(measure_of(i.quantity, i.unit), d.units, i.unit))
        .unwrap_or("");
    let h = [
        "Instrument".to_string(),
        "Kind".into(),
        format!("Latest ({unit})"),
        "at".into(),
        format!("Min ({unit})"),
        format!("Max ({unit})"),
        "at".into(),
        "Readings".into(),
        "Compl. %".into(),
        "Status".into(),
    ];
    let h: Vec<&str> = h.iter().map(String::as_str).collect();
    l.table(
        &h,
        &[1.0, 1.9, 1.25, 1.65, 1.0, 1.0, 1.65, 0.95, 0.95, 0.7],
        2,
        &stats_rows(rows, d),
    );
}

fn derived_rows(rows: &[DerivedStats], d: &ReportData) -> Vec<Vec<String>> {
    let tz = d.time_zone.parse().unwrap_or(chrono_tz::UTC);
    rows.iter()
        .map(|r| {
            // The unit goes with the quantity's name, the value columns hold numbers only: a
            // flow in ft³/s per ft would not fit beside its number in a value column.
            let m = measure_of(&r.quantity, &r.unit);
            let v = |x: Option<(i64, f64)>| {
                x.map_or_else(|| "—".into(), |x| shown_bare(x.1, m, d.units))
            };
            let at = |x: Option<(i64, f64)>| x.map_or_else(|| "—".into(), |x| local(x.0, tz));
            let fs = m == Measure::FactorOfSafety;
            vec![
                r.object.clone(),
                crate::present::labels::axis_label(
                    &quantity_name(&r.quantity, None),
                    unit_label(m, d.units, &r.unit),
                ),
                v(r.latest),
                v(r.min),
                at(r.min),
                if fs { "not shown".into() } else { v(r.max) },
                if fs { String::new() } else { at(r.max) },
            ]
        })
        .collect()
}

fn derived_table(l: &mut Layout, rows: &[DerivedStats], d: &ReportData) {
    l.table(
        &[
            "Object", "Quantity", "Latest", "Minimum", "at", "Maximum", "at",
        ],
        &[0.8, 4.3, 1.0, 1.0, 1.5, 1.0, 1.5],
        2,
        &derived_rows(rows, d),
    );
}

/// Size of an inline SVG from its `width`/`height` attributes (px).
fn svg_size(svg: &str) -> (f32, f32) {
    let attr = |name: &str| -> Option<f32> {
        let head = &svg[..svg.find('>')?];
        let at = head.find(&format!(" {name}=\""))? + name.len() + 3;
        head[at..].split('"').next()?.parse().ok()
    };
    (
        attr("width").unwrap_or(860.0),
        attr("height").unwrap_or(320.0),
    )
}

/// Lay the report out in pages.
fn layout(d: &ReportData, x: &Extras) -> Layout {
    let tz = d.time_zone.parse().unwrap_or(chrono_tz::UTC);
    let mut l = Layout::new(d.units);
    l.text(
        MARGIN,
        15.0,
        &format!("Instrumentation report: {}", d.site_name),
    );
    l.y += 24.0;
    for line in [
        format!("Site: {} ({})", d.site_name, d.site_id),
        format!(
            "Period: {} to {} ({})",
            local(d.from.timestamp_millis(), tz),
            local(d.to.timestamp_millis(), tz),
            d.time_zone
        ),
        format!("Generated: {}", local(d.generated.timestamp_millis(), tz)),
        format!("Units: {}", system_name(d.units)),
    ] {
        l.paragraph(BODY, &line, 0.0);
    }
    l.y += 4.0;
    l.boxed(&format!("Caution. {}", x.caution));
    l.heading(Part::Summary.title());
    for s in &x.summary {
        l.paragraph(BODY, &format!("• {s}"), 4.0);
    }
    l.heading(Part::Places.title());
    let cols: Vec<_> = super::places::columns(d, tz)
        .into_iter()
        .filter(|c| c.pdf_width > 0.0)
        .collect();
    let h: Vec<&str> = cols.iter().map(|c| c.header.as_str()).collect();
    let widths: Vec<f32> = cols.iter().map(|c| c.pdf_width).collect();
    let left = cols.iter().take_while(|c| c.left).count();
    let rows: Vec<Vec<String>> = (0..cols.first().map_or(0, |c| c.cells.len()))
        .map(|k| cols.iter().map(|c| c.cells[k].clone()).collect())
        .collect();
    l.table(&h, &widths, left, &rows);
    l.heading(Part::Piezometers.title());
    stats_table(&mut l, &d.piezometers, d);
    l.heading(Part::Stages.title());
    stats_table(&mut l, &d.stages, d);
    if !d.others.is_empty() {
        l.heading(Part::Others.title());
        stats_table(&mut l, &d.others, d);
    }
    for (part, rows) in parts::derived(d) {
        l.heading(part.title());
        derived_table(&mut l, rows, d);
        if let Some(n) = part.note() {
            l.paragraph(7.0, &n, 0.0);
        }
    }
    l.heading(Part::Plots.title());
    for (_, svg) in &x.charts {
        let (w, h) = svg_size(svg);
        l.svg(svg, w, h);
    }
    for (caption, svg) in &x.sections {
        l.room(40.0);
        l.paragraph(BODY, caption, 0.0);
        match svg {
            Ok(svg) => {
                let (w, h) = svg_size(svg);
                l.svg(svg, w, h);
            }
            Err(why) => l.paragraph(BODY, &format!("Not drawn: {why}"), 0.0),
        }
    }
    l.heading(Part::Alerts.title());
    match &x.alerts {
        Some(rows) if !rows.is_empty() => {
            let rows: Vec<Vec<String>> = rows.iter().map(|r| r.to_vec()).collect();
            l.table(
                &["Time", "Event", "Object / rule", "Level", "Detail"],
                &[1.3, 1.2, 2.4, 0.7, 4.5],
                5,
                &rows,
            );
        }
        Some(_) => l.paragraph(BODY, "None in this period.", 0.0),
        None => l.paragraph(BODY, "This database holds no alert records.", 0.0),
    }
    l.heading(Part::Quality.title());
    for (part, header, rows, widths) in [
        (
            Part::Quarantine,
            &parts::QUARANTINE_HEADER[..],
            parts::quarantine_rows(d),
            &[4.0, 1.0][..],
        ),
        (
            Part::Flagged,
            &parts::FLAGGED_HEADER[..],
            parts::flagged_rows(d),
            &[1.0, 4.0, 1.0][..],
        ),
    ] {
        l.paragraph(BODY, part.title(), 0.0);
        if rows.is_empty() {
            l.paragraph(BODY, "None in this period.", 0.0);
        } else {
            l.table(header, widths, header.len() - 1, &rows);
        }
    }
    // The sign-off block stays whole on the last page.
    l.room(90.0);
    l.y += 6.0;
    l.boxed(&format!("Caution. {}", x.caution));
    l.y += 18.0;
    l.text(MARGIN, BODY, "Reviewed by: ______________________   Signature: ______________________   Date: ____________");
    l.y += 20.0;
    l.text(
        MARGIN,
        7.0,
        &format!("Prepared automatically by seepd {}.", x.version),
    );
    l
}

fn fill(red: bool) -> Fill {
    let c = if red {
        rgb::Color::new(170, 0, 0)
    } else {
        rgb::Color::new(17, 17, 17)
    };
    Fill {
        paint: c.into(),
        opacity: NormalizedF32::ONE,
        rule: Default::default(),
    }
}

/// The report as a PDF document.
///
/// # Errors
/// The embedded font cannot be read, or the PDF cannot be written.
pub fn render(d: &ReportData, x: &Extras) -> anyhow::Result<Vec<u8>> {
    let l = layout(d, x);
    let font = Font::new(FONT.to_vec().into(), 0)
        .ok_or_else(|| anyhow::anyhow!("the embedded font cannot be read"))?;
    let opt = svg_options();
    let trees: Vec<Option<usvg::Tree>> = l
        .svgs
        .iter()
        .map(|s| usvg::Tree::from_str(s, &opt).ok())
        .collect();
    let header = format!(
        "Instrumentation report: {} — {} to {}",
        d.site_name,
        d.from.format("%Y-%m-%d"),
        d.to.format("%Y-%m-%d")
    );
    let n = l.pages.len();
    let mut doc = Document::new();
    for (k, ops) in l.pages.iter().enumerate() {
        let settings =
            PageSettings::from_wh(l.w, l.h).ok_or_else(|| anyhow::anyhow!("bad page size"))?;
        let mut page = doc.start_page_with(settings);
        let mut s = page.surface();
        let text = |s: &mut krilla::surface::Surface<'_>,
                    x: f32,
                    y: f32,
                    size: f32,
                    t: &str,
                    red: bool| {
            s.set_fill(Some(fill(red)));
            s.draw_text(
                Point::from_xy(x, y),
                font.clone(),
                size,
                t,
                false,
                TextDirection::Auto,
            );
        };
        // Header and footer on every page.
        text(&mut s, MARGIN, MARGIN - 16.0, 7.0, &header, false);
        let footer = format!("Page {} of {n}", k + 1);
        text(
            &mut s,
            l.w - MARGIN - width(&footer, 7.0),
            l.h - MARGIN + 16.0,
            7.0,
            &footer,
            false,
        );
        text(
            &mut s,
            MARGIN,
            l.h - MARGIN + 16.0,
            7.0,
            "Automated screening only; verify in the field.",
            false,
        );
        for op in ops {
            match op {
                Op::Text {
                    x,
                    y,
                    size,
                    text: t,
                    red,
                } => text(&mut s, *x, *y, *size, t, *red),
                Op::Line { x1, y1, x2, y2 } => {
                    let mut pb = PathBuilder::new();
                    pb.move_to(*x1, *y1);
                    pb.line_to(*x2, *y2);
                    if let Some(p) = pb.finish() {
                        s.set_fill(None);
                        s.set_stroke(Some(Stroke {
                            width: 0.5,
                            ..Default::default()
                        }));
                        s.draw_path(&p);
                        s.set_stroke(None);
                    }
                }
                Op::Frame { x, y, w, h } => {
                    let mut pb = PathBuilder::new();
                    if let Some(r) = Rect::from_xywh(*x, *y, *w, *h) {
                        pb.push_rect(r);
                    }
                    if let Some(p) = pb.finish() {
                        s.set_fill(None);
                        s.set_stroke(Some(Stroke {
                            paint: rgb::Color::new(170, 0, 0).into(),
                            width: 1.5,
                            ..Default::default()
                        }));
                        s.draw_path(&p);
                        s.set_stroke(None);
                    }
                }
                Op::Svg { x, y, w, h, svg } => {
                    if let (Some(Some(tree)), Some(size)) = (trees.get(*svg), Size::from_wh(*w, *h))
                    {
                        s.push_transform(&krilla::geom::Transform::from_translate(*x, *y));
                        s.draw_svg(tree, size, SvgSettings::default());
                        s.pop();
                    }
                }
            }
        }
        s.finish();
        page.finish();
    }
    doc.finish()
        .map_err(|e| anyhow::anyhow!("cannot write the PDF: {e:?}"))
}
