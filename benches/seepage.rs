//! Benchmark (not a test): the steady seepage solve against element count, for a homogeneous
//! dam section, unconfined (free surface and seepage face found by iteration) and, as the
//! anchor measured in the same run on the same mesh, confined (one linear solve). Run with
//! `cargo bench --bench seepage`.

use std::time::Instant;

use seepd::seepage::outputs::{exit_points, total_flow};
use seepd::seepage::{
    build_mesh, solve, Boundary, BoundaryKind, Material, MeshOptions, Point, SectionModel,
    SolveOptions,
};

fn dam() -> SectionModel {
    let p = Point::new;
    let (crest_y, crest_w) = (12.5, 2.6);
    let up_crest = p(1.5 * crest_y, crest_y);
    let down_crest = p(up_crest.x + crest_w, crest_y);
    let toe = p(down_crest.x + 2.5 * crest_y, 0.0);
    SectionModel {
        outline: vec![p(0.0, 0.0), toe, down_crest, up_crest],
        base: Material::isotropic(1e-6),
        zones: vec![],
        lines: vec![],
        boundaries: vec![
            Boundary {
                name: "pool".into(),
                kind: BoundaryKind::Water { level_m: 12.0 },
                path: vec![up_crest, p(0.0, 0.0)],
            },
            Boundary {
                name: "downstream slope".into(),
                kind: BoundaryKind::SeepageFace,
                path: vec![toe, down_crest],
            },
        ],
    }
}

/// Median of `runs` timings of `f`, ms.
fn median_ms(runs: usize, mut f: impl FnMut()) -> f64 {
    let mut t: Vec<f64> = (0..runs)
        .map(|_| {
            let start = Instant::now();
            f();
            start.elapsed().as_secs_f64() * 1e3
        })
        .collect();
    t.sort_by(f64::total_cmp);
    t[runs / 2]
}

fn main() {
    let model = dam();
    println!("Seepage solve, homogeneous dam H 12 m (median of 5 runs, one thread)");
    println!(
        "| elements | nodes | mesh ms | confined solve ms (anchor) | unconfined solve ms | outer iterations | CG iterations | system MiB | exit elevation m | q/k m |"
    );
    println!("|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|");
    for size in [0.8, 0.5, 0.25] {
        let opts = MeshOptions::uniform(size);
        let mesh = build_mesh(&model, &opts).expect("mesh");
        let mesh_ms = median_ms(5, || {
            build_mesh(&model, &opts).expect("mesh");
        });
        let confined = SolveOptions {
            unconfined: false,
            ..SolveOptions::default()
        };
        let anchor_ms = median_ms(5, || {
            solve(&model, &mesh, &confined).expect("solve");
        });
        let unconfined = SolveOptions::default();
        let sol = solve(&model, &mesh, &unconfined).expect("solve");
        let solve_ms = median_ms(5, || {
            solve(&model, &mesh, &unconfined).expect("solve");
        });
        // Stored entries of the conductance matrix (value + column index), twice: the
        // assembled matrix and the one with fixed values, plus the incomplete factor.
        let nnz: usize = {
            let (pattern, _) =
                seepd::seepage::sparse::Csr::pattern(mesh.nodes.len(), &mesh.triangles);
            pattern.col.len()
        };
        let mib = (nnz * (8 + 8) * 2 + nnz * 8) as f64 / (1024.0 * 1024.0);
        let exit = exit_points(&model, &mesh, &sol);
        println!(
            "| {} | {} | {mesh_ms:.1} | {anchor_ms:.1} | {solve_ms:.1} | {} | {} | {mib:.2} | {:.2} | {:.3} |",
            mesh.triangles.len(),
            mesh.nodes.len(),
            sol.iterations,
            sol.linear_iterations,
            exit.first().map_or(f64::NAN, |e| e.exit.y),
            total_flow(&sol) / 1e-6,
        );
    }
}
