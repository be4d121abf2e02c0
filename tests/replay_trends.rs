//! Trends, sensor health and the stage-response model through the real binary: a replayed
//! rising series gives the Theil–Sen `rate_24h` computed here independently, a spike is
//! flagged and left out of a nest gradient, a flatline is flagged; `seepd fit` on a replay
//! database recovers a known lag and ratio, and a later replayed reading's `stage_residual` is
//! measured − predicted.

mod common;

use std::path::Path;
use std::process::Command;

use serde_json::Value;

const GW: f64 = 9.81;
const PSI: f64 = 6.894_757_293_168;
const H_MS: i64 = 3_600_000;

fn line(t_ms: i64, id: &str, v: f64) -> String {
    format!("{{\"time\":{t_ms},\"instrument\":\"{id}\",\"value\":{v}}}\n")
}

fn run(args: &[&str]) -> std::process::Output {
    let out = Command::new(common::seepd_bin())
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "seepd {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// Replay `input` with the configuration in `cfg` (into `db` if given); the records.
fn replay(cfg: &Path, input: &str, db: Option<&Path>) -> Vec<Value> {
    let dir = tempfile::tempdir().unwrap();
    let (inp, out) = (dir.path().join("in.ndjson"), dir.path().join("out.ndjson"));
    std::fs::write(&inp, input).unwrap();
    let mut args = vec![
        "replay".to_string(),
        "--config".into(),
        cfg.display().to_string(),
        "--input".into(),
        inp.display().to_string(),
        "--output".into(),
        out.display().to_string(),
    ];
    if let Some(db) = db {
        args.extend(["--db".into(), db.display().to_string()]);
    }
    run(&args.iter().map(String::as_str).collect::<Vec<_>>());
    std::fs::read_to_string(&out)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

fn t_text(t_ms: i64) -> String {
    chrono::DateTime::from_timestamp_millis(t_ms)
        .unwrap()
        .to_rfc3339_opts(chrono::SecondsFormat::Millis, true)
}

fn derived<'a>(recs: &'a [Value], id: &str, quantity: &str, t_ms: i64) -> Vec<&'a Value> {
    recs.iter()
        .filter(|r| {
            r["type"] == "derived"
                && r["id"] == id
                && r["quantity"] == quantity
                && r["time"] == t_text(t_ms)
        })
        .collect()
}

fn flags(recs: &[Value], id: &str, t_ms: i64) -> Vec<String> {
    let r = recs
        .iter()
        .find(|r| {
            r["type"] == "value"
                && r["id"] == id
                && r["quantity"] == "total_head"
                && r["time"] == t_text(t_ms)
        })
        .unwrap_or_else(|| panic!("no total_head of {id} at {}", t_text(t_ms)));
    r["flags"]
        .as_array()
        .map(|a| a.iter().map(|f| f.as_str().unwrap().to_string()).collect())
        .unwrap_or_default()
}

/// Median of all pairwise slopes per day (Theil 1950; Sen 1968) [pub], written out here.
fn theil_sen_per_day(points: &[(i64, f64)]) -> f64 {
    let mut s = Vec::new();
    for i in 0..points.len() {
        for j in i + 1..points.len() {
            let dt = (points[j].0 - points[i].0) as f64 / 86_400_000.0;
            s.push((points[j].1 - points[i].1) / dt);
        }
    }
    s.sort_by(f64::total_cmp);
    let n = s.len();
    if n % 2 == 1 {
        s[n / 2]
    } else {
        (s[n / 2 - 1] + s[n / 2]) / 2.0
    }
}

#[test]
fn rising_series_rate_spike_and_flatline() {
    let cfg = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    let t0 = chrono::DateTime::parse_from_rfc3339("2026-05-01T00:00:00Z")
        .unwrap()
        .timestamp_millis();
    // AB-PZ-2B (psi, tip 86.3 m) rises 2 cm/h with a few mm of noise; one spike of +2 m.
    let head_2b = |k: i64| 95.0 + 0.02 * k as f64 + 0.002 * ((k * 7) % 5 - 2) as f64;
    let spike_k = 35;
    let mut input = String::new();
    let mut clean = Vec::new();
    for k in 0..=40 {
        let t = t0 + k * H_MS;
        // AB-PZ-2A (4–20 mA over 0–200 kPa, tip 95.2 m) a little above 96.3 m.
        let h2a = 96.3 + 0.001 * (k % 3) as f64;
        input += &line(t, "AB-PZ-2A", 4.0 + 16.0 * (h2a - 95.2) * GW / 200.0);
        let h = head_2b(k) + if k == spike_k { 2.0 } else { 0.0 };
        input += &line(t, "AB-PZ-2B", (h - 86.3) * GW / PSI);
        if k != spike_k {
            clean.push((t, head_2b(k)));
        }
        // AB-SP-3 (standpipe): the sounder reads the same depth every hour.
        input += &line(t, "AB-SP-3", 4.0);
    }
    let recs = replay(&cfg, &input, None);

    // The spike is confirmed by the next reading (one `flag` record for its time), and no
    // other reading is flagged.
    let t_spike = t0 + spike_k * H_MS;
    let flag_recs: Vec<&Value> = recs.iter().filter(|r| r["type"] == "flag").collect();
    assert_eq!(flag_recs.len(), 1, "{flag_recs:?}");
    assert_eq!(flag_recs[0]["id"], "AB-PZ-2B");
    assert_eq!(flag_recs[0]["time"], t_text(t_spike));
    assert_eq!(flag_recs[0]["flags"], serde_json::json!(["spike"]));
    for k in 0..=40 {
        assert!(flags(&recs, "AB-PZ-2B", t0 + k * H_MS).is_empty(), "{k}");
    }
    // ... and the nest gradient at that time is recomputed without it (the last record for
    // that time wins).
    let g = derived(&recs, "AB-N2", "vertical_gradient", t_spike);
    let last = g.last().unwrap();
    assert!(last["value"].is_null(), "{last}");
    assert!(
        last["reason"].as_str().unwrap().contains("rejected: spike"),
        "{last}"
    );
    // The gradient comes back with the next reading.
    let g = derived(&recs, "AB-N2", "vertical_gradient", t_spike + H_MS);
    assert!(g.last().unwrap()["value"].is_f64());

    // rate_24h at the last reading: Theil–Sen of the unflagged heads of the last 24 h (ends
    // included), computed here from the heads the raw values were made from.
    let t_end = t0 + 40 * H_MS;
    let window: Vec<(i64, f64)> = clean
        .iter()
        .copied()
        .filter(|(t, _)| *t >= t_end - 24 * H_MS)
        .collect();
    assert_eq!(window.len(), 24);
    let want = theil_sen_per_day(&window);
    let got = derived(&recs, "AB-PZ-2B", "rate_24h", t_end)[0]["value"]
        .as_f64()
        .unwrap();
    assert!((got - want).abs() < 1e-9, "rate_24h {got} vs {want}");
    assert!((got - 0.48).abs() < 0.05, "{got}");
    let r = derived(&recs, "AB-PZ-2B", "rate_24h", t_end)[0];
    assert_eq!(r["unit"], "m/day");

    // Flatline: the 24th identical reading is flagged, the 23rd not.
    assert!(flags(&recs, "AB-SP-3", t0 + 22 * H_MS).is_empty());
    assert_eq!(flags(&recs, "AB-SP-3", t0 + 23 * H_MS), ["flatline"]);
    // Completeness of a gauge read every hour since the start of the day: 100 %.
    let c = derived(&recs, "AB-PZ-2B", "completeness_24h", t_end)[0]["value"]
        .as_f64()
        .unwrap();
    assert!((c - 100.0).abs() < 1e-9, "{c}");
}

const SERVICE: &str = "[[subscription]]\npattern = \"t/{logger}/json\"\nformat = \"json\"\n";

const SITE: &str = r#"[site]
id = "t"

[[instrument]]
id = "T-GAUGE"
kind = "stage_gauge"
installed = "2026-01-01"
interval_s = 3600
range = [0.0, 200.0]
[instrument.stage_gauge]
water_body = "river"
mode = "elevation"
unit = "m"

[[instrument]]
id = "T-PZ"
kind = "pressure_transducer"
tip_elevation = 40.0
installed = "2026-01-01"
interval_s = 3600
range = [0.0, 2000.0]
[instrument.pressure_transducer]
output = "kPa"
barometric_correction = "none"

[[stage_response]]
id = "T-RESP"
piezometer = "T-PZ"
stage_gauge = "T-GAUGE"
training_days = 30
lag_range_h = [0, 24]
lag_step_h = 1
"#;

/// Synthetic river stage (m) at hour `k`: two periods, so one lag fits best.
fn stage(k: i64) -> f64 {
    let d = k as f64 / 24.0;
    let tau = std::f64::consts::TAU;
    95.0 + 2.0 * (tau * d / 3.0).sin() + 0.7 * (tau * d / 0.9).sin()
}

#[test]
fn fit_on_a_replay_database_then_residual() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = dir.path().join("config");
    std::fs::create_dir(&cfg).unwrap();
    std::fs::write(cfg.join("seepd.toml"), SERVICE).unwrap();
    std::fs::write(cfg.join("t.toml"), SITE).unwrap();
    let db = dir.path().join("r.sqlite");
    let t0 = chrono::DateTime::parse_from_rfc3339("2026-03-01T00:00:00Z")
        .unwrap()
        .timestamp_millis();
    // Head = 50 + 0.5·stage(t − 6 h), plus ±2 mm of noise.
    let (a, b, lag_h) = (50.0, 0.5, 6);
    let head = |k: i64| a + b * stage(k - lag_h) + 0.002 * ((k * 7) % 5 - 2) as f64;
    let kpa = |h: f64| (h - 40.0) * GW;
    let mut input = String::new();
    for k in 0..480 {
        let t = t0 + k * H_MS;
        input += &line(t, "T-GAUGE", stage(k));
        input += &line(t, "T-PZ", kpa(head(k)));
    }
    let cfg_s = cfg.display().to_string();
    let db_s = db.display().to_string();
    let recs = replay(&cfg, &input, Some(&db));
    let before = derived(&recs, "T-RESP", "stage_residual", t0 + 479 * H_MS);
    assert!(before[0]["reason"]
        .as_str()
        .unwrap()
        .contains("no model T-RESP fitted yet"));

    let out = run(&["fit", "--config", &cfg_s, "--db", &db_s]);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("T-RESP: fitted"), "{text}");
    let store = seepd::store::Store::open(&db).unwrap();
    let models = store.latest_models().unwrap();
    assert_eq!(models.len(), 1);
    let m = &models[0];
    assert_eq!(m.lag_ms, Some(lag_h * H_MS));
    let (fa, fb) = (m.a.unwrap(), m.b.unwrap());
    assert!((fb - b).abs() < 0.005, "ratio {fb}");
    assert!(
        m.r_squared > 0.99 && m.sigma > 0.0 && m.sigma < 0.01,
        "{m:?}"
    );
    assert_eq!(m.train_end_ms, t0 + 479 * H_MS + 1);
    drop(store);

    // A later reading, replayed into the same database: stage at t − 6 h is a stored reading.
    let k = 490;
    let mut later = String::new();
    for j in 480..=k {
        later += &line(t0 + j * H_MS, "T-GAUGE", stage(j));
    }
    let measured = head(k) + 0.3;
    later += &line(t0 + k * H_MS, "T-PZ", kpa(measured));
    let recs = replay(&cfg, &later, Some(&db));
    let r = derived(&recs, "T-RESP", "stage_residual", t0 + k * H_MS);
    let got = r[0]["value"].as_f64().unwrap_or_else(|| panic!("{}", r[0]));
    // The stored head went through kPa and back: compare with what the engine stored.
    let stored = recs
        .iter()
        .find(|r| r["type"] == "value" && r["id"] == "T-PZ" && r["quantity"] == "total_head")
        .unwrap()["value"]
        .as_f64()
        .unwrap();
    let want = stored - (fa + fb * stage(k - lag_h));
    assert!((got - want).abs() < 1e-9, "{got} vs {want}");
    assert!((got - 0.3).abs() < 0.02, "{got}");
    let s = derived(&recs, "T-RESP", "stage_residual_sigma", t0 + k * H_MS)[0]["value"]
        .as_f64()
        .unwrap();
    assert!((s - got / m.sigma).abs() < 1e-6);
}
