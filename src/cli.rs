//! Command-line interface: argument parsing and dispatch to the library. Exit codes: 0 success,
//! 1 runtime failure, 2 usage (clap), 78 configuration error (EX_CONFIG). Output goes through
//! `emit`, which treats a closed pipe (`seepd alerts | head`) as the end of the output.

use std::fs::File;
use std::io::{BufReader, BufWriter, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::Arc;

use anyhow::Context as _;
use chrono::{DateTime, Utc};
use clap::{Parser, Subcommand, ValueEnum};

use crate::alerts;
use crate::config::{self, Config, PayloadFormat};
use crate::ingest::progress::Counters;

/// Exit code for a configuration error (sysexits EX_CONFIG).
pub const EXIT_CONFIG: u8 = 78;

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

/// `--config DIR`, for the commands that need a configuration that loads.
#[derive(clap::Args, Debug)]
pub struct ConfigDir {
    /// The configuration directory (seepd.toml and the site files).
    #[arg(long = "config", value_name = "DIR")]
    pub dir: PathBuf,
}

/// `--from T --to T`: a period of stored data.
#[derive(clap::Args, Debug)]
pub struct Period {
    /// Start (RFC 3339 or YYYY-MM-DD, UTC).
    #[arg(long, value_name = "TIME", value_parser = crate::timetext::instant)]
    pub from: DateTime<Utc>,
    /// End, exclusive (RFC 3339 or YYYY-MM-DD, UTC).
    #[arg(long, value_name = "TIME", value_parser = crate::timetext::instant)]
    pub to: DateTime<Utc>,
}

/// `--db FILE`, for the commands that read the database.
#[derive(clap::Args, Debug)]
pub struct DbFile {
    /// Database (default: the configured one).
    #[arg(long = "db", value_name = "FILE")]
    pub file: Option<PathBuf>,
}

impl DbFile {
    /// Open the chosen database, or the configured one.
    fn open(&self, cfg: &Config) -> anyhow::Result<crate::store::Store> {
        Ok(crate::store::Store::open(self.path(cfg))?)
    }

    fn path<'a>(&'a self, cfg: &'a Config) -> &'a std::path::Path {
        self.file.as_ref().unwrap_or(&cfg.service.database)
    }
}

#[derive(Subcommand, Debug)]
pub enum Command {
    /// Run the service: subscribe to the broker and store reduced readings.
    Run {
        #[command(flatten)]
        config: ConfigDir,
    },
    /// Validate a configuration directory; list every problem, or print a summary.
    Check {
        #[command(flatten)]
        config: ConfigDir,
    },
    /// Run historical readings through the engine and write NDJSON records.
    Replay {
        #[command(flatten)]
        config: ConfigDir,
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
        #[command(flatten)]
        config: ConfigDir,
        #[command(flatten)]
        db: DbFile,
        /// Section id.
        #[arg(long)]
        id: String,
        /// Time (RFC 3339 or YYYY-MM-DD, UTC); default: now (the latest heads).
        #[arg(long, value_name = "TIME", value_parser = crate::timetext::instant)]
        at: Option<DateTime<Utc>>,
        /// Output file (default: standard output).
        #[arg(long, value_name = "FILE")]
        out: Option<PathBuf>,
    },
    /// Solve a section's seepage model once and print the flow net's results.
    Flownet {
        #[command(flatten)]
        config: ConfigDir,
        #[command(flatten)]
        db: DbFile,
        /// Section id.
        #[arg(long)]
        id: String,
        /// Solve at the levels stored at this time (RFC 3339 or YYYY-MM-DD, UTC); default: now.
        #[arg(long, value_name = "TIME", value_parser = crate::timetext::instant, conflicts_with = "upstream")]
        at: Option<DateTime<Utc>>,
        /// Upstream (pool) level, m, instead of the stored one.
        #[arg(long, value_name = "LEVEL", allow_negative_numbers = true)]
        upstream: Option<f64>,
        /// Downstream (tail-water) level, m, with --upstream.
        #[arg(
            long,
            value_name = "LEVEL",
            allow_negative_numbers = true,
            requires = "upstream"
        )]
        downstream: Option<f64>,
        /// Print one JSON object (SI units).
        #[arg(long)]
        json: bool,
        /// Also draw the flow net as SVG into this file.
        #[arg(long, value_name = "FILE")]
        out: Option<PathBuf>,
    },
    /// Write an instrumentation report (HTML with plots, PDF, CSV tables) for a site and period.
    Report {
        #[command(flatten)]
        config: ConfigDir,
        #[command(flatten)]
        db: DbFile,
        #[arg(long)]
        site: String,
        #[command(flatten)]
        period: Period,
        /// Output directory.
        #[arg(long, value_name = "DIR")]
        out: PathBuf,
        /// Documents to write, comma-separated: any of html, pdf, csv (default: all).
        #[arg(long, value_name = "LIST", default_value_t)]
        format: crate::config::Formats,
    },
    /// Plot one quantity of one instrument or derived object over a period, as SVG (or PNG).
    Plot {
        #[command(flatten)]
        config: ConfigDir,
        #[command(flatten)]
        db: DbFile,
        /// Instrument or derived-object id.
        #[arg(long)]
        id: String,
        /// Quantity (default: an instrument's total head or water level).
        #[arg(long)]
        quantity: Option<String>,
        #[command(flatten)]
        period: Period,
        /// Output file (default: standard output).
        #[arg(long, value_name = "FILE")]
        out: Option<PathBuf>,
    },
    /// Show what the database holds: readings, quarantine counts, export backlog and lag.
    Status {
        #[command(flatten)]
        on: Operator,
    },
    /// Send the stored readings and derived values of a time range to the export server.
    Export {
        #[command(flatten)]
        config: ConfigDir,
        /// Start of the range (RFC 3339 or YYYY-MM-DD, inclusive).
        #[arg(long, value_name = "TIME", value_parser = crate::timetext::instant)]
        from: DateTime<Utc>,
        /// End of the range (RFC 3339 or YYYY-MM-DD, exclusive).
        #[arg(long, value_name = "TIME", value_parser = crate::timetext::instant)]
        to: DateTime<Utc>,
    },
    /// Refit the stage-response and HST models now, or calibrate a section's seepage model to
    /// its piezometers (`--id SECTION`), and keep the fits in the model history.
    Fit {
        #[command(flatten)]
        config: ConfigDir,
        /// Database (default: the configured one); a replay database works too.
        #[command(flatten)]
        db: DbFile,
        /// Fit only this model, or calibrate this section (default: every configured model).
        #[arg(long, value_name = "MODEL|SECTION")]
        id: Option<String>,
        /// Section: calibrate to the heads stored at this time (RFC 3339 or YYYY-MM-DD, UTC;
        /// repeat for several times, fitted together); default: now.
        #[arg(long, value_name = "TIME", value_parser = crate::timetext::instant, requires = "id")]
        at: Vec<DateTime<Utc>>,
        /// Section: fit this zone's permeability factor (repeat; default: every zone, unless
        /// --boundary is given).
        #[arg(long, value_name = "NAME", requires = "id")]
        zone: Vec<String>,
        /// Section: fit an offset on this water boundary's level (repeat; default: none).
        #[arg(long, value_name = "NAME", requires = "id")]
        boundary: Vec<String>,
        /// Section: search boundary offsets within ± this many metres.
        #[arg(long, value_name = "M", default_value_t = crate::derive::calibration::OFFSET_LIMIT_M, requires = "boundary")]
        offset_limit: f64,
        /// Section: print one JSON object (SI units).
        #[arg(long, requires = "id")]
        json: bool,
    },
    /// Record a hand-read value (a standpipe dipped, a readout box read): it goes through
    /// the same reduction, rules and store as telemetry, flagged `manual`.
    Record {
        #[command(flatten)]
        config: ConfigDir,
        /// Instrument id.
        instrument: String,
        /// The value in the instrument's raw unit (what its logger would send).
        #[arg(allow_negative_numbers = true)]
        value: String,
        /// The thermistor temperature read with it, °C (vibrating-wire piezometers: the
        /// thermal correction needs it).
        #[arg(long, value_name = "C", allow_hyphen_values = true)]
        temperature: Option<String>,
        /// When it was read (RFC 3339 or YYYY-MM-DD, UTC); default: now.
        #[arg(long, value_name = "TIME", value_parser = crate::timetext::instant)]
        time: Option<DateTime<Utc>>,
        /// Who read it (default: the login name).
        #[arg(long, value_name = "NAME")]
        by: Option<String>,
    },
    /// Manage the people who may sign in to the web pages (`[http]`).
    User {
        #[command(subcommand)]
        action: UserAction,
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

/// The `seepd user` subcommands.
#[derive(clap::Subcommand, Debug)]
pub enum UserAction {
    /// Add a user, or change their password (read from standard input, one line).
    Add {
        name: String,
        /// `viewer` reads the pages; `responder` also acknowledges, silences and records
        /// manual readings.
        #[arg(long, default_value = "viewer")]
        role: String,
        #[command(flatten)]
        on: Operator,
    },
    /// Remove a user.
    Remove {
        name: String,
        #[command(flatten)]
        on: Operator,
    },
    /// List the users.
    List {
        #[command(flatten)]
        on: Operator,
    },
}

impl UserAction {
    /// Where the database is.
    pub fn on(&self) -> &Operator {
        match self {
            UserAction::Add { on, .. }
            | UserAction::Remove { on, .. }
            | UserAction::List { on } => on,
        }
    }
}

/// Run `action` on the database `db`.
///
/// # Errors
/// As `user_cmd::add`, `remove` and `list`.
fn user(db: &Path, action: &UserAction) -> anyhow::Result<String> {
    use crate::web::user_cmd;
    match action {
        UserAction::Add { name, role, .. } => user_cmd::add(db, name, role, &mut user_cmd::stdin()),
        UserAction::Remove { name, .. } => user_cmd::remove(db, name),
        UserAction::List { .. } => user_cmd::list(db),
    }
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

/// A command's end other than success: the exit code, its message already printed.
#[derive(Debug, thiserror::Error)]
#[error("exit {0}")]
pub struct Exit(pub u8);

/// Write `text` to standard output. A closed pipe (the reader went away, as `| head` does) ends
/// the output quietly instead of panicking.
///
/// # Errors
/// Other write errors.
pub fn emit(text: &str) -> anyhow::Result<()> {
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => Err(e.into()),
        _ => Ok(()),
    }
}

/// Load a configuration, or print every problem and end with the config exit code.
fn load(dir: &ConfigDir) -> anyhow::Result<Config> {
    let cfg = config::load_dir(&dir.dir).map_err(|problems| {
        eprintln!("{problems}");
        eprintln!(
            "seepd: {} configuration problem(s); not starting",
            problems.0.len()
        );
        Exit(EXIT_CONFIG)
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
fn operator(on: &Operator) -> anyhow::Result<(PathBuf, Option<Config>)> {
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
            Exit(EXIT_CONFIG)
        })?,
        (None, None, None) => return Err(Exit(2).into()),
    };
    if !db.is_file() {
        eprintln!(
            "seepd: error: there is no database at {} (has `seepd run` started with this \
             configuration?)",
            db.display()
        );
        return Err(Exit(1).into());
    }
    Ok((db, cfg))
}

/// Write `text` to `out`, or to standard output.
fn write_or_emit(out: Option<&Path>, text: &str) -> anyhow::Result<()> {
    match out {
        Some(p) => std::fs::write(p, text).with_context(|| format!("writing {}", p.display())),
        None => emit(text),
    }
}

/// Who runs the command, for `--by` (`$USER`, else `$LOGNAME`, else "operator").
fn who() -> String {
    ["USER", "LOGNAME"]
        .iter()
        .filter_map(|v| std::env::var(v).ok())
        .find(|u| !u.trim().is_empty())
        .unwrap_or_else(|| "operator".into())
}

/// Run the parsed command; returns the process exit code.
pub fn main_with(cli: Cli) -> ExitCode {
    match dispatch(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => match e.downcast_ref::<Exit>() {
            Some(Exit(code)) => ExitCode::from(*code),
            None => {
                eprintln!("seepd: error: {e:#}");
                ExitCode::FAILURE
            }
        },
    }
}

fn dispatch(cli: Cli) -> anyhow::Result<()> {
    let now = Utc::now();
    match cli.command {
        Command::Check { config } => emit(&config::summary(&load(&config)?)),
        Command::Run { config } => run(load(&config)?),
        Command::Status { on } => {
            let (db, cfg) = operator(&on)?;
            emit(&crate::status::report_db(&db, cfg.as_ref(), now)?)
        }
        Command::Export { config, from, to } => export_range(&load(&config)?, from, to),
        Command::Replay {
            config,
            input,
            format,
            db,
            output,
            send_email,
        } => replay(
            &load(&config)?,
            &input,
            format,
            db.as_deref(),
            output.as_deref(),
            send_email,
        ),
        Command::Section {
            config,
            db,
            id,
            at,
            out,
        } => {
            let cfg = load(&config)?;
            let svg = crate::section_cmd::render(&cfg, &db.open(&cfg)?, &id, at.unwrap_or(now))?;
            write_or_emit(out.as_deref(), &svg)
        }
        Command::Flownet {
            config,
            db,
            id,
            at,
            upstream,
            downstream,
            json,
            out,
        } => {
            use crate::flownet_cmd::{printed, run, Levels};
            let cfg = load(&config)?;
            let levels = match upstream {
                Some(pool_m) => Levels::Given {
                    pool_m,
                    tail_m: downstream,
                },
                None => Levels::At(at.unwrap_or(now)),
            };
            let (s, solved) = run(&cfg, db.path(&cfg), &id, &levels)?;
            if let Some(path) = &out {
                let svg = crate::section_cmd::flownet_svg(&cfg, s, &solved.net);
                write_or_emit(Some(path), &svg)?;
            }
            emit(&printed(&id, &solved, json))
        }
        Command::Report {
            config,
            db,
            site,
            period: Period { from, to },
            out,
            format,
        } => {
            let cfg = load(&config)?;
            let store = db.open(&cfg)?;
            let files =
                crate::report::generate(&cfg, &store, &site, (from, to), now, format, &out)?;
            let list: String = files.iter().map(|p| format!("{}\n", p.display())).collect();
            emit(&list)
        }
        Command::Plot {
            config,
            db,
            id,
            quantity,
            period: Period { from, to },
            out,
        } => {
            let cfg = load(&config)?;
            let store = db.open(&cfg)?;
            let svg = crate::plot_cmd::render(&cfg, &store, &id, quantity.as_deref(), from, to)?;
            match out.as_deref() {
                Some(p) if p.extension().is_some_and(|e| e.eq_ignore_ascii_case("png")) => {
                    let png = crate::plot_cmd::png(&svg)?;
                    std::fs::write(p, png).with_context(|| format!("writing {}", p.display()))
                }
                _ => write_or_emit(out.as_deref(), &svg),
            }
        }
        Command::Alerts { on } => {
            let (db, cfg) = operator(&on)?;
            emit(&alerts::commands::report_db(&db, cfg.as_ref(), now)?)
        }
        Command::Ack {
            alert,
            on,
            by,
            note,
        } => {
            let (db, _) = operator(&on)?;
            let by = by.unwrap_or_else(who);
            emit(&alerts::commands::ack(
                &db,
                alert,
                &by,
                note.as_deref(),
                now,
            )?)
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
            let (db, cfg) = operator(&on)?;
            let by = by.unwrap_or_else(who);
            let args = alerts::commands::SilenceArgs {
                rule: rule.as_deref(),
                object: instrument.as_deref(),
                until: &until,
                reason: &reason,
                by: &by,
                all_levels,
            };
            emit(&alerts::commands::silence(&db, cfg.as_ref(), &args, now)?)
        }
        Command::Fit {
            config,
            db,
            id,
            at,
            zone,
            boundary,
            offset_limit,
            json,
        } => {
            let cfg = load(&config)?;
            let mut out = String::new();
            let store = db.open(&cfg)?;
            let section = id
                .as_deref()
                .filter(|id| cfg.objects.sections.iter().any(|s| s.id == *id));
            let code = match section {
                Some(id) => {
                    let req = crate::calibrate_cmd::Request {
                        id,
                        times: &at,
                        zones: &zone,
                        boundaries: &boundary,
                        offset_limit_m: offset_limit,
                        json,
                    };
                    crate::calibrate_cmd::run(&cfg, &store, &req, now, &mut out)?
                }
                None if !at.is_empty() || !zone.is_empty() || !boundary.is_empty() || json => {
                    anyhow::bail!(
                        "--at, --zone, --boundary and --json are for calibrating a section"
                    )
                }
                None => crate::fit_cmd::run(&cfg, &store, id.as_deref(), &mut out)?,
            };
            emit(&out)?;
            match u8::try_from(code) {
                Ok(0) => Ok(()),
                Ok(c) => Err(Exit(c).into()),
                Err(_) => Err(Exit(1).into()),
            }
        }
        Command::Record {
            config,
            instrument,
            value,
            temperature,
            time,
            by,
        } => {
            let cfg = load(&config)?;
            let by = by.unwrap_or_else(who);
            let given = crate::manual::Given {
                instrument: &instrument,
                value: &value,
                temperature: temperature.as_deref(),
                time,
                by: &by,
            };
            emit(&crate::manual::record_cmd(&cfg, &given)?)
        }
        Command::User { action } => {
            let (db, _) = operator(action.on())?;
            emit(&user(&db, &action)?)
        }
        Command::Demo {
            seconds_per_day,
            days,
        } => demo(seconds_per_day, days),
    }
}

/// `seepd run`: the service until SIGINT/SIGTERM.
fn run(cfg: Config) -> anyhow::Result<()> {
    let cfg = Arc::new(cfg);
    let rt = tokio::runtime::Runtime::new()?;
    let counters = Arc::new(Counters::default());
    let shutdown = crate::service::shutdown_for(&cfg);
    let result = rt.block_on(async {
        shutdown.request_on_signal();
        crate::service::run(cfg, counters, shutdown.clone()).await
    });
    // A task stuck past the shutdown deadline must not hold the exit.
    rt.shutdown_timeout(std::time::Duration::from_millis(500));
    result
}

/// `seepd replay`.
fn replay(
    cfg: &Config,
    input: &Path,
    format: ReplayFormat,
    db: Option<&Path>,
    output: Option<&Path>,
    send_email: bool,
) -> anyhow::Result<()> {
    let mut store = match db {
        Some(p) => crate::store::Store::open(p)?,
        None => crate::store::Store::open_in_memory()?,
    };
    store.sync_instruments(cfg, Utc::now())?;
    let reader =
        BufReader::new(File::open(input).with_context(|| format!("opening {}", input.display()))?);
    let mut out: Box<dyn Write> = match output {
        Some(p) => Box::new(BufWriter::new(
            File::create(p).with_context(|| format!("creating {}", p.display()))?,
        )),
        None => Box::new(BufWriter::new(std::io::stdout().lock())),
    };
    let started = std::time::Instant::now();
    let t = crate::replay::run_with(
        cfg,
        format.into(),
        reader,
        &mut store,
        &mut out,
        Utc::now(),
        send_email,
    );
    let t = match t {
        Err(e) if is_broken_pipe(&e) => return Ok(()),
        other => other?,
    };
    eprintln!(
        "replay: {} lines, {} readings stored, {} duplicates, {} quarantined, {} records in {:.3} s",
        t.lines,
        t.readings,
        t.duplicates,
        t.quarantined,
        t.records,
        started.elapsed().as_secs_f64()
    );
    Ok(())
}

/// Whether an error is a write to a closed pipe.
fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.chain().any(|c| {
        c.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

/// `seepd demo`.
fn demo(seconds_per_day: f64, days: Option<u32>) -> anyhow::Result<()> {
    #[cfg(feature = "demo-broker")]
    {
        let rt = tokio::runtime::Runtime::new()?;
        // The example configuration's deadline (its default).
        let shutdown = crate::shutdown::Shutdown::new(std::time::Duration::from_secs(10));
        rt.block_on(async {
            shutdown.request_on_signal();
            crate::demo::run(seconds_per_day, days, shutdown.clone()).await
        })
    }
    #[cfg(not(feature = "demo-broker"))]
    {
        let _ = (seconds_per_day, days);
        anyhow::bail!("this build has no embedded broker: rebuild with the `demo-broker` feature")
    }
}

/// `seepd export`: backfill a time range.
fn export_range(cfg: &Config, from: DateTime<Utc>, to: DateTime<Utc>) -> anyhow::Result<()> {
    let Some(e) = &cfg.export else {
        eprintln!("seepd: no [export] section in seepd.toml; nothing to export to");
        return Err(Exit(EXIT_CONFIG).into());
    };
    anyhow::ensure!(from < to, "--from must be before --to");
    #[cfg(feature = "influx")]
    {
        let rt = tokio::runtime::Runtime::new()?;
        let sink = crate::export::influx::InfluxSink::new(e)?;
        let started = std::time::Instant::now();
        let t = rt.block_on(async {
            let stop = crate::shutdown::Shutdown::new(std::time::Duration::ZERO);
            stop.request_on_signal();
            crate::export::backfill::run(
                cfg,
                e,
                &sink,
                from.timestamp_millis(),
                to.timestamp_millis(),
                &stop,
            )
            .await
        })?;
        eprintln!(
            "export: {} readings, {} derived values, {} points accepted, {} refused (see export_rejects) in {:.3} s",
            t.readings,
            t.derived,
            t.points,
            t.rejected,
            started.elapsed().as_secs_f64()
        );
        Ok(())
    }
    #[cfg(not(feature = "influx"))]
    {
        let _ = (e, from, to);
        anyhow::bail!("this build has no InfluxDB client: rebuild with the `influx` feature")
    }
}
