//! The SVG is well-formed XML (checked by a small tag-balance parser written here) and carries
//! the expected elements and escaped labels.

use super::*;
use crate::domain::section::{analyse, SectionPiezometer};
use crate::present::format::tick_step;

fn sample() -> SectionInput {
    let pt = |station_m, elevation_m| StationPoint {
        station_m,
        elevation_m,
    };
    let piezo = |id: &str, station_m, tip_elevation_m, head_m| SectionPiezometer {
        id: id.into(),
        station_m,
        tip_elevation_m,
        head_m,
    };
    SectionInput {
        ground: vec![
            pt(0.0, 100.0),
            pt(10.0, 100.0),
            pt(40.0, 115.0),
            pt(46.0, 115.0),
            pt(76.0, 100.0),
            pt(100.0, 100.0),
        ],
        pool_m: 112.0,
        tail_water_m: Some(100.5),
        toe_station_m: 76.0,
        piezometers: vec![
            piezo("P<1> & \"A\"", 50.0, 101.0, 110.0),
            piezo("P-2", 60.0, 100.5, 109.0),
            piezo("P-3", 60.0, 95.0, 110.0),
            piezo("P-4", 70.0, 99.0, 98.5),
        ],
    }
}

#[test]
fn svg_is_well_formed_and_has_the_parts() {
    let input = sample();
    let result = analyse(&input).unwrap();
    let options = SvgOptions {
        title: "Section A–A' <east reach> & toe".into(),
        ..SvgOptions::default()
    };
    let svg = render_section_svg(&input, &result, &options);
    let doc = roxmltree::Document::parse(&svg).unwrap_or_else(|e| panic!("{e}\n{svg}"));
    assert_eq!(doc.root_element().tag_name().name(), "svg");
    assert!(svg.contains(r#"xmlns="http://www.w3.org/2000/svg""#));
    for class in [
        "class=\"ground\"",
        "class=\"phreatic\"",
        "class=\"pool\"",
        "class=\"pool-level\"",
        "class=\"tail-water\"",
        "class=\"riser\"",
        "class=\"tip\"",
        "class=\"exit\"",
        "class=\"axes\"",
    ] {
        assert!(svg.contains(class), "missing {class}");
    }
    // Four tips (one dry), three heads drawn.
    assert_eq!(svg.matches("class=\"tip\"").count(), 4);
    assert_eq!(svg.matches("class=\"head\"").count(), 3);
    // Text escaped; labels and units present.
    assert!(svg.contains("Section A–A&apos; &lt;east reach&gt; &amp; toe"));
    assert!(svg.contains("P&lt;1&gt; &amp; &quot;A&quot; 110.000 m"));
    assert!(svg.contains("P-4 dry"));
    assert!(svg.contains("Station (m)") && svg.contains("Elevation (m)"));
    assert!(svg.contains("pool 112.000 m") && svg.contains("tail water 100.500 m"));
    assert!(svg.contains("exit 109.250 m at station 57.500 m"), "{svg}");
    assert!(svg.contains("<title>"));
    // Every coordinate is a number.
    assert!(!svg.contains("NaN") && !svg.contains("inf"));
}

#[test]
fn us_units_label_feet_and_stale_inputs_carry_their_age() {
    let input = sample();
    let result = analyse(&input).unwrap();
    let options = SvgOptions {
        units: crate::config::DisplayUnits::Us,
        note: "stale heads drawn, with their age: P-2 5.0 h".into(),
        marks: vec![("P-2".into(), "stale, 5.0 h old".into())],
        ..SvgOptions::default()
    };
    let svg = render_section_svg(&input, &result, &options);
    roxmltree::Document::parse(&svg).unwrap_or_else(|e| panic!("{e}\n{svg}"));
    // 112 m / 0.3048 = 367.45 ft (exact foot).
    assert!(svg.contains("pool 367.45 ft"), "{svg}");
    assert!(svg.contains("Station (ft)") && svg.contains("Elevation (ft)"));
    assert!(!svg.contains(" m<") && !svg.contains("(m)"), "{svg}");
    assert!(svg.contains("(stale, 5.0 h old)"));
    assert!(svg.contains("with their age: P-2 5.0 h"));
}

#[test]
fn svg_without_exit_or_tail_water_is_well_formed() {
    let mut input = sample();
    input.tail_water_m = None;
    input.ground[5].elevation_m = 99.0;
    input.piezometers.truncate(1);
    input.piezometers[0].station_m = 74.0;
    input.piezometers[0].tip_elevation_m = 97.0;
    input.piezometers[0].head_m = 100.0;
    let result = analyse(&input).unwrap();
    assert_eq!(result.exit, None);
    let svg = render_section_svg(&input, &result, &SvgOptions::default());
    roxmltree::Document::parse(&svg).unwrap_or_else(|e| panic!("{e}\n{svg}"));
    assert!(!svg.contains("class=\"exit\""));
    assert!(!svg.contains("class=\"tail-water\""));
}

#[test]
fn ticks_are_nice_and_cover_the_range() {
    assert_eq!(tick_step(100.0, 8.0), 20.0);
    assert_eq!(tick_step(7.0, 6.0), 2.0);
    assert_eq!(tick_step(0.3, 6.0), 0.05);
    let t: Vec<f64> = crate::present::format::ticks_within(93.2, 118.7, 6.0)
        .marks
        .into_iter()
        .map(|m| m.0)
        .collect();
    assert_eq!(t.first().copied(), Some(95.0));
    assert_eq!(t.last().copied(), Some(115.0));
    assert_eq!(xml_escape("a<b>&\"'"), "a&lt;b&gt;&amp;&quot;&apos;");
}
