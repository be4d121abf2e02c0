//! Time-history charts as short hand-written SVG: several series on the left axis (heads,
//! gradients, factors of safety, in display units), an optional stage series on a second axis,
//! rule levels as dashed lines with the side beyond them shaded, an optional display cap and
//! zero line, round 1-2-5 ticks on axes extended to whole steps, dates in the site's time
//! zone. Long series are thinned to a min/max per pixel column so a month of hourly data for
//! many instruments stays small.

use std::fmt::Write as _;

use chrono::{TimeZone, Utc};
use chrono_tz::Tz;

use crate::present::format::{ticks, Ticks};
use crate::section_svg::xml_escape;

/// One plotted line.
#[derive(Debug, Clone)]
pub struct Series {
    pub label: String,
    /// (time ms, value), time-ordered.
    pub points: Vec<(i64, f64)>,
}

/// Which side of a level line is beyond it (shaded).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Beyond {
    /// Not shaded.
    Neither,
    /// Values above the line are beyond it.
    Above,
    /// Values below the line are beyond it.
    Below,
}

/// A horizontal reference line (e.g. a rule level).
#[derive(Debug, Clone)]
pub struct LevelLine {
    pub label: String,
    pub value: f64,
    pub beyond: Beyond,
}

/// A chart to draw.
#[derive(Debug, Clone)]
pub struct Chart {
    pub title: String,
    pub y_label: String,
    pub series: Vec<Series>,
    /// Second axis (stage).
    pub stage: Option<Series>,
    pub levels: Vec<LevelLine>,
    /// The second axis's title, e.g. "River stage (ft)".
    pub stage_axis: String,
    /// Values above this are drawn at it (the axis stops there); said under the title.
    pub cap: Option<f64>,
    /// Always include this value in the axis (e.g. 0 for gradients, with "upward"/"downward"
    /// marked either side of it).
    pub zero_line: bool,
    pub from_ms: i64,
    pub to_ms: i64,
    pub tz: Tz,
}

const W: f64 = 860.0;
const H: f64 = 320.0;
const LEFT: f64 = 64.0;
const RIGHT: f64 = 70.0;
const TOP: f64 = 40.0;
const BOTTOM: f64 = 56.0;
/// Colour-blind-safe palette (Okabe–Ito).
const COLOURS: [&str; 8] = [
    "#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000", "#F0E442",
];
const STAGE: &str = "#7a7a7a";

/// A pixel column being filled: (column, lowest point, highest point).
type Bucket = (usize, (i64, f64), (i64, f64));

/// Thin a series to at most two points (min and max) per pixel column.
pub fn thin(points: &[(i64, f64)], from_ms: i64, to_ms: i64, columns: usize) -> Vec<(i64, f64)> {
    if points.len() <= 2 * columns || to_ms <= from_ms {
        return points.to_vec();
    }
    let span = (to_ms - from_ms) as f64;
    let mut out = Vec::with_capacity(2 * columns);
    let mut bucket: Option<Bucket> = None;
    let flush = |b: Option<Bucket>, out: &mut Vec<(i64, f64)>| {
        if let Some((_, lo, hi)) = b {
            if lo.0 <= hi.0 {
                out.push(lo);
                if hi != lo {
                    out.push(hi);
                }
            } else {
                out.push(hi);
                out.push(lo);
            }
        }
    };
    for &p in points {
        let col = (((p.0 - from_ms) as f64 / span) * columns as f64)
            .clamp(0.0, columns as f64 - 1.0) as usize;
        match &mut bucket {
            Some((c, lo, hi)) if *c == col => {
                if p.1 < lo.1 {
                    *lo = p;
                }
                if p.1 > hi.1 {
                    *hi = p;
                }
            }
            _ => {
                flush(bucket.take(), &mut out);
                bucket = Some((col, p, p));
            }
        }
    }
    flush(bucket, &mut out);
    out
}

fn range(values: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    let (lo, hi) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
    if lo > hi {
        return None;
    }
    let pad = ((hi - lo) * 0.05).max(0.02);
    Some((lo - pad, hi + pad))
}

/// Date ticks: about six, on whole hours or days, labelled in the chart's time zone.
fn time_ticks(from_ms: i64, to_ms: i64) -> Vec<i64> {
    const HOUR: i64 = 3_600_000;
    let span = (to_ms - from_ms).max(HOUR);
    let steps = [
        HOUR,
        3 * HOUR,
        6 * HOUR,
        12 * HOUR,
        24 * HOUR,
        48 * HOUR,
        7 * 24 * HOUR,
        14 * 24 * HOUR,
        28 * 24 * HOUR,
    ];
    let step = steps
        .iter()
        .copied()
        .find(|s| span / s <= 7)
        .unwrap_or(28 * 24 * HOUR);
    let mut t = (from_ms + step - 1) / step * step;
    let mut out = Vec::new();
    while t <= to_ms && out.len() < 12 {
        out.push(t);
        t += step;
    }
    out
}

/// Draw the chart as an inline SVG element (no XML declaration, for embedding in HTML).
pub fn render(c: &Chart) -> String {
    let mut s = String::new();
    let pw = W - LEFT - RIGHT;
    let ph = H - TOP - BOTTOM;
    let (from, to) = (c.from_ms, c.to_ms.max(c.from_ms + 1));
    let x = |t: i64| LEFT + (t - from) as f64 / (to - from) as f64 * pw;
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" class="chart" width="{W}" height="{H}" viewBox="0 0 {W} {H}" font-family="DejaVu Sans, Arial, sans-serif" font-size="11">"#
    );
    let _ = writeln!(
        s,
        r#"<text x="{LEFT}" y="18" font-size="13" font-weight="bold">{}</text>"#,
        xml_escape(&c.title)
    );
    let cap = |v: f64| c.cap.map_or(v, |m| v.min(m));
    let series: Vec<Series> = c
        .series
        .iter()
        .map(|se| Series {
            label: se.label.clone(),
            points: thin(&se.points, from, to, pw as usize)
                .into_iter()
                .map(|(t, v)| (t, cap(v)))
                .collect(),
        })
        .collect();
    let values = series
        .iter()
        .flat_map(|se| se.points.iter().map(|p| p.1))
        .chain(c.levels.iter().map(|l| cap(l.value)))
        .chain(c.zero_line.then_some(0.0));
    let span = range(values).map(|(lo, hi)| (lo, c.cap.map_or(hi, |m| hi.min(m))));
    let Some(t) = span.map(|(lo, hi)| ticks(lo, hi, 6.0)) else {
        let _ = writeln!(
            s,
            r#"<text x="{}" y="{}" text-anchor="middle">No data in this period</text>"#,
            W / 2.0,
            H / 2.0
        );
        s.push_str("</svg>\n");
        return s;
    };
    if let Some(m) = c.cap {
        let _ = writeln!(
            s,
            r##"<text x="{:.1}" y="18" text-anchor="end" fill="#555">values above {m} drawn at {m}</text>"##,
            LEFT + pw
        );
    }
    let Ticks { lo, hi, .. } = t;
    let y = |v: f64| TOP + (hi - v) / (hi - lo) * ph;
    for l in &c.levels {
        let yy = y(cap(l.value));
        let (y0, y1) = match l.beyond {
            Beyond::Neither => continue,
            Beyond::Above => (TOP, yy),
            Beyond::Below => (yy, TOP + ph),
        };
        let _ = writeln!(
            s,
            r##"<rect x="{LEFT}" y="{y0:.1}" width="{pw}" height="{:.1}" fill="#d62728" fill-opacity="0.07"/>"##,
            (y1 - y0).max(0.0)
        );
    }
    let _ = writeln!(
        s,
        r##"<rect x="{LEFT}" y="{TOP}" width="{pw}" height="{ph}" fill="none" stroke="#444"/>"##
    );
    for (v, label) in &t.marks {
        let yy = y(*v);
        let _ = writeln!(
            s,
            r##"<line x1="{LEFT}" y1="{yy:.1}" x2="{:.1}" y2="{yy:.1}" stroke="#ddd"/><text x="{:.1}" y="{:.1}" text-anchor="end">{label}</text>"##,
            LEFT + pw,
            LEFT - 6.0,
            yy + 4.0
        );
    }
    for t in time_ticks(from, to) {
        let xx = x(t);
        let label = Utc
            .timestamp_millis_opt(t)
            .single()
            .map(|u| u.with_timezone(&c.tz).format("%m-%d %H:%M").to_string())
            .unwrap_or_default();
        let _ = writeln!(
            s,
            r##"<line x1="{xx:.1}" y1="{TOP}" x2="{xx:.1}" y2="{:.1}" stroke="#eee"/><text x="{xx:.1}" y="{:.1}" text-anchor="middle">{label}</text>"##,
            TOP + ph,
            TOP + ph + 16.0
        );
    }
    let _ = writeln!(
        s,
        r#"<text x="14" y="{:.1}" transform="rotate(-90 14 {:.1})" text-anchor="middle">{}</text>"#,
        TOP + ph / 2.0,
        TOP + ph / 2.0,
        xml_escape(&c.y_label)
    );
    let _ = writeln!(
        s,
        r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">Time ({})</text>"#,
        LEFT + pw / 2.0,
        H - 14.0,
        xml_escape(c.tz.name())
    );
    if c.zero_line {
        let yy = y(0.0);
        let _ = writeln!(
            s,
            r##"<line x1="{LEFT}" y1="{yy:.1}" x2="{:.1}" y2="{yy:.1}" stroke="#444"/><text x="{:.1}" y="{:.1}" text-anchor="end" fill="#444">upward flow ↑</text><text x="{:.1}" y="{:.1}" text-anchor="end" fill="#444">downward flow ↓</text>"##,
            LEFT + pw,
            LEFT + pw - 4.0,
            yy - 4.0,
            LEFT + pw - 4.0,
            yy + 13.0
        );
    }
    for (k, l) in c.levels.iter().enumerate() {
        let yy = y(cap(l.value));
        // Labels side by side, so close levels do not write over each other.
        let lx = LEFT + 4.0 + (k % 4) as f64 * pw / 4.0;
        let _ = writeln!(
            s,
            r##"<line x1="{LEFT}" y1="{yy:.1}" x2="{:.1}" y2="{yy:.1}" stroke="#b00" stroke-dasharray="6 4"/><text x="{:.1}" y="{:.1}" fill="#b00">{}</text>"##,
            LEFT + pw,
            lx,
            yy - 3.0,
            xml_escape(&l.label)
        );
    }
    if let Some(stage) = &c.stage {
        let pts = thin(&stage.points, from, to, pw as usize);
        if let Some(st) = range(pts.iter().map(|p| p.1)).map(|(a, b)| ticks(a, b, 6.0)) {
            let (slo, shi) = (st.lo, st.hi);
            let sy = |v: f64| TOP + (shi - v) / (shi - slo) * ph;
            polyline(&mut s, &pts, &x, &sy, STAGE, "4 3");
            for (v, label) in &st.marks {
                let _ = writeln!(
                    s,
                    r##"<text x="{:.1}" y="{:.1}" fill="{STAGE}">{label}</text>"##,
                    LEFT + pw + 6.0,
                    sy(*v) + 4.0
                );
            }
            let _ = writeln!(
                s,
                r#"<text x="{:.1}" y="{:.1}" transform="rotate(90 {:.1} {:.1})" text-anchor="middle" fill="{STAGE}">{}</text>"#,
                W - 12.0,
                TOP + ph / 2.0,
                W - 12.0,
                TOP + ph / 2.0,
                xml_escape(&c.stage_axis)
            );
        }
    }
    for (k, se) in series.iter().enumerate() {
        polyline(&mut s, &se.points, &x, &y, COLOURS[k % COLOURS.len()], "");
    }
    // Legend.
    let mut lx = LEFT;
    let entries = series
        .iter()
        .enumerate()
        .map(|(k, se)| (se.label.as_str(), COLOURS[k % COLOURS.len()]))
        .chain(c.stage.iter().map(|st| (st.label.as_str(), STAGE)));
    for (label, colour) in entries {
        let _ = writeln!(
            s,
            r#"<line x1="{lx:.1}" y1="30" x2="{:.1}" y2="30" stroke="{colour}" stroke-width="2"/><text x="{:.1}" y="34">{}</text>"#,
            lx + 16.0,
            lx + 20.0,
            xml_escape(label)
        );
        lx += 28.0 + 7.0 * label.chars().count() as f64;
    }
    s.push_str("</svg>\n");
    s
}

fn polyline(
    s: &mut String,
    pts: &[(i64, f64)],
    x: &impl Fn(i64) -> f64,
    y: &impl Fn(f64) -> f64,
    colour: &str,
    dash: &str,
) {
    if pts.is_empty() {
        return;
    }
    let mut d = String::with_capacity(pts.len() * 14);
    for (k, (t, v)) in pts.iter().enumerate() {
        let _ = write!(
            d,
            "{}{:.1},{:.1}",
            if k == 0 { "" } else { " " },
            x(*t),
            y(*v)
        );
    }
    let dash = if dash.is_empty() {
        String::new()
    } else {
        format!(r#" stroke-dasharray="{dash}""#)
    };
    let _ = writeln!(
        s,
        r#"<polyline fill="none" stroke="{colour}" stroke-width="1.5"{dash} points="{d}"/>"#
    );
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn thinning_keeps_extremes_and_bounds_size() {
        let pts: Vec<(i64, f64)> = (0..10_000)
            .map(|k| (k as i64 * 1000, (k as f64 * 0.01).sin()))
            .collect();
        let t = thin(&pts, 0, 10_000_000, 100);
        assert!(t.len() <= 200, "{}", t.len());
        let max = pts.iter().map(|p| p.1).fold(f64::MIN, f64::max);
        assert!(t.iter().any(|p| p.1 == max));
        assert!(t.windows(2).all(|w| w[0].0 <= w[1].0));
    }

    #[test]
    fn chart_is_well_formed_with_and_without_data() {
        let c = Chart {
            title: "Heads & stage <test>".into(),
            y_label: "Total head (m)".into(),
            series: vec![Series {
                label: "P-1".into(),
                points: vec![(0, 1.0), (3_600_000, 2.0)],
            }],
            stage: Some(Series {
                label: "River".into(),
                points: vec![(0, 90.0), (3_600_000, 91.0)],
            }),
            levels: vec![LevelLine {
                label: "level a".into(),
                value: 1.5,
                beyond: Beyond::Above,
            }],
            stage_axis: "River (m)".into(),
            cap: None,
            zero_line: false,
            from_ms: 0,
            to_ms: 3_600_000,
            tz: chrono_tz::UTC,
        };
        let svg = render(&c);
        roxmltree::Document::parse(&svg).unwrap();
        assert!(svg.contains("Heads &amp; stage &lt;test&gt;"));
        let empty = Chart {
            series: vec![],
            stage: None,
            levels: vec![],
            ..c
        };
        let svg = render(&empty);
        roxmltree::Document::parse(&svg).unwrap();
        assert!(svg.contains("No data in this period"));
    }
}
