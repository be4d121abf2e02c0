//! Derived quantities through the deriver: alignment (missing, stale, flagged inputs), naming,
//! and the published check values carried through (check-value list #5, #6, #11).

use std::sync::Arc;

use super::*;
use crate::config::{
    BlanketReach, CriticalGradientFrom, LandsideCase, LandwardDistance, Nest, Objects,
    RiversideCase, Section, ToeCheck,
};

fn config(objects: Objects) -> Arc<Config> {
    let mut cfg = crate::config::load_dir(&example_dir()).expect("example config");
    cfg.objects = objects;
    Arc::new(cfg)
}

fn row(id: &str, t_s: i64, head: f64, flags: Flags) -> ReadingRow {
    ReadingRow {
        instrument: id.into(),
        t_ms: t_s * 1000,
        arrival_ms: t_s * 1000,
        raw: 0.0,
        temperature_c: None,
        baro_kpa: None,
        eng_value: 0.0,
        eng_unit: "m",
        pressure_kpa: None,
        pressure_head_m: None,
        total_head_m: Some(head),
        flags,
    }
}

fn find<'a>(rows: &'a [DerivedRow], object: &str, quantity: &str) -> &'a DerivedRow {
    rows.iter()
        .find(|r| r.object == object && r.quantity == quantity)
        .unwrap_or_else(|| panic!("no {object}/{quantity} in {rows:?}"))
}

fn nest_cfg() -> Arc<Config> {
    config(Objects {
        nests: vec![Nest {
            id: "N1".into(),
            site: "ash-bend".into(),
            piezometers: vec!["AB-PZ-1A".into(), "AB-PZ-1B".into()],
            deadband: 0.02,
            tolerance_s: 3600,
        }],
        ..Objects::default()
    })
}

#[test]
fn nest_gradient_positive_upward() {
    // AB-PZ-1A tip 95.0 m, AB-PZ-1B tip 86.0 m (example config). Heads 101.2 (upper) and
    // 102.7 (lower): i_v = (102.7 − 101.2)/(95.0 − 86.0) = 1/6, upward [practice formula,
    // as in check value #11].
    let mut d = Deriver::new(nest_cfg());
    assert!(d
        .on_reading(&row("AB-PZ-1A", 1000, 101.2, Flags::empty()))
        .iter()
        .all(|r| r.value.is_none()));
    let out = d.on_reading(&row("AB-PZ-1B", 1060, 102.7, Flags::empty()));
    let g = find(&out, "N1", "vertical_gradient");
    assert!((g.value.unwrap() - 1.5 / 9.0).abs() < 1e-12);
    assert_eq!(g.t_ms, 1_060_000);
    assert_eq!(g.inputs, vec!["AB-PZ-1A", "AB-PZ-1B"]);
    assert_eq!(find(&out, "N1", "flow_direction").value, Some(1.0));
    // Reversed heads: downward flow.
    let out = d.on_reading(&row("AB-PZ-1B", 1120, 100.0, Flags::empty()));
    assert_eq!(find(&out, "N1", "flow_direction").value, Some(-1.0));
}

#[test]
fn missing_stale_and_rejected_inputs_give_no_value_with_a_reason_suspect_ones_keep_it() {
    let mut d = Deriver::new(nest_cfg());
    let out = d.on_reading(&row("AB-PZ-1A", 0, 101.0, Flags::empty()));
    let g = find(&out, "N1", "vertical_gradient");
    assert!(
        g.value.is_none()
            && g.reason
                .as_deref()
                .unwrap()
                .contains("AB-PZ-1B has no reading")
    );
    // The other tip two hours later: the first is stale (tolerance 1 h).
    let out = d.on_reading(&row("AB-PZ-1B", 7200, 102.0, Flags::empty()));
    let g = find(&out, "N1", "vertical_gradient");
    assert!(
        g.value.is_none() && g.reason.as_deref().unwrap().contains("stale"),
        "{g:?}"
    );
    // Fresh but suspect (a missing barometer, a stuck sensor): the value is kept, with a note
    // naming the input — a soft flag never blanks a safety value.
    let out = d.on_reading(&row("AB-PZ-1A", 7300, 101.0, Flags::BARO_MISSING));
    let g = find(&out, "N1", "vertical_gradient");
    assert!((g.value.unwrap() - 1.0 / 9.0).abs() < 1e-12, "{g:?}");
    assert_eq!(
        g.reason.as_deref(),
        Some("suspect input AB-PZ-1A: baro_missing")
    );
    let out = d.on_reading(&row("AB-PZ-1A", 7350, 101.0, Flags::FLATLINE));
    assert!(find(&out, "N1", "vertical_gradient").value.is_some());
    // Rejected (a confirmed spike): no value, with the reason; recomputed at its own time.
    let out = d.reject("AB-PZ-1A", 7_350_000, 101.0, Flags::SPIKE);
    let g = find(&out, "N1", "vertical_gradient");
    assert_eq!(g.t_ms, 7_350_000);
    assert!(
        g.value.is_none()
            && crate::derive::is_input_problem(g.reason.as_deref().unwrap())
            && g.reason.as_deref().unwrap().contains("rejected: spike"),
        "{g:?}"
    );
    // A reading flagged only for its time source is usable.
    let out = d.on_reading(&row("AB-PZ-1A", 7400, 101.0, Flags::TIME_FROM_ARRIVAL));
    assert!(find(&out, "N1", "vertical_gradient").value.is_some());
}

fn toe_cfg(water: Option<Level>) -> Arc<Config> {
    config(Objects {
        toes: vec![ToeCheck {
            id: "T1".into(),
            site: "ash-bend".into(),
            piezometer: "AB-PZ-1B".into(),
            ground_elevation_m: 10.0,
            water,
            blanket_thickness_m: 2.5,
            critical: CriticalGradientFrom::UnitWeight {
                gamma_sat_kn_m3: 18.5,
            },
            fs_target: 1.6,
            tolerance_s: 3600,
        }],
        ..Objects::default()
    })
}

#[test]
fn toe_check_value_5() {
    // Check value #5: head at blanket base 12.0 m, landside ground 10.0 m, z_t 2.5 m,
    // γsat 18.5, γw 9.81 → i = 0.800, FS = 1.10729 (EM 1110-2-1913 App. B eqs. as reproduced in
    // the USACE RMC piping manual; values [derived]).
    let mut d = Deriver::new(toe_cfg(None));
    let out = d.on_reading(&row("AB-PZ-1B", 100, 12.0, Flags::empty()));
    assert!((find(&out, "T1", "exit_gradient").value.unwrap() - 0.8).abs() < 1e-5);
    assert!((find(&out, "T1", "factor_of_safety").value.unwrap() - 1.10729).abs() < 1e-5);
    assert!((find(&out, "T1", "excess_head").value.unwrap() - 2.0).abs() < 1e-12);
    // Allowable head for FS 1.6: 10 + i_c·z_t/1.6 with i_c = (18.5 − 9.81)/9.81.
    let i_c = (18.5 - 9.81) / 9.81;
    assert!(
        (find(&out, "T1", "allowable_head").value.unwrap() - (10.0 + i_c * 2.5 / 1.6)).abs() < 1e-9
    );
}

#[test]
fn toe_fs_not_applicable_without_upward_gradient_and_ponded_water_counts() {
    let mut d = Deriver::new(toe_cfg(Some(Level::Fixed(10.5))));
    let out = d.on_reading(&row("AB-PZ-1B", 100, 10.2, Flags::empty()));
    let fs = find(&out, "T1", "factor_of_safety");
    assert!(fs.value.is_none() && fs.reason.as_deref().unwrap().contains("not applicable"));
    // With ponded water at 10.5 m the excess head is measured from the water: 12.0 − 10.5.
    let out = d.on_reading(&row("AB-PZ-1B", 200, 12.0, Flags::empty()));
    assert!((find(&out, "T1", "excess_head").value.unwrap() - 1.5).abs() < 1e-12);
}

#[test]
fn blanket_check_value_6() {
    // Check value #6: H 6 m, L2 40 m, d 20 m, k_f 1e-3, k_b 1e-6 m/s, z_bl 3 m, river at
    // L1 100 m, endless landside blanket → h_o 3.87026 m, i 1.29009, Q 3.16005e-4 m²/s,
    // h(100 m) 2.57300 m (Bennett 1946; EM 1110-2-1913 App. B; values [derived]).
    let cfg = config(Objects {
        blankets: vec![BlanketReach {
            id: "R".into(),
            site: "ash-bend".into(),
            river_gauge: "AB-RIVER".into(),
            landside_level: Level::Fixed(96.0),
            toe_piezometer: Some("AB-PZ-1B".into()),
            base_width_m: 40.0,
            foundation_thickness_m: 20.0,
            k_foundation_m_s: 1e-3,
            k_blanket_m_s: 1e-6,
            blanket_thickness_m: 3.0,
            riverside: RiversideCase::OpenEntranceAt { l1_m: 100.0 },
            landside: LandsideCase::Endless,
            distances: vec![LandwardDistance {
                m: 100.0,
                label: "100m".into(),
            }],
            tolerance_s: 3600,
        }],
        ..Objects::default()
    });
    let mut d = Deriver::new(cfg);
    d.on_reading(&row("AB-PZ-1B", 0, 96.0 + 3.87026, Flags::empty()));
    let out = d.on_reading(&row("AB-RIVER", 60, 102.0, Flags::empty()));
    let rel = |q: &str, want: f64| {
        let v = find(&out, "R", q).value.unwrap();
        assert!(((v - want) / want).abs() < 1e-4, "{q}: {v} vs {want}");
    };
    rel("net_head", 6.0);
    rel("expected_excess_head", 3.87026);
    rel("expected_exit_gradient", 1.29009);
    rel("expected_flow", 3.16005e-4);
    rel("expected_excess_head_at_100m", 2.57300);
    // The measured toe head equals the expected one, so the back-calculated x3 is 1/c.
    rel("effective_x3", 244.949);
    rel("measured_residual_ratio", 3.87026 / 6.0);
    // River below the landside level: no value, with the reason.
    let out = d.on_reading(&row("AB-RIVER", 120, 95.0, Flags::empty()));
    let r = find(&out, "R", "expected_excess_head");
    assert!(r.value.is_none() && r.reason.as_deref().unwrap().contains("no net head"));
}

#[test]
fn section_exit_point_on_the_downstream_slope() {
    let cfg = config(Objects {
        sections: vec![Section {
            id: "S".into(),
            site: "tarn-hollow".into(),
            ground: vec![
                (0.0, 200.0),
                (40.0, 225.0),
                (48.0, 225.0),
                (88.0, 200.0),
                (120.0, 199.0),
            ],
            pool_gauge: "TH-POOL".into(),
            tail: Some(Level::Fixed(199.3)),
            toe_station_m: 88.0,
            piezometers: vec!["TH-PZ-1".into(), "TH-PZ-2".into(), "TH-PZ-3".into()],
            tolerance_s: 3600,
            model: None,
        }],
        ..Objects::default()
    });
    let mut d = Deriver::new(cfg);
    // Stations 50, 65, 80 (example config). A high head at station 80 breaks out on the slope.
    for (id, h) in [("TH-PZ-1", 213.0), ("TH-PZ-2", 209.0), ("TH-POOL", 220.0)] {
        d.on_reading(&row(id, 0, h, Flags::empty()));
    }
    let out = d.on_reading(&row("TH-PZ-3", 0, 206.0, Flags::empty()));
    let st = find(&out, "S", "exit_station").value.unwrap();
    let el = find(&out, "S", "exit_elevation").value.unwrap();
    // On the slope from (48, 225) to (88, 200).
    assert!((48.0..=88.0).contains(&st));
    assert!((el - (225.0 - 25.0 * (st - 48.0) / 40.0)).abs() < 1e-9);
    assert!((find(&out, "S", "seepage_face_height").value.unwrap() - (el - 200.0)).abs() < 1e-9);
    // A low head: no breakout, no exit value, zero seepage face.
    let out = d.on_reading(&row("TH-PZ-3", 60, 199.8, Flags::empty()));
    assert!(find(&out, "S", "exit_elevation").value.is_none());
    assert_eq!(find(&out, "S", "seepage_face_height").value, Some(0.0));
}

/// The quantities each kind computes are the registry's (`ObjectKind::quantities`), with the
/// same units, both when they have values and when an input is missing: the example site's
/// objects, every input given a reading that lets each object compute, then one object's input
/// taken away.
#[test]
fn every_kind_computes_its_registry_quantities_with_their_units() {
    let cfg = Arc::new(crate::config::load_dir(&example_dir()).expect("example config"));
    let heads = [
        ("AB-RIVER", 102.0),
        ("AB-PZ-1A", 99.5),
        ("AB-PZ-1B", 100.0),
        ("AB-PZ-2A", 99.0),
        ("AB-PZ-2B", 99.8),
        ("AB-SP-3", 98.0),
        ("TH-POOL", 220.0),
        ("TH-TAIL", 199.3),
        ("TH-PZ-1", 213.0),
        ("TH-PZ-2", 209.0),
        ("TH-PZ-3", 206.0),
    ];
    let mut d = Deriver::new(Arc::clone(&cfg));
    let mut out = Vec::new();
    for (id, h) in heads {
        out.extend(d.on_reading(&row(id, 0, h, Flags::empty())));
    }
    assert_eq!(cfg.objects.all().count(), 6, "the example's objects");
    for kind in ObjectKind::ALL {
        let objects = cfg.objects.of(kind);
        assert!(!objects.is_empty(), "the example has no {kind:?}");
        for (id, _) in objects {
            for &(q, unit) in kind.quantities() {
                let newest = out.iter().rev().find(|r| r.object == id && r.quantity == q);
                let r = newest.unwrap_or_else(|| panic!("{kind:?} {id}: no {q}"));
                assert_eq!(r.unit, unit, "{kind:?} {id}: unit of {q}");
                assert!(r.value.is_some(), "{kind:?} {id}: {q} has no value: {r:?}");
            }
        }
    }
    // A stale input (two hours later, beyond every tolerance): the same names and units, no value.
    let mut d = Deriver::new(Arc::clone(&cfg));
    d.on_reading(&row("TH-PZ-1", 0, 213.0, Flags::empty()));
    d.on_reading(&row("AB-PZ-1A", 0, 99.5, Flags::empty()));
    let later = 4 * 3600;
    let mut out = Vec::new();
    for (id, h) in [("AB-PZ-1B", 100.0), ("AB-RIVER", 102.0), ("TH-POOL", 220.0)] {
        out.extend(d.on_reading(&row(id, later, h, Flags::empty())));
    }
    for (kind, id) in [(ObjectKind::Nest, "AB-N1"), (ObjectKind::Section, "TH-S1")] {
        for &(q, unit) in kind.quantities() {
            let r = out.iter().rev().find(|r| r.object == id && r.quantity == q);
            let r = r.unwrap_or_else(|| panic!("{kind:?} {id}: no {q} without its input"));
            assert_eq!(r.unit, unit, "{kind:?} {id}: unit of {q}");
            assert!(r.value.is_none() && r.reason.is_some(), "{r:?}");
        }
    }
}

fn example_dir() -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("config")
}
