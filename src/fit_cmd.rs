//! `seepd fit`: refit the stage-response and HST models now from a database (the configured one,
//! or a replay database) and print one line per model.
//!
//! Owns the command's arguments (also `--id SECTION`'s, handed to `calibrate_cmd`), the output
//! lines and the exit status; fitting is `watch::fit`.

use std::fmt::Write as _;

use chrono::{DateTime, Utc};

use crate::command::{emit, status, ConfigDb, Run};
use crate::config::Config;
use crate::present::format::utc as time;
use crate::store::{ModelRow, Store};
use crate::watch::fit::{fit_and_store, model_ids, FitError};

/// `seepd fit`'s arguments.
#[derive(clap::Args, Debug)]
pub struct Args {
    #[command(flatten)]
    on: ConfigDb,
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
}

impl Run for Args {
    fn run(self, now: DateTime<Utc>) -> anyhow::Result<()> {
        let cfg = self.on.load()?;
        let store = self.on.open(&cfg)?;
        let mut out = String::new();
        let section = self
            .id
            .as_deref()
            .filter(|id| cfg.objects.sections.iter().any(|s| s.id == *id));
        let code = match section {
            Some(id) => {
                let req = crate::calibrate_cmd::Request {
                    id,
                    times: &self.at,
                    zones: &self.zone,
                    boundaries: &self.boundary,
                    offset_limit_m: self.offset_limit,
                    json: self.json,
                };
                crate::calibrate_cmd::run(&cfg, &store, &req, now, &mut out)?
            }
            None if !self.at.is_empty()
                || !self.zone.is_empty()
                || !self.boundary.is_empty()
                || self.json =>
            {
                anyhow::bail!("--at, --zone, --boundary and --json are for calibrating a section")
            }
            None => run(&cfg, &store, self.id.as_deref(), &mut out)?,
        };
        emit(&out)?;
        status(code)
    }
}

/// One line describing a stored fit.
pub fn describe(m: &ModelRow) -> String {
    let mut s = format!("{}: fitted", m.id);
    if let (Some(a), Some(b), Some(lag)) = (m.a, m.b, m.lag_ms) {
        let _ = write!(
            s,
            " h = a + b·stage(t − lag): b = {b:.4} m/m, a = {a:.3} m, lag = {} h,",
            lag as f64 / 3.6e6
        );
    } else {
        let _ = write!(s, " HST,");
    }
    let _ = write!(
        s,
        " R² = {:.4}, σ = {:.4} m, n = {}, training {} to {}",
        m.r_squared,
        m.sigma,
        m.n,
        time(m.train_start_ms),
        time(m.train_end_ms)
    );
    s
}

/// Fit `id` (or every model) into `store`; returns the exit code: 0, or 1 when `id` was given
/// and could not be fitted. Models that cannot be fitted yet are reported, not errors.
///
/// # Errors
/// Database errors, and an unknown `id`.
pub fn run(cfg: &Config, store: &Store, id: Option<&str>, out: &mut String) -> anyhow::Result<i32> {
    let ids = match id {
        Some(id) if !model_ids(cfg).iter().any(|m| m == id) => anyhow::bail!(
            "no [[stage_response]] or [[hst]] model or [[section]] with id {id:?} (models: {})",
            model_ids(cfg).join(", ")
        ),
        Some(id) => vec![id.to_string()],
        None => model_ids(cfg),
    };
    if ids.is_empty() {
        out.push_str("no [[stage_response]] or [[hst]] models configured\n");
    }
    let now = Utc::now().timestamp_millis();
    let mut failed = false;
    for id in ids {
        match fit_and_store(store, cfg, &id, now) {
            Ok(m) => out.push_str(&(describe(&m) + "\n")),
            Err(FitError::Data(e)) => {
                failed = true;
                let _ = writeln!(out, "{id}: not fitted: {e}");
            }
            Err(FitError::Store(e)) => return Err(e.into()),
        }
    }
    Ok(i32::from(failed && id.is_some()))
}
