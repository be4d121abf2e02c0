//! What every command of the `seepd` binary shares: the common arguments (`--config`, `--db`,
//! `--from`/`--to`, an operator command's database), loading the configuration for a command,
//! output that survives a closed pipe (`seepd alerts | head`), and the exit codes: 0 success,
//! 1 runtime failure, 2 usage (clap), 78 configuration error (EX_CONFIG).
//!
//! Each command's own arguments live with the command (`fit_cmd::Args`, `alerts::commands::Ack`,
//! ...) and run through `Run::run`; `cli` only lists them. Must not hold a command's logic.

use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::Context as _;
use chrono::{DateTime, Utc};

use crate::config::{self, Config};

/// Exit code for a configuration error (sysexits EX_CONFIG).
pub const EXIT_CONFIG: u8 = 78;

/// A command: its parsed arguments, run at `now` (the time the command started).
pub trait Run {
    /// Run the command; output already written.
    ///
    /// # Errors
    /// The command's failure, or an `Exit` whose message is already printed.
    fn run(self, now: DateTime<Utc>) -> anyhow::Result<()>;
}

/// A command's end other than success: the exit code, its message already printed.
#[derive(Debug, thiserror::Error)]
#[error("exit {0}")]
pub struct Exit(pub u8);

/// `--config DIR`, for the commands that need a configuration that loads.
#[derive(clap::Args, Debug)]
pub struct ConfigDir {
    /// The configuration directory (seepd.toml and the site files).
    #[arg(long = "config", value_name = "DIR")]
    pub dir: PathBuf,
}

impl ConfigDir {
    /// Load the configuration, or print every problem and end with the config exit code.
    ///
    /// # Errors
    /// `Exit(78)` when the configuration has problems (already printed).
    pub fn load(&self) -> anyhow::Result<Config> {
        let cfg = config::load_dir(&self.dir).map_err(|problems| {
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

/// `--config DIR [--db FILE]`: a loaded configuration and the database it names, or another.
#[derive(clap::Args, Debug)]
pub struct ConfigDb {
    #[command(flatten)]
    pub config: ConfigDir,
    /// Database (default: the configured one; a replay's database works too).
    #[arg(long = "db", value_name = "FILE")]
    pub db: Option<PathBuf>,
}

impl ConfigDb {
    /// Load the configuration (as `ConfigDir::load`).
    ///
    /// # Errors
    /// As `ConfigDir::load`.
    pub fn load(&self) -> anyhow::Result<Config> {
        self.config.load()
    }

    /// The chosen database, or the configured one.
    pub fn path<'a>(&'a self, cfg: &'a Config) -> &'a Path {
        self.db.as_deref().unwrap_or(&cfg.service.database)
    }

    /// Open the chosen database, or the configured one.
    ///
    /// # Errors
    /// The database cannot be opened.
    pub fn open(&self, cfg: &Config) -> anyhow::Result<crate::store::Store> {
        Ok(crate::store::Store::open(self.path(cfg))?)
    }
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

impl Operator {
    /// The database and (if it loads) the configuration. A configuration with problems does
    /// not stop an operator command: the problems are printed as a warning and the database is
    /// taken from `[service] database` (or `--db`).
    ///
    /// # Errors
    /// `Exit(78)` when no database can be found; `Exit(1)` when the database file does not
    /// exist (a new empty one would report "no alerts").
    pub fn open(&self) -> anyhow::Result<(PathBuf, Option<Config>)> {
        let cfg = self.config.as_deref().and_then(|dir| {
            config::load_dir(dir)
                .map_err(|problems| {
                    eprintln!("{problems}");
                    eprintln!(
                        "seepd: warning: {} configuration problem(s) (see `seepd check`); \
                         going on with the database only",
                        problems.0.len()
                    );
                })
                .ok()
        });
        let db = match (&self.db, &cfg, &self.config) {
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
}

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

/// Write `text` to the file `out`, or to standard output.
///
/// # Errors
/// The file cannot be written.
pub fn write_or_emit(out: Option<&Path>, text: &str) -> anyhow::Result<()> {
    match out {
        Some(p) => std::fs::write(p, text).with_context(|| format!("writing {}", p.display())),
        None => emit(text),
    }
}

/// Whether an error is a write to a closed pipe.
pub fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.chain().any(|c| {
        c.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

/// `--by NAME`, or who runs the command (`$USER`, else `$LOGNAME`, else "operator").
pub fn who(by: Option<String>) -> String {
    by.unwrap_or_else(|| {
        ["USER", "LOGNAME"]
            .iter()
            .filter_map(|v| std::env::var(v).ok())
            .find(|u| !u.trim().is_empty())
            .unwrap_or_else(|| "operator".into())
    })
}

/// A command's status code as the process's: 0 success, else `Exit` (1 when it does not fit).
///
/// # Errors
/// `Exit(code)` for a non-zero code.
pub fn status(code: i32) -> anyhow::Result<()> {
    match u8::try_from(code) {
        Ok(0) => Ok(()),
        Ok(c) => Err(Exit(c).into()),
        Err(_) => Err(Exit(1).into()),
    }
}
