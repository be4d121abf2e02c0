//! One test per published object check: a valid base site with one object of each kind, with
//! one line changed, must give exactly the expected problem on the expected line; plus the
//! defaults and the conversion of lengths from feet.

use crate::config::model::{LandsideCase, Level, RiversideCase};

use super::test_dir::{load, problems};

const SITE: [&str; 53] = [
    "[site]",                                                                       // 1
    "id = \"s\"",                                                                   // 2
    "[[instrument]]",                                                               // 3
    "id = \"P1\"",                                                                  // 4
    "kind = \"pressure_transducer\"",                                               // 5
    "tip_elevation = 10.0",                                                         // 6
    "station = 5.0",                                                                // 7
    "installed = \"2025-01-01\"",                                                   // 8
    "interval_s = 60",                                                              // 9
    "range = [0.0, 50.0]",                                                          // 10
    "pressure_transducer = { output = \"kPa\" }",                                   // 11
    "[[instrument]]",                                                               // 12
    "id = \"P2\"",                                                                  // 13
    "kind = \"standpipe\"",                                                         // 14
    "tip_elevation = 8.0",                                                          // 15
    "station = 6.0",                                                                // 16
    "installed = \"2025-01-01\"",                                                   // 17
    "interval_s = 121",                                                             // 18
    "range = [0.0, 5.0]",                                                           // 19
    "standpipe = { reference_elevation = 12.0, depth_unit = \"m\" }",               // 20
    "[[instrument]]",                                                               // 21
    "id = \"G1\"",                                                                  // 22
    "kind = \"stage_gauge\"",                                                       // 23
    "installed = \"2025-01-01\"",                                                   // 24
    "interval_s = 60",                                                              // 25
    "range = [0.0, 20.0]",                                                          // 26
    "stage_gauge = { water_body = \"river\", mode = \"elevation\", unit = \"m\" }", // 27
    "[[nest]]",                                                                     // 28
    "id = \"C1\"",                                                                  // 29
    "piezometers = [\"P1\", \"P2\"]",                                               // 30
    "[[toe]]",                                                                      // 31
    "id = \"T1\"",                                                                  // 32
    "piezometer = \"P1\"",                                                          // 33
    "ground_elevation = 11.0",                                                      // 34
    "blanket_thickness = 1.0",                                                      // 35
    "gamma_sat_kn_m3 = 19.0",                                                       // 36
    "[[blanket]]",                                                                  // 37
    "id = \"R1\"",                                                                  // 38
    "river_gauge = \"G1\"",                                                         // 39
    "landside_level = 11.0",                                                        // 40
    "base_width = 10.0",                                                            // 41
    "foundation_thickness = 5.0",                                                   // 42
    "k_foundation_m_s = 1e-3",                                                      // 43
    "k_blanket_m_s = 1e-6",                                                         // 44
    "blanket_thickness = 1.0",                                                      // 45
    "riverside = \"no_blanket\"",                                                   // 46
    "landside = \"endless\"",                                                       // 47
    "[[section]]",                                                                  // 48
    "id = \"S1\"",                                                                  // 49
    "ground = [[0.0, 10.0], [5.0, 12.0], [10.0, 9.0]]",                             // 50
    "pool_gauge = \"G1\"",                                                          // 51
    "toe_station = 8.0",                                                            // 52
    "piezometers = [\"P1\", \"P2\"]",                                               // 53
];

/// The base site with lines replaced (`#` comments a line out; text may hold several lines).
fn site_edit(edits: &[(usize, &str)]) -> String {
    let mut lines: Vec<String> = SITE.iter().map(|s| s.to_string()).collect();
    for (n, text) in edits {
        lines[n - 1] = text.to_string();
    }
    lines.join("\n") + "\n"
}

#[test]
fn base_objects_load_with_defaults() {
    let cfg = match load(&[("s.toml", &site_edit(&[]))]) {
        Ok(cfg) => cfg,
        Err(p) => panic!("{p}"),
    };
    let o = &cfg.objects;
    // Default tolerance: 1.5 × the largest input interval, rounded up to whole seconds.
    assert_eq!(o.nests[0].tolerance_s, 182); // P2: 121 s
    assert_eq!(o.nests[0].deadband, 0.02);
    assert_eq!(o.toes[0].tolerance_s, 90); // P1: 60 s
    assert_eq!(o.toes[0].fs_target, 1.6);
    assert_eq!(o.blankets[0].tolerance_s, 90); // G1
    assert_eq!(o.blankets[0].riverside, RiversideCase::NoBlanket);
    assert!(o.blankets[0].distances.is_empty());
    assert_eq!(o.sections[0].tolerance_s, 182);
    assert_eq!(o.sections[0].tail, None);
    // k_blanket_m_s = 0 is allowed with impervious blankets on both sides.
    let impervious = site_edit(&[
        (44, "k_blanket_m_s = 0.0"),
        (46, "riverside = \"impervious\"\nl1 = 30.0"),
        (47, "landside = \"impervious\"\nl3 = 40.0"),
    ]);
    assert_eq!(problems(&[("s.toml", &impervious)]), Vec::new());
}

#[test]
fn object_checks() {
    let cases: &[(usize, &str, usize, &str)] = &[
        (29, "#", 28, "missing key \"id\" in [[nest]]"),
        (
            30,
            "piezometers = [\"P1\"]",
            30,
            "lists 1 piezometer(s), expected at least 2",
        ),
        (
            30,
            "piezometers = [\"P1\", \"P1\"]",
            30,
            "lists \"P1\" twice",
        ),
        (
            30,
            "piezometers = [\"P1\", 3]",
            30,
            "element 2 is 3, expected an instrument id",
        ),
        (
            30,
            "piezometers = \"P1\"",
            30,
            "expected an array of instrument ids",
        ),
        (
            30,
            "piezometers = [\"P1\", \"G1\"]",
            30,
            "names \"G1\", a stage_gauge (at",
        ),
        (
            30,
            "piezometers = [\"P1\", \"P2\"]\ndeadband = -0.1",
            31,
            "is -0.1, expected a number >= 0",
        ),
        (
            30,
            "piezometers = [\"P1\", \"P2\"]\ntolerance_s = 0",
            31,
            "expected between 1 and",
        ),
        (
            33,
            "piezometer = \"NOPE\"",
            33,
            "not an instrument in any site file; expected the id of a piezometer",
        ),
        (33, "piezometer = \"C1\"", 33, "is a [[nest]] object"),
        (
            34,
            "ground_elevation = 11.0\nwater_level = 11.5\nwater_gauge = \"G1\"",
            35,
            "both \"water_gauge\" and \"water_level\"",
        ),
        (
            34,
            "ground_elevation = 11.0\nwater_gauge = \"P1\"",
            35,
            "a pressure_transducer (at /",
        ),
        (
            34,
            "ground_elevation = 11.0\nwater_gauge = \"P1\"",
            35,
            "s.toml:4); expected a stage_gauge",
        ),
        (34, "ground_elevation = inf", 34, "expected a finite number"),
        (
            35,
            "blanket_thickness = 0",
            35,
            "is 0, expected a number > 0",
        ),
        (
            36,
            "gamma_sat_kn_m3 = 9.0",
            36,
            "more than the site's unit weight of water (9.81",
        ),
        (
            36,
            "#",
            31,
            "missing key \"gamma_sat_kn_m3\" (or \"specific_gravity\" and \"void_ratio\")",
        ),
        (
            36,
            "gamma_sat_kn_m3 = 19.0\nvoid_ratio = 0.6",
            37,
            "both \"gamma_sat_kn_m3\" and \"void_ratio\"",
        ),
        (
            36,
            "specific_gravity = 2.65",
            31,
            "missing key \"void_ratio\"",
        ),
        (
            36,
            "specific_gravity = 1.0\nvoid_ratio = 0.6",
            36,
            "expected a number > 1",
        ),
        (
            36,
            "specific_gravity = 2.6\nvoid_ratio = -0.1",
            37,
            "expected a number >= 0",
        ),
        (
            36,
            "gamma_sat_kn_m3 = 19.0\nfs_target = 1.0",
            37,
            "expected a number > 1",
        ),
        (39, "river_gauge = \"P1\"", 39, "expected a stage_gauge"),
        (
            40,
            "#",
            37,
            "missing key \"landside_level\" or \"landside_gauge\"",
        ),
        (
            40,
            "landside_level = 11.0\nlandside_gauge = \"G1\"",
            40,
            "both \"landside_gauge\" and \"landside_level\"",
        ),
        (
            40,
            "landside_gauge = \"G1\"\ntoe_piezometer = \"G1\"",
            41,
            "\"toe_piezometer\" names \"G1\", a stage_gauge",
        ),
        (41, "base_width = 0.0", 41, "expected a number > 0"),
        (43, "k_foundation_m_s = 0", 43, "expected a number > 0"),
        (
            44,
            "k_blanket_m_s = 0.0",
            44,
            "unless riverside and landside are both \"impervious\"",
        ),
        (
            46,
            "riverside = \"open_entrance\"",
            37,
            "missing key \"l1\" in [[blanket]] (required for riverside = \"open_entrance\")",
        ),
        (
            46,
            "riverside = \"no_blanket\"\nl1 = 5.0",
            47,
            "\"l1\" does not apply to riverside = \"no_blanket\"",
        ),
        (
            46,
            "riverside = \"beach\"",
            46,
            "expected one of: open_entrance, no_blanket, impervious",
        ),
        (
            47,
            "landside = \"open_exit\"",
            37,
            "missing key \"l3\" in [[blanket]] (required for landside = \"open_exit\")",
        ),
        (
            47,
            "landside = \"seepage_block\"\nl3 = -2.0",
            48,
            "expected a number > 0",
        ),
        (
            47,
            "landside = \"infinite\"",
            47,
            "expected one of: endless, seepage_block, open_exit, impervious",
        ),
        (
            47,
            "landside = \"endless\"\ndistances = [10.0, -1.0]",
            48,
            "element 2 is -1.0, expected a distance >= 0",
        ),
        (
            47,
            "landside = \"endless\"\nl1_m = 5.0",
            48,
            "unknown key \"l1_m\" in [[blanket]]; did you mean \"l1\"?",
        ),
        (
            50,
            "ground = [[0.0, 10.0], [5.0, 12.0]]",
            50,
            "has 2 point(s), expected at least 3",
        ),
        (
            50,
            "ground = [[0.0, 10.0], [5.0, 12.0], [5.0, 9.0]]",
            50,
            "point 3 has station 5 after 5; expected stations strictly increasing",
        ),
        (
            50,
            "ground = [[0.0, 10.0], [5.0], [10.0, 9.0]]",
            50,
            "element 2 is an array, expected [station, elevation]",
        ),
        (51, "#", 48, "missing key \"pool_gauge\""),
        (
            51,
            "pool_gauge = \"G1\"\ntail_gauge = \"G1\"\ntail_level = 9.0",
            53,
            "both \"tail_gauge\" and \"tail_level\"",
        ),
        (
            52,
            "toe_station = 12.0",
            52,
            "is 12, expected a station within the ground line (0 to 10)",
        ),
        (
            53,
            "piezometers = []",
            53,
            "lists 0 piezometer(s), expected at least 1",
        ),
        (16, "#", 53, "names \"P2\", which has no station (at "),
        (16, "#", 53, "s.toml:13); expected a piezometer"),
        (
            49,
            "id = \"P1\"",
            49,
            "section id \"P1\" is already used by an instrument at",
        ),
        (
            49,
            "id = \"C1\"",
            49,
            "section id \"C1\" is already used by a [[nest]] at",
        ),
        (
            53,
            "piezometers = [\"P1\", \"P2\"]\n[[nests]]",
            54,
            "did you mean \"nest\"",
        ),
    ];
    for (n, text, line, needle) in cases {
        let got = problems(&[("s.toml", &site_edit(&[(*n, text)]))]);
        assert_eq!(
            got.len(),
            1,
            "line {n} = {text:?}: expected one problem, got {got:#?}"
        );
        let (f, l, m) = &got[0];
        assert_eq!((f.as_str(), *l), ("s.toml", *line), "{text:?}: {m}");
        assert!(m.contains(needle), "{m:?} should contain {needle:?}");
    }
    // A standpipe without a tip is no piezometer: both objects that use it say so.
    let got = problems(&[("s.toml", &site_edit(&[(15, "#")]))]);
    let lines: Vec<usize> = got.iter().map(|p| p.1).collect();
    assert_eq!(lines, [30, 53], "{got:#?}");
    assert!(got
        .iter()
        .all(|p| p.2.contains("a standpipe without tip_elevation")));
}

#[test]
fn feet_site_objects_are_converted_to_metres() {
    let ft = site_edit(&[
        (2, "id = \"s\"\nlength_unit = \"ft\""),
        (34, "ground_elevation = 100.0\nwater_level = 101.0"),
        (46, "riverside = \"open_entrance\"\nl1 = 1000.0"),
        (
            47,
            "landside = \"open_exit\"\nl3 = 500.0\ndistances = [0.0, 100.0]",
        ),
        (52, "toe_station = 8.0\ntail_level = 9.0"),
    ]);
    let cfg = match load(&[("s.toml", &ft)]) {
        Ok(cfg) => cfg,
        Err(p) => panic!("{p}"),
    };
    let close = |a: f64, b: f64| (a - b).abs() < 1e-9;
    let t = &cfg.objects.toes[0];
    assert!(close(t.ground_elevation_m, 30.48), "{t:?}");
    assert!(close(t.blanket_thickness_m, 0.3048), "{t:?}");
    assert!(
        matches!(t.water, Some(Level::Fixed(w)) if close(w, 30.7848)),
        "{t:?}"
    );
    let b = &cfg.objects.blankets[0];
    assert!(
        matches!(b.landside_level, Level::Fixed(l) if close(l, 3.3528)),
        "{b:?}"
    );
    assert!(close(b.base_width_m, 3.048) && close(b.foundation_thickness_m, 1.524));
    assert!(close(b.blanket_thickness_m, 0.3048), "{b:?}");
    assert!(matches!(b.riverside, RiversideCase::OpenEntranceAt { l1_m } if close(l1_m, 304.8)));
    assert!(matches!(b.landside, LandsideCase::OpenExitAt { l3_m } if close(l3_m, 152.4)));
    assert!(close(b.distances[1].m, 30.48) && b.distances[0].m == 0.0);
    // The quantity is named from the value as written, not from the converted metres.
    assert_eq!(b.distances[1].label, "100ft");
    // Permeabilities carry their unit in the key and are not converted.
    assert_eq!((b.k_foundation_m_s, b.k_blanket_m_s), (1e-3, 1e-6));
    let s = &cfg.objects.sections[0];
    assert!(
        close(s.ground[1].0, 1.524) && close(s.ground[1].1, 3.6576),
        "{s:?}"
    );
    assert!(close(s.toe_station_m, 2.4384), "{s:?}");
    assert!(
        matches!(s.tail, Some(Level::Fixed(l)) if close(l, 2.7432)),
        "{s:?}"
    );
}
/// Values of the wrong type are named with what was found and what each key expects.
#[test]
fn wrong_types_say_what_was_found_and_expected() {
    let cases = [
        (
            46,
            "riverside = 3",
            46,
            "key \"riverside\" is 3, expected a string",
        ),
        (
            46,
            "riverside = [\"x\"]",
            46,
            "key \"riverside\" is an array, expected a string",
        ),
        (
            30,
            "piezometers = [\"P1\", \"P2\"]\ndeadband = \"x\"",
            31,
            "nest \"C1\": key \"deadband\" is \"x\", expected a number",
        ),
        (
            33,
            "piezometer = 3",
            33,
            "key \"piezometer\" is 3, expected a string",
        ),
        (29, "id = \" \"", 29, "nest #1: key \"id\" is empty"),
    ];
    for (n, text, line, needle) in cases {
        let got = problems(&[("s.toml", &site_edit(&[(n, text)]))]);
        assert_eq!(got.len(), 1, "{text:?}: {got:#?}");
        assert_eq!(got[0].1, line, "{text:?}: {got:#?}");
        assert!(
            got[0].2.ends_with(needle),
            "{:?} should end with {needle:?}",
            got[0].2
        );
    }
}
