//! Check S4: the exit point on a dam's downstream slope, against an independent numerical
//! reference (the trial free-surface method on a boundary-fitted mesh, run in Python from
//! `tests/support/dam_trial_surface.py`) and, in an ignored test, against Schaffernak's and
//! L. Casagrande's approximations.

use std::io::Write;
use std::process::{Command, Stdio};

use seepd::seepage::outputs::{exit_points, total_flow};
use seepd::seepage::solve::{solve, NodeCondition, SolveOptions};
use seepd::seepage::{build_mesh, validate, BoundaryKind, Material, MeshOptions, SectionModel};

use super::{p, report, stretch};

/// The S4 dam: homogeneous, on an impervious base, pool 12 m, upstream slope 1V:1.5H (Δ = 18 m,
/// A. Casagrande's entry correction 0.3·Δ = 5.4 m), crest 12.5 m high and 2.6 m wide,
/// downstream slope 1V:2.5H: the toe is d = 40 m from the corrected entry point.
const S4_POOL: f64 = 12.0;
const S4_UPSTREAM_COT: f64 = 1.5;
const S4_CREST: (f64, f64) = (12.5, 2.6);
const S4_DOWNSTREAM_COT: f64 = 2.5;

fn s4_dam(k: f64) -> SectionModel {
    let (crest_y, crest_w) = S4_CREST;
    let up_crest = p(S4_UPSTREAM_COT * crest_y, crest_y);
    let down_crest = p(up_crest.x + crest_w, crest_y);
    let toe = p(down_crest.x + S4_DOWNSTREAM_COT * crest_y, 0.0);
    let entry = S4_UPSTREAM_COT * S4_POOL * (1.0 - 0.3);
    assert!((toe.x - entry - 40.0).abs() < 1e-9);
    SectionModel {
        outline: vec![p(0.0, 0.0), toe, down_crest, up_crest],
        base: Material::isotropic(k),
        zones: vec![],
        lines: vec![],
        boundaries: vec![
            stretch(
                "pool",
                BoundaryKind::Water { level_m: S4_POOL },
                &[up_crest, p(0.0, 0.0)],
            ),
            stretch(
                "downstream slope",
                BoundaryKind::SeepageFace,
                &[toe, down_crest],
            ),
        ],
    }
}

/// The seepd solve of S4 at element size 0.4 m.
struct S4Solve {
    /// The exit point (highest wet face node), m along the slope from the toe.
    wet_m: f64,
    /// The next face node above it (dry), m along the slope: the exit lies between the two.
    dry_m: f64,
    /// q/k, m.
    q_over_k_m: f64,
}

fn s4_solve() -> S4Solve {
    let k = 1e-6;
    let model = s4_dam(k);
    assert_eq!(validate(&model), vec![]);
    let mesh = build_mesh(&model, &MeshOptions::uniform(0.4)).expect("mesh");
    let sol = solve(&model, &mesh, &SolveOptions::default()).expect("solve");
    report("S4", &mesh, &sol);
    assert!(sol.converged);
    let sin = 1.0 / S4_DOWNSTREAM_COT.hypot(1.0);
    let exit = &exit_points(&model, &mesh, &sol)[0];
    let wet_m = exit.exit.y / sin;
    let dry_m = (0..mesh.nodes.len())
        .filter(|&i| sol.condition[i] == NodeCondition::Outflow { stretch: 1 } && !sol.wet[i])
        .map(|i| mesh.nodes[i].y / sin)
        .fold(f64::INFINITY, f64::min);
    assert!(
        dry_m > wet_m && dry_m.is_finite(),
        "no dry face node above the exit"
    );
    S4Solve {
        wet_m,
        dry_m,
        q_over_k_m: total_flow(&sol) / k,
    }
}

/// One refinement level of the independent reference.
#[derive(Debug)]
struct TrialSurfaceLevel {
    size_m: f64,
    exit_size_m: f64,
    elements: u64,
    exit_m: f64,
    q_over_k_m: f64,
}

/// The independent reference for S4: the trial free-surface method on a boundary-fitted mesh
/// (`tests/support/dam_trial_surface.py`, numpy and scipy), at the listed levels (element size,
/// size at the exit point).
fn trial_surface_reference(levels: &[(f64, f64)]) -> Vec<TrialSurfaceLevel> {
    let script =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/support/dam_trial_surface.py");
    let probe = Command::new("/usr/bin/python3")
        .args(["-c", "import numpy, scipy"])
        .output();
    match probe {
        Ok(out) if out.status.success() => {}
        Ok(out) => panic!(
            "numpy/scipy are not importable by /usr/bin/python3 ({}); install them with \
             `apt-get install -y python3-scipy` (tests/run.sh does this)",
            String::from_utf8_lossy(&out.stderr).trim()
        ),
        Err(e) => panic!("cannot run /usr/bin/python3 ({e}); install python3-scipy"),
    }
    let input = serde_json::json!({
        "pool_m": S4_POOL,
        "upstream_cot": S4_UPSTREAM_COT,
        "crest_y_m": S4_CREST.0,
        "crest_w_m": S4_CREST.1,
        "downstream_cot": S4_DOWNSTREAM_COT,
        "levels": levels.iter().map(|(a, b)| [a, b]).collect::<Vec<_>>(),
    });
    let mut child = Command::new("/usr/bin/python3")
        .arg(&script)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn python3");
    child
        .stdin
        .take()
        .expect("stdin is piped")
        .write_all(input.to_string().as_bytes())
        .expect("write to python3");
    let out = child.wait_with_output().expect("python3 finishes");
    assert!(
        out.status.success(),
        "the reference failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    let num = |l: &serde_json::Value, key: &str| l[key].as_f64().expect(key);
    v["levels"]
        .as_array()
        .expect("levels")
        .iter()
        .map(|l| TrialSurfaceLevel {
            size_m: num(l, "size_m"),
            exit_size_m: num(l, "exit_size_m"),
            elements: l["elements"].as_u64().expect("elements"),
            exit_m: num(l, "exit_along_slope_m"),
            q_over_k_m: num(l, "q_over_k_m"),
        })
        .collect()
}

/// S4, against an independent numerical reference: the same dam solved by the trial
/// free-surface method on a boundary-fitted mesh (the classical method; Python with numpy and
/// scipy, `tests/support/dam_trial_surface.py`), refined three times (element size 1, 0.5,
/// 0.25 m, at the exit point 0.2, 0.1, 0.05 m). Further levels (0.125/0.025 and
/// 0.0625/0.0125 m, README) converge to an exit 18.43 m up the slope and q/k = 2.2926 m.
///
/// Checked: the reference converges (each refinement changes the exit distance and q/k less
/// than the one before); the true exit lies between seepd's highest wet face node and the dry
/// node above it, so the reference must fall in that interval widened by twice its own last
/// change (the remaining discretisation error of a sequence converging at least at ratio 1.5);
/// and q/k agrees within 0.5 % (the reference's last refinement moved it by 0.12 %, and seepd's
/// flow in S1/S2 is within 0.25 % of the closed forms at comparable sizes).
#[test]
fn s4_exit_point_against_trial_free_surface() {
    let levels = [(1.0, 0.2), (0.5, 0.1), (0.25, 0.05)];
    let reference = trial_surface_reference(&levels);
    assert_eq!(reference.len(), levels.len());
    for l in &reference {
        eprintln!(
            "S4 reference: size {} m (exit {} m), {} elements, exit {:.4} m along the slope, \
             q/k {:.5} m",
            l.size_m, l.exit_size_m, l.elements, l.exit_m, l.q_over_k_m
        );
    }
    let change = |f: fn(&TrialSurfaceLevel) -> f64| -> Vec<f64> {
        reference
            .windows(2)
            .map(|w| (f(&w[1]) - f(&w[0])).abs())
            .collect()
    };
    let (da, dq) = (change(|l| l.exit_m), change(|l| l.q_over_k_m));
    assert!(
        da[1] < da[0],
        "exit distance not converging: changes {da:?}"
    );
    assert!(dq[1] < dq[0], "q/k not converging: changes {dq:?}");
    let finest = &reference[2];
    let seepd = s4_solve();
    eprintln!(
        "S4: seepd exit between {:.3} and {:.3} m along the slope, q/k {:.5} m; reference \
         {:.4} m, q/k {:.5} m",
        seepd.wet_m, seepd.dry_m, seepd.q_over_k_m, finest.exit_m, finest.q_over_k_m
    );
    let margin = 2.0 * da[1];
    assert!(
        finest.exit_m >= seepd.wet_m - margin && finest.exit_m <= seepd.dry_m + margin,
        "reference exit {:.4} m outside seepd's [{:.3}, {:.3}] m ± {margin:.4} m",
        finest.exit_m,
        seepd.wet_m,
        seepd.dry_m
    );
    let q_diff = seepd.q_over_k_m / finest.q_over_k_m - 1.0;
    assert!(
        q_diff.abs() < 0.005,
        "q/k differs by {:.3} %",
        100.0 * q_diff
    );
    // The approximations beside it (asserted in the ignored test below).
    let (a, q) = (seepd.wet_m, seepd.q_over_k_m);
    for (name, ea, eq) in [
        ("Schaffernak", 14.5857, 2.16680),
        ("L. Casagrande", 15.3037, 2.11086),
    ] {
        eprintln!(
            "S4: {name} a {ea} m ({:+.1} %), q/k {eq} m ({:+.1} %) against seepd",
            100.0 * (ea / a - 1.0),
            100.0 * (eq / q - 1.0)
        );
    }
}

/// S4 against the approximations: Schaffernak (1917) `a = d/cos α − sqrt(d²/cos²α − H²/sin²α)`
/// and L. Casagrande (1932) `a = sqrt(d² + H²) − sqrt(d² − H²·cot²α)` with d = 40 m from
/// A. Casagrande's corrected entry point; check-values.md S4: a = 14.5857 m (Schaffernak),
/// 15.3037 m (L. Casagrande); the numerical exit point within 10 % of these (tolerance from
/// memory, as the table marks it).
///
/// Not met, and not a solver defect: seepd puts the exit 18.41 m up the slope (q/k 2.293 m) and
/// the independent trial free-surface solve above converges to 18.43 m (q/k 2.2926 m); both
/// approximations lie 17–21 % below the full solution of this dam (README, "S4").
#[test]
#[ignore = "the approximations differ from the full solution (18.43 m by an independent trial \
            free-surface solve, which seepd matches) by 17-21 %, outside the remembered 10 %"]
fn s4_exit_point_against_approximations() {
    let seepd = s4_solve();
    let a = seepd.wet_m;
    eprintln!(
        "S4: exit {a:.3} m along the slope, q/k = {:.4} m (Schaffernak a 14.5857, q/k 2.16680; \
         L. Casagrande a 15.3037, q/k 2.11086)",
        seepd.q_over_k_m
    );
    for (name, expected) in [("Schaffernak", 14.5857), ("L. Casagrande", 15.3037)] {
        assert!(
            (a / expected - 1.0).abs() < 0.10,
            "exit distance {a:.3} m vs {name} {expected} m"
        );
    }
}
