//! The seepage solver against closed forms from the literature (check-values.md, "Seepage
//! analysis"): Dupuit–Charny, Kozeny, Harr; S4 (a dam's exit point) against an independent
//! trial free-surface solve and Schaffernak's and L. Casagrande's approximations (`s4`); and a
//! mesh-refinement study.

use seepd::seepage::outputs::{
    exit_gradients, phreatic_line, phreatic_segments, stretch_flows, total_flow,
};
use seepd::seepage::solve::{solve, Solution, SolveOptions};
use seepd::seepage::stream::stream_function;
use seepd::seepage::{
    build_mesh, validate, Boundary, BoundaryKind, ImperviousLine, LocalSize, Material, Mesh,
    MeshOptions, Point, SectionModel,
};

#[path = "seepage_checks/s4.rs"]
mod s4;

fn p(x: f64, y: f64) -> Point {
    Point::new(x, y)
}

fn stretch(name: &str, kind: BoundaryKind, path: &[Point]) -> Boundary {
    Boundary {
        name: name.into(),
        kind,
        path: path.to_vec(),
    }
}

/// Rectangular dam with vertical faces on an impervious base (S1).
fn rectangular_dam(k: f64, h1: f64, h2: f64, l: f64, top: f64) -> SectionModel {
    SectionModel {
        outline: vec![p(0.0, 0.0), p(l, 0.0), p(l, top), p(0.0, top)],
        base: Material::isotropic(k),
        zones: vec![],
        lines: vec![],
        boundaries: vec![
            stretch(
                "upstream",
                BoundaryKind::Water { level_m: h1 },
                &[p(0.0, top), p(0.0, 0.0)],
            ),
            stretch(
                "tail water",
                BoundaryKind::Water { level_m: h2 },
                &[p(l, 0.0), p(l, top)],
            ),
            stretch(
                "downstream face",
                BoundaryKind::SeepageFace,
                &[p(l, 0.0), p(l, top)],
            ),
        ],
    }
}

/// S1: Dupuit–Charny discharge `q = k·(h1² − h2²)/(2L)`, exact for the flow rate (Charny 1951);
/// check-values.md S1: k 1e-5 m/s, h1 10 m, h2 2 m, L 50 m → q = 9.6e-6 m²/s within 1 %.
#[test]
fn s1_dupuit_charny_discharge() {
    let model = rectangular_dam(1e-5, 10.0, 2.0, 50.0, 11.0);
    assert_eq!(validate(&model), vec![]);
    let mesh = build_mesh(&model, &MeshOptions::uniform(0.5)).expect("mesh");
    let sol = solve(&model, &mesh, &SolveOptions::default()).expect("solve");
    let q = total_flow(&sol);
    let flows = stretch_flows(&model, &sol);
    report("S1", &mesh, &sol);
    assert!(sol.converged);
    // The balance closes: what enters upstream leaves at the tail water and the face.
    let out: f64 = flows.iter().map(|f| f.outflow_m2_per_s).sum();
    assert!((out / q - 1.0).abs() < 1e-6, "balance {out:e} vs {q:e}");
    let expected = 9.6e-6;
    assert!((q / expected - 1.0).abs() < 0.01, "q {q:e} vs {expected:e}");
}

fn report(case: &str, mesh: &Mesh, sol: &Solution) {
    eprintln!(
        "{case}: {} nodes, {} elements, {} outer iterations ({} CG), converged {}",
        mesh.nodes.len(),
        mesh.triangles.len(),
        sol.iterations,
        sol.linear_iterations,
        sol.converged
    );
}

/// Kozeny's problem: focus at the origin, drain along y = 0 for x ≤ 0, upstream boundary the
/// confocal parabola on which the head is `h` (x = (b² − y²)/(2b), b = h²/y0), the domain
/// extended above the free surface for the fixed-mesh method.
fn kozeny(k: f64, h: f64, y0: f64) -> SectionModel {
    let b = h * h / y0;
    let parabola = |y: f64| p((b * b - y * y) / (2.0 * b), y);
    let upstream: Vec<Point> = (0..=20)
        .map(|i| parabola(h * f64::from(i) / 20.0))
        .collect();
    let top = h + 4.0;
    let mut outline = vec![p(-10.0, 0.0), p(0.0, 0.0)];
    outline.extend(upstream.iter().copied());
    outline.extend([p(upstream[20].x, top), p(-10.0, top)]);
    let mut path = upstream.clone();
    path.reverse();
    SectionModel {
        outline,
        base: Material::isotropic(k),
        zones: vec![],
        lines: vec![],
        boundaries: vec![
            stretch("upstream", BoundaryKind::Water { level_m: h }, &path),
            stretch("drain", BoundaryKind::Drain, &[p(-10.0, 0.0), p(0.0, 0.0)]),
        ],
    }
}

/// S2: Kozeny (1931), flow to a horizontal drain: free surface `x = (y² − y0²)/(2·y0)`,
/// `y0 = sqrt(h² + d²) − d`, `q = k·y0`; check-values.md S2: h 20 m, d 60 m, k 1e-6 m/s →
/// y0 = 3.24555 m, q = 3.24555e-6 m²/s, free surface at 20 m upstream of the focus at
/// y = 11.8472 m, each within 1 %.
#[test]
fn s2_kozeny_drain() {
    let (k, h, d): (f64, f64, f64) = (1e-6, 20.0, 60.0);
    let y0 = (h * h + d * d).sqrt() - d;
    assert!((y0 - 3.24555).abs() < 1e-5, "closed form y0 {y0}");
    let model = kozeny(k, h, y0);
    assert_eq!(validate(&model), vec![]);
    let opts = MeshOptions {
        element_size_m: 1.0,
        local: vec![LocalSize {
            at: p(0.0, 0.0),
            radius_m: 4.0,
            size_m: 0.25,
        }],
    };
    let mesh = build_mesh(&model, &opts).expect("mesh");
    let sol = solve(&model, &mesh, &SolveOptions::default()).expect("solve");
    report("S2", &mesh, &sol);
    assert!(sol.converged);
    let q = total_flow(&sol);
    let line = phreatic_line(&phreatic_segments(&mesh, &sol), &[20.0, 0.0]);
    let y20 = line[0].1.expect("free surface at x = 20 m");
    let y_focus = line[1].1.expect("free surface above the focus");
    eprintln!(
        "S2: q {q:e} (exact {:e}), y(20) {y20} (exact 11.8472), y(0) {y_focus} (exact {y0})",
        k * y0
    );
    assert!((q / (k * 3.24555) - 1.0).abs() < 0.01, "q {q:e}");
    assert!(
        (y20 / 11.8472 - 1.0).abs() < 0.01,
        "free surface at 20 m: {y20}"
    );
}

/// Linear interpolation of the normal exit gradient at station `x`.
fn gradient_at(g: &[(f64, f64)], x: f64) -> f64 {
    let k = g.partition_point(|(s, _)| *s < x).clamp(1, g.len() - 1);
    let ((x0, g0), (x1, g1)) = (g[k - 1], g[k]);
    g0 + (x - x0) / (x1 - x0) * (g1 - g0)
}

/// S3: Harr (Groundwater and Seepage, 1962), sheet pile of penetration d in a layer of
/// infinite depth with head loss h: exit gradient at distance x downstream of the pile
/// `i = h/(π·sqrt(d² + x²))`; check-values.md S3: h 4 m, d 5 m → i(0) = 0.254648,
/// i(12 m) = 0.0979415, within 3 % (truncated domain).
#[test]
fn s3_harr_sheet_pile_exit_gradient() {
    let (h, d, w) = (4.0, 5.0, 200.0);
    let model = SectionModel {
        outline: vec![p(-w, -w), p(w, -w), p(w, 0.0), p(0.0, 0.0), p(-w, 0.0)],
        base: Material::isotropic(1e-5),
        zones: vec![],
        lines: vec![ImperviousLine {
            name: "sheet pile".into(),
            points: vec![p(0.0, 0.0), p(0.0, -d)],
        }],
        boundaries: vec![
            stretch(
                "upstream",
                BoundaryKind::Water { level_m: h },
                &[p(-w, 0.0), p(0.0, 0.0)],
            ),
            stretch(
                "downstream",
                BoundaryKind::Water { level_m: 0.0 },
                &[p(0.0, 0.0), p(w, 0.0)],
            ),
        ],
    };
    assert_eq!(validate(&model), vec![]);
    let opts = MeshOptions {
        element_size_m: 25.0,
        local: vec![
            LocalSize {
                at: p(0.0, -d / 2.0),
                radius_m: d / 2.0 + 1.0,
                size_m: 0.2,
            },
            LocalSize {
                at: p(7.5, 0.0),
                radius_m: 8.0,
                size_m: 0.5,
            },
        ],
    };
    let mesh = build_mesh(&model, &opts).expect("mesh");
    let confined = SolveOptions {
        unconfined: false,
        ..SolveOptions::default()
    };
    let sol = solve(&model, &mesh, &confined).expect("solve");
    report("S3", &mesh, &sol);
    let g: Vec<(f64, f64)> = exit_gradients(&model, &mesh, &sol, &[1])
        .iter()
        .map(|e| (e.at.x, e.normal))
        .collect();
    assert!(
        g[0].0.abs() < 1e-9,
        "first exit node at the pile, got {:?}",
        g[0]
    );
    let harr = |x: f64| h / (std::f64::consts::PI * (d * d + x * x).sqrt());
    for x in [0.0, 12.0] {
        let i = gradient_at(&g, x);
        eprintln!("S3: i({x}) = {i:.6} (Harr {:.6})", harr(x));
        assert!(
            (i / harr(x) - 1.0).abs() < 0.03,
            "i({x}) = {i} vs {}",
            harr(x)
        );
    }
    // Vertical and normal agree on horizontal ground; no flow crosses the pile.
    let up = exit_gradients(&model, &mesh, &sol, &[1]);
    assert!(up.iter().all(|e| (e.vertical - e.normal).abs() < 1e-9));
}

/// A curvilinear quadrilateral of Kozeny's flow net (parabolic coordinates σ, τ with
/// x = (σ² − τ²)/2, y = σ·τ): two equipotentials σ1, σ2 at fixed heads and two streamlines τ1,
/// τ2 impervious. The exact head is `h = c·σ` and the flow `q = k·c·(τ2 − τ1)`.
fn parabolic_patch(size: f64) -> (SectionModel, f64) {
    let c = 1.8;
    let (s1, s2, t1, t2) = (3.0, 10.0, 0.5, 1.8);
    let xy = |s: f64, t: f64| p((s * s - t * t) / 2.0, s * t);
    let side = |from: (f64, f64), to: (f64, f64)| -> Vec<Point> {
        let length = xy(from.0, from.1).dist(xy(to.0, to.1)) * 1.2;
        let n = (length / size).ceil().max(2.0) as usize;
        (0..n)
            .map(|i| {
                let f = i as f64 / n as f64;
                xy(from.0 + f * (to.0 - from.0), from.1 + f * (to.1 - from.1))
            })
            .collect()
    };
    let bottom = side((s1, t1), (s2, t1));
    let right = side((s2, t1), (s2, t2));
    let topline = side((s2, t2), (s1, t2));
    let left = side((s1, t2), (s1, t1));
    let mut outline = Vec::new();
    for part in [&bottom, &right, &topline, &left] {
        outline.extend(part.iter().copied());
    }
    let mut right_path = right.clone();
    right_path.push(topline[0]);
    let mut left_path = left.clone();
    left_path.push(bottom[0]);
    let model = SectionModel {
        outline,
        base: Material::isotropic(1e-5),
        zones: vec![],
        lines: vec![],
        boundaries: vec![
            stretch(
                "low",
                BoundaryKind::FixedHead { head_m: c * s1 },
                &left_path,
            ),
            stretch(
                "high",
                BoundaryKind::FixedHead { head_m: c * s2 },
                &right_path,
            ),
        ],
    };
    (model, c)
}

/// Mesh refinement: on a problem with a smooth exact solution (a patch of Kozeny's flow net),
/// halving the element size cuts the largest nodal head error about fourfold and the flow
/// error at least twofold, as expected of linear triangles (second order in head).
#[test]
fn mesh_refinement_converges_at_the_expected_rate() {
    let mut errors = Vec::new();
    for size in [1.0, 0.5, 0.25] {
        let (model, c) = parabolic_patch(size);
        assert_eq!(validate(&model), vec![]);
        let mesh = build_mesh(&model, &MeshOptions::uniform(size)).expect("mesh");
        let confined = SolveOptions {
            unconfined: false,
            ..SolveOptions::default()
        };
        let sol = solve(&model, &mesh, &confined).expect("solve");
        let head_error = mesh
            .nodes
            .iter()
            .zip(&sol.head_m)
            .map(|(n, h)| {
                let sigma = (n.x + n.x.hypot(n.y)).sqrt();
                (h - c * sigma).abs()
            })
            .fold(0.0, f64::max);
        let q = total_flow(&sol);
        let q_exact = 1e-5 * c * (1.8 - 0.5);
        let q_error = (q / q_exact - 1.0).abs();
        eprintln!(
            "refinement: size {size} m, {} elements, max head error {head_error:.3e} m, flow error {q_error:.3e}",
            mesh.triangles.len()
        );
        errors.push((head_error, q_error));
    }
    for w in errors.windows(2) {
        let head_order = (w[0].0 / w[1].0).log2();
        let flow_order = (w[0].1 / w[1].1).log2();
        eprintln!("refinement: observed order head {head_order:.2}, flow {flow_order:.2}");
        assert!(head_order > 1.5, "head error order {head_order}");
        assert!(flow_order > 1.0, "flow error order {flow_order}");
    }
}

/// Stream function on the same patch: exact `ψ = k·c·τ` up to a constant and sign (τ² = r − x
/// in parabolic coordinates); the difference between the two impervious sides is the flow.
#[test]
fn stream_function_matches_the_exact_flow_lines() {
    let (model, c) = parabolic_patch(0.5);
    let mesh = build_mesh(&model, &MeshOptions::uniform(0.5)).expect("mesh");
    let confined = SolveOptions {
        unconfined: false,
        ..SolveOptions::default()
    };
    let sol = solve(&model, &mesh, &confined).expect("solve");
    let psi = stream_function(&model, &mesh, &sol, 1e-11).expect("stream function");
    let exact: Vec<f64> = mesh
        .nodes
        .iter()
        .map(|n| 1e-5 * c * (n.x.hypot(n.y) - n.x).sqrt())
        .collect();
    let q = 1e-5 * c * (1.8 - 0.5);
    // Align sign and constant on two nodes with the extreme exact values.
    let lo = (0..exact.len())
        .min_by(|&a, &b| exact[a].total_cmp(&exact[b]))
        .expect("nodes");
    let hi = (0..exact.len())
        .max_by(|&a, &b| exact[a].total_cmp(&exact[b]))
        .expect("nodes");
    let sign = (psi[hi] - psi[lo]).signum();
    let worst = psi
        .iter()
        .zip(&exact)
        .map(|(s, e)| (sign * (s - psi[lo]) - (e - exact[lo])).abs() / q)
        .fold(0.0, f64::max);
    eprintln!("stream function: largest error {worst:.2e} of the flow");
    assert!(((psi[hi] - psi[lo]).abs() / q - 1.0).abs() < 0.01);
    // Our own bound for drawing flow lines (lumped boundary flows make ~1 % at this size).
    assert!(worst < 0.02, "largest error {worst} of the flow");
}
