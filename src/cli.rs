//! Command-line interface: the list of commands and the dispatch to them. Each command's
//! arguments and run live with the command (`fit_cmd::Args`, `alerts::commands::Ack`, ...);
//! the arguments they share, the exit codes and output that survives a closed pipe are
//! `command`'s. A new command is its `Args` with a `command::Run` impl plus one line here.

use std::process::ExitCode;

use chrono::{DateTime, Utc};
use clap::{Parser, Subcommand};

use crate::command::{emit, ConfigDir, Exit, Operator, Run};
use crate::{alerts, export, fit_cmd, flownet_cmd, manual, plot_cmd, replay, report};
use crate::{section_cmd, web};

pub use crate::command::EXIT_CONFIG;

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
    Run(ConfigDir),
    /// Validate a configuration directory; list every problem, or print a summary.
    Check(ConfigDir),
    /// Run historical readings through the engine and write NDJSON records.
    Replay(replay::Args),
    /// List active, pending and silenced alerts and undeliverable messages.
    Alerts(alerts::commands::Alerts),
    /// Acknowledge an alert: no more reminders or escalation for it.
    Ack(alerts::commands::Ack),
    /// Silence the messages of a rule or of an instrument until a time (mandatory).
    Silence(alerts::commands::Silence),
    /// Draw a cross-section (phreatic line, exit point) as SVG from the stored heads.
    Section(section_cmd::Args),
    /// Solve a section's seepage model once and print the flow net's results.
    Flownet(flownet_cmd::Args),
    /// Write an instrumentation report (HTML with plots, PDF, CSV tables) for a site and period.
    Report(report::Args),
    /// Plot one quantity of one instrument or derived object over a period, as SVG (or PNG).
    Plot(plot_cmd::Args),
    /// Show what the database holds: readings, quarantine counts, export backlog and lag.
    Status(Operator),
    /// Send the stored readings and derived values of a time range to the export server.
    Export(export::backfill::Args),
    /// Refit the stage-response and HST models now, or calibrate a section's seepage model to
    /// its piezometers (`--id SECTION`), and keep the fits in the model history.
    Fit(fit_cmd::Args),
    /// Record a hand-read value (a standpipe dipped, a readout box read): it goes through
    /// the same reduction, rules and store as telemetry, flagged `manual`.
    Record(manual::Record),
    /// Manage the people who may sign in to the web pages (`[http]`).
    #[command(subcommand)]
    User(web::user_cmd::Action),
    /// Run a self-contained demo: embedded broker, the service and simulated loggers.
    Demo(Demo),
}

/// Run the parsed command; returns the process exit code.
pub fn main_with(cli: Cli) -> ExitCode {
    match dispatch(cli.command, Utc::now()) {
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

fn dispatch(command: Command, now: DateTime<Utc>) -> anyhow::Result<()> {
    match command {
        Command::Check(c) => emit(&crate::check_cmd::summary(&c.load()?)),
        Command::Run(c) => crate::service::run_until_signal(c.load()?),
        Command::Status(on) => {
            let (db, cfg) = on.open()?;
            emit(&crate::status::report_db(&db, cfg.as_ref(), now)?)
        }
        Command::Replay(a) => a.run(now),
        Command::Alerts(a) => a.run(now),
        Command::Ack(a) => a.run(now),
        Command::Silence(a) => a.run(now),
        Command::Section(a) => a.run(now),
        Command::Flownet(a) => a.run(now),
        Command::Report(a) => a.run(now),
        Command::Plot(a) => a.run(now),
        Command::Export(a) => a.run(now),
        Command::Fit(a) => a.run(now),
        Command::Record(a) => a.run(now),
        Command::User(a) => a.run(now),
        Command::Demo(a) => a.run(now),
    }
}

/// `seepd demo`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Demo {
    /// Seconds of wall time per simulated day.
    #[arg(long, default_value_t = 6.0)]
    seconds_per_day: f64,
    /// Stop after this many simulated days (default: run until Ctrl-C).
    #[arg(long)]
    days: Option<u32>,
}

impl Run for Demo {
    /// The demo's embedded broker is the `demo-broker` feature; without it, say so.
    fn run(self, _now: DateTime<Utc>) -> anyhow::Result<()> {
        #[cfg(feature = "demo-broker")]
        {
            let rt = tokio::runtime::Runtime::new()?;
            // The example configuration's deadline (its default).
            let shutdown = crate::shutdown::Shutdown::new(std::time::Duration::from_secs(10));
            rt.block_on(async {
                shutdown.request_on_signal();
                crate::demo::run(self.seconds_per_day, self.days, shutdown.clone()).await
            })
        }
        #[cfg(not(feature = "demo-broker"))]
        {
            let _ = (self.seconds_per_day, self.days);
            anyhow::bail!(
                "this build has no embedded broker: rebuild with the `demo-broker` feature"
            )
        }
    }
}
