//! `seepd report` on a replayed scenario: well-formed HTML whose tables carry the numbers this
//! test computes from the stored data, SVG that parses, documented CSV columns, and a period
//! without data that says so.

mod common;

use std::path::Path;
use std::process::Command;

fn run(args: &[&str]) -> std::process::Output {
    Command::new(common::seepd_bin())
        .args(args)
        .output()
        .unwrap()
}

fn example() -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("config")
        .display()
        .to_string()
}

/// Replay two days of hourly readings for the levee's second nested pair and the river.
fn scenario(dir: &Path) -> String {
    let mut text = String::new();
    for h in 0..48 {
        let t = format!("2026-04-{:02}T{:02}:00:00Z", 1 + h / 24, h % 24);
        let x = h as f64;
        let river = 3.0 + 2.5 * (x / 47.0 * std::f64::consts::PI).sin();
        let head_b = 95.0 + 0.4 * (river - 3.0);
        let psi = (head_b - 86.3) * 9.81 / 6.894_757_293_168;
        text += &format!("{{\"time\":\"{t}\",\"instrument\":\"AB-RIVER\",\"value\":{river}}}\n");
        text += &format!("{{\"time\":\"{t}\",\"instrument\":\"AB-PZ-2B\",\"value\":{psi}}}\n");
    }
    let input = dir.join("in.ndjson");
    std::fs::write(&input, text).unwrap();
    let db = dir.join("r.sqlite");
    let o = run(&[
        "replay",
        "--config",
        &example(),
        "--input",
        input.to_str().unwrap(),
        "--db",
        db.to_str().unwrap(),
        "--output",
        "/dev/null",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    db.display().to_string()
}

fn cell_after(row: &str, n: usize) -> &str {
    row.split(',').nth(n).unwrap()
}

#[test]
fn report_tables_match_the_stored_data_and_documents_parse() {
    let dir = tempfile::tempdir().unwrap();
    let db = scenario(dir.path());
    let out = dir.path().join("out");
    let o = run(&[
        "report",
        "--config",
        &example(),
        "--site",
        "ash-bend",
        "--from",
        "2026-04-01",
        "--to",
        "2026-04-03",
        "--out",
        out.to_str().unwrap(),
        "--db",
        &db,
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let html = std::fs::read_to_string(out.join("ash-bend_20260401_20260403.html")).unwrap();
    seepd::xml_check::check_xml(&html).unwrap();
    // Every SVG in it parses on its own too.
    let mut rest = html.as_str();
    let mut svgs = 0;
    while let Some(a) = rest.find("<svg") {
        let b = rest[a..].find("</svg>").unwrap() + a + 6;
        seepd::xml_check::check_xml(&rest[a..b]).unwrap();
        svgs += 1;
        rest = &rest[b..];
    }
    assert!(svgs >= 2, "{svgs} charts");
    assert!(html.contains("Automated screening only"));

    // Independent figures from the database.
    let c = rusqlite::Connection::open(&db).unwrap();
    let (min, max, n): (f64, f64, i64) = c
        .query_row("SELECT min(total_head_m), max(total_head_m), count(*) FROM readings WHERE instrument='AB-PZ-2B'", [], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .unwrap();
    let first: f64 = c
        .query_row(
            "SELECT total_head_m FROM readings WHERE instrument='AB-PZ-2B' ORDER BY t_ms LIMIT 1",
            [],
            |r| r.get(0),
        )
        .unwrap();
    let last: f64 = c.query_row("SELECT total_head_m FROM readings WHERE instrument='AB-PZ-2B' ORDER BY t_ms DESC LIMIT 1", [], |r| r.get(0)).unwrap();
    let csv =
        std::fs::read_to_string(out.join("ash-bend_20260401_20260403_instruments.csv")).unwrap();
    let header = csv.lines().next().unwrap();
    assert_eq!(header, "instrument,kind,quantity,unit,latest_time,latest,min_time,min,max_time,max,change,readings,expected,completeness_pct,flagged,status");
    // The README documents every column.
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    for col in header.split(',') {
        assert!(
            readme.contains(&format!("`{col}`")),
            "README lacks CSV column {col}"
        );
    }
    let row = csv.lines().find(|l| l.starts_with("AB-PZ-2B,")).unwrap();
    let num = |k: usize| cell_after(row, k).parse::<f64>().unwrap();
    assert!(
        (num(7) - min).abs() < 1e-4 && (num(9) - max).abs() < 1e-4,
        "{row}"
    );
    assert!((num(10) - (last - first)).abs() < 1e-4);
    assert_eq!(cell_after(row, 11), n.to_string());
    // 48 hourly readings over 48 h: complete.
    assert_eq!(cell_after(row, 13), "100.0");
    // The HTML table shows the same maximum (3 decimals).
    assert!(html.contains(&format!("{max:.3}")));
    // Toe check AB-TOE-2: minimum FS in the period, from the derived table.
    let fs_min: f64 = c
        .query_row("SELECT min(value) FROM derived WHERE object='AB-TOE-2' AND quantity='factor_of_safety'", [], |r| r.get(0))
        .unwrap_or(f64::NAN);
    let dcsv = std::fs::read_to_string(out.join("ash-bend_20260401_20260403_derived.csv")).unwrap();
    let fs_row = dcsv
        .lines()
        .find(|l| l.starts_with("AB-TOE-2,factor_of_safety,"))
        .unwrap();
    if fs_min.is_finite() {
        assert!(
            (cell_after(fs_row, 6).parse::<f64>().unwrap() - fs_min).abs() < 1e-4,
            "{fs_row}"
        );
    } else {
        assert_eq!(cell_after(fs_row, 6), "");
    }
}

#[test]
fn a_period_without_data_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let db = scenario(dir.path());
    let out = dir.path().join("empty");
    let o = run(&[
        "report",
        "--config",
        &example(),
        "--site",
        "tarn-hollow",
        "--from",
        "2026-01-01",
        "--to",
        "2026-01-08",
        "--out",
        out.to_str().unwrap(),
        "--db",
        &db,
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let html = std::fs::read_to_string(out.join("tarn-hollow_20260101_20260108.html")).unwrap();
    seepd::xml_check::check_xml(&html).unwrap();
    assert!(html.contains("No readings were stored for this site in this period"));
    assert!(html.contains("No data in this period"));
}
