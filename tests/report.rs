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

/// `seepd report` of the example configuration for `site` over [from, to) into `out`, with
/// `extra` arguments.
fn report(
    db: &str,
    site: &str,
    (from, to): (&str, &str),
    out: &Path,
    extra: &[&str],
) -> std::process::Output {
    let example = example();
    let mut args = vec![
        "report",
        "--config",
        &example,
        "--site",
        site,
        "--from",
        from,
        "--to",
        to,
        "--out",
        out.to_str().unwrap(),
        "--db",
        db,
    ];
    args.extend_from_slice(extra);
    run(&args)
}

fn cell_after(row: &str, n: usize) -> &str {
    row.split(',').nth(n).unwrap()
}

#[test]
fn report_tables_match_the_stored_data_and_documents_parse() {
    let dir = tempfile::tempdir().unwrap();
    let db = scenario(dir.path());
    let out = dir.path().join("out");
    let o = report(&db, "ash-bend", ("2026-04-01", "2026-04-03"), &out, &[]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let html = std::fs::read_to_string(out.join("ash-bend_20260401_20260403.html")).unwrap();
    common::well_formed(&html);
    // Every SVG in it parses on its own too.
    let mut rest = html.as_str();
    let mut svgs = 0;
    while let Some(a) = rest.find("<svg") {
        let b = rest[a..].find("</svg>").unwrap() + a + 6;
        common::well_formed(&rest[a..b]);
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
    let o = report(&db, "tarn-hollow", ("2026-01-01", "2026-01-08"), &out, &[]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let html = std::fs::read_to_string(out.join("tarn-hollow_20260101_20260108.html")).unwrap();
    common::well_formed(&html);
    assert!(html.contains("No readings were stored for this site in this period"));
    assert!(html.contains("No data in this period"));
}

/// `--format` writes exactly the documents asked for, for every non-empty subset (in any
/// order), lists them on standard output, and refuses an unknown format naming it.
#[test]
fn format_writes_each_combination_and_refuses_an_unknown_one() {
    let dir = tempfile::tempdir().unwrap();
    let db = scenario(dir.path());
    let stem = "ash-bend_20260401_20260403";
    let csvs = ["instruments", "derived", "quarantine"].map(|t| format!("{stem}_{t}.csv"));
    for (n, list) in [
        "html",
        "pdf",
        "csv",
        "html,pdf",
        "pdf,csv",
        "csv,html",
        "html,pdf,csv",
    ]
    .into_iter()
    .enumerate()
    {
        let out = dir.path().join(format!("out{n}"));
        let o = report(
            &db,
            "ash-bend",
            ("2026-04-01", "2026-04-03"),
            &out,
            &["--format", list],
        );
        assert!(
            o.status.success(),
            "{list}: {}",
            String::from_utf8_lossy(&o.stderr)
        );
        let mut want: Vec<String> = Vec::new();
        if list.contains("html") {
            want.push(format!("{stem}.html"));
        }
        if list.contains("pdf") {
            want.push(format!("{stem}.pdf"));
        }
        if list.contains("csv") {
            want.extend(csvs.iter().cloned());
        }
        let mut got: Vec<String> = std::fs::read_dir(&out)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        got.sort();
        let mut sorted = want.clone();
        sorted.sort();
        assert_eq!(got, sorted, "--format {list}");
        // Standard output lists the files written, HTML, PDF, CSV in that order.
        let listed: Vec<String> = String::from_utf8_lossy(&o.stdout)
            .lines()
            .map(|l| l.rsplit('/').next().unwrap().to_string())
            .collect();
        assert_eq!(listed, want, "--format {list}");
        for f in &want {
            let bytes = std::fs::read(out.join(f)).unwrap();
            match f.rsplit('.').next().unwrap() {
                "pdf" => assert!(bytes.starts_with(b"%PDF-"), "{f}"),
                "html" => {
                    common::well_formed(std::str::from_utf8(&bytes).unwrap());
                }
                _ => assert!(bytes.contains(&b'\n'), "{f} has no header line"),
            }
        }
    }
    for (bad, says) in [
        ("html,docx", "unknown report format \"docx\""),
        ("", "no report format given"),
    ] {
        let out = dir.path().join("refused");
        let o = report(
            &db,
            "ash-bend",
            ("2026-04-01", "2026-04-03"),
            &out,
            &["--format", bad],
        );
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{bad:?}: {err}");
        assert!(err.contains(says), "{bad:?}: {err}");
        assert!(!out.exists(), "nothing is written for {bad:?}");
    }
}
