//! A section with a seepage model drawn as a flow net: the model's outline and zones, the
//! reservoir and tail water, cutoffs, equipotentials at equal head drops and flow lines at
//! equal flow increments (contours of the stream function) in the saturated region, the free
//! surface ending at the exit point, the seepage face, and each piezometer's measured and
//! modelled head with the residual.
//!
//! Owns: the flow-net layer of the drawing. Must not: solve (the net comes from
//! `derive::flownet`).

use std::fmt::Write;

use super::{axes, xml_escape, Frame, SvgOptions, EXIT, GRID, INK, LEFT_PX, PHREATIC, TOP_PX};
use super::{SOIL, WATER, WATER_FILL, WHITE};
use crate::derive::flownet::FlowNet;
use crate::seepage::{BoundaryKind, Point};

/// Equal head drops between the pool and the lowest fixed head.
const HEAD_DROPS: usize = 10;
/// Flow channels between flow lines.
const FLOW_CHANNELS: usize = 6;
const EQUIPOTENTIAL: &str = "#2e7d32";
const FLOW_LINE: &str = "#1565c0";
const MODELLED: &str = "#6a1b9a";
const ZONE_FILLS: [&str; 5] = ["#d7c4a3", "#c9d6b5", "#e3c7b8", "#cfc6e0", "#bfd9d6"];

fn frame(net: &FlowNet, options: &SvgOptions) -> Frame {
    let (mut s_min, mut s_max, mut e_min, mut e_max) = (
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
    );
    for p in &net.model.outline {
        s_min = s_min.min(p.x);
        s_max = s_max.max(p.x);
        e_min = e_min.min(p.y);
        e_max = e_max.max(p.y);
    }
    e_max = e_max.max(net.pool_m);
    for p in &net.piezometers {
        e_max = e_max.max(p.measured_m.unwrap_or(e_min));
    }
    let pad = ((e_max - e_min) * 0.06).max(0.5);
    Frame {
        s_min,
        s_max: if s_max > s_min { s_max } else { s_min + 1.0 },
        e_min: e_min - pad,
        e_max: e_max + pad,
        width_px: options.width_px,
        height_px: options.height_px,
        units: options.units,
    }
}

fn path(f: &Frame, points: &[Point], close: bool) -> String {
    let mut d = String::new();
    for (i, p) in points.iter().enumerate() {
        let _ = write!(
            d,
            "{}{:.2},{:.2} ",
            if i == 0 { "M" } else { "L" },
            f.x(p.x),
            f.y(p.y)
        );
    }
    if close {
        d.push('Z');
    }
    d
}

/// The part of a boundary path below `level`, closed along the water surface.
fn under_water(path: &[Point], level: f64) -> Vec<Point> {
    let mut out = Vec::new();
    for w in path.windows(2) {
        let (a, b) = (w[0], w[1]);
        let (ia, ib) = (a.y <= level, b.y <= level);
        if ia {
            out.push(a);
        }
        if ia != ib {
            let t = (level - a.y) / (b.y - a.y);
            out.push(Point::new(a.x + t * (b.x - a.x), level));
        }
    }
    if let Some(&last) = path.last() {
        if last.y <= level {
            out.push(last);
            out.push(Point::new(last.x, level));
        }
    }
    if let Some(&first) = path.first() {
        if first.y < level {
            out.insert(0, Point::new(first.x, level));
        }
    }
    out
}

/// Contour pieces of a nodal field at `level`, kept where the pressure head is not negative.
fn contour(net: &FlowNet, field: &[f64], level: f64, out: &mut String, f: &Frame) {
    let nodes = &net.mesh.nodes;
    let head = &net.solution.head_m;
    for t in &net.mesh.triangles {
        let mut pts = Vec::with_capacity(2);
        for k in 0..3 {
            let (i, j) = (t[k], t[(k + 1) % 3]);
            let (a, b) = (field[i] - level, field[j] - level);
            if (a >= 0.0) != (b >= 0.0) {
                let s = a / (a - b);
                let p = Point::new(
                    nodes[i].x + s * (nodes[j].x - nodes[i].x),
                    nodes[i].y + s * (nodes[j].y - nodes[i].y),
                );
                let psi =
                    (head[i] - nodes[i].y) + s * ((head[j] - nodes[j].y) - (head[i] - nodes[i].y));
                pts.push((p, psi));
            }
        }
        if let [(p, a), (q, b)] = pts[..] {
            if a >= -1e-6 && b >= -1e-6 {
                let _ = write!(
                    out,
                    "M{:.2},{:.2} L{:.2},{:.2} ",
                    f.x(p.x),
                    f.y(p.y),
                    f.x(q.x),
                    f.y(q.y)
                );
            }
        }
    }
}

/// Draw a solved section as a flow net, a standalone SVG document.
#[must_use]
pub fn render_flownet_svg(net: &FlowNet, options: &SvgOptions) -> String {
    let f = frame(net, options);
    let mut svg = String::new();
    let title = xml_escape(&options.title);
    let (w, h) = (options.width_px, options.height_px);
    let _ = writeln!(svg, r#"<?xml version="1.0" encoding="UTF-8"?>"#);
    let _ = writeln!(
        svg,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w:.0}" height="{h:.0}" viewBox="0 0 {w:.0} {h:.0}" font-family="DejaVu Sans, Arial, sans-serif" font-size="12" fill="{INK}">"#
    );
    let _ = writeln!(svg, "<title>{title}</title>");
    let _ = writeln!(
        svg,
        r#"<rect x="0" y="0" width="{w:.0}" height="{h:.0}" fill="{WHITE}"/>"#
    );
    let _ = writeln!(
        svg,
        r#"<text x="{LEFT_PX:.0}" y="24" font-size="16" font-weight="bold">{title}</text>"#
    );
    let face = net.exit.as_ref().map_or("no seepage face".into(), |e| {
        format!("seepage face {}", f.len(e.face_height_m))
    });
    let _ = writeln!(
        svg,
        r#"<text x="{LEFT_PX:.0}" y="42" font-size="11">Screening model: pool {}, tail {}; flow {:.2e} m³/s per m; {face}; max exit gradient {:.2}; exaggeration {:.1}x{}</text>"#,
        f.len(net.pool_m),
        net.tail_m.map_or("none".into(), |t| f.len(t)),
        net.flow_m2_per_s,
        net.max_exit_gradient(),
        f.vertical_exaggeration(),
        if options.note.is_empty() {
            String::new()
        } else {
            format!("; {}", xml_escape(&options.note))
        }
    );
    axes(&mut svg, &f);
    // Ground and zones.
    let _ = writeln!(
        svg,
        r#"<path class="domain" d="{}" fill="{SOIL}" stroke="{INK}" stroke-width="1.2"/>"#,
        path(&f, &net.model.outline, true)
    );
    for (i, z) in net.model.zones.iter().enumerate() {
        let _ = writeln!(
            svg,
            r#"<path class="zone" d="{}" fill="{}" stroke="{GRID}" stroke-width="0.8"><title>{}</title></path>"#,
            path(&f, &z.polygon, true),
            ZONE_FILLS[i % ZONE_FILLS.len()],
            xml_escape(&z.name)
        );
    }
    // Free water on the water boundaries.
    for b in &net.model.boundaries {
        if let BoundaryKind::Water { level_m } = b.kind {
            let wet = under_water(&b.path, level_m);
            if wet.len() >= 2 {
                let _ = writeln!(
                    svg,
                    r#"<path class="water" d="{}" fill="{WATER_FILL}" stroke="none"/>"#,
                    path(&f, &wet, true)
                );
                let (a, b) = (wet[0], wet[wet.len() - 1]);
                let _ = writeln!(
                    svg,
                    r#"<line class="water-level" x1="{:.2}" y1="{y:.2}" x2="{:.2}" y2="{y:.2}" stroke="{WATER}" stroke-width="2"/>"#,
                    f.x(a.x.min(b.x)),
                    f.x(a.x.max(b.x)),
                    y = f.y(level_m)
                );
            }
        }
    }
    // Equipotentials at equal head drops.
    let head = &net.solution.head_m;
    let fixed: Vec<f64> = net
        .model
        .boundaries
        .iter()
        .filter_map(|b| match b.kind {
            BoundaryKind::Water { level_m } => Some(level_m),
            _ => None,
        })
        .collect();
    let h_hi = fixed.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let h_lo = head
        .iter()
        .copied()
        .fold(f64::INFINITY, f64::min)
        .max(fixed.iter().copied().fold(f64::INFINITY, f64::min));
    let mut d = String::new();
    for k in 1..HEAD_DROPS {
        let level = h_lo + (h_hi - h_lo) * k as f64 / HEAD_DROPS as f64;
        contour(net, head, level, &mut d, &f);
    }
    let _ = writeln!(
        svg,
        r#"<path class="equipotentials" d="{d}" fill="none" stroke="{EQUIPOTENTIAL}" stroke-width="1"/>"#
    );
    // Flow lines at equal flow increments.
    let wet: Vec<f64> = (0..net.psi.len())
        .filter(|&i| head[i] >= net.mesh.nodes[i].y)
        .map(|i| net.psi[i])
        .collect();
    let (p_lo, p_hi) = wet
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| {
            (l.min(*v), h.max(*v))
        });
    let mut d = String::new();
    if p_hi > p_lo {
        for k in 1..FLOW_CHANNELS {
            let level = p_lo + (p_hi - p_lo) * k as f64 / FLOW_CHANNELS as f64;
            contour(net, &net.psi, level, &mut d, &f);
        }
    }
    let _ = writeln!(
        svg,
        r#"<path class="flow-lines" d="{d}" fill="none" stroke="{FLOW_LINE}" stroke-width="1" stroke-dasharray="4 3"/>"#
    );
    // Cutoffs.
    for l in &net.model.lines {
        let _ = writeln!(
            svg,
            r#"<path class="cutoff" d="{}" fill="none" stroke="{INK}" stroke-width="4"><title>{}</title></path>"#,
            path(&f, &l.points, false),
            xml_escape(&l.name)
        );
    }
    // Free surface, ending at the exit point.
    let line: Vec<Point> = net
        .phreatic
        .iter()
        .map(|&(x, y)| Point::new(x, y))
        .collect();
    if line.len() >= 2 {
        let _ = writeln!(
            svg,
            r#"<path class="phreatic" d="{}" fill="none" stroke="{PHREATIC}" stroke-width="2.5"/>"#,
            path(&f, &line, false)
        );
    }
    piezometers(&mut svg, &f, net, &options.marks);
    seepage_face(&mut svg, &f, net);
    legend(&mut svg, &f);
    svg.push_str("</svg>\n");
    svg
}

fn seepage_face(svg: &mut String, f: &Frame, net: &FlowNet) {
    let Some(e) = &net.exit else { return };
    let mut d = String::new();
    for b in &net.mesh.boundary {
        if b.stretches.contains(&e.stretch) && net.solution.wet[b.a] && net.solution.wet[b.b] {
            let (p, q) = (net.mesh.nodes[b.a], net.mesh.nodes[b.b]);
            let _ = write!(
                d,
                "M{:.2},{:.2} L{:.2},{:.2} ",
                f.x(p.x),
                f.y(p.y),
                f.x(q.x),
                f.y(q.y)
            );
        }
    }
    let _ = writeln!(
        svg,
        r#"<path class="seepage-face" d="{d}" fill="none" stroke="{EXIT}" stroke-width="4"/>"#
    );
    let (x, y) = (f.x(e.exit.x), f.y(e.exit.y));
    let _ = writeln!(
        svg,
        r#"<circle class="exit" cx="{x:.2}" cy="{y:.2}" r="6" fill="none" stroke="{EXIT}" stroke-width="2.5"/>"#
    );
    let (lx, anchor) = if x > LEFT_PX + f.plot_w() * 0.6 {
        (x - 10.0, "end")
    } else {
        (x + 10.0, "start")
    };
    let _ = writeln!(
        svg,
        r#"<text x="{lx:.2}" y="{:.2}" text-anchor="{anchor}" fill="{EXIT}" stroke="{WHITE}" stroke-width="3" paint-order="stroke" font-weight="bold">exit {} at station {}</text>"#,
        y + 24.0,
        f.len(e.exit.y),
        f.len(e.exit.x)
    );
}

fn piezometers(svg: &mut String, f: &Frame, net: &FlowNet, marks: &[(String, String)]) {
    for (k, p) in net.piezometers.iter().enumerate() {
        let (x, tip) = (f.x(p.tip.x), f.y(p.tip.y));
        let top = p
            .measured_m
            .into_iter()
            .chain(p.modelled_m)
            .fold(p.tip.y, f64::max);
        let _ = writeln!(
            svg,
            r#"<g class="piezometer"><line x1="{x:.2}" y1="{tip:.2}" x2="{x:.2}" y2="{:.2}" stroke="{INK}" stroke-width="1"/><rect x="{:.2}" y="{:.2}" width="6" height="6" fill="{INK}"/>"#,
            f.y(top),
            x - 3.0,
            tip - 3.0
        );
        if let Some(m) = p.measured_m {
            let y = f.y(m);
            let _ = writeln!(
                svg,
                r#"<path class="measured" d="M{:.2},{:.2} L{:.2},{:.2} L{x:.2},{y:.2} Z" fill="{WATER}"/>"#,
                x - 6.0,
                y - 9.0,
                x + 6.0,
                y - 9.0
            );
        }
        if let Some(m) = p.modelled_m {
            let _ = writeln!(
                svg,
                r#"<circle class="modelled" cx="{x:.2}" cy="{:.2}" r="4.5" fill="none" stroke="{MODELLED}" stroke-width="2"/>"#,
                f.y(m)
            );
        }
        let mark = marks
            .iter()
            .find(|(i, _)| *i == p.id)
            .map_or(String::new(), |(_, m)| format!(" ({m})"));
        let measured = p
            .measured_m
            .map_or("no reading".into(), |a| format!("{}{mark}", f.len(a)));
        let words = match (p.modelled_m, p.residual_m()) {
            (Some(b), Some(r)) => format!(
                "{} {measured}; model {}, residual {}{}",
                p.id,
                f.len(b),
                if r >= 0.0 { "+" } else { "" },
                f.len(r)
            ),
            (Some(b), None) => format!("{} {measured}; model {}", p.id, f.len(b)),
            _ => format!("{} {measured}; outside the model", p.id),
        };
        let ly = f.bottom() - 8.0 - 14.0 * (net.piezometers.len() - 1 - k) as f64;
        let _ = writeln!(
            svg,
            r#"<text class="piezometer-label" x="{:.2}" y="{ly:.2}" font-size="11" stroke="{WHITE}" stroke-width="3" paint-order="stroke">{}</text></g>"#,
            LEFT_PX + 8.0,
            xml_escape(&words)
        );
    }
}

fn legend(svg: &mut String, f: &Frame) {
    let x = LEFT_PX + f.plot_w() - 200.0;
    let y = TOP_PX + 14.0;
    let rows: [(&str, String); 6] = [
        (
            "free surface",
            format!(r#"stroke="{PHREATIC}" stroke-width="2.5""#),
        ),
        (
            "equipotential",
            format!(r#"stroke="{EQUIPOTENTIAL}" stroke-width="1""#),
        ),
        (
            "flow line",
            format!(r#"stroke="{FLOW_LINE}" stroke-width="1" stroke-dasharray="4 3""#),
        ),
        (
            "seepage face",
            format!(r#"stroke="{EXIT}" stroke-width="4""#),
        ),
        (
            "measured head ▼",
            format!(r#"stroke="{WATER}" stroke-width="3""#),
        ),
        (
            "modelled head ○",
            format!(r#"stroke="{MODELLED}" stroke-width="2""#),
        ),
    ];
    let _ = writeln!(
        svg,
        r#"<g class="legend" font-size="11"><rect x="{:.2}" y="{:.2}" width="196" height="{:.0}" fill="{WHITE}" fill-opacity="0.9" stroke="{GRID}"/>"#,
        x - 6.0,
        y - 10.0,
        16.0 * rows.len() as f64 + 6.0
    );
    for (i, (label, style)) in rows.iter().enumerate() {
        let yy = y + 16.0 * i as f64;
        let _ = writeln!(
            svg,
            r#"<line x1="{x:.2}" y1="{yy:.2}" x2="{:.2}" y2="{yy:.2}" {style}/><text x="{:.2}" y="{:.2}">{label}</text>"#,
            x + 24.0,
            x + 32.0,
            yy + 4.0
        );
    }
    svg.push_str("</g>\n");
}
