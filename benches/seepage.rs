//! Benchmark (not a test): the steady seepage solve against element count, for a homogeneous
//! dam section, unconfined (free surface and seepage face found by iteration) and, as the
//! anchor measured in the same run on the same mesh, confined (one linear solve); time and
//! memory (the sparse factor's entries and the peak heap the solve allocates, counted by this
//! binary's allocator). Run with `cargo bench --bench seepage`.

use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::atomic::{AtomicUsize, Ordering::Relaxed};
use std::time::Instant;

use seepd::seepage::outputs::{exit_points, total_flow};
use seepd::seepage::sparse::{Cholesky, Csr};
use seepd::seepage::{
    build_mesh, solve, Boundary, BoundaryKind, Material, MeshOptions, Point, SectionModel,
    SolveOptions,
};

/// The system allocator, counting the bytes in use and their peak.
struct Counting;

static IN_USE: AtomicUsize = AtomicUsize::new(0);
static PEAK: AtomicUsize = AtomicUsize::new(0);

// SAFETY: every call is passed on to the system allocator unchanged; only counters are added.
unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let p = System.alloc(layout);
        if !p.is_null() {
            let now = IN_USE.fetch_add(layout.size(), Relaxed) + layout.size();
            PEAK.fetch_max(now, Relaxed);
        }
        p
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        System.dealloc(ptr, layout);
        IN_USE.fetch_sub(layout.size(), Relaxed);
    }
}

#[global_allocator]
static ALLOC: Counting = Counting;

/// Peak heap allocated by `f` above what was in use when it started, MiB.
fn peak_mib(f: impl FnOnce()) -> f64 {
    let base = IN_USE.load(Relaxed);
    PEAK.store(base, Relaxed);
    f();
    (PEAK.load(Relaxed) - base) as f64 / (1024.0 * 1024.0)
}

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
        "| elements | nodes | mesh ms | confined solve ms (anchor) | unconfined solve ms | outer iterations | factor entries | factor MiB | peak heap of the unconfined solve MiB | exit elevation m | q/k m |"
    );
    println!("|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|");
    for size in [0.8, 0.5, 0.25, 0.16] {
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
        let mut sol = None;
        let peak = peak_mib(|| sol = Some(solve(&model, &mesh, &unconfined).expect("solve")));
        let sol = sol.expect("solved");
        let solve_ms = median_ms(5, || {
            solve(&model, &mesh, &unconfined).expect("solve");
        });
        // The factor L: a value and a row index per entry.
        let entries = {
            let (pattern, _) = Csr::pattern(mesh.nodes.len(), &mesh.triangles);
            Cholesky::analyse(&pattern)
                .expect("analysis")
                .factor_entries()
        };
        let factor_mib = (entries * (8 + 8)) as f64 / (1024.0 * 1024.0);
        let exit = exit_points(&model, &mesh, &sol);
        println!(
            "| {} | {} | {mesh_ms:.1} | {anchor_ms:.1} | {solve_ms:.1} | {} | {entries} | {factor_mib:.2} | {peak:.2} | {:.2} | {:.3} |",
            mesh.triangles.len(),
            mesh.nodes.len(),
            sol.iterations,
            exit.first().map_or(f64::NAN, |e| e.exit.y),
            total_flow(&sol) / 1e-6,
        );
    }
}
