//! Display units end to end: the example levee set to `display_units = "us"` and
//! `length_unit = "ft"` gives a report (HTML tables, plots, summary), the report email's body
//! and an alert email in feet and psi with no metre value left, landward-distance quantities
//! named from the configured value (`_at_50ft`), and figures that match the stored SI values
//! converted with the exact factors (1 ft = 0.3048 m, 1 psi = 6.894757293168 kPa).

mod common;

use std::path::Path;

use chrono::{TimeZone, Utc};
use common::*;

/// Two days of hourly river stage and one piezometer of the second nest, replayed into `db`.
fn replay(cfg: &Path, db: &Path) {
    let mut text = String::new();
    for h in 0..48 {
        let t = format!("2026-04-{:02}T{:02}:00:00Z", 1 + h / 24, h % 24);
        let x = h as f64;
        let river = 3.0 + 2.5 * (x / 47.0 * std::f64::consts::PI).sin();
        text += &format!("{{\"time\":\"{t}\",\"instrument\":\"AB-RIVER\",\"value\":{river}}}\n");
        let psi = 4.0 + 0.5 * (x / 47.0 * std::f64::consts::PI).sin();
        text += &format!("{{\"time\":\"{t}\",\"instrument\":\"AB-PZ-2B\",\"value\":{psi}}}\n");
    }
    let input = db.with_extension("ndjson");
    std::fs::write(&input, text).unwrap();
    let (code, _, err) = seepd_output(&[
        "replay",
        "--config",
        cfg.to_str().unwrap(),
        "--input",
        input.to_str().unwrap(),
        "--db",
        db.to_str().unwrap(),
        "--output",
        "/dev/null",
    ]);
    assert_eq!(code, 0, "{err}");
}

#[test]
fn a_us_site_reads_in_feet_and_psi_everywhere_a_person_reads() {
    let dir = tempfile::tempdir().unwrap();
    let cfg_dir = example_config(dir.path(), 1883);
    edit(
        &cfg_dir,
        "levee-ash-bend.toml",
        &[
            ("display_units = \"si\"", "display_units = \"us\""),
            // A US site keeps its own time: dates written in the site file stay those dates.
            ("time_zone = \"UTC\"", "time_zone = \"America/Chicago\""),
            ("length_unit = \"m\"", "length_unit = \"ft\""),
            (
                "# [[report]]",
                "[[report]]\nid = \"ash-bend-daily\"\nevery = \"daily\"\nat = \"07:30\"\nrecipients = [\"file@example.invalid\"]\n\n# [[report]]",
            ),
        ],
    );
    let db = dir.path().join("us.sqlite");
    replay(&cfg_dir, &db);
    let cfg = seepd::config::load_dir(&cfg_dir).unwrap_or_else(|p| panic!("{p}"));
    let mut store = seepd::store::Store::open(&db).unwrap();
    let from = Utc.with_ymd_and_hms(2026, 4, 1, 0, 0, 0).unwrap();
    let to = Utc.with_ymd_and_hms(2026, 4, 3, 0, 0, 0).unwrap();
    let now = Utc.with_ymd_and_hms(2026, 4, 3, 8, 0, 0).unwrap();
    let (docs, summary) = seepd::report::render_report(
        &cfg,
        &store,
        "ash-bend",
        (from, to),
        now,
        seepd::config::Formats::default(),
    )
    .unwrap();
    let html = &docs[0].text();
    common::well_formed(html);

    // Units in words and in every table header and axis.
    for part in [
        "US customary (ft, psi, ft³/s per ft)",
        "Station (ft)",
        "Tip elevation (ft)",
        "Latest (ft)",
        "Latest (psi)",
        "Total head (ft)",
        "AB-RIVER water level (ft)",
        "Expected excess head 50 ft landward of the toe",
    ] {
        assert!(html.contains(part), "the HTML lacks {part:?}");
    }
    for metric in ["(m)", " m<", " m ", "kPa"] {
        assert!(!html.contains(metric), "the HTML still shows {metric:?}");
    }
    // The stored SI maximum of the river, shown in feet to 0.01 ft.
    let c = rusqlite::Connection::open(&db).unwrap();
    let max_m: f64 = c
        .query_row(
            "SELECT max(total_head_m) FROM readings WHERE instrument = 'AB-RIVER'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    let max_ft = format!("{:.2}", max_m / 0.3048);
    assert!(
        html.contains(&max_ft),
        "the HTML lacks the river maximum {max_ft} ft"
    );
    // Tip elevation configured as 86.3 (ft) shows as written, not converted twice.
    assert!(html.contains(">86.30<"), "tip elevation of AB-PZ-2B");
    // The instrument table gives each instrument's last calibration as configured
    // (`calibrated`, a date as written), a dash where the site file gives none.
    let table = &html[html
        .find("<th class=\"l\">Instrument</th><th class=\"l\">Kind</th>")
        .unwrap()..];
    let table = &table[..table.find("</table>").unwrap()];
    let cells = |row: &str| -> Vec<String> {
        row.split('<')
            .filter(|p| p.starts_with("td") || p.starts_with("th"))
            .map(|p| p[p.find('>').unwrap() + 1..].to_string())
            .collect()
    };
    let header = cells(table.lines().next().unwrap());
    let col = header
        .iter()
        .position(|h| h == "Last calibration")
        .expect("the column");
    let cell = |id: &str, col: usize| {
        let row = table
            .lines()
            .find(|l| l.contains(&format!(">{id}</td>")))
            .unwrap();
        cells(row)[col].clone()
    };
    let last_calibration = |id: &str| cell(id, col);
    // `installed = "2025-03-01"` (a date) reads 2025-03-01 in Chicago, not the evening before.
    let installed = header.iter().position(|h| h == "Installed").unwrap();
    assert_eq!(cell("AB-PZ-2B", installed), "2025-03-01");
    assert_eq!(last_calibration("AB-PZ-2B"), "2025-02-13");
    assert_eq!(last_calibration("AB-RIVER"), "2025-09-30");
    assert_eq!(last_calibration("AB-BARO"), "—");
    // Landward-distance quantities carry the configured value and unit in their names.
    let derived = docs
        .iter()
        .find(|d| d.name.ends_with("_derived.csv"))
        .unwrap();
    assert!(
        derived.text().contains("expected_excess_head_at_50ft"),
        "{}",
        derived.text()
    );
    assert!(!derived.text().contains("_at_15.24"));
    // The summary in feet.
    let river = summary
        .iter()
        .find(|l| l.starts_with("Highest water level at AB-RIVER"))
        .unwrap();
    assert!(river.contains(&format!("{max_ft} ft")), "{river}");

    // The report email's body carries the same summary and the caution.
    let schedule = cfg.reports[0].clone();
    let id = seepd::report::scheduler::queue_one(&cfg, &mut store, &schedule, (from, to), now)
        .unwrap()
        .unwrap();
    let (text, body_html): (String, String) = c
        .query_row(
            "SELECT body_text, body_html FROM outbox WHERE id = ?1",
            [id],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .unwrap();
    for body in [&text, &body_html] {
        assert!(body.contains(&format!("{max_ft} ft")), "{body}");
        assert!(body.contains("Automated screening only"), "{body}");
        assert!(body.contains("Alerts in this period"), "{body}");
    }

    // The PDF: the caution, the tables and the summary in feet, on US Letter; attached.
    let pdf = docs
        .iter()
        .find(|d| d.name.ends_with(".pdf"))
        .expect("a PDF");
    assert_eq!(pdf.content_type, "application/pdf");
    let path = dir.path().join(&pdf.name);
    std::fs::write(&path, &pdf.data).unwrap();
    let out = std::process::Command::new("pdftotext")
        .args(["-layout"])
        .arg(&path)
        .arg("-")
        .output()
        .expect("pdftotext (poppler-utils; tests/run.sh installs it)");
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    for part in [
        "Automated screening only",
        "engineer of record",
        "Instruments and where they are",
        "Tip elevation (ft)",
        "Last calibration",
        "2025-02-13",
        "Latest (ft)",
        "Toe checks",
        "Data quality",
        "Quarantined input (whole service)",
        "Instruments with health flags",
        "Reviewed by:",
        "Page 1 of",
        &format!("{max_ft} ft"),
    ] {
        assert!(text.contains(part), "the PDF text lacks {part:?}:\n{text}");
    }
    let info = std::process::Command::new("pdfinfo")
        .arg(&path)
        .output()
        .unwrap();
    assert!(String::from_utf8_lossy(&info.stdout).contains("612 x 792 pts (letter)"));
    let attached: Vec<(String, String)> = c
        .prepare("SELECT name, content_type FROM outbox_attachments WHERE outbox = ?1")
        .unwrap()
        .query_map([id], |r| Ok((r.get(0)?, r.get(1)?)))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    assert!(
        attached.contains(&(pdf.name.clone(), "application/pdf".into())),
        "{attached:?}"
    );

    // An alert email on the river stage: feet, per day, words.
    let cfg2 = seepd::config::load_dir(&cfg_dir).unwrap();
    let mut alert_store = seepd::store::Store::open(&dir.path().join("alerts.sqlite")).unwrap();
    let writes = river_alerts(
        cfg2,
        &mut alert_store,
        &[97.0, 97.5, 98.0, 98.5, 99.0, 99.2],
    );
    let m = writes.messages.first().expect("an alert message");
    assert!(
        m.subject.contains("water level") && m.subject.contains(" ft"),
        "{}",
        m.subject
    );
    assert!(m.text.contains("ft per day"), "{}", m.text);
    assert!(
        !m.text.contains(" m ") && !m.text.contains(" m\n"),
        "{}",
        m.text
    );
}
