//! Check values #1–#5 (../shared/check-values.md) and properties of the toe check.

use super::*;
use crate::domain::testutil::{close, Rng};

// #1 — Gs 2.65, e 0.65 → i_c = 1.000. Formula: Terzaghi, Peck & Mesri (1996) [pub];
// value [derived].
#[test]
fn check_1_critical_gradient_gs_e() {
    let i_c = critical_gradient_from_gs_e(2.65, 0.65).unwrap();
    assert!(close(i_c, 1.000, 1e-9), "{i_c}"); // check-values #1 [derived]
}

// #2 — Gs 2.70, e 0.60 → i_c = 1.0625. Terzaghi formula [pub]; value [derived].
#[test]
fn check_2_critical_gradient_gs_e() {
    let i_c = critical_gradient_from_gs_e(2.70, 0.60).unwrap();
    assert!(close(i_c, 1.0625, 1e-9), "{i_c}"); // check-values #2 [derived]
}

// #3 — γsat 18.5 kN/m³, γw 9.81 → i_c = 0.885831. i_c = γ′/γw (Terzaghi) [pub]; value [derived].
#[test]
fn check_3_critical_gradient_unit_weights() {
    let i_c = critical_gradient_from_unit_weights(18.5, 9.81).unwrap();
    assert!(close(i_c, 0.885831, 1e-6), "{i_c}"); // check-values #3 [derived]
}

// #4 — γsat 110 pcf, γw 62.4 pcf → i_c = 0.762821. Same formula [pub]; value [derived].
// Given in pcf and converted to kN/m³ first, as configuration in US units would be.
#[test]
fn check_4_critical_gradient_pcf() {
    let i_c = critical_gradient_from_unit_weights(pcf_to_kn_m3(110.0), pcf_to_kn_m3(62.4)).unwrap();
    assert!(close(i_c, 0.762821, 1e-6), "{i_c}"); // check-values #4 [derived]
                                                  // 62.4 pcf agrees with the site constant in units.rs.
    assert!(close(
        pcf_to_kn_m3(62.4),
        crate::domain::units::GAMMA_W_62_4_PCF_KN_M3,
        1e-12
    ));
}

// #5 — head at blanket base 12.0 m, landside ground 10.0 m, z_t 2.5 m, γsat 18.5, γw 9.81 →
// i = 0.800, FS = 1.10729. EM 1110-2-1913 App. B via USACE RMC BEP initiation manual eqs. 6, 9,
// 10 [pub]; value [derived].
#[test]
fn check_5_exit_gradient_and_fs() {
    let i_c = critical_gradient_from_unit_weights(18.5, 9.81).unwrap();
    let check = toe_check(&ToeInput {
        blanket_base_head_m: 12.0,
        ground_elevation_m: 10.0,
        water_level_m: None,
        blanket_thickness_m: 2.5,
        critical_gradient: i_c,
    })
    .unwrap();
    assert!(close(check.exit_gradient, 0.800, 1e-5)); // check-values #5 [derived]
    let fs = check.factor_of_safety.value().unwrap();
    assert!(close(fs, 1.10729, 1e-5), "FS = {fs}"); // check-values #5 [derived]
    assert!(close(check.excess_head_m, 2.0, 1e-12));
    // The allowable head for FS = 1.10729 is (nearly) the head that gave it.
    let allowed = allowable_blanket_base_head_m(10.0, None, 2.5, i_c, fs).unwrap();
    assert!(close(allowed, 12.0, 1e-9));
}

#[test]
fn ponded_water_above_ground_is_the_reference() {
    let check = toe_check(&ToeInput {
        blanket_base_head_m: 12.0,
        ground_elevation_m: 10.0,
        water_level_m: Some(10.5),
        blanket_thickness_m: 2.5,
        critical_gradient: 0.9,
    })
    .unwrap();
    assert_eq!(check.reference_level_m, 10.5);
    assert!(close(check.excess_head_m, 1.5, 1e-12));
    assert!(close(check.head_above_ground_m, 2.0, 1e-12));
    assert!(close(check.exit_gradient, 0.6, 1e-12));
    // Ponded water below ground does not count.
    let low = toe_check(&ToeInput {
        water_level_m: Some(9.0),
        blanket_thickness_m: 2.0,
        ..ToeInput {
            blanket_base_head_m: 12.0,
            ground_elevation_m: 10.0,
            water_level_m: None,
            blanket_thickness_m: 2.5,
            critical_gradient: 0.9,
        }
    })
    .unwrap();
    assert_eq!(low.reference_level_m, 10.0);
    // Allowable: 10.5 + 0.9·2.5/1.5 = 12.0.
    let a = allowable_blanket_base_head_m(10.0, Some(10.5), 2.5, 0.9, 1.5).unwrap();
    assert!(close(a, 12.0, 1e-12));
}

#[test]
fn head_at_or_below_ground_makes_fs_not_applicable() {
    for head in [10.0, 9.2, 3.0] {
        let check = toe_check(&ToeInput {
            blanket_base_head_m: head,
            ground_elevation_m: 10.0,
            water_level_m: None,
            blanket_thickness_m: 2.0,
            critical_gradient: 1.0,
        })
        .unwrap();
        assert!(check.exit_gradient <= 0.0);
        assert!(check.excess_head_m <= 0.0);
        assert_eq!(check.factor_of_safety, SafetyFactor::NotApplicable);
        assert_eq!(check.factor_of_safety.value(), None);
    }
    assert_eq!(factor_of_safety(1.0, 0.0), SafetyFactor::NotApplicable);
    assert_eq!(factor_of_safety(1.0, -0.3), SafetyFactor::NotApplicable);
    assert_eq!(factor_of_safety(1.0, f64::NAN), SafetyFactor::NotApplicable);
}

#[test]
fn invalid_inputs_are_typed_errors() {
    assert_eq!(
        critical_gradient_from_unit_weights(9.0, 9.81),
        Err(ToeError::SoilNotHeavierThanWater {
            gamma_sat: 9.0,
            gamma_w: 9.81
        })
    );
    assert_eq!(
        critical_gradient_from_unit_weights(9.81, 9.81),
        Err(ToeError::SoilNotHeavierThanWater {
            gamma_sat: 9.81,
            gamma_w: 9.81
        })
    );
    assert_eq!(
        critical_gradient_from_unit_weights(18.0, 0.0),
        Err(ToeError::NonPositiveWater(0.0))
    );
    assert_eq!(
        critical_gradient_from_gs_e(1.0, 0.5),
        Err(ToeError::SpecificGravityNotAboveOne(1.0))
    );
    assert_eq!(
        critical_gradient_from_gs_e(2.65, -0.1),
        Err(ToeError::NegativeVoidRatio(-0.1))
    );
    assert!(critical_gradient_from_gs_e(2.65, 0.0).is_ok());
    let base = ToeInput {
        blanket_base_head_m: 12.0,
        ground_elevation_m: 10.0,
        water_level_m: None,
        blanket_thickness_m: 0.0,
        critical_gradient: 1.0,
    };
    assert_eq!(toe_check(&base), Err(ToeError::NonPositiveThickness(0.0)));
    let nan = ToeInput {
        blanket_base_head_m: f64::NAN,
        blanket_thickness_m: 2.0,
        ..base
    };
    assert!(matches!(toe_check(&nan), Err(ToeError::NonFinite(_))));
    assert_eq!(
        allowable_blanket_base_head_m(10.0, None, 2.0, 1.0, 0.0),
        Err(ToeError::NonPositiveTarget(0.0))
    );
    assert_eq!(
        allowable_blanket_base_head_m(10.0, None, 2.0, -1.0, 1.5),
        Err(ToeError::NonPositiveCriticalGradient(-1.0))
    );
}

// Property: for fixed soil and ground, FS falls as the exit gradient rises (higher head at the
// blanket base or thinner blanket), and the allowable head gives back the target FS.
#[test]
fn property_fs_falls_as_gradient_rises() {
    let mut rng = Rng::new(0xF5);
    for _ in 0..5000 {
        let i_c = critical_gradient_from_gs_e(rng.range(2.5, 2.8), rng.range(0.3, 1.2)).unwrap();
        let ground = rng.range(0.0, 200.0);
        let z_t = rng.range(0.3, 10.0);
        let h1 = ground + rng.range(0.001, 10.0);
        let h2 = h1 + rng.range(0.001, 5.0);
        let check = |head: f64| {
            toe_check(&ToeInput {
                blanket_base_head_m: head,
                ground_elevation_m: ground,
                water_level_m: None,
                blanket_thickness_m: z_t,
                critical_gradient: i_c,
            })
            .unwrap()
        };
        let (c1, c2) = (check(h1), check(h2));
        assert!(c2.exit_gradient > c1.exit_gradient);
        let (fs1, fs2) = (
            c1.factor_of_safety.value().unwrap(),
            c2.factor_of_safety.value().unwrap(),
        );
        assert!(
            fs2 < fs1,
            "i {} → {}, FS {fs1} → {fs2}",
            c1.exit_gradient,
            c2.exit_gradient
        );
        let target = rng.range(1.0, 3.0);
        let allowed = allowable_blanket_base_head_m(ground, None, z_t, i_c, target).unwrap();
        let at = check(allowed).factor_of_safety.value().unwrap();
        assert!(close(at, target, 1e-9 * target.max(1.0)));
    }
}
