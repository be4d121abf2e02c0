//! Check values #6 and #7 (../shared/check-values.md), the head profiles landward of the toe
//! (differential equation and boundary conditions checked numerically) and properties.

use super::*;
use crate::domain::testutil::{rel_close, Rng};

fn check_6_config() -> BlanketConfig {
    BlanketConfig {
        net_head_m: 6.0,
        base_width_m: 40.0,
        foundation_thickness_m: 20.0,
        k_foundation_m_s: 1e-3,
        k_blanket_m_s: 1e-6,
        blanket_thickness_m: 3.0,
        riverside: Riverside::OpenEntranceAt { l1_m: 100.0 },
        landside: Landside::Endless,
    }
}

// #6 — H 6 m, L2 40 m, d 20 m, k_f 1e-3 m/s, k_b 1e-6 m/s, z_bl 3 m, river at L1 100 m, endless
// landside blanket. Bennett (1946); EM 1110-2-1913 App. B [pub]; values [derived] from the
// published formulas with these inputs.
#[test]
fn check_6_leaky_blankets_river_at_l1_endless_landside() {
    let s = solve(&check_6_config()).unwrap();
    let tol = 1e-4; // relative, check-values #6
    assert!(rel_close(s.c_per_m, 0.00408248, tol), "c = {}", s.c_per_m); // #6 [derived]
    assert!(rel_close(s.x1_m, 94.7914, tol), "x1 = {}", s.x1_m); // #6 [derived]
    assert!(rel_close(s.x3_m, 244.949, tol), "x3 = {}", s.x3_m); // #6 [derived]
    assert!(
        rel_close(s.toe_head_m, 3.87026, tol),
        "h_o = {}",
        s.toe_head_m
    ); // #6 [derived]
    assert!(
        rel_close(s.exit_gradient, 1.29009, tol),
        "i = {}",
        s.exit_gradient
    ); // #6
    assert!(
        rel_close(s.flow_m2_s, 3.16005e-4, tol),
        "Q = {}",
        s.flow_m2_s
    ); // #6 [derived]
    let h100 = s.head_landward_m(100.0).unwrap();
    assert!(rel_close(h100, 2.57300, tol), "h(100) = {h100}"); // #6 [derived]
    assert!(rel_close(s.residual_head_ratio, 3.87026 / 6.0, tol));
    assert!(!s.outside_validity); // k_f/k_b = 1000
}

// #7 — impervious blankets: H 6, L1 100, L2 40, L3 200, k_f 1e-3, d 20 → h_o = 3.52941 m,
// Q = 3.52941e-4 m²/s. EM 1110-2-1913 App. B formulas [pub]; values [derived]; x1 = L1 and
// x3 = L3 for impervious blankets [practice/memory].
#[test]
fn check_7_impervious_blankets() {
    let config = BlanketConfig {
        k_blanket_m_s: 0.0,
        riverside: Riverside::Impervious { l1_m: 100.0 },
        landside: Landside::Impervious { l3_m: 200.0 },
        ..check_6_config()
    };
    let s = solve(&config).unwrap();
    assert!(
        rel_close(s.toe_head_m, 3.52941, 1e-5),
        "h_o = {}",
        s.toe_head_m
    ); // #7 [derived]
    assert!(
        rel_close(s.flow_m2_s, 3.52941e-4, 1e-5),
        "Q = {}",
        s.flow_m2_s
    ); // #7 [derived]
    assert_eq!(s.c_per_m, 0.0);
    assert!(!s.outside_validity);
    // Linear decline to zero at the open end, nothing beyond it.
    assert!(rel_close(
        s.head_landward_m(100.0).unwrap(),
        3.52941 / 2.0,
        1e-5
    ));
    assert_eq!(s.head_landward_m(200.0), Some(0.0));
    assert_eq!(s.head_landward_m(200.1), None);
    assert_eq!(s.head_landward_m(-1.0), None);
}

#[test]
fn no_riverside_blanket_uses_0_43_d() {
    let config = BlanketConfig {
        riverside: Riverside::NoBlanket,
        ..check_6_config()
    };
    let s = solve(&config).unwrap();
    // x1 = 0.43·d, EM 1110-2-1913 App. B [pub]; 0.43·20 = 8.6 m [derived].
    assert!(rel_close(s.x1_m, 8.6, 1e-12));
    let expected = 6.0 * s.x3_m / (8.6 + 40.0 + s.x3_m);
    assert!(rel_close(s.toe_head_m, expected, 1e-12));
}

#[test]
fn low_permeability_contrast_is_flagged() {
    let config = BlanketConfig {
        k_blanket_m_s: 2e-4, // k_f/k_b = 5 < 10
        ..check_6_config()
    };
    assert!(solve(&config).unwrap().outside_validity);
    let at_limit = BlanketConfig {
        k_blanket_m_s: 1e-4, // exactly 10: inside
        ..check_6_config()
    };
    assert!(!solve(&at_limit).unwrap().outside_validity);
}

#[test]
fn invalid_configs_are_typed_errors() {
    let leaky_without_k_b = BlanketConfig {
        k_blanket_m_s: 0.0,
        ..check_6_config()
    };
    assert!(matches!(
        solve(&leaky_without_k_b),
        Err(BlanketError::NeedsLeakyBlanket(_))
    ));
    let zero_h = BlanketConfig {
        net_head_m: 0.0,
        ..check_6_config()
    };
    assert!(matches!(
        solve(&zero_h),
        Err(BlanketError::NotPositive { .. })
    ));
    let bad_l3 = BlanketConfig {
        landside: Landside::OpenExitAt { l3_m: -5.0 },
        ..check_6_config()
    };
    assert!(matches!(
        solve(&bad_l3),
        Err(BlanketError::NotPositive { .. })
    ));
    let neg_k = BlanketConfig {
        k_blanket_m_s: -1e-6,
        ..check_6_config()
    };
    assert!(matches!(solve(&neg_k), Err(BlanketError::Negative { .. })));
    let nan = BlanketConfig {
        base_width_m: f64::NAN,
        ..check_6_config()
    };
    assert!(matches!(solve(&nan), Err(BlanketError::NonFinite(_))));
}

#[test]
fn back_calculation_rejects_impossible_heads() {
    assert_eq!(back_calculated_x3_m(6.0, 6.0, 94.8, 40.0), None);
    assert_eq!(back_calculated_x3_m(7.0, 6.0, 94.8, 40.0), None);
    assert_eq!(back_calculated_x3_m(-0.1, 6.0, 94.8, 40.0), None);
    assert_eq!(back_calculated_x3_m(f64::NAN, 6.0, 94.8, 40.0), None);
    assert_eq!(back_calculated_x3_m(0.0, 6.0, 94.8, 40.0), Some(0.0));
}

fn random_config(rng: &mut Rng, landside: Landside) -> BlanketConfig {
    let riverside = match rng.int(0, 2) {
        0 => Riverside::OpenEntranceAt {
            l1_m: rng.range(5.0, 2000.0),
        },
        1 => Riverside::NoBlanket,
        _ => Riverside::Impervious {
            l1_m: rng.range(5.0, 500.0),
        },
    };
    BlanketConfig {
        net_head_m: rng.range(0.1, 15.0),
        base_width_m: rng.range(0.0, 150.0),
        foundation_thickness_m: rng.range(2.0, 60.0),
        k_foundation_m_s: rng.log_range(1e-5, 1e-2),
        k_blanket_m_s: rng.log_range(1e-9, 1e-5),
        blanket_thickness_m: rng.range(0.3, 10.0),
        riverside,
        landside,
    }
}

fn random_landside(rng: &mut Rng) -> Landside {
    let l3_m = rng.range(1.0, 3000.0);
    match rng.int(0, 3) {
        0 => Landside::Endless,
        1 => Landside::SeepageBlockAt { l3_m },
        2 => Landside::OpenExitAt { l3_m },
        _ => Landside::Impervious { l3_m },
    }
}

// Property: h_o lies in [0, H], h_o/H matches, and back-calculating x3 from h_o gives x3 again.
#[test]
fn property_toe_head_bounded_and_back_calculation_round_trips() {
    let mut rng = Rng::new(0xB1A_4E7);
    for _ in 0..5000 {
        let landside = random_landside(&mut rng);
        let config = random_config(&mut rng, landside);
        let s = solve(&config).unwrap();
        let h = config.net_head_m;
        assert!(
            s.toe_head_m >= 0.0 && s.toe_head_m <= h,
            "{config:?} → {s:?}"
        );
        assert!(rel_close(s.residual_head_ratio * h, s.toe_head_m, 1e-12));
        let x3 = back_calculated_x3_m(s.toe_head_m, h, s.x1_m, config.base_width_m).unwrap();
        assert!(rel_close(x3, s.x3_m, 1e-8), "{x3} vs {}", s.x3_m);
        // Continuity: Q = k_f·d·(H − h_o)/(x1 + L2) = k_f·d·h_o/x3.
        let q_land =
            config.k_foundation_m_s * config.foundation_thickness_m * s.toe_head_m / s.x3_m;
        assert!(rel_close(q_land, s.flow_m2_s, 1e-9));
    }
}

// Property: h_o rises with x3 — with L3 for an open exit, with 1/c (a tighter blanket) for an
// endless blanket, and falls with L3 for a seepage block (x3 = 1/(c·tanh(c·L3)) shrinks).
#[test]
fn property_toe_head_rises_with_x3() {
    let mut rng = Rng::new(77);
    for _ in 0..3000 {
        let base = random_config(&mut rng, Landside::Endless);
        let l3 = rng.range(1.0, 2000.0);
        let longer = l3 * rng.range(1.01, 3.0);
        let solve_with = |landside, k_b| {
            solve(&BlanketConfig {
                landside,
                k_blanket_m_s: k_b,
                ..base
            })
            .unwrap()
        };
        let k_b = base.k_blanket_m_s;
        let a = solve_with(Landside::OpenExitAt { l3_m: l3 }, k_b);
        let b = solve_with(Landside::OpenExitAt { l3_m: longer }, k_b);
        // A ulp of slack: tanh saturates for long blankets.
        let slack = 1.0 + 1e-12;
        assert!(b.x3_m * slack >= a.x3_m && b.toe_head_m * slack >= a.toe_head_m);
        let a = solve_with(Landside::SeepageBlockAt { l3_m: l3 }, k_b);
        let b = solve_with(Landside::SeepageBlockAt { l3_m: longer }, k_b);
        assert!(b.x3_m <= a.x3_m * slack && b.toe_head_m <= a.toe_head_m * slack);
        let loose = solve_with(Landside::Endless, k_b);
        let tight = solve_with(Landside::Endless, k_b / rng.range(1.5, 100.0));
        assert!(tight.c_per_m < loose.c_per_m);
        assert!(tight.x3_m > loose.x3_m && tight.toe_head_m > loose.toe_head_m);
    }
}

// The landside head profiles: h(0) = h_o, h'' = c²·h by central differences, the boundary
// condition at L3, and −h'(0) = h_o/x3 (the same underseepage as Q = k_f·d·h_o/x3).
#[test]
fn head_profiles_satisfy_the_equation_and_boundary_conditions() {
    let mut rng = Rng::new(0xDEC0DE);
    for _ in 0..2000 {
        let landside = match rng.int(0, 2) {
            0 => Landside::Endless,
            1 => Landside::SeepageBlockAt {
                l3_m: rng.range(5.0, 3000.0),
            },
            _ => Landside::OpenExitAt {
                l3_m: rng.range(5.0, 3000.0),
            },
        };
        let config = random_config(&mut rng, landside);
        let s = solve(&config).unwrap();
        let c = s.c_per_m;
        let h_o = s.toe_head_m;
        let head = |x: f64| s.head_landward_m(x).unwrap();
        assert!(rel_close(head(0.0), h_o, 1e-12));
        let l3 = match landside {
            Landside::SeepageBlockAt { l3_m } | Landside::OpenExitAt { l3_m } => l3_m,
            _ => 5.0 / c,
        };
        // Step a thousandth of 1/c, but small against the blanket length too.
        let dx = (1e-3 / c).min(l3 * 1e-3);
        // The equation at an interior point.
        let x = rng.range(2.0 * dx, l3 - 2.0 * dx);
        let second = (head(x + dx) - 2.0 * head(x) + head(x - dx)) / (dx * dx);
        let scale = c * c * h_o;
        assert!(
            (second - c * c * head(x)).abs() <= 1e-4 * scale,
            "{landside:?} c={c} x={x}: h''={second}, c²h={}",
            c * c * head(x)
        );
        // Slope at the toe, second-order one-sided.
        let slope0 = (-3.0 * head(0.0) + 4.0 * head(dx) - head(2.0 * dx)) / (2.0 * dx);
        assert!(
            (-slope0 - h_o / s.x3_m).abs() <= 1e-5 * c * h_o,
            "{landside:?}: −h'(0) = {} vs h_o/x3 = {}",
            -slope0,
            h_o / s.x3_m
        );
        match landside {
            Landside::OpenExitAt { l3_m } => {
                assert!(head(l3_m).abs() <= 1e-12 * h_o);
                assert_eq!(s.head_landward_m(l3_m * 1.001), None);
            }
            Landside::SeepageBlockAt { l3_m } => {
                let end =
                    (3.0 * head(l3_m) - 4.0 * head(l3_m - dx) + head(l3_m - 2.0 * dx)) / (2.0 * dx);
                assert!(end.abs() <= 1e-5 * c * h_o, "h'(L3) = {end}");
            }
            _ => {
                assert!(head(50.0 / c) <= 1e-20 * h_o.max(1.0));
            }
        }
        // Head never rises landward.
        let mut previous = h_o;
        for k in 1..=20 {
            let h = head((l3 * k as f64 / 20.0).min(l3));
            assert!(h <= previous * (1.0 + 1e-12) && h >= 0.0);
            previous = h;
        }
    }
}
