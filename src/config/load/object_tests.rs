//! Tests of the object tables against whole directories: the example objects in SI (and the
//! summary), and every problem of two files reported at its line.

use std::path::Path;

use super::*;
use crate::check_cmd::summary;
use crate::config::model::{
    BlanketReach, CriticalGradientFrom, LandsideCase, LandwardDistance, Level, Nest, RiversideCase,
    Section, ToeCheck,
};

use super::test_dir::problems;

#[test]
fn example_objects_load_in_si() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    let cfg = match load_dir(&dir) {
        Ok(cfg) => cfg,
        Err(p) => panic!("example config has problems:\n{p}"),
    };
    let o = &cfg.objects;
    let nest = |id: &str, a: &str, b: &str| Nest {
        id: id.into(),
        site: "ash-bend".into(),
        piezometers: vec![a.into(), b.into()],
        deadband: 0.02,
        tolerance_s: 5400,
    };
    assert_eq!(
        o.nests,
        [
            nest("AB-N1", "AB-PZ-1A", "AB-PZ-1B"),
            nest("AB-N2", "AB-PZ-2A", "AB-PZ-2B")
        ]
    );
    let toe = |id: &str, pz: &str, critical, fs_target| ToeCheck {
        id: id.into(),
        site: "ash-bend".into(),
        piezometer: pz.into(),
        ground_elevation_m: 96.0,
        water: None,
        blanket_thickness_m: 2.5,
        critical,
        fs_target,
        tolerance_s: 5400,
    };
    let gs_e = CriticalGradientFrom::GsE {
        specific_gravity: 2.65,
        void_ratio: 0.7,
    };
    let unit_weight = CriticalGradientFrom::UnitWeight {
        gamma_sat_kn_m3: 18.5,
    };
    assert_eq!(
        o.toes,
        [
            toe("AB-TOE-1", "AB-PZ-1B", unit_weight, 1.6),
            toe("AB-TOE-2", "AB-PZ-2B", gs_e, 1.6)
        ]
    );
    assert_eq!(
        o.blankets,
        [BlanketReach {
            id: "AB-R2".into(),
            site: "ash-bend".into(),
            river_gauge: "AB-RIVER".into(),
            landside_level: Level::Fixed(96.0),
            toe_piezometer: Some("AB-PZ-1B".into()),
            base_width_m: 40.0,
            foundation_thickness_m: 20.0,
            k_foundation_m_s: 1e-3,
            k_blanket_m_s: 1e-6,
            blanket_thickness_m: 2.5,
            riverside: RiversideCase::OpenEntranceAt { l1_m: 100.0 },
            landside: LandsideCase::Endless,
            distances: [25, 50, 100]
                .map(|d| LandwardDistance {
                    m: f64::from(d),
                    label: format!("{d}m"),
                })
                .to_vec(),
            tolerance_s: 5400,
        }]
    );
    assert_eq!(
        o.sections,
        [Section {
            id: "TH-S1".into(),
            site: "tarn-hollow".into(),
            ground: vec![
                (0.0, 200.0),
                (40.0, 225.0),
                (48.0, 225.0),
                (88.0, 200.0),
                (120.0, 199.0)
            ],
            pool_gauge: "TH-POOL".into(),
            tail: Some(Level::Gauge("TH-TAIL".into())),
            toe_station_m: 88.0,
            piezometers: vec!["TH-PZ-1".into(), "TH-PZ-2".into(), "TH-PZ-3".into()],
            tolerance_s: 5400,
            // The model's contents are checked in `section_model_tests`.
            model: o.sections[0].model.clone(),
        }]
    );
    assert!(
        o.sections[0].model.is_some(),
        "the example dam's section has a model"
    );
    let s = summary(&cfg);
    assert!(s.contains("7 instruments, 5 objects"), "{s}");
    assert!(s.contains("[[nest]] 2: AB-N1, AB-N2"), "{s}");
    assert!(s.contains("[[toe]] 2: AB-TOE-1, AB-TOE-2"), "{s}");
    assert!(s.contains("[[blanket]] 1: AB-R2"), "{s}");
    assert!(s.contains("[[section]] 1: TH-S1"), "{s}");
}

/// A valid site file with one object of each kind; cases change one line (1-based).
const SITE_A: &str = r#"[site]
id = "a"

[[instrument]]
id = "A-PZ"
kind = "standpipe"
tip_elevation = 1.0
installed = "2025-01-01"
interval_s = 60
range = [0.0, 5.0]
[instrument.standpipe]
reference_elevation = 10.0
depth_unit = "m"

[[instrument]]
id = "A-RIVER"
kind = "stage_gauge"
installed = "2025-01-01"
interval_s = 60
range = [0.0, 5.0]
[instrument.stage_gauge]
water_body = "river"
mode = "elevation"
unit = "m"

[[nest]]
id = "A-N1"
piezometers = ["A-PZ", "A-NOPE"]

[[toe]]
id = "A-TOE"
piezometer = "A-RIVER"
ground_elevation = 5.0
water_gauge = "A-RIVER"
water_level = 5.5
blanket_thickness = 1.0
gamma_sat_kn_m3 = 19.0

[[blanket]]
id = "A-R"
river_gauge = "A-RIVER"
landside_level = 5.0
base_width = 10.0
foundation_thickness = 5.0
k_foundation_m_s = 1e-3
k_blanket_m_s = 1e-6
blanket_thickness = 1.0
riverside = "open_entrance"
landside = "infinite"
"#;

const SITE_B: &str = r#"[site]
id = "b"

[[instrument]]
id = "B-POOL"
kind = "stage_gauge"
installed = "2025-01-01"
interval_s = 60
range = [0.0, 5.0]
stage_gauge = { water_body = "reservoir", mode = "elevation", unit = "m" }

[[section]]
id = "A-PZ"
ground = [[0.0, 1.0], [5.0, 2.0], [4.0, 1.0]]
pool_gauge = "B-POOL"
toe_station = 4.5
piezometers = ["A-PZ"]
"#;

#[test]
fn every_object_problem_in_two_files_is_reported_at_its_line() {
    let got = problems(&[("a-site.toml", SITE_A), ("b-site.toml", SITE_B)]);
    let located: Vec<(&str, usize)> = got.iter().map(|(f, l, _)| (f.as_str(), *l)).collect();
    assert_eq!(
        located,
        [
            ("a-site.toml", 28), // A-NOPE: dangling reference
            ("a-site.toml", 32), // piezometer is a stage gauge
            ("a-site.toml", 35), // both water_gauge and water_level
            ("a-site.toml", 39), // l1 missing for open_entrance (at the [[blanket]] header)
            ("a-site.toml", 49), // landside = "infinite"
            ("b-site.toml", 13), // section id = an instrument's id
            ("b-site.toml", 14), // ground stations not increasing
            ("b-site.toml", 17), // piezometer of another site
        ],
        "{got:#?}"
    );
    let msg = |i: usize| got[i].2.as_str();
    assert_eq!(
        msg(0),
        "nest \"A-N1\": key \"piezometers\" names \"A-NOPE\", which is not an instrument in \
         any site file; expected the id of a piezometer (vibrating_wire, pressure_transducer, or \
         standpipe with tip_elevation) of site \"a\""
    );
    assert!(
        msg(1).contains("names \"A-RIVER\", a stage_gauge (at ")
            && msg(1).contains("a-site.toml:16); expected a piezometer"),
        "{}",
        msg(1)
    );
    assert!(
        msg(2).starts_with("toe \"A-TOE\": both \"water_gauge\" and \"water_level\" are set"),
        "{}",
        msg(2)
    );
    assert!(
        msg(3).contains(
            "missing key \"l1\" in [[blanket]] (required for riverside = \"open_entrance\")"
        ),
        "{}",
        msg(3)
    );
    assert!(
        msg(4).contains("key \"landside\" is \"infinite\", expected one of"),
        "{}",
        msg(4)
    );
    assert!(
        msg(5).contains("section id \"A-PZ\" is already used by an instrument at")
            && msg(5).contains("a-site.toml:5"),
        "{}",
        msg(5)
    );
    assert!(
        msg(6).contains("point 3 has station 4 after 5"),
        "{}",
        msg(6)
    );
    assert!(
        msg(7).contains("an instrument of site \"a\"") && msg(7).contains("of this site \"b\""),
        "{}",
        msg(7)
    );
}
