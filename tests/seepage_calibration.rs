//! Calibration of zone permeabilities to piezometer heads: heads solved with a known
//! permeability ratio (a synthetic truth) are handed to the fit, which must recover the ratio;
//! with two zones whose common scale the heads cannot see, the fit must say so. A landside head
//! written 0.35 m too low is recovered together with the blanket's ratio (a log10 factor and a
//! head in metres in one parameter vector).

use seepd::seepage::calibrate::{calibrate, residuals, FitParameter, Observation, Target};
use seepd::seepage::outputs::head_at;
use seepd::seepage::solve::{solve, SolveOptions};
use seepd::seepage::{
    build_mesh, check_points, validate, Boundary, BoundaryKind, Material, Mesh, MeshOptions, Point,
    SectionModel, Zone,
};

fn p(x: f64, y: f64) -> Point {
    Point::new(x, y)
}

/// A levee foundation: a pervious layer under a top blanket, river at 15 m on the left and on
/// the riverside blanket, landside ground at 12 m (ponded), impervious elsewhere.
fn foundation(k_blanket: f64) -> SectionModel {
    let rect =
        |x0: f64, y0: f64, x1: f64, y1: f64| vec![p(x0, y0), p(x1, y0), p(x1, y1), p(x0, y1)];
    SectionModel {
        outline: vec![
            p(0.0, 0.0),
            p(100.0, 0.0),
            p(100.0, 12.0),
            p(30.0, 12.0),
            p(0.0, 12.0),
        ],
        base: Material::isotropic(1e-4),
        zones: vec![
            Zone {
                name: "aquifer".into(),
                polygon: rect(0.0, 0.0, 100.0, 10.0),
                material: Material::isotropic(1e-4),
            },
            Zone {
                name: "blanket".into(),
                polygon: rect(0.0, 10.0, 100.0, 12.0),
                material: Material {
                    kh_m_per_s: k_blanket,
                    kv_m_per_s: k_blanket / 4.0,
                    angle_deg: 0.0,
                },
            },
        ],
        lines: vec![],
        boundaries: vec![
            Boundary {
                name: "river".into(),
                kind: BoundaryKind::Water { level_m: 15.0 },
                path: vec![p(30.0, 12.0), p(0.0, 12.0), p(0.0, 0.0)],
            },
            Boundary {
                name: "landside".into(),
                kind: BoundaryKind::FixedHead { head_m: 12.0 },
                path: vec![p(100.0, 12.0), p(30.0, 12.0)],
            },
        ],
    }
}

fn tips() -> Vec<(String, Point)> {
    [
        (40.0, 5.0),
        (55.0, 5.0),
        (75.0, 2.0),
        (50.0, 11.0),
        (90.0, 9.0),
    ]
    .iter()
    .enumerate()
    .map(|(i, &(x, y))| (format!("PZ-{}", i + 1), p(x, y)))
    .collect()
}

/// The heads at the tips solved with `truth`, each raised by `bias_m`.
fn observed(truth: &SectionModel, mesh: &Mesh, bias_m: f64) -> Vec<Observation> {
    let sol = solve(truth, mesh, &confined()).expect("solve");
    tips()
        .into_iter()
        .map(|(id, at)| Observation {
            head_m: head_at(mesh, &sol, at).expect("inside") + bias_m,
            id,
            at,
        })
        .collect()
}

fn confined() -> SolveOptions {
    SolveOptions {
        unconfined: false,
        ..SolveOptions::default()
    }
}

#[test]
fn fit_recovers_a_known_blanket_permeability_ratio() {
    let truth = foundation(1e-4 * 10f64.powf(-2.3));
    assert_eq!(validate(&truth), vec![]);
    assert_eq!(check_points(&truth, &tips()), vec![]);
    let mesh = build_mesh(&truth, &MeshOptions::uniform(1.5)).expect("mesh");
    let obs = observed(&truth, &mesh, 0.0);
    // The heads must actually feel the blanket, or the test proves nothing.
    let spread = obs.iter().map(|o| o.head_m).fold(0.0, f64::max)
        - obs.iter().map(|o| o.head_m).fold(f64::INFINITY, f64::min);
    assert!(spread > 0.3, "head spread {spread}");

    // Start from a blanket 10× more pervious than the truth's blanket scaled by 10^-1.
    let start = foundation(1e-4 * 10f64.powf(-1.0));
    let (before, rms_before) = residuals(
        &mesh,
        &solve(&start, &mesh, &confined()).expect("solve"),
        &obs,
    )
    .expect("residuals");
    assert_eq!(before.len(), obs.len());
    let params = [FitParameter {
        target: Target::Zone(1),
        start: 0.0,
        lower: -3.0,
        upper: 1.0,
    }];
    let fit = calibrate(&start, &mesh, &confined(), &obs, &params).expect("fit");
    eprintln!(
        "calibration: rms before {rms_before:.4} m, after {:.2e} m, factor {:?}, {} iterations, {} solves, warnings {:?}",
        fit.rms_m, fit.parameters, fit.iterations, fit.solves, fit.warnings
    );
    let got = fit.parameters[0].value;
    assert!(
        (got - (-1.3)).abs() < 0.01,
        "log10 factor {got}, truth −1.3"
    );
    assert!(fit.rms_m < 1e-3 && rms_before > 0.05);
    assert!(fit.parameters[0].std_error.is_some());
    assert!(fit.warnings.is_empty(), "{:?}", fit.warnings);
}

#[test]
fn fit_warns_when_only_the_ratio_is_determined() {
    let truth = foundation(1e-6);
    let mesh = build_mesh(&truth, &MeshOptions::uniform(2.0)).expect("mesh");
    let obs = observed(&truth, &mesh, 0.01);
    // Every permeability in the model is a fitted zone: scaling both leaves the heads alone.
    let mut start = foundation(1e-5);
    start.base = Material::isotropic(1e-4);
    let params = [
        FitParameter {
            target: Target::Zone(0),
            start: 0.0,
            lower: -2.0,
            upper: 2.0,
        },
        FitParameter {
            target: Target::Zone(1),
            start: 0.0,
            lower: -2.0,
            upper: 2.0,
        },
    ];
    let fit = calibrate(&start, &mesh, &confined(), &obs, &params).expect("fit");
    eprintln!(
        "ratio-only fit: {:?} warnings {:?}",
        fit.parameters, fit.warnings
    );
    assert!(
        fit.warnings
            .iter()
            .any(|w| w.contains("cannot separate") || w.contains("poorly determined")),
        "{:?}",
        fit.warnings
    );
    let ratio = fit.parameters[1].value - fit.parameters[0].value;
    assert!((ratio - (-1.0)).abs() < 0.05, "fitted ratio {ratio}");
}

#[test]
fn fit_recovers_a_landside_head_offset_with_the_blanket_ratio() {
    let mut truth = foundation(1e-4 * 10f64.powf(-1.3));
    truth.boundaries[1].kind = BoundaryKind::FixedHead { head_m: 12.35 };
    let mesh = build_mesh(&truth, &MeshOptions::uniform(1.5)).expect("mesh");
    let obs = observed(&truth, &mesh, 0.0);
    // Written: the blanket 10^0.3 too pervious, the landside head at 12.0 m.
    let start = foundation(1e-4 * 10f64.powf(-1.0));
    let params = [
        FitParameter {
            target: Target::Zone(1),
            start: 0.0,
            lower: -2.0,
            upper: 2.0,
        },
        FitParameter {
            target: Target::Boundary(1),
            start: 0.0,
            lower: -2.0,
            upper: 2.0,
        },
    ];
    let fit = calibrate(&start, &mesh, &confined(), &obs, &params).expect("fit");
    eprintln!(
        "blanket and landside head: {:?}, rms {:.2e} m, {} iterations, {} solves, warnings {:?}",
        fit.parameters, fit.rms_m, fit.iterations, fit.solves, fit.warnings
    );
    let (z, b) = (&fit.parameters[0], &fit.parameters[1]);
    assert!((z.value - (-0.3)).abs() < 0.01, "log10 factor {}", z.value);
    assert!((b.value - 0.35).abs() < 0.01, "offset {} m", b.value);
    assert!(z.std_error.is_some() && b.std_error.is_some());
    assert!(fit.warnings.is_empty(), "{:?}", fit.warnings);
}

#[test]
fn an_offset_on_a_boundary_without_a_level_is_refused() {
    let m = foundation(1e-6);
    let mesh = build_mesh(&m, &MeshOptions::uniform(3.0)).expect("mesh");
    let mut dry = m.clone();
    dry.boundaries[1].kind = BoundaryKind::SeepageFace;
    let params = [FitParameter {
        target: Target::Boundary(1),
        start: 0.0,
        lower: -1.0,
        upper: 1.0,
    }];
    let obs = [Observation {
        id: "PZ".into(),
        at: p(40.0, 5.0),
        head_m: 13.0,
    }];
    let e = calibrate(&dry, &mesh, &confined(), &obs, &params).unwrap_err();
    assert_eq!(
        e.to_string(),
        "bad fit parameters: boundary 'landside' has no water level or head to offset"
    );
}
