//! The real binary: `check` (summary, and every problem with file:line and exit 78) and `replay`
//! (a small input gives the expected heads, bad lines go to quarantine records).

mod common;

use std::path::Path;

use common::seepd_output as seepd;

fn example_dir() -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("config")
        .display()
        .to_string()
}

#[test]
fn check_accepts_the_example_and_summarises_it() {
    let (code, out, err) = seepd(&["check", "--config", &example_dir()]);
    assert_eq!(code, 0, "{out}\n{err}");
    for needle in [
        "ash-bend",
        "tarn-hollow",
        "vibrating_wire",
        "demo/+/json",
        "demo/+/senml",
        "demo/+/csv",
    ] {
        assert!(out.contains(needle), "summary lacks {needle}:\n{out}");
    }
}

#[test]
fn check_lists_every_problem_with_file_and_line_and_exits_78() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(
        d.join("seepd.toml"),
        "[service]\ndatabase = \"x.sqlite\"\n\n[mqtt]\nport = 70000\n",
    )
    .unwrap();
    std::fs::write(
        d.join("site-a.toml"),
        "[site]\nid = \"a\"\nname = \"A\"\n\n[[instrument]]\nid = \"P1\"\nkind = \"standpipe\"\ninstalled = \"2025-01-01\"\ninterval_s = 3600\nrange = [0.0, 10.0]\ncolour = \"red\"\n[instrument.standpipe]\nreference_elevation = 10.0\ndepth_unit = \"yards\"\n",
    )
    .unwrap();
    let (code, out, err) = seepd(&["check", "--config", &d.display().to_string()]);
    assert_eq!(code, 78, "{out}\n{err}");
    // No subscription (the service would receive nothing) and port out of range on line 5 of
    // seepd.toml; unknown key on line 11 and bad unit on line 14 of site-a.toml.
    assert!(
        err.contains("seepd.toml:1:1: seepd.toml: no [[subscription]]"),
        "{err}"
    );
    assert!(err.contains("seepd.toml:5:"), "{err}");
    assert!(err.contains("site-a.toml:11:"), "{err}");
    assert!(err.contains("site-a.toml:14:"), "{err}");
    assert!(err.contains("4 configuration problem(s)"), "{err}");
}

#[test]
fn check_refuses_old_names_naming_the_new_ones_and_exits_78() {
    let dir = tempfile::tempdir().unwrap();
    let (old, new) = (
        [
            "group_wait_s",
            "repeat_interval_s",
            "[[cluster]]",
            "[[response]]",
        ],
        [
            "bundle_window_s",
            "remind_every_s",
            "[[nest]]",
            "[[stage_response]]",
        ],
    );
    for entry in std::fs::read_dir(example_dir()).unwrap() {
        let path = entry.unwrap().path();
        let mut text = std::fs::read_to_string(&path).unwrap();
        for (o, n) in old.iter().zip(new) {
            text = text.replace(n, o);
        }
        std::fs::write(dir.path().join(path.file_name().unwrap()), text).unwrap();
    }
    let (code, out, err) = seepd(&["check", "--config", &dir.path().display().to_string()]);
    assert_eq!(code, 78, "{out}\n{err}");
    // Both site files write the two [alerting] keys; the levee writes the two tables.
    for needle in [
        "levee-ash-bend.toml:287:1: [alerting]: key \"group_wait_s\" was renamed \"bundle_window_s\"",
        "levee-ash-bend.toml:289:1: [alerting]: key \"repeat_interval_s\" was renamed \"remind_every_s\"",
        "dam-tarn.toml:132:1: [alerting]: key \"group_wait_s\" was renamed \"bundle_window_s\"",
        "dam-tarn.toml:133:1: [alerting]: key \"repeat_interval_s\" was renamed \"remind_every_s\"",
        "levee-ash-bend.toml:197:3: levee-ash-bend.toml: [[cluster]] tables are now [[nest]]",
        "levee-ash-bend.toml:432:3: levee-ash-bend.toml: [[response]] tables are now [[stage_response]]",
    ] {
        assert!(err.contains(needle), "{needle} not in:\n{err}");
    }
    assert!(err.contains("6 configuration problem(s)"), "{err}");
}

#[test]
fn replay_gives_the_expected_heads_and_quarantines_bad_lines() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in.ndjson");
    std::fs::write(
        &input,
        concat!(
            "{\"time\":\"2026-03-01T00:00:00Z\",\"instrument\":\"AB-RIVER\",\"value\":4.5}\n",
            "{\"time\":\"2026-03-01T00:00:00Z\",\"instrument\":\"TH-PZ-1\",\"value\":8000}\n",
            "{\"time\":\"2026-03-01T01:00:00Z\",\"instrument\":\"AB-SP-3\",\"value\":3.9}\n",
            "not json\n",
            "{\"time\":\"2026-03-01T02:00:00Z\",\"instrument\":\"AB-RIVER\",\"value\":99}\n",
        ),
    )
    .unwrap();
    let out = dir.path().join("out.ndjson");
    let db = dir.path().join("replay.sqlite");
    let (code, _, err) = seepd(&[
        "replay",
        "--config",
        &example_dir(),
        "--input",
        &input.display().to_string(),
        "--db",
        &db.display().to_string(),
        "--output",
        &out.display().to_string(),
    ]);
    assert_eq!(code, 0, "{err}");
    let records: Vec<serde_json::Value> = std::fs::read_to_string(&out)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let value = |id: &str, q: &str| -> f64 {
        records
            .iter()
            .find(|r| r["id"] == id && r["quantity"] == q)
            .unwrap_or_else(|| panic!("no {q} for {id} in {records:?}"))["value"]
            .as_f64()
            .unwrap()
    };
    assert!((value("AB-RIVER", "total_head") - 94.5).abs() < 1e-9);
    // 0.042 × (9100 − 8000) = 46.2 kPa; head = 201.0 + 46.2/9.81.
    assert!((value("TH-PZ-1", "pressure") - 46.2).abs() < 1e-9);
    assert!((value("TH-PZ-1", "total_head") - (201.0 + 46.2 / 9.81)).abs() < 1e-9);
    assert!((value("AB-SP-3", "total_head") - 95.5).abs() < 1e-9);
    let time = records.iter().find(|r| r["id"] == "AB-SP-3").unwrap()["time"]
        .as_str()
        .unwrap()
        .to_string();
    assert_eq!(time, "2026-03-01T01:00:00.000Z");
    let reasons: Vec<&str> = records
        .iter()
        .filter(|r| r["type"] == "quarantine")
        .map(|r| r["reason"].as_str().unwrap())
        .collect();
    assert_eq!(reasons, vec!["malformed", "out_of_range"]);
    // The same readings are in the database.
    let c = rusqlite::Connection::open(&db).unwrap();
    let n: i64 = c
        .query_row("SELECT count(*) FROM readings", [], |r| r.get(0))
        .unwrap();
    assert_eq!(n, 3);
}

#[test]
fn replay_writes_alert_transitions_without_email() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    let input = dir.path().join("river.ndjson");
    // Hourly river stage: 92 m, then 98.2 m for 6 h (act), then back to 92 m for 4 h.
    let mut text = String::new();
    for h in 0..16 {
        let depth = if (2..8).contains(&h) { 8.2 } else { 2.0 };
        text.push_str(&format!(
            "{{\"time\": {}, \"instrument\": \"AB-RIVER\", \"value\": {depth}}}\n",
            1_772_366_400 + h * 3600
        ));
    }
    std::fs::write(&input, text).unwrap();
    let (code, out, err) = seepd(&[
        "replay",
        "--config",
        cfg.to_str().unwrap(),
        "--input",
        input.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    let river: Vec<serde_json::Value> = out
        .lines()
        .filter_map(|l| serde_json::from_str(l).ok())
        .filter(|v: &serde_json::Value| v["type"] == "alert" && v["rule"] == "ash-bend-river-stage")
        .collect();
    let actions: Vec<&str> = river.iter().filter_map(|v| v["action"].as_str()).collect();
    // Raise on the 2nd reading beyond (persist_readings = 2), reminders every 4 h, escalation
    // to the second list after 1 h, resolve 2 h (keep_active_s) after the value came back.
    assert_eq!(actions.first(), Some(&"raise"), "{actions:?}");
    assert_eq!(actions.last(), Some(&"resolve"), "{actions:?}");
    assert!(actions.contains(&"notify_escalation"), "{actions:?}");
    assert_eq!(river[0]["level"], "act");
    assert_eq!(river[0]["time"], "2026-03-01T15:00:00.000Z");
    assert_eq!(river[0]["bound"], 97.8);
    assert_eq!(river[0]["direction"], "above");
    let resolve = river.last().unwrap();
    assert_eq!(resolve["time"], "2026-03-01T22:00:00.000Z");
}

/// `seepd replay … | head -1`: the reader goes away after the first line; seepd ends quietly
/// with exit 0 instead of panicking on the closed pipe (exit 101).
#[test]
fn output_into_a_closed_pipe_ends_quietly() {
    use std::io::{BufRead, BufReader};
    use std::process::{Command, Stdio};
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in.ndjson");
    // Hourly river readings: far more output than a pipe holds (64 KiB).
    let lines: String = (0..5_000)
        .map(|h| {
            format!(
                "{{\"time\":{},\"instrument\":\"AB-RIVER\",\"value\":{:.2}}}\n",
                1_767_225_600 + h * 3600,
                4.0 + (h % 24) as f64 / 100.0
            )
        })
        .collect();
    std::fs::write(&input, lines).unwrap();
    let mut child = Command::new(common::seepd_bin())
        .args(["replay", "--config", &example_dir(), "--input"])
        .arg(&input)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut first = String::new();
    BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut first)
        .unwrap();
    assert!(first.starts_with('{'), "{first}");
    // The reader has gone (dropped above).
    let out = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    assert!(!err.contains("panicked"), "{err}");
}

/// The two-command start: `seepd demo` brings up its embedded broker, the service and the
/// simulated loggers, stores readings and stops cleanly after the days asked for.
#[test]
fn demo_runs_its_embedded_broker_and_stops_cleanly() {
    let (code, out, err) = seepd(&["demo", "--seconds-per-day", "1", "--days", "1"]);
    assert_eq!(code, 0, "{out}\n{err}");
    assert!(out.contains("embedded broker on 127.0.0.1:"), "{out}");
    assert!(out.contains("Demo stopped cleanly"), "{out}");
    // The last summary line: "--- N messages, M readings stored, ...".
    let stored: u64 = out
        .lines()
        .rev()
        .find_map(|l| {
            l.split(", ")
                .nth(1)?
                .strip_suffix(" readings stored")?
                .parse()
                .ok()
        })
        .unwrap_or(0);
    assert!(stored > 100, "{out}");
}

/// Replay `hours` hourly river readings from 2026-03-01 (`value(hour)`) into a new database in
/// `dir`; returns its path.
fn replay_river(dir: &std::path::Path, hours: i64, value: impl Fn(f64) -> f64) -> String {
    let input = dir.join("in.ndjson");
    let lines: String = (0..hours)
        .map(|h| {
            format!(
                "{{\"time\":{},\"instrument\":\"AB-RIVER\",\"value\":{:.2}}}\n",
                1_772_323_200 + h * 3600,
                value(h as f64)
            )
        })
        .collect();
    std::fs::write(&input, lines).unwrap();
    let db = dir.join("replay.sqlite").display().to_string();
    let (code, _, err) = seepd(&[
        "replay",
        "--config",
        &example_dir(),
        "--input",
        &input.display().to_string(),
        "--db",
        &db,
        "--output",
        "/dev/null",
    ]);
    assert_eq!(code, 0, "{err}");
    db
}

/// `seepd plot`: one quantity of one instrument over a period, as a well-formed SVG with the
/// quantity in words, the unit, and the rule levels on it; a derived object needs `--quantity`;
/// an unknown id and an empty period are clear errors.
#[test]
fn plot_draws_one_quantity_with_its_rule_levels() {
    let dir = tempfile::tempdir().unwrap();
    // A river rising 0.25 m an hour for two days (invented).
    let db_s = replay_river(dir.path(), 48, |h| 3.0 + 0.25 * h);
    let out = dir.path().join("river.svg");
    let (code, _, err) = seepd(&[
        "plot",
        "--config",
        &example_dir(),
        "--db",
        &db_s,
        "--id",
        "AB-RIVER",
        "--from",
        "2026-03-01",
        "--to",
        "2026-03-03",
        "--out",
        &out.display().to_string(),
    ]);
    assert_eq!(code, 0, "{err}");
    let svg = std::fs::read_to_string(&out).unwrap();
    common::well_formed(&svg);
    assert!(svg.contains("AB-RIVER — Water level"), "{svg}");
    // The example's river rule has levels; each is drawn and labelled with the rule id.
    assert!(svg.contains("ash-bend-river-stage"), "{svg}");
    assert!(svg.contains("<polyline") || svg.contains("<path"), "{svg}");
    // Failures: (id, from, to) and what the message must say.
    for (id, from, to, says) in [
        ("AB-TOE-1", "2026-03-01", "2026-03-03", "--quantity"),
        ("NO-SUCH", "2026-03-01", "2026-03-03", "NO-SUCH"),
        ("AB-RIVER", "2025-01-01", "2025-01-02", "no stored values"),
    ] {
        let (code, _, err) = seepd(&[
            "plot",
            "--config",
            &example_dir(),
            "--db",
            &db_s,
            "--id",
            id,
            "--from",
            from,
            "--to",
            to,
        ]);
        assert_eq!(code, 1, "{id}: {err}");
        assert!(err.contains(says), "{id}: {err}");
    }
}

/// `seepd plot --out FILE.png`: the same drawing rasterised at twice the SVG's size — an image
/// that decodes, of that size, on white, with the series drawn in its colour.
#[cfg(feature = "pdf")]
#[test]
fn plot_writes_a_png_twice_the_size_of_its_svg() {
    let dir = tempfile::tempdir().unwrap();
    // The river falling 0.1 m an hour for a day (invented).
    let db = replay_river(dir.path(), 24, |h| 6.0 - 0.1 * h);
    let plot = |out: &str| {
        let (code, _, err) = seepd(&[
            "plot",
            "--config",
            &example_dir(),
            "--db",
            &db,
            "--id",
            "AB-RIVER",
            "--from",
            "2026-03-01",
            "--to",
            "2026-03-02",
            "--out",
            out,
        ]);
        assert_eq!(code, 0, "{out}: {err}");
    };
    let (svg_path, png_path) = (dir.path().join("r.svg"), dir.path().join("r.PNG"));
    plot(svg_path.to_str().unwrap());
    plot(png_path.to_str().unwrap());
    let svg = std::fs::read_to_string(&svg_path).unwrap();
    let root = common::well_formed(&svg);
    let size = |a: &str| -> u32 { root.root_element().attribute(a).unwrap().parse().unwrap() };
    let bytes = std::fs::read(&png_path).unwrap();
    assert!(bytes.starts_with(b"\x89PNG"), "not a PNG");
    let img = resvg::tiny_skia::Pixmap::decode_png(&bytes).expect("the PNG decodes");
    assert_eq!(
        (img.width(), img.height()),
        (2 * size("width"), 2 * size("height"))
    );
    let px = img.pixels();
    let white = px
        .iter()
        .filter(|p| (p.red(), p.green(), p.blue(), p.alpha()) == (255, 255, 255, 255))
        .count();
    // On white (no transparent background), but not blank: axes, text and the series.
    assert!(px.iter().all(|p| p.alpha() == 255), "transparent pixels");
    assert!(
        white > px.len() / 2,
        "mostly white background: {white} of {}",
        px.len()
    );
    assert!(
        px.len() - white > px.len() / 100,
        "blank: {white} of {} white",
        px.len()
    );
    // The first series colour of the report's charts is drawn (the river's line).
    let first = svg
        .split("<polyline")
        .nth(1)
        .and_then(|p| p.split("stroke=\"#").nth(1))
        .map(|c| &c[..6])
        .expect("a series line in the SVG");
    let rgb = |k: usize| u8::from_str_radix(&first[2 * k..2 * k + 2], 16).unwrap();
    let drawn = px
        .iter()
        .filter(|p| (p.red(), p.green(), p.blue()) == (rgb(0), rgb(1), rgb(2)))
        .count();
    assert!(drawn > 200, "{drawn} pixels of #{first}");
}
