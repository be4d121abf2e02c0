//! Check value #11 (../shared/check-values.md) and properties of the vertical gradient.

use super::*;
use crate::domain::testutil::{close, Rng};

fn tip(z: f64, h: f64) -> Tip {
    Tip {
        tip_elevation_m: z,
        head_m: h,
    }
}

// #11 — upper tip 95.0 m head 101.2 m; lower tip 90.0 m head 102.7 m → i_v = +0.30 (upward).
// Formula: vertical gradient between nested piezometers [practice]; value [derived].
#[test]
fn check_11_nested_pair_upward() {
    let upper = tip(95.0, 101.2);
    let lower = tip(90.0, 102.7);
    let i = vertical_gradient(upper, lower).unwrap();
    assert!(close(i, 0.30, 1e-9), "i_v = {i}"); // check-values #11 [derived]
    assert_eq!(direction(i, 0.01), Direction::Upward);
    // The argument order does not matter.
    assert!(close(vertical_gradient(lower, upper).unwrap(), 0.30, 1e-9));
}

#[test]
fn nest_sorts_tips_and_forms_adjacent_and_overall() {
    // Given out of order: 80 m, 95 m, 90 m.
    let tips = [tip(80.0, 104.0), tip(95.0, 101.2), tip(90.0, 102.7)];
    let g = nest_gradients(&tips, 0.02).unwrap();
    assert_eq!(g.adjacent.len(), 2);
    assert_eq!(g.adjacent[0].lower.tip_elevation_m, 80.0);
    assert_eq!(g.adjacent[0].upper.tip_elevation_m, 90.0);
    assert!(close(g.adjacent[0].gradient, (104.0 - 102.7) / 10.0, 1e-12));
    assert!(close(g.adjacent[1].gradient, 0.30, 1e-12));
    assert!(close(g.overall.gradient, (104.0 - 101.2) / 15.0, 1e-12));
    assert_eq!(g.overall.lower.tip_elevation_m, 80.0);
    assert_eq!(g.overall.upper.tip_elevation_m, 95.0);
}

#[test]
fn deadband_gives_no_direction() {
    assert_eq!(direction(0.009, 0.01), Direction::None);
    assert_eq!(direction(-0.01, 0.01), Direction::None);
    assert_eq!(direction(-0.011, 0.01), Direction::Downward);
    assert_eq!(direction(0.0, 0.0), Direction::None);
    let g = nest_gradients(&[tip(95.0, 100.0), tip(90.0, 100.02)], 0.01).unwrap();
    assert_eq!(g.overall.direction, Direction::None);
}

#[test]
fn errors_are_typed() {
    assert_eq!(
        nest_gradients(&[tip(90.0, 100.0)], 0.0),
        Err(GradientError::TooFewTips { count: 1 })
    );
    assert_eq!(
        nest_gradients(&[], 0.0),
        Err(GradientError::TooFewTips { count: 0 })
    );
    assert!(matches!(
        vertical_gradient(tip(90.0, 100.0), tip(90.0, 101.0)),
        Err(GradientError::CoincidentTips { .. })
    ));
    assert!(matches!(
        nest_gradients(&[tip(80.0, 1.0), tip(90.0, 1.0), tip(90.0005, 2.0)], 0.0),
        Err(GradientError::CoincidentTips { .. })
    ));
    assert_eq!(
        vertical_gradient(tip(f64::NAN, 100.0), tip(90.0, 101.0)),
        Err(GradientError::NonFinite)
    );
    assert_eq!(
        nest_gradients(&[tip(80.0, 1.0), tip(90.0, 1.0)], -0.1),
        Err(GradientError::BadDeadband(-0.1))
    );
}

// Property: the sign of i_v follows the order of the heads — upward when the deeper tip has the
// higher head, downward when lower, whatever the elevations.
#[test]
fn property_sign_follows_head_order() {
    let mut rng = Rng::new(0x5EED_0011);
    for _ in 0..5000 {
        let z_a = rng.range(50.0, 150.0);
        let z_b = z_a + rng.range(0.01, 30.0) * if rng.unit() < 0.5 { 1.0 } else { -1.0 };
        let h_a = rng.range(80.0, 160.0);
        let h_b = rng.range(80.0, 160.0);
        let (a, b) = (tip(z_a, h_a), tip(z_b, h_b));
        let i = vertical_gradient(a, b).unwrap();
        let (deeper, shallower) = if z_a < z_b { (a, b) } else { (b, a) };
        if deeper.head_m > shallower.head_m {
            assert!(i > 0.0, "{a:?} {b:?} → {i}");
            assert_eq!(direction(i, 0.0), Direction::Upward);
        } else if deeper.head_m < shallower.head_m {
            assert!(i < 0.0, "{a:?} {b:?} → {i}");
            assert_eq!(direction(i, 0.0), Direction::Downward);
        } else {
            assert_eq!(i, 0.0);
        }
    }
}

// Property: for a random nest, the overall gradient is the thickness-weighted mean of the
// adjacent gradients (heads telescope), so adjacent and overall are consistent.
#[test]
fn property_overall_is_weighted_mean_of_adjacent() {
    let mut rng = Rng::new(42);
    for _ in 0..2000 {
        let n = rng.int(2, 6);
        let mut z = rng.range(50.0, 100.0);
        let mut tips = Vec::new();
        for _ in 0..n {
            tips.push(tip(z, rng.range(90.0, 120.0)));
            z += rng.range(0.5, 10.0);
        }
        // Shuffle a little: reverse half the time.
        if rng.unit() < 0.5 {
            tips.reverse();
        }
        let g = nest_gradients(&tips, 0.0).unwrap();
        assert_eq!(g.adjacent.len(), n - 1);
        let total_dz = g.overall.upper.tip_elevation_m - g.overall.lower.tip_elevation_m;
        let weighted: f64 = g
            .adjacent
            .iter()
            .map(|p| p.gradient * (p.upper.tip_elevation_m - p.lower.tip_elevation_m))
            .sum();
        assert!(close(weighted / total_dz, g.overall.gradient, 1e-9));
    }
}
