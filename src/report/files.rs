//! A report's documents: which formats are written (`--format`, a schedule's `formats`), the
//! documents rendered in memory (HTML, PDF, CSV tables, in that order), and writing them to a
//! directory. What goes into them is `build`'s job (in `report`), how they look the format
//! modules'. Also `seepd report`'s arguments (`Args`).

use std::path::{Path, PathBuf};

use anyhow::Context as _;
use chrono::{DateTime, Utc};

use super::{build, csv, html};
use crate::command::{emit, ConfigDb, Period, Run};
use crate::config::{Config, Formats};
use crate::store::Store;

/// `seepd report`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Args {
    #[command(flatten)]
    on: ConfigDb,
    #[arg(long)]
    site: String,
    #[command(flatten)]
    period: Period,
    /// Output directory.
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
    /// Documents to write, comma-separated: any of html, pdf, csv (default: all).
    #[arg(long, value_name = "LIST", default_value_t)]
    format: Formats,
}

impl Run for Args {
    fn run(self, now: DateTime<Utc>) -> anyhow::Result<()> {
        let cfg = self.on.load()?;
        let store = self.on.open(&cfg)?;
        let Period { from, to } = self.period;
        let files = generate(
            &cfg,
            &store,
            &self.site,
            (from, to),
            now,
            self.format,
            &self.out,
        )?;
        emit(
            &files
                .iter()
                .map(|p| format!("{}\n", p.display()))
                .collect::<String>(),
        )
    }
}

/// One generated file, in memory: its name (e.g. `SITE_FROM_TO.html`), MIME type and bytes.
#[derive(Debug, Clone)]
pub struct Document {
    pub name: String,
    pub content_type: &'static str,
    pub data: Vec<u8>,
}

impl Document {
    /// The document as text (HTML, CSV); a binary one (PDF) reads with replacement characters.
    pub fn text(&self) -> std::borrow::Cow<'_, str> {
        String::from_utf8_lossy(&self.data)
    }
}

/// Render the report for `site` over [from, to) in `formats` (HTML, then PDF, then the CSV
/// tables), and its summary sentences (for the body of the report email).
///
/// # Errors
/// Unknown site, database errors, or a generated document that is not well-formed.
pub fn render_report(
    cfg: &Config,
    store: &Store,
    site: &str,
    (from, to): (DateTime<Utc>, DateTime<Utc>),
    now: DateTime<Utc>,
    formats: Formats,
) -> anyhow::Result<(Vec<Document>, Vec<String>)> {
    anyhow::ensure!(to > from, "the period is empty: --to must be after --from");
    let (data, extras) = build(cfg, store, site, from, to, now)?;
    let summary = extras.summary.clone();
    let stem = format!("{}_{}_{}", site, from.format("%Y%m%d"), to.format("%Y%m%d"));
    let mut docs = Vec::new();
    if formats.html {
        let doc = html::render(&data, &extras);
        let opt = roxmltree::ParsingOptions {
            allow_dtd: true,
            ..roxmltree::ParsingOptions::default()
        };
        roxmltree::Document::parse_with_options(&doc, opt)
            .map_err(|e| anyhow::anyhow!("generated HTML is not well-formed: {e}"))?;
        docs.push(Document {
            name: format!("{stem}.html"),
            content_type: "text/html; charset=utf-8",
            data: doc.into_bytes(),
        });
    }
    #[cfg(feature = "pdf")]
    if formats.pdf {
        docs.push(Document {
            name: format!("{stem}.pdf"),
            content_type: "application/pdf",
            data: super::pdf::render(&data, &extras)?,
        });
    }
    if formats.csv {
        for (name, text) in csv::tables(&data)? {
            docs.push(Document {
                name: format!("{stem}_{name}.csv"),
                content_type: "text/csv; charset=utf-8",
                data: text,
            });
        }
    }
    Ok((docs, summary))
}

/// Write rendered documents into `out` (created if needed); returns their paths in order.
///
/// # Errors
/// File errors.
pub fn write_files(docs: &[Document], out: &Path) -> anyhow::Result<Vec<PathBuf>> {
    std::fs::create_dir_all(out).with_context(|| format!("creating {}", out.display()))?;
    let mut paths = Vec::new();
    for d in docs {
        let p = out.join(&d.name);
        std::fs::write(&p, &d.data).with_context(|| format!("writing {}", p.display()))?;
        paths.push(p);
    }
    Ok(paths)
}

/// Generate the report files for `site` over [from, to) in `formats` into `out`; returns their
/// paths (HTML, PDF, CSV tables, as asked).
///
/// # Errors
/// Unknown site, database or file errors, or a generated document that is not well-formed.
pub fn generate(
    cfg: &Config,
    store: &Store,
    site: &str,
    period: (DateTime<Utc>, DateTime<Utc>),
    now: DateTime<Utc>,
    formats: Formats,
    out: &Path,
) -> anyhow::Result<Vec<PathBuf>> {
    let (docs, _) = render_report(cfg, store, site, period, now, formats)?;
    write_files(&docs, out)
}
