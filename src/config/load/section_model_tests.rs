//! `[section.model]`: the example dam's model loads (metres, water bound to the gauges), the
//! length unit converts, and each broken model gives its problem on the line of the part it is
//! about — several at once.

use crate::config::section_model::WaterFrom;
use crate::seepage::BoundaryKind;

use super::test_dir::{load, problems};

const SITE: [&str; 44] = [
    "[site]",                                                                       // 1
    "id = \"s\"",                                                                   // 2
    "[[instrument]]",                                                               // 3
    "id = \"P1\"",                                                                  // 4
    "kind = \"pressure_transducer\"",                                               // 5
    "tip_elevation = 4.0",                                                          // 6
    "station = 20.0",                                                               // 7
    "installed = \"2025-01-01\"",                                                   // 8
    "interval_s = 60",                                                              // 9
    "range = [0.0, 50.0]",                                                          // 10
    "pressure_transducer = { output = \"kPa\" }",                                   // 11
    "[[instrument]]",                                                               // 12
    "id = \"G1\"",                                                                  // 13
    "kind = \"stage_gauge\"",                                                       // 14
    "installed = \"2025-01-01\"",                                                   // 15
    "interval_s = 60",                                                              // 16
    "range = [0.0, 20.0]",                                                          // 17
    "stage_gauge = { water_body = \"river\", mode = \"elevation\", unit = \"m\" }", // 18
    "[[section]]",                                                                  // 19
    "id = \"S1\"",                                                                  // 20
    "ground = [[0.0, 10.0], [20.0, 12.0], [40.0, 9.0]]",                            // 21
    "pool_gauge = \"G1\"",                                                          // 22
    "tail_level = 9.5",                                                             // 23
    "toe_station = 30.0",                                                           // 24
    "piezometers = [\"P1\"]",                                                       // 25
    "[section.model]",                                                              // 26
    "outline = [[0.0, 0.0], [40.0, 0.0], [40.0, 9.0], [0.0, 10.0]]",                // 27
    "base = { k_m_per_s = 1e-6 }",                                                  // 28
    "element_size = 2.0",                                                           // 29
    "[[section.model.zone]]",                                                       // 30
    "name = \"core\"",                                                              // 31
    "polygon = [[15.0, 0.0], [25.0, 0.0], [25.0, 9.3], [15.0, 9.5]]",               // 32
    "kh_m_per_s = 1e-7",                                                            // 33
    "kv_m_per_s = 1e-8",                                                            // 34
    "[[section.model.cutoff]]",                                                     // 35
    "name = \"pile\"",                                                              // 36
    "points = [[5.0, 9.875], [5.0, 4.0]]",                                          // 37
    "[[section.model.boundary]]",                                                   // 38
    "name = \"up\"",                                                                // 39
    "kind = \"water\"",                                                             // 40
    "water = \"pool\"",                                                             // 41
    "path = [[0.0, 10.0], [0.0, 0.0]]",                                             // 42
    "[[section.model.boundary]]",                                                   // 43
    "name = \"down\"\nkind = \"water\"\nwater = \"tail\"\npath = [[40.0, 0.0], [40.0, 9.0]]", // 44
];

fn site_edit(edits: &[(usize, &str)]) -> String {
    let mut lines: Vec<String> = SITE.iter().map(|s| s.to_string()).collect();
    for (n, text) in edits {
        lines[n - 1] = text.to_string();
    }
    lines.join("\n") + "\n"
}

#[test]
fn a_model_loads_in_metres_with_water_bound_to_the_gauges() {
    let cfg = match load(&[("s.toml", &site_edit(&[]))]) {
        Ok(cfg) => cfg,
        Err(p) => panic!("{p}"),
    };
    let spec = cfg.objects.sections[0].model.as_ref().expect("model");
    assert_eq!(spec.model.outline.len(), 4);
    assert_eq!(spec.model.zones[0].material.kv_m_per_s, 1e-8);
    assert_eq!(spec.model.lines.len(), 1);
    assert_eq!(spec.water, [Some(WaterFrom::Pool), Some(WaterFrom::Tail)]);
    assert_eq!(spec.element_size_m, 2.0);
    let m = spec.at(10.5, Some(9.2));
    assert_eq!(m.boundaries[0].kind, BoundaryKind::Water { level_m: 10.5 });
    assert_eq!(m.boundaries[1].kind, BoundaryKind::Water { level_m: 9.2 });
    // Feet: every length converts (exact factor 0.3048 m/ft).
    let ft = site_edit(&[(2, "id = \"s\"\nlength_unit = \"ft\"")]);
    let cfg = load(&[("s.toml", &ft)]).unwrap_or_else(|p| panic!("{p}"));
    let spec = cfg.objects.sections[0].model.as_ref().expect("model");
    assert!((spec.model.outline[1].x - 40.0 * 0.3048).abs() < 1e-12);
    assert!((spec.element_size_m - 2.0 * 0.3048).abs() < 1e-12);
}

#[test]
fn model_problems_name_the_line_of_the_part() {
    let cases: &[(usize, &str, usize, &str)] = &[
        (
            28,
            "base = { k_m_per_s = 1e-6, colour = 1 }",
            26,
            "unknown field `colour`",
        ),
        (
            27,
            "outline = [[0.0, 0.0], [40.0, 0.0], [10.0, 10.0], [40.0, 9.0]]",
            27,
            "not simple",
        ),
        (
            32,
            "polygon = [[15.0, 0.0], [55.0, 0.0], [25.0, 9.5]]",
            30,
            "outside the outline",
        ),
        (
            37,
            "points = [[5.0, 9.875], [5.0, -4.0]]",
            35,
            "impervious line #1",
        ),
        (
            41,
            "water = \"river\"",
            41,
            "expected \"pool\", \"tail\" or an elevation",
        ),
        (42, "path = [[0.0, 10.0], [3.0, 3.0]]", 38, "boundary #1"),
        (23, "#", 46, "neither \"tail_gauge\" nor \"tail_level\""),
        (
            33,
            "kh_m_per_s = -1e-7",
            30,
            "permeabilities must be positive",
        ),
        (29, "element_size = 100.0", 29, "expected between"),
        (6, "tip_elevation = 40.0", 26, "point 'P1'"),
    ];
    for (line, text, want_line, want) in cases {
        let found = problems(&[("s.toml", &site_edit(&[(*line, text)]))]);
        assert!(
            found
                .iter()
                .any(|(f, l, m)| f == "s.toml" && l == want_line && m.contains(want)),
            "edit line {line} to {text:?}: expected line {want_line} with {want:?}, got {found:?}"
        );
    }
    // Every problem at once: a zone outside and a boundary off the outline.
    let both = site_edit(&[
        (32, "polygon = [[15.0, 0.0], [55.0, 0.0], [25.0, 9.5]]"),
        (42, "path = [[0.0, 10.0], [3.0, 3.0]]"),
    ]);
    let found = problems(&[("s.toml", &both)]);
    assert!(found.iter().any(|(_, l, _)| *l == 30), "{found:?}");
    assert!(found.iter().any(|(_, l, _)| *l == 38), "{found:?}");
}
