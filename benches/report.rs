//! Benchmark (not a test): a monthly report for 500 instruments with hourly data.
//! Run: `cargo bench --bench report`. Target < 5 s. Figures go to the README.

use std::fmt::Write as _;
use std::time::Instant;

use chrono::{TimeZone, Utc};
use seepd::quality::Flags;
use seepd::store::{ReadingRow, Store};

const N: usize = 500;

fn main() {
    let dir = tempfile::tempdir().unwrap();
    let cfg_dir = dir.path().join("config");
    std::fs::create_dir_all(&cfg_dir).unwrap();
    std::fs::write(
        cfg_dir.join("seepd.toml"),
        "[service]\ndatabase = \"bench.sqlite\"\n\n[[subscription]]\npattern = \"bench/{instrument}/json\"\nformat = \"json\"\n",
    )
    .unwrap();
    let mut site = String::from("[site]\nid = \"big\"\nname = \"Bench site (invented)\"\n\n[[instrument]]\nid = \"RIVER\"\nkind = \"stage_gauge\"\ninstalled = \"2025-01-01\"\ninterval_s = 3600\nrange = [0.0, 200.0]\n[instrument.stage_gauge]\nwater_body = \"river\"\nmode = \"elevation\"\nunit = \"m\"\n");
    for k in 0..N {
        let _ = write!(
            site,
            "\n[[instrument]]\nid = \"P{k:03}\"\nkind = \"pressure_transducer\"\nreach = \"R{}\"\nstation = {}.0\ntip_elevation = {}.0\ninstalled = \"2025-01-01\"\ninterval_s = 3600\nrange = [0.0, 500.0]\n[instrument.pressure_transducer]\noutput = \"kPa\"\n",
            k / 50,
            k * 10,
            80 + k % 10
        );
    }
    for c in 0..N / 2 {
        let _ = write!(
            site,
            "\n[[nest]]\nid = \"C{c:03}\"\npiezometers = [\"P{:03}\", \"P{:03}\"]\n",
            2 * c,
            2 * c + 1
        );
    }
    std::fs::write(cfg_dir.join("big.toml"), site).unwrap();
    let cfg = seepd::config::load_dir(&cfg_dir).expect("bench config");
    let mut store = Store::open(&cfg.service.database).unwrap();
    let start = Utc.with_ymd_and_hms(2026, 3, 1, 0, 0, 0).unwrap();
    let hours = 31 * 24;
    let mut rows = Vec::with_capacity(N * hours);
    for h in 0..hours {
        let t_ms = start.timestamp_millis() + h as i64 * 3_600_000;
        let stage = 90.0 + 3.0 * (h as f64 / 100.0).sin();
        rows.push(row("RIVER", t_ms, stage));
        for k in 0..N {
            rows.push(row(
                &format!("P{k:03}"),
                t_ms,
                85.0 + (k % 10) as f64 + 0.3 * stage - 27.0,
            ));
        }
    }
    store.write_batch(&rows, &[], &[]).unwrap();
    drop(rows);
    let out = dir.path().join("out");
    let to = start + chrono::Duration::days(31);
    let t = Instant::now();
    let files = seepd::report::generate(
        &cfg,
        &store,
        "big",
        (start, to),
        Utc::now(),
        seepd::config::Formats::default(),
        &out,
    )
    .unwrap();
    let secs = t.elapsed().as_secs_f64();
    let size_of = |ext: &str| {
        files
            .iter()
            .find(|p| p.extension().is_some_and(|e| e == ext))
            .map_or(0, |p| std::fs::metadata(p).unwrap().len())
    };
    let (size, pdf) = (size_of("html"), size_of("pdf"));
    println!(
        "monthly report, {N} instruments x {hours} hourly readings ({} readings): {secs:.2} s, HTML {:.1} MB, PDF {:.1} MB (0 without the pdf feature)",
        N * hours,
        size as f64 / 1e6,
        pdf as f64 / 1e6
    );
    phases(&cfg, &store, (start, to));
}

/// The report's phases timed one by one in a second run (database set-up excluded, as above):
/// reading and drawing, the HTML and its well-formedness check, the PDF, the CSV tables.
fn phases(
    cfg: &seepd::config::Config,
    store: &Store,
    (from, to): (chrono::DateTime<Utc>, chrono::DateTime<Utc>),
) {
    let t = Instant::now();
    let (data, extras) = seepd::report::build(cfg, store, "big", from, to, Utc::now()).unwrap();
    let build = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let html = seepd::report::html::render(&data, &extras);
    let html_s = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let opt = roxmltree::ParsingOptions {
        allow_dtd: true,
        ..roxmltree::ParsingOptions::default()
    };
    roxmltree::Document::parse_with_options(&html, opt).unwrap();
    let check = t.elapsed().as_secs_f64();
    let t = Instant::now();
    #[cfg(feature = "pdf")]
    seepd::report::pdf::render(&data, &extras).unwrap();
    let pdf = t.elapsed().as_secs_f64();
    let t = Instant::now();
    seepd::report::csv::tables(&data).unwrap();
    let csv = t.elapsed().as_secs_f64();
    println!(
        "phases (second run): read and draw {build:.2} s, HTML {html_s:.2} s, HTML check {check:.2} s, PDF {pdf:.2} s, CSV {csv:.3} s"
    );
}

fn row(id: &str, t_ms: i64, head: f64) -> ReadingRow {
    ReadingRow {
        instrument: id.into(),
        t_ms,
        arrival_ms: t_ms,
        raw: head,
        temperature_c: None,
        baro_kpa: None,
        eng_value: head,
        eng_unit: "kPa",
        pressure_kpa: None,
        pressure_head_m: None,
        total_head_m: Some(head),
        flags: Flags::empty(),
    }
}
