//! A scripted scenario replayed through the real binary with the example configuration gives the
//! expected sequence of derived values (toe check, nest gradient, blanket expectation and the
//! seepage-face exit on the dam section). Expected values are computed here from the formulas,
//! independently of the engine.

mod common;

use std::path::Path;
use std::process::Command;

use serde_json::Value;

const GW: f64 = 9.81;
const PSI: f64 = 6.894_757_293_168;

/// Raw psi for AB-PZ-2B (tip 86.3 m) to show total head `h`.
fn psi_for(h: f64) -> f64 {
    (h - 86.3) * GW / PSI
}

/// Raw mA for AB-PZ-2A (tip 95.2 m, 4–20 mA over 0–200 kPa) to show total head `h`.
fn ma_for(h: f64) -> f64 {
    4.0 + 16.0 * (h - 95.2) * GW / 200.0
}

fn line(t: &str, id: &str, v: f64) -> String {
    format!("{{\"time\":\"{t}\",\"instrument\":\"{id}\",\"value\":{v}}}\n")
}

fn replay(input: &str) -> Vec<Value> {
    let dir = tempfile::tempdir().unwrap();
    let inp = dir.path().join("in.ndjson");
    let out = dir.path().join("out.ndjson");
    std::fs::write(&inp, input).unwrap();
    let cfg = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    let st = Command::new(common::seepd_bin())
        .args(["replay", "--config"])
        .arg(&cfg)
        .arg("--input")
        .arg(&inp)
        .arg("--output")
        .arg(&out)
        .status()
        .unwrap();
    assert!(st.success());
    std::fs::read_to_string(&out)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

/// The derived values of (object, quantity) in time order.
fn series(records: &[Value], object: &str, quantity: &str) -> Vec<(String, Option<f64>)> {
    records
        .iter()
        .filter(|r| r["type"] == "derived" && r["id"] == object && r["quantity"] == quantity)
        .map(|r| (r["time"].as_str().unwrap().to_string(), r["value"].as_f64()))
        .collect()
}

#[test]
fn toe_and_nest_sequence() {
    // AB-TOE-2: piezometer AB-PZ-2B, ground 96.0 m, blanket 2.5 m, Gs 2.65, e 0.7.
    let i_c = (2.65 - 1.0) / (1.0 + 0.7); // Terzaghi [pub]
    let heads_2b = [95.0, 97.0, 98.5];
    let heads_2a = [96.3, 96.4, 96.5];
    let times = [
        "2026-05-01T00:00:00Z",
        "2026-05-01T01:00:00Z",
        "2026-05-01T02:00:00Z",
    ];
    let mut input = String::new();
    for k in 0..3 {
        input += &line(times[k], "AB-PZ-2A", ma_for(heads_2a[k]));
        input += &line(times[k], "AB-PZ-2B", psi_for(heads_2b[k]));
    }
    let recs = replay(&input);
    // The toe check is recomputed on each AB-PZ-2B reading.
    let i = series(&recs, "AB-TOE-2", "exit_gradient");
    let fs = series(&recs, "AB-TOE-2", "factor_of_safety");
    assert_eq!(i.len(), 3);
    for k in 0..3 {
        let want_i = (heads_2b[k] - 96.0) / 2.5; // i = h_o/z_t (EM 1110-2-1913 App. B) [pub]
        assert!(
            (i[k].1.unwrap() - want_i).abs() < 1e-6,
            "{k}: {:?} vs {want_i}",
            i[k]
        );
        match fs[k].1 {
            None => assert!(want_i <= 0.0, "FS missing at {k}"),
            Some(v) => assert!((v - i_c / want_i).abs() < 1e-6, "{k}: {v}"),
        }
        assert_eq!(i[k].0, format!("{}", times[k].replace("Z", ".000Z")));
    }
    // FS: not applicable, then falling below 1 as the gradient passes critical.
    assert!(fs[0].1.is_none() && fs[1].1.unwrap() > 1.0 && fs[2].1.unwrap() < 1.0);
    // Nest AB-N2 (tips 95.2 and 86.3): gradient at the AB-PZ-2B readings.
    let g = series(&recs, "AB-N2", "vertical_gradient");
    let last = g.last().unwrap().1.unwrap();
    assert!(
        (last - (98.5 - 96.5) / (95.2 - 86.3)).abs() < 1e-6,
        "{last}"
    );
}

#[test]
fn blanket_expectation_and_section_breakout() {
    let t0 = "2026-05-02T00:00:00Z";
    let t1 = "2026-05-02T06:00:00Z";
    let mut input = String::new();
    // River 8.0 m above datum 90.0 → 98.0 m; landside level 96.0 → H = 2 m.
    input += &line(t0, "AB-RIVER", 8.0);
    // Dam: pool 220 m; piezometers in digits (0.042 kPa/digit below 9100) and metres of water.
    let digits = |h: f64, tip: f64| 9100.0 - (h - tip) * GW / 0.042;
    input += &line(t0, "TH-POOL", 220.0);
    input += &line(t0, "TH-TAIL", 0.5); // 199.0 + 0.5
    input += &line(t0, "TH-PZ-1", digits(212.0, 201.0));
    input += &line(t0, "TH-PZ-2", digits(207.0, 200.5));
    input += &line(t0, "TH-PZ-3", 199.8 - 197.0); // low: no breakout
    input += &line(t1, "TH-POOL", 220.0);
    input += &line(t1, "TH-TAIL", 0.5);
    input += &line(t1, "TH-PZ-1", digits(212.0, 201.0));
    input += &line(t1, "TH-PZ-2", digits(207.0, 200.5));
    input += &line(t1, "TH-PZ-3", 204.0 - 197.0); // high: breakout on the slope
    let recs = replay(&input);

    // Blanket theory (Bennett 1946; EM 1110-2-1913 App. B) [pub], inputs from config/:
    // L1 100 (open entrance), L2 40, d 20, k_f 1e-3, k_b 1e-6, z_bl 2.5, endless landside.
    let c = (1e-6_f64 / (1e-3 * 2.5 * 20.0)).sqrt();
    let x1 = (c * 100.0).tanh() / c;
    let x3 = 1.0 / c;
    let h_o = 2.0 * x3 / (x1 + 40.0 + x3);
    let got = series(&recs, "AB-R2", "expected_excess_head");
    assert!((got[0].1.unwrap() - h_o).abs() < 1e-6, "{got:?} vs {h_o}");
    let at25 = series(&recs, "AB-R2", "expected_excess_head_at_25m");
    assert!((at25[0].1.unwrap() - h_o * (-c * 25.0).exp()).abs() < 1e-6);
    // No toe piezometer reading yet: the measured side has no value, the expectation does.
    assert!(series(&recs, "AB-R2", "measured_excess_head")[0]
        .1
        .is_none());

    // Section TH-S1: at t0 the line stays below the slope; at t1 it breaks out between the
    // PZ-3 station (80 m, head 204.0) and the toe: phreatic 204 − 0.1125·d meets the ground
    // 205 − 0.625·d (slope 25/40) at d = 1/0.5125 m.
    let exit = series(&recs, "TH-S1", "exit_elevation");
    let first_t1 = exit
        .iter()
        .position(|(t, _)| t.starts_with("2026-05-02T06"))
        .unwrap();
    assert!(
        exit[..first_t1].iter().all(|(_, v)| v.is_none()),
        "{exit:?}"
    );
    let d = 1.0 / (0.625 - 4.5 / 40.0);
    let (_, v) = exit.last().unwrap();
    assert!((v.unwrap() - (205.0 - 0.625 * d)).abs() < 1e-6, "{exit:?}");
    let face = series(&recs, "TH-S1", "seepage_face_height");
    assert!((face.last().unwrap().1.unwrap() - (205.0 - 0.625 * d - 200.0)).abs() < 1e-6);
    let station = series(&recs, "TH-S1", "exit_station");
    assert!((station.last().unwrap().1.unwrap() - (80.0 + d)).abs() < 1e-6);
}

#[test]
fn section_svg_from_a_replayed_database() {
    let dir = tempfile::tempdir().unwrap();
    let inp = dir.path().join("in.ndjson");
    let db = dir.path().join("r.sqlite");
    let t = "2026-05-03T00:00:00Z";
    let digits = |h: f64, tip: f64| 9100.0 - (h - tip) * GW / 0.042;
    let text = [
        line(t, "TH-POOL", 219.0),
        line(t, "TH-TAIL", 0.4),
        line(t, "TH-PZ-1", digits(211.0, 201.0)),
        line(t, "TH-PZ-2", digits(206.0, 200.5)),
        line(t, "TH-PZ-3", 3.5),
    ]
    .concat();
    std::fs::write(&inp, text).unwrap();
    let cfg = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    let ok = Command::new(common::seepd_bin())
        .args(["replay", "--config"])
        .arg(&cfg)
        .arg("--input")
        .arg(&inp)
        .arg("--db")
        .arg(&db)
        .args(["--output", "/dev/null"])
        .status()
        .unwrap();
    assert!(ok.success());
    let out = Command::new(common::seepd_bin())
        .args(["section", "--config"])
        .arg(&cfg)
        .args(["--id", "TH-S1", "--at", "2026-05-03T01:00:00Z", "--db"])
        .arg(&db)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let svg = String::from_utf8(out.stdout).unwrap();
    assert!(svg.starts_with("<?xml") && svg.trim_end().ends_with("</svg>"));
    for id in ["TH-PZ-1", "TH-PZ-2", "TH-PZ-3", "Section TH-S1"] {
        assert!(svg.contains(id), "{id} missing");
    }
    // Two days later the inputs are stale: still drawn from the latest heads, each stale one
    // marked with its age (a silent gauge must not hide the drawing); without --at the same.
    for at in [Some("2026-05-05T00:00:00Z"), None] {
        let mut cmd = Command::new(common::seepd_bin());
        cmd.args(["section", "--config"])
            .arg(&cfg)
            .args(["--id", "TH-S1", "--db"])
            .arg(&db);
        if let Some(at) = at {
            cmd.args(["--at", at]);
        }
        let out = cmd.output().unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let svg = String::from_utf8(out.stdout).unwrap();
        common::well_formed(&svg);
        assert!(
            svg.contains("stale heads drawn, with their age: TH-POOL "),
            "{svg}"
        );
        assert!(svg.contains("TH-PZ-1") && svg.contains("(stale, "), "{svg}");
        if at.is_some() {
            // The readings are of 2026-05-03 00:00: two days before.
            assert!(svg.contains("TH-POOL 2.0 days"), "{svg}");
            assert!(
                svg.contains("TH-PZ-1 211.000 m (stale, 2.0 days old)"),
                "{svg}"
            );
        }
    }
}
