//! The row round trip (rows written before boundary offsets existed too), which stored fit is
//! in use, the model a fit is applied to, and what may be fitted.

use std::path::PathBuf;

use super::*;
use crate::config::section_model::WaterFrom;
use crate::seepage::{Boundary, BoundaryKind, Material, Zone};

fn fit(section: &str, fitted_ms: i64, applied: bool) -> SectionFit {
    SectionFit {
        section: section.into(),
        fitted_ms,
        times_ms: vec![1000, 5000],
        factors: vec![ZoneFactor {
            zone: "foundation".into(),
            log10_factor: -0.5,
            std_error: Some(0.01),
            at_bound: false,
        }],
        boundary_offsets: vec![BoundaryOffset {
            boundary: "tail water".into(),
            offset_m: 0.4,
            std_error_m: Some(0.02),
            at_bound: false,
        }],
        rms_written_m: 0.5,
        rms_calibrated_m: 0.01,
        tips: vec![TipFit {
            t_ms: 1000,
            id: "PZ".into(),
            measured_m: 10.0,
            written_m: 10.5,
            calibrated_m: 10.01,
        }],
        warnings: Vec::new(),
        not_applied: if applied {
            Vec::new()
        } else {
            vec!["zone foundation: not determined by the data".into()]
        },
        iterations: 3,
        solves: 9,
    }
}

#[test]
fn a_fit_round_trips_through_its_row() {
    let f = fit("S1", 7, true);
    let row = f.to_row();
    assert_eq!((row.kind.as_str(), row.id.as_str()), (KIND, "S1"));
    assert_eq!((row.train_start_ms, row.train_end_ms), (1000, 5000));
    assert_eq!(row.sigma, 0.01);
    assert_eq!(SectionFit::from_row(&row), Ok(f));
}

#[test]
fn the_newest_applied_fit_is_in_use_and_a_flagged_one_never() {
    let rows: Vec<ModelRow> = [
        fit("S1", 1, true),
        fit("S1", 3, false),
        fit("S1", 2, true),
        fit("S2", 5, false),
    ]
    .iter()
    .map(SectionFit::to_row)
    .collect();
    let used = in_use(&rows);
    assert_eq!(used.get("S1").map(|f| f.fitted_ms), Some(2));
    assert!(!used.contains_key("S2"));
}

/// A row as `seepd fit` stored it before boundary offsets were fitted (the JSON of that
/// version's `SectionFit`, field for field).
const OLD_ROW: &str = r#"{"section":"S1","fitted_ms":7,"times_ms":[1000,5000],"factors":[{"zone":"foundation","log10_factor":-0.5,"std_error":0.01,"at_bound":false}],"rms_written_m":0.5,"rms_calibrated_m":0.01,"tips":[{"t_ms":1000,"id":"PZ","measured_m":10.0,"written_m":10.5,"calibrated_m":10.01}],"warnings":[],"not_applied":[],"iterations":3,"solves":9}"#;

#[test]
fn a_row_written_before_boundary_offsets_still_reads_and_is_used() {
    let mut row = fit("S1", 7, true).to_row();
    row.params = OLD_ROW.into();
    let old = SectionFit::from_row(&row).expect("old row");
    let mut want = fit("S1", 7, true);
    want.boundary_offsets.clear();
    assert_eq!(old, want);
    assert_eq!(in_use(&[row]).get("S1"), Some(&want));
}

#[test]
fn the_label_names_factors_and_offsets() {
    let l = fit("S1", 7, true).label();
    assert!(l.ends_with(": foundation ×0.316 tail water +0.40 m"), "{l}");
}

/// A 20 m × 10 m block: river on the left (pool), tail water on the right (tail), a ditch at
/// a written elevation on the top right, a seepage face on the top left; one zone.
fn spec() -> SeepageSpec {
    let p = Point::new;
    let boundary = |name: &str, kind, path| Boundary {
        name: name.into(),
        kind,
        path,
    };
    let water = |name: &str, path| boundary(name, BoundaryKind::Water { level_m: 0.0 }, path);
    SeepageSpec {
        model: SectionModel {
            outline: vec![p(0.0, 0.0), p(20.0, 0.0), p(20.0, 10.0), p(0.0, 10.0)],
            base: Material::isotropic(1e-5),
            zones: vec![Zone {
                name: "foundation".into(),
                polygon: vec![p(0.0, 0.0), p(20.0, 0.0), p(20.0, 4.0), p(0.0, 4.0)],
                material: Material::isotropic(1e-4),
            }],
            lines: vec![],
            boundaries: vec![
                water("river", vec![p(0.0, 10.0), p(0.0, 0.0)]),
                water("tail water", vec![p(20.0, 0.0), p(20.0, 10.0)]),
                water("ditch", vec![p(20.0, 10.0), p(15.0, 10.0)]),
                boundary(
                    "face",
                    BoundaryKind::SeepageFace,
                    vec![p(15.0, 10.0), p(0.0, 10.0)],
                ),
            ],
        },
        water: vec![
            Some(WaterFrom::Pool),
            Some(WaterFrom::Tail),
            Some(WaterFrom::Elevation(9.0)),
            None,
        ],
        element_size_m: 2.0,
        unconfined: true,
        resolve_change_m: 0.5,
        resolve_every_s: 86400,
        file: PathBuf::new(),
        pos: (1, 1),
    }
}

fn level(m: &SectionModel, i: usize) -> f64 {
    match m.boundaries[i].kind {
        BoundaryKind::Water { level_m } => level_m,
        k => panic!("{k:?}"),
    }
}

#[test]
fn a_fit_moves_the_levels_of_its_boundaries_and_scales_its_zones() {
    let spec = spec();
    let mut f = fit("S1", 7, true);
    f.boundary_offsets.push(BoundaryOffset {
        boundary: "ditch".into(),
        offset_m: -0.25,
        std_error_m: Some(0.01),
        at_bound: false,
    });
    f.boundary_offsets.push(BoundaryOffset {
        boundary: "renamed since".into(),
        offset_m: 1.0,
        std_error_m: Some(0.01),
        at_bound: false,
    });
    let written = model_at(&spec, None, 12.0, Some(6.0));
    assert_eq!(written, spec.at(12.0, Some(6.0)));
    let m = model_at(&spec, Some(&f), 12.0, Some(6.0));
    assert_eq!(
        (level(&m, 0), level(&m, 1), level(&m, 2)),
        (12.0, 6.4, 8.75)
    );
    assert_eq!(m.boundaries[3].kind, BoundaryKind::SeepageFace);
    let k = m.zones[0].material.kh_m_per_s;
    assert!((k / 1e-4 - 10f64.powf(-0.5)).abs() < 1e-12, "{k}");
    assert_eq!(m.base, spec.model.base);
}

fn choose(zones: &[&str], boundaries: &[&str]) -> Result<Vec<Target>, String> {
    let zones: Vec<String> = zones.iter().map(|s| (*s).to_string()).collect();
    let boundaries: Vec<String> = boundaries.iter().map(|s| (*s).to_string()).collect();
    let choice = Choice {
        zones: &zones,
        boundaries: &boundaries,
        offset_limit_m: OFFSET_LIMIT_M,
    };
    choice::parameters(&spec(), &choice).map(|p| p.iter().map(|p| p.target).collect())
}

#[test]
fn zones_are_fitted_by_default_and_offsets_only_when_asked() {
    assert_eq!(choose(&[], &[]), Ok(vec![Target::Zone(0)]));
    assert_eq!(choose(&[], &["ditch"]), Ok(vec![Target::Boundary(2)]));
    assert_eq!(
        choose(&["foundation"], &["tail water", "river", "tail water"]),
        Ok(vec![
            Target::Zone(0),
            Target::Boundary(1),
            Target::Boundary(0)
        ])
    );
}

#[test]
fn unknown_or_dry_boundaries_are_refused_with_the_water_boundaries_listed() {
    let e = choose(&[], &["landside ditch"]).unwrap_err();
    assert_eq!(
        e,
        "no boundary \"landside ditch\" in the model (water boundaries: river, tail water, ditch)"
    );
    let e = choose(&[], &["face"]).unwrap_err();
    assert!(
        e.starts_with("boundary \"face\" is not a water boundary")
            && e.ends_with("(water boundaries: river, tail water, ditch)"),
        "{e}"
    );
    let e = choose(&["core"], &[]).unwrap_err();
    assert_eq!(e, "no zone \"core\" in the model (zones: foundation)");
}
