//! Command-line interface: argument parsing and dispatch to the library. Exit codes: 0 success,
//! 1 runtime failure, 2 usage (clap), 78 configuration error (EX_CONFIG).

use std::fs::File;
use std::io::{BufReader, BufWriter, Write};
use std::path::PathBuf;
use std::sync::Arc;

use anyhow::Context as _;
use clap::{Parser, Subcommand, ValueEnum};

use crate::config::{self, Config, PayloadFormat};
use crate::ingest::progress::Counters;

/// Exit code for a configuration error (sysexits EX_CONFIG).
pub const EXIT_CONFIG: i32 = 78;

#[derive(Parser, Debug)]
#[command(
    name = "seepd",
    version,
    about = "Seepage watch for earth dams and levees"
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Subcommand, Debug)]
pub enum Command {
    /// Run the service: subscribe to the broker and store reduced readings.
    Run {
        #[arg(long, value_name = "DIR")]
        config: PathBuf,
    },
    /// Validate a configuration directory; list every problem, or print a summary.
    Check {
        #[arg(long, value_name = "DIR")]
        config: PathBuf,
    },
    /// Run historical readings through the engine and write NDJSON records.
    Replay {
        #[arg(long, value_name = "DIR")]
        config: PathBuf,
        #[arg(long, value_name = "FILE")]
        input: PathBuf,
        #[arg(long, value_enum, default_value = "ndjson")]
        format: ReplayFormat,
        /// Store into this SQLite database (default: in memory only).
        #[arg(long, value_name = "FILE")]
        db: Option<PathBuf>,
        /// Write records here (default: standard output).
        #[arg(long, value_name = "FILE")]
        output: Option<PathBuf>,
    },
    /// Draw a cross-section (phreatic line, exit point) as SVG from the stored heads.
    Section {
        #[arg(long, value_name = "DIR")]
        config: PathBuf,
        /// Section id.
        #[arg(long)]
        id: String,
        /// Time (RFC 3339); default: now (the latest heads).
        #[arg(long)]
        at: Option<String>,
        /// Database (default: the configured one).
        #[arg(long, value_name = "FILE")]
        db: Option<PathBuf>,
        /// Output file (default: standard output).
        #[arg(long, value_name = "FILE")]
        out: Option<PathBuf>,
    },
    /// Refit the stage-response and HST models now and keep them in the model history.
    Fit {
        #[arg(long, value_name = "DIR")]
        config: PathBuf,
        /// Database (default: the configured one); a replay database works too.
        #[arg(long, value_name = "FILE")]
        db: Option<PathBuf>,
        /// Fit only this model (default: every configured model).
        #[arg(long, value_name = "MODEL")]
        id: Option<String>,
    },
    /// Run a self-contained demo: embedded broker, the service and simulated loggers.
    Demo {
        /// Seconds of wall time per simulated day.
        #[arg(long, default_value_t = 6.0)]
        seconds_per_day: f64,
        /// Stop after this many simulated days (default: run until Ctrl-C).
        #[arg(long)]
        days: Option<u32>,
    },
}

/// Replay input formats.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum ReplayFormat {
    Ndjson,
    Csv,
    Senml,
}

impl From<ReplayFormat> for PayloadFormat {
    fn from(f: ReplayFormat) -> Self {
        match f {
            ReplayFormat::Ndjson => PayloadFormat::Json,
            ReplayFormat::Csv => PayloadFormat::Csv,
            ReplayFormat::Senml => PayloadFormat::Senml,
        }
    }
}

/// Load a configuration or print every problem and return the config exit code.
fn load(dir: &std::path::Path) -> Result<Config, i32> {
    config::load_dir(dir).map_err(|problems| {
        eprintln!("{problems}");
        eprintln!(
            "seepd: {} configuration problem(s); not starting",
            problems.0.len()
        );
        EXIT_CONFIG
    })
}

/// Run the parsed command; returns the process exit code.
pub fn main_with(cli: Cli) -> i32 {
    match dispatch(cli) {
        Ok(code) => code,
        Err(e) => {
            eprintln!("seepd: error: {e:#}");
            1
        }
    }
}

fn dispatch(cli: Cli) -> anyhow::Result<i32> {
    match cli.command {
        Command::Check { config } => Ok(match load(&config) {
            Ok(cfg) => {
                print!("{}", config::summary(&cfg));
                0
            }
            Err(code) => code,
        }),
        Command::Run { config } => {
            let cfg = match load(&config) {
                Ok(c) => Arc::new(c),
                Err(code) => return Ok(code),
            };
            let rt = tokio::runtime::Runtime::new()?;
            let counters = Arc::new(Counters::default());
            rt.block_on(crate::service::run(cfg, counters, crate::service::signal()))?;
            Ok(0)
        }
        Command::Replay {
            config,
            input,
            format,
            db,
            output,
        } => {
            let cfg = match load(&config) {
                Ok(c) => c,
                Err(code) => return Ok(code),
            };
            let mut store = match &db {
                Some(p) => crate::store::Store::open(p)?,
                None => crate::store::Store::open_in_memory()?,
            };
            store.sync_instruments(&cfg, chrono::Utc::now())?;
            let reader = BufReader::new(
                File::open(&input).with_context(|| format!("opening {}", input.display()))?,
            );
            let mut out: Box<dyn Write> = match &output {
                Some(p) => Box::new(BufWriter::new(
                    File::create(p).with_context(|| format!("creating {}", p.display()))?,
                )),
                None => Box::new(BufWriter::new(std::io::stdout().lock())),
            };
            let started = std::time::Instant::now();
            let t = crate::replay::run(
                &cfg,
                format.into(),
                reader,
                &mut store,
                &mut out,
                chrono::Utc::now(),
            )?;
            let secs = started.elapsed().as_secs_f64();
            eprintln!(
                "replay: {} lines, {} readings stored, {} duplicates, {} quarantined, {} records in {:.3} s",
                t.lines, t.readings, t.duplicates, t.quarantined, t.records, secs
            );
            Ok(0)
        }
        Command::Section {
            config,
            id,
            at,
            db,
            out,
        } => {
            let cfg = match load(&config) {
                Ok(c) => c,
                Err(code) => return Ok(code),
            };
            let at = match at {
                Some(t) => chrono::DateTime::parse_from_rfc3339(&t)
                    .with_context(|| format!("--at {t:?} is not an RFC 3339 time"))?
                    .with_timezone(&chrono::Utc),
                None => chrono::Utc::now(),
            };
            let store = crate::store::Store::open(db.as_ref().unwrap_or(&cfg.service.database))?;
            let svg = crate::section_cmd::render(&cfg, &store, &id, at)?;
            match out {
                Some(p) => {
                    std::fs::write(&p, svg).with_context(|| format!("writing {}", p.display()))?
                }
                None => print!("{svg}"),
            }
            Ok(0)
        }
        Command::Fit { config, db, id } => {
            let cfg = match load(&config) {
                Ok(c) => c,
                Err(code) => return Ok(code),
            };
            let store = crate::store::Store::open(db.as_ref().unwrap_or(&cfg.service.database))?;
            let mut out = String::new();
            let code = crate::fit_cmd::run(&cfg, &store, id.as_deref(), &mut out)?;
            print!("{out}");
            Ok(code)
        }
        Command::Demo {
            seconds_per_day,
            days,
        } => {
            #[cfg(feature = "demo-broker")]
            {
                let rt = tokio::runtime::Runtime::new()?;
                rt.block_on(crate::demo::run(
                    seconds_per_day,
                    days,
                    crate::service::signal(),
                ))?;
                Ok(0)
            }
            #[cfg(not(feature = "demo-broker"))]
            {
                let _ = (seconds_per_day, days);
                anyhow::bail!(
                    "this build has no embedded broker: rebuild with the `demo-broker` feature"
                )
            }
        }
    }
}
