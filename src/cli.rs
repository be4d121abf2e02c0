//! Command-line interface: argument parsing and dispatch to the library. Exit codes: 0 success,
//! 1 runtime failure, 2 usage (clap), 78 configuration error (EX_CONFIG).

use std::fs::File;
use std::io::{BufReader, BufWriter, Write};
use std::path::PathBuf;
use std::sync::Arc;

use anyhow::Context as _;
use clap::{Parser, Subcommand, ValueEnum};

use crate::alerts;
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
        /// Also send the alert messages through [smtp] (default: alert records only).
        #[arg(long)]
        send_email: bool,
    },
    /// List active, pending and silenced alerts and undeliverable messages.
    Alerts {
        #[command(flatten)]
        on: Operator,
    },
    /// Acknowledge an alert: no more reminders or escalation for it.
    Ack {
        /// The alert number (see `seepd alerts`).
        alert: i64,
        #[command(flatten)]
        on: Operator,
        /// Who acknowledges (default: $USER).
        #[arg(long, value_name = "NAME")]
        by: Option<String>,
        #[arg(long, value_name = "TEXT")]
        note: Option<String>,
    },
    /// Silence the messages of a rule or of an instrument until a time (mandatory).
    Silence {
        #[command(flatten)]
        on: Operator,
        #[arg(
            long,
            value_name = "ID",
            conflicts_with = "instrument",
            required_unless_present = "instrument"
        )]
        rule: Option<String>,
        /// An instrument or derived-object id (silences every rule on it).
        #[arg(long, value_name = "ID")]
        instrument: Option<String>,
        /// RFC 3339 time, a date, or +30m / +4h / +2d.
        #[arg(long, value_name = "TIME")]
        until: String,
        #[arg(long, value_name = "TEXT")]
        reason: String,
        /// Who silences (default: $USER).
        #[arg(long, value_name = "NAME")]
        by: Option<String>,
        /// Also silence the most severe level of the rules (never silenced otherwise).
        #[arg(long)]
        all_levels: bool,
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
    /// Write an instrumentation report (HTML with plots, CSV tables) for a site and period.
    Report {
        #[arg(long, value_name = "DIR")]
        config: PathBuf,
        #[arg(long)]
        site: String,
        /// Start (RFC 3339 or YYYY-MM-DD, UTC).
        #[arg(long)]
        from: String,
        /// End, exclusive (RFC 3339 or YYYY-MM-DD, UTC).
        #[arg(long)]
        to: String,
        /// Output directory.
        #[arg(long, value_name = "DIR")]
        out: PathBuf,
        /// Database (default: the configured one).
        #[arg(long, value_name = "FILE")]
        db: Option<PathBuf>,
    },
    /// Show what the database holds: readings, quarantine counts, export backlog and lag.
    Status {
        #[command(flatten)]
        on: Operator,
    },
    /// Send the stored readings and derived values of a time range to the export server.
    Export {
        #[arg(long, value_name = "DIR")]
        config: PathBuf,
        /// Start of the range (RFC 3339, inclusive).
        #[arg(long, value_name = "TIME", value_parser = rfc3339)]
        from: chrono::DateTime<chrono::Utc>,
        /// End of the range (RFC 3339, exclusive).
        #[arg(long, value_name = "TIME", value_parser = rfc3339)]
        to: chrono::DateTime<chrono::Utc>,
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
    /// Manage the people who may sign in to the web pages (`[http]`).
    User {
        #[command(subcommand)]
        action: crate::web::user_cmd::UserAction,
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

/// Where an operator command finds the database: the configuration directory (whose other
/// problems are only warned about) and/or the database file itself.
#[derive(clap::Args, Debug)]
pub struct Operator {
    /// The configuration directory (its database; names and checks when it loads).
    #[arg(long, value_name = "DIR", required_unless_present = "db")]
    config: Option<PathBuf>,
    /// The database (default: the one the configuration names).
    #[arg(long, value_name = "FILE")]
    db: Option<PathBuf>,
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

fn rfc3339(s: &str) -> Result<chrono::DateTime<chrono::Utc>, String> {
    chrono::DateTime::parse_from_rfc3339(s)
        .map(|t| t.with_timezone(&chrono::Utc))
        .map_err(|e| format!("{e}; expected RFC 3339, e.g. 2026-03-01T00:00:00Z"))
}

/// Load a configuration or print every problem and return the config exit code.
fn load(dir: &std::path::Path) -> Result<Config, i32> {
    let cfg = config::load_dir(dir).map_err(|problems| {
        eprintln!("{problems}");
        eprintln!(
            "seepd: {} configuration problem(s); not starting",
            problems.0.len()
        );
        EXIT_CONFIG
    })?;
    for w in cfg.alerting.warnings() {
        eprintln!("warning: {w}");
    }
    Ok(cfg)
}

/// The database and (if it loads) the configuration of an operator command. A configuration
/// with problems does not stop it: the problems are printed as a warning and the database is
/// taken from `[service] database` (or `--db`). Exit 78 only when no database can be found;
/// exit 1 when the database file does not exist (a new empty one would report "no alerts").
fn operator(on: &Operator) -> Result<(PathBuf, Option<Config>), i32> {
    let cfg = match &on.config {
        None => None,
        Some(dir) => match config::load_dir(dir) {
            Ok(cfg) => Some(cfg),
            Err(problems) => {
                eprintln!("{problems}");
                eprintln!(
                    "seepd: warning: {} configuration problem(s) (see `seepd check`); going on \
                     with the database only",
                    problems.0.len()
                );
                None
            }
        },
    };
    let db = match (&on.db, &cfg, &on.config) {
        (Some(db), ..) => db.clone(),
        (None, Some(cfg), _) => cfg.service.database.clone(),
        (None, None, Some(dir)) => config::database_path(dir).map_err(|problems| {
            eprintln!("{problems}");
            eprintln!("seepd: cannot find the database in the configuration; pass --db FILE");
            EXIT_CONFIG
        })?,
        (None, None, None) => return Err(2),
    };
    if !db.is_file() {
        eprintln!(
            "seepd: error: there is no database at {} (has `seepd run` started with this \
             configuration?)",
            db.display()
        );
        return Err(1);
    }
    Ok((db, cfg))
}

/// A time from the command line: RFC 3339, or a date (midnight UTC).
fn parse_time(text: &str, what: &str) -> anyhow::Result<chrono::DateTime<chrono::Utc>> {
    if let Ok(t) = chrono::DateTime::parse_from_rfc3339(text) {
        return Ok(t.with_timezone(&chrono::Utc));
    }
    chrono::NaiveDate::parse_from_str(text, "%Y-%m-%d")
        .ok()
        .and_then(|d| d.and_hms_opt(0, 0, 0))
        .map(|d| d.and_utc())
        .ok_or_else(|| anyhow::anyhow!("{what} {text:?} is neither RFC 3339 nor YYYY-MM-DD"))
}

/// Who runs the command ($USER, else "operator").
fn who() -> String {
    std::env::var("USER")
        .ok()
        .filter(|u| !u.is_empty())
        .unwrap_or_else(|| "operator".into())
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
            let result = rt.block_on(crate::service::run(cfg, counters, crate::service::signal()));
            // A task stuck past the shutdown deadline must not hold the exit.
            rt.shutdown_timeout(std::time::Duration::from_millis(500));
            result?;
            Ok(0)
        }
        Command::Status { on } => {
            let (db, cfg) = match operator(&on) {
                Ok(found) => found,
                Err(code) => return Ok(code),
            };
            print!(
                "{}",
                crate::status::report_db(&db, cfg.as_ref(), chrono::Utc::now())?
            );
            Ok(0)
        }
        Command::Export { config, from, to } => {
            let cfg = match load(&config) {
                Ok(c) => c,
                Err(code) => return Ok(code),
            };
            export_range(&cfg, from, to)
        }
        Command::Replay {
            config,
            input,
            format,
            db,
            output,
            send_email,
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
            let t = crate::replay::run_with(
                &cfg,
                format.into(),
                reader,
                &mut store,
                &mut out,
                chrono::Utc::now(),
                send_email,
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
                Some(t) => parse_time(&t, "--at")?,
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
        Command::Report {
            config,
            site,
            from,
            to,
            out,
            db,
        } => {
            let cfg = match load(&config) {
                Ok(c) => c,
                Err(code) => return Ok(code),
            };
            let (from, to) = (parse_time(&from, "--from")?, parse_time(&to, "--to")?);
            let store = crate::store::Store::open(db.as_ref().unwrap_or(&cfg.service.database))?;
            let files =
                crate::report::generate(&cfg, &store, &site, from, to, chrono::Utc::now(), &out)?;
            println!("{}", files.html.display());
            for c in files.csv {
                println!("{}", c.display());
            }
            Ok(0)
        }
        Command::Alerts { on } => {
            let (db, cfg) = match operator(&on) {
                Ok(found) => found,
                Err(code) => return Ok(code),
            };
            print!(
                "{}",
                alerts::commands::report_db(&db, cfg.as_ref(), chrono::Utc::now())?
            );
            Ok(0)
        }
        Command::Ack {
            alert,
            on,
            by,
            note,
        } => {
            let (db, _) = match operator(&on) {
                Ok(found) => found,
                Err(code) => return Ok(code),
            };
            let by = by.unwrap_or_else(who);
            print!(
                "{}",
                alerts::commands::ack(&db, alert, &by, note.as_deref(), chrono::Utc::now())?
            );
            Ok(0)
        }
        Command::Silence {
            on,
            rule,
            instrument,
            until,
            reason,
            by,
            all_levels,
        } => {
            let (db, cfg) = match operator(&on) {
                Ok(found) => found,
                Err(code) => return Ok(code),
            };
            let by = by.unwrap_or_else(who);
            print!(
                "{}",
                alerts::commands::silence(
                    &db,
                    cfg.as_ref(),
                    &alerts::commands::SilenceArgs {
                        rule: rule.as_deref(),
                        object: instrument.as_deref(),
                        until: &until,
                        reason: &reason,
                        by: &by,
                        all_levels,
                    },
                    chrono::Utc::now()
                )?
            );
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
        Command::User { action } => {
            let (db, _) = match operator(action.on()) {
                Ok(found) => found,
                Err(code) => return Ok(code),
            };
            print!("{}", crate::web::user_cmd::run(&db, &action)?);
            Ok(0)
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

/// `seepd export`: backfill a time range.
fn export_range(
    cfg: &Config,
    from: chrono::DateTime<chrono::Utc>,
    to: chrono::DateTime<chrono::Utc>,
) -> anyhow::Result<i32> {
    let Some(e) = &cfg.export else {
        eprintln!("seepd: no [export] section in seepd.toml; nothing to export to");
        return Ok(EXIT_CONFIG);
    };
    anyhow::ensure!(from < to, "--from must be before --to");
    #[cfg(feature = "influx")]
    {
        let rt = tokio::runtime::Runtime::new()?;
        let sink = crate::export::influx::InfluxSink::new(e)?;
        let started = std::time::Instant::now();
        let t = rt.block_on(crate::export::backfill::run(
            cfg,
            e,
            &sink,
            from.timestamp_millis(),
            to.timestamp_millis(),
        ))?;
        eprintln!(
            "export: {} readings, {} derived values, {} points accepted, {} refused (see export_rejects) in {:.3} s",
            t.readings,
            t.derived,
            t.points,
            t.rejected,
            started.elapsed().as_secs_f64()
        );
        Ok(0)
    }
    #[cfg(not(feature = "influx"))]
    {
        let _ = (e, from, to);
        anyhow::bail!("this build has no InfluxDB client: rebuild with the `influx` feature")
    }
}
