//! Helpers of the section-calibration tests (`seepage_fit`, `seepage_fit_boundary`): a
//! configuration with one test site, telemetry messages, the heads a model gives at a
//! section's tips, the live residual stored for a piezometer, and running a `seepd` command
//! on a section.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::time::Duration;

use seepd::config::section_model::SeepageSpec;
use seepd::config::Config;
use seepd::derive::flownet::{solve_section, tips};

use crate::common::{count, db, example_config, seepd_output, wait_for, Publisher};

/// The example service file with only the test site `site`, written as `file`.
pub fn site_config(dir: &Path, port: u16, file: &str, site: &str) -> PathBuf {
    let cfg = example_config(dir, port);
    for e in std::fs::read_dir(&cfg).unwrap() {
        let p = e.unwrap().path();
        if p.file_name().is_some_and(|n| n != "seepd.toml") {
            std::fs::remove_file(p).unwrap();
        }
    }
    std::fs::write(cfg.join(file), site).unwrap();
    cfg
}

/// Telemetry of a test: the pool level, then the piezometers' raw values ten minutes later.
pub struct Feed<'a> {
    /// The test's directory (its database).
    pub dir: &'a Path,
    pub publisher: &'a Publisher,
    /// The MQTT topic of the example configuration's JSON format.
    pub topic: &'a str,
    pub pool_gauge: &'a str,
    /// How many sections a pool move re-solves live.
    pub sections: i64,
    /// Messages sent so far.
    pub sent: usize,
}

impl Feed<'_> {
    /// Send the pool level `pool_m` at `t_ms`; when it `solves`, wait for the live solve of
    /// every section at that time; then send `raw` (instrument, value in its raw unit) ten
    /// minutes later and wait until they are stored.
    pub fn send(&mut self, t_ms: i64, pool_m: f64, solves: bool, raw: &[(String, f64)]) {
        let (dir, p) = (self.dir, self.publisher);
        p.send(self.topic, message(t_ms, self.pool_gauge, pool_m));
        if solves {
            let solved = format!("quantity = 'model_flow' AND t_ms = {t_ms}");
            wait_for(Duration::from_secs(60), || {
                (count(dir, "derived", &solved) == self.sections).then_some(())
            })
            .unwrap_or_else(|| panic!("no live solves at {t_ms}"));
        }
        let t = t_ms + 600_000;
        for (id, v) in raw {
            p.send(self.topic, message(t, id, *v));
        }
        self.sent += 1 + raw.len();
        p.wait_acked(self.sent, Duration::from_secs(30));
        wait_for(Duration::from_secs(30), || {
            (count(dir, "readings", &format!("t_ms = {t}")) == raw.len() as i64).then_some(())
        })
        .unwrap_or_else(|| panic!("readings at {t} not stored"));
    }
}

/// A telemetry message of the example configuration's JSON format.
pub fn message(t_ms: i64, id: &str, value: f64) -> String {
    format!(r#"{{"time": {t_ms}, "instrument": "{id}", "value": {value}}}"#)
}

/// Heads at section `s`'s tips solved with `spec` at `pool` and `tail`, m.
pub fn tip_heads(cfg: &Config, s: usize, spec: &SeepageSpec, pool: f64, tail: f64) -> Vec<f64> {
    let pz: Vec<_> = tips(cfg, &cfg.objects.sections[s])
        .into_iter()
        .map(|(id, p)| (id, p, None))
        .collect();
    solve_section(spec, pool, Some(tail), &pz)
        .unwrap()
        .piezometers
        .iter()
        .map(|p| p.modelled_m.unwrap())
        .collect()
}

/// The `model_residual` of piezometer `id` at `t_ms`, once the service has stored it.
pub fn residual_at(dir: &Path, id: &str, t_ms: i64) -> f64 {
    wait_for(Duration::from_secs(30), || {
        db(dir)
            .query_row(
                "SELECT value FROM derived WHERE object = ?1 AND quantity = 'model_residual'
                   AND t_ms = ?2 AND value IS NOT NULL",
                rusqlite::params![id, t_ms],
                |r| r.get::<_, f64>(0),
            )
            .ok()
    })
    .unwrap_or_else(|| panic!("no model_residual of {id} at {t_ms}"))
}

/// `seepd CMD --config CFG --id ID EXTRA...`: (exit code, stdout, stderr).
pub fn on_section(cfg: &Path, cmd: &str, id: &str, extra: &[&str]) -> (i32, String, String) {
    let mut args = vec![cmd, "--config", cfg.to_str().unwrap(), "--id", id];
    args.extend_from_slice(extra);
    seepd_output(&args)
}
