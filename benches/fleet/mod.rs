//! Bench helper (not a bench target): writes a valid configuration directory for an invented
//! fleet of N instruments, and field-shaped hourly readings for it.
//!
//! The mix follows the example site: per site one river stage gauge and one barometer, then
//! groups of five instruments on one logger — a vibrating-wire nest (linear and polynomial
//! calibrations, sealed gauges corrected by the site barometer), a transducer nest (4–20 mA and
//! psi) and a standpipe — with a nest object per pair, a toe check on each deep tip, and a
//! factor-of-safety rule on the first toe of every group. Sites hold `SITE_SIZE` instruments,
//! one file each. All names and numbers are invented.

#![allow(dead_code)] // each bench uses part of it

use std::fmt::Write as _;
use std::path::Path;

/// Instruments per site file (a large reach).
pub const SITE_SIZE: usize = 1_000;
/// Instruments per group (on one logger).
pub const GROUP: usize = 5;

/// One instrument of the fleet, as the reading generator needs it.
#[derive(Clone, Debug)]
pub struct Inst {
    pub id: String,
    /// `stage`, `baro`, `vw`, `pt_ma`, `pt_psi`, `sp`.
    pub kind: &'static str,
    /// Whether a reading carries a thermistor value.
    pub temperature: bool,
}

/// Write `seepd.toml` (subscriptions on `fleet/{logger}/json`, broker port `port`) and the site
/// files for `n` instruments (at least 2 per site: a gauge and a barometer) into `dir`.
/// Returns the instruments in the order they were written.
pub fn write(dir: &Path, n: usize, port: u16) -> Vec<Inst> {
    std::fs::create_dir_all(dir).expect("config dir");
    let service = format!(
        "[service]\ndatabase = \"seepd.sqlite\"\n\n[mqtt]\nhost = \"127.0.0.1\"\nport = {port}\n\
         client_id = \"seepd-fleet\"\n\n[[subscription]]\npattern = \"fleet/{{logger}}/json\"\n\
         format = \"json\"\nqos = 1\n"
    );
    std::fs::write(dir.join("seepd.toml"), service).expect("write seepd.toml");
    let mut all = Vec::with_capacity(n);
    let mut site = 0;
    while all.len() < n {
        let size = (n - all.len()).min(SITE_SIZE);
        let (text, insts) = site_file(site, size);
        std::fs::write(dir.join(format!("site-{site:04}.toml")), text).expect("write site");
        all.extend(insts);
        site += 1;
    }
    all
}

/// One site file with `size` instruments.
fn site_file(s: usize, size: usize) -> (String, Vec<Inst>) {
    let mut t = String::with_capacity(size * 700);
    let mut insts = Vec::with_capacity(size);
    let _ = write!(
        t,
        "[site]\nid = \"s{s}\"\nname = \"Invented reach {s}\"\ntime_zone = \"UTC\"\n\n\
         [alerting]\nstatus_url = \"https://status.example.invalid/s{s}\"\n\n\
         [[contacts]]\nname = \"on-call\"\nemails = [\"oncall-{s}@example.invalid\"]\n\n"
    );
    let gauge = format!("S{s}-RIVER");
    let baro = format!("S{s}-BARO");
    let _ = write!(
        t,
        "[[instrument]]\nid = \"{gauge}\"\nkind = \"stage_gauge\"\nstation = 0.0\n\
         installed = \"2020-01-01\"\ninterval_s = 3600\nrange = [0.0, 12.0]\n\
         logger = \"S{s}-LOGR\"\nchannel = \"river\"\n[instrument.stage_gauge]\n\
         water_body = \"river\"\nmode = \"depth_above_datum\"\ndatum_elevation = 90.0\nunit = \"m\"\n\n\
         [[instrument]]\nid = \"{baro}\"\nkind = \"barometer\"\nstation = 0.0\n\
         installed = \"2020-01-01\"\ninterval_s = 3600\nrange = [85.0, 110.0]\n\
         logger = \"S{s}-LOGR\"\nchannel = \"baro\"\n[instrument.barometer]\nunit = \"kPa\"\n\n"
    );
    insts.push(inst(gauge, "stage", false));
    insts.push(inst(baro.clone(), "baro", false));
    let mut g = 0;
    while insts.len() < size {
        let room = size - insts.len();
        group(&mut t, &mut insts, s, g, &baro, room.min(GROUP));
        g += 1;
    }
    (t, insts)
}

fn inst(id: String, kind: &'static str, temperature: bool) -> Inst {
    Inst {
        id,
        kind,
        temperature,
    }
}

/// Common keys of an instrument table.
fn head(
    t: &mut String,
    id: &str,
    kind: &str,
    (station, tip): (f64, f64),
    range: &str,
    logger: &str,
    ch: usize,
) {
    let _ = write!(
        t,
        "[[instrument]]\nid = \"{id}\"\nkind = \"{kind}\"\nreach = \"R\"\nstation = {station:.1}\n\
         offset = 40.0\ntip_elevation = {tip:.1}\ninstalled = \"2020-01-01\"\ninterval_s = 3600\n\
         range = {range}\nlogger = \"{logger}\"\nchannel = \"{ch}\"\n"
    );
}

/// Group `g` of site `s`: up to `k` of the five instruments, and the objects they complete.
fn group(t: &mut String, insts: &mut Vec<Inst>, s: usize, g: usize, baro: &str, k: usize) {
    let logger = format!("S{s}-L{g}");
    let station = 10.0 * g as f64;
    let id = |j: usize| format!("S{s}-G{g}-{}", ["VA", "VB", "PA", "PB", "SP"][j]);
    for j in 0..k {
        let iid = id(j);
        match j {
            0 | 1 => {
                let tip = if j == 0 { 95.0 } else { 86.0 };
                head(
                    t,
                    &iid,
                    "vibrating_wire",
                    (station, tip),
                    "[1800.0, 3200.0]",
                    &logger,
                    j + 1,
                );
                let cal = if j == 0 {
                    "calibration = \"linear\"\ngauge_factor = 0.025\nzero_reading = 8900.0\n\
                     sign = \"zero_minus_current\"\n"
                } else {
                    "calibration = \"polynomial\"\npoly_a = 1.2e-7\npoly_b = -0.0262\npoly_c = 233.2\n"
                };
                let _ = write!(
                    t,
                    "[instrument.vibrating_wire]\nreading = \"frequency_hz\"\n{cal}\
                     calibration_unit = \"kPa\"\nthermal_factor = 0.02\nzero_temperature_c = 15.0\n\
                     barometric_correction = \"sealed\"\nbarometer = \"{baro}\"\n\
                     zero_barometric_kpa = 101.0\n\n"
                );
                insts.push(inst(iid, "vw", true));
            }
            2 => {
                head(
                    t,
                    &iid,
                    "pressure_transducer",
                    (station, 95.2),
                    "[3.5, 20.5]",
                    &logger,
                    j + 1,
                );
                t.push_str(
                    "[instrument.pressure_transducer]\noutput = \"mA\"\n\
                     current_range_ma = [4.0, 20.0]\npressure_span = [0.0, 200.0]\n\
                     span_unit = \"kPa\"\nbarometric_correction = \"none\"\n\n",
                );
                insts.push(inst(iid, "pt_ma", false));
            }
            3 => {
                head(
                    t,
                    &iid,
                    "pressure_transducer",
                    (station, 86.3),
                    "[0.0, 50.0]",
                    &logger,
                    j + 1,
                );
                t.push_str(
                    "[instrument.pressure_transducer]\noutput = \"psi\"\n\
                     barometric_correction = \"none\"\n\n",
                );
                insts.push(inst(iid, "pt_psi", false));
            }
            _ => {
                head(
                    t,
                    &iid,
                    "standpipe",
                    (station, 88.0),
                    "[0.0, 9.0]",
                    &logger,
                    j + 1,
                );
                t.push_str(
                    "[instrument.standpipe]\nreference_elevation = 99.4\ndepth_unit = \"m\"\n\n",
                );
                insts.push(inst(iid, "sp", false));
            }
        }
    }
    for (pair, upper, lower) in [(2, 0, 1), (4, 2, 3)] {
        if k < pair {
            continue;
        }
        let (u, l) = (id(upper), id(lower));
        let _ = write!(
            t,
            "[[nest]]\nid = \"S{s}-G{g}-N{pair}\"\npiezometers = [\"{u}\", \"{l}\"]\ndeadband = 0.02\n\n\
             [[toe]]\nid = \"S{s}-G{g}-T{pair}\"\npiezometer = \"{l}\"\nground_elevation = 96.0\n\
             blanket_thickness = 2.5\ngamma_sat_kn_m3 = 18.5\nfs_target = 1.6\n\n"
        );
    }
    if k >= 2 {
        let _ = write!(
            t,
            "[[rule]]\nid = \"S{s}-G{g}-FS\"\nobject = \"S{s}-G{g}-T2\"\nquantity = \"factor_of_safety\"\n\
             deadband = 0.05\npersist_readings = 2\n[[rule.level]]\nname = \"watch\"\nbelow = 1.3\n\
             response = \"Inspect the landside toe; confirm with a manual reading.\"\n\n"
        );
    }
}

/// The raw value of instrument `inst` at hour `k` (a slow flood wave plus a small per-instrument
/// offset; all within range), and its thermistor value if it has one.
pub fn raw(inst: &Inst, i: usize, k: i64) -> (f64, Option<f64>) {
    // River depth above datum: 3 m rising to 7 m and back over ~20 days, repeating.
    let phase = (k % 480) as f64 / 480.0 * std::f64::consts::TAU;
    let depth = 5.0 - 2.0 * phase.cos();
    let wobble = ((i as i64 * 7 + k * 13) % 11 - 5) as f64;
    match inst.kind {
        "stage" => (round(depth, 3), None),
        "baro" => (round(101.0 + 0.05 * wobble, 2), None),
        // Frequency: lower for more pressure (linear gauge: P = 0.025·(8900 − f²/1000)).
        "vw" => (
            round(2900.0 - 40.0 * depth + wobble, 1),
            Some(round(12.0 + 0.1 * wobble, 1)),
        ),
        "pt_ma" => (round(4.0 + 0.6 * depth + 0.01 * wobble, 3), None),
        "pt_psi" => (round(10.0 + 1.2 * depth + 0.02 * wobble, 3), None),
        _ => (round(8.0 - 0.5 * depth + 0.005 * wobble, 3), None),
    }
}

fn round(v: f64, digits: i32) -> f64 {
    let f = 10f64.powi(digits);
    (v * f).round() / f
}

/// One NDJSON reading line for `seepd replay` (instrument id in the payload).
pub fn ndjson_line(out: &mut String, inst: &Inst, i: usize, k: i64, t0_s: i64) {
    let (v, temp) = raw(inst, i, k);
    let _ = write!(
        out,
        "{{\"time\":{},\"instrument\":\"{}\",\"value\":{v}",
        t0_s + k * 3600,
        inst.id
    );
    if let Some(c) = temp {
        let _ = write!(out, ",\"temperature\":{c}");
    }
    out.push_str("}\n");
}
