//! The SVG is well-formed XML (checked by a small tag-balance parser written here) and carries
//! the expected elements and escaped labels.

use super::*;
use crate::domain::section::{analyse, SectionPiezometer};

/// A minimal well-formedness check: every opened tag is closed in order, attributes are
/// `name="value"` with no `<` inside values, text has no bare `<` or unknown `&` entities.
/// Returns the element names in document order.
fn check_xml(doc: &str) -> Result<Vec<String>, String> {
    let mut stack: Vec<String> = Vec::new();
    let mut names = Vec::new();
    let mut rest = doc.trim_start();
    if let Some(after) = rest.strip_prefix("<?xml") {
        let end = after.find("?>").ok_or("unterminated XML declaration")?;
        rest = &after[end + 2..];
    }
    let mut seen_root = false;
    while !rest.is_empty() {
        let lt = rest.find('<').unwrap_or(rest.len());
        check_text(&rest[..lt])?;
        if !stack.is_empty() || rest[..lt].trim().is_empty() {
        } else {
            return Err(format!("text outside the root: {:?}", &rest[..lt]));
        }
        rest = &rest[lt..];
        if rest.is_empty() {
            break;
        }
        let gt = rest.find('>').ok_or("unterminated tag")?;
        let tag = &rest[1..gt];
        rest = &rest[gt + 1..];
        if let Some(name) = tag.strip_prefix('/') {
            let open = stack
                .pop()
                .ok_or(format!("closing </{name}> with nothing open"))?;
            if open != name.trim() {
                return Err(format!("<{open}> closed by </{name}>"));
            }
            continue;
        }
        let (body, self_closing) = match tag.strip_suffix('/') {
            Some(b) => (b, true),
            None => (tag, false),
        };
        let name_end = body.find(char::is_whitespace).unwrap_or(body.len());
        let name = &body[..name_end];
        if name.is_empty() || !name.chars().all(|c| c.is_ascii_alphanumeric() || c == '-') {
            return Err(format!("bad tag name in <{tag}>"));
        }
        if stack.is_empty() && seen_root {
            return Err("second root element".into());
        }
        seen_root = true;
        check_attributes(&body[name_end..])?;
        names.push(name.to_string());
        if !self_closing {
            stack.push(name.to_string());
        }
    }
    if let Some(open) = stack.pop() {
        return Err(format!("<{open}> never closed"));
    }
    Ok(names)
}

fn check_text(text: &str) -> Result<(), String> {
    let mut parts = text.split('&');
    parts.next();
    for part in parts {
        let known = ["amp;", "lt;", "gt;", "quot;", "apos;"];
        if !known.iter().any(|k| part.starts_with(k)) {
            return Err(format!("bare & in {text:?}"));
        }
    }
    if text.contains('>') {
        return Err(format!("bare > in text {text:?}"));
    }
    Ok(())
}

fn check_attributes(mut attrs: &str) -> Result<(), String> {
    let mut seen = Vec::new();
    loop {
        attrs = attrs.trim_start();
        if attrs.is_empty() {
            return Ok(());
        }
        let eq = attrs
            .find('=')
            .ok_or(format!("attribute without value: {attrs}"))?;
        let name = attrs[..eq].trim();
        if name.is_empty() || name.contains(char::is_whitespace) || seen.contains(&name) {
            return Err(format!("bad or repeated attribute name {name:?}"));
        }
        seen.push(name);
        let value = attrs[eq + 1..]
            .strip_prefix('"')
            .ok_or(format!("unquoted value for {name}"))?;
        let close = value
            .find('"')
            .ok_or(format!("unterminated value for {name}"))?;
        check_text(&value[..close])?;
        if value[..close].contains('<') {
            return Err(format!("< in value of {name}"));
        }
        attrs = &value[close + 1..];
        if !attrs.is_empty() && !attrs.starts_with(char::is_whitespace) {
            return Err(format!("no space after attribute {name}"));
        }
    }
}

#[test]
fn the_checker_rejects_broken_documents() {
    assert!(check_xml(r#"<svg a="1"><g></g></svg>"#).is_ok());
    assert!(check_xml(r#"<svg><g></svg>"#).is_err());
    assert!(check_xml(r#"<svg a=1></svg>"#).is_err());
    assert!(check_xml(r#"<svg a="1" a="2"></svg>"#).is_err());
    assert!(check_xml(r#"<svg><text>a & b</text></svg>"#).is_err());
    assert!(check_xml(r#"<svg><text>a &amp; b</text></svg>"#).is_ok());
    assert!(check_xml(r#"<svg></svg><svg></svg>"#).is_err());
    assert!(check_xml(r#"<svg>"#).is_err());
}

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
    let names = check_xml(&svg).unwrap_or_else(|e| panic!("{e}\n{svg}"));
    assert_eq!(names[0], "svg");
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
    assert!(svg.contains("P&lt;1&gt; &amp; &quot;A&quot; 110.00 m"));
    assert!(svg.contains("P-4 dry"));
    assert!(svg.contains("Station (m)") && svg.contains("Elevation (m)"));
    assert!(svg.contains("pool 112.00 m") && svg.contains("tail water 100.50 m"));
    assert!(svg.contains("exit 109.25 m at 57.5 m"));
    assert!(svg.contains("<title>"));
    // Every coordinate is a number.
    assert!(!svg.contains("NaN") && !svg.contains("inf"));
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
    check_xml(&svg).unwrap_or_else(|e| panic!("{e}\n{svg}"));
    assert!(!svg.contains("class=\"exit\""));
    assert!(!svg.contains("class=\"tail-water\""));
}

#[test]
fn ticks_are_nice_and_cover_the_range() {
    assert_eq!(tick_step(100.0, 8.0), 20.0);
    assert_eq!(tick_step(7.0, 6.0), 2.0);
    assert_eq!(tick_step(0.3, 6.0), 0.05);
    let t = ticks(93.2, 118.7, 6.0);
    assert_eq!(t.first().copied(), Some(95.0));
    assert_eq!(t.last().copied(), Some(115.0));
    assert_eq!(xml_escape("a<b>&\"'"), "a&lt;b&gt;&amp;&quot;&apos;");
}
