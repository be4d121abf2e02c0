//! InfluxDB v2 export end to end, with the real seepd binary: against a real VictoriaMetrics
//! (which accepts the v2 write API) for the round trip, an outage, kill -9 mid-export and the
//! `seepd export` backfill; against a minimal HTTP server of our own for the refusal path
//! (VictoriaMetrics answers 204 even for a bad line).

mod common;

use std::collections::{BTreeMap, BTreeSet};
use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpListener;
use std::process::Command;
use std::sync::{Arc, Mutex};
use std::time::Duration;

use common::*;

/// Samples VictoriaMetrics holds for one reading of the river gauge: engineering value and
/// total head (`seepd_reading_value`), raw and flags (`seepd_input_raw`, `seepd_input_flags`).
const SAMPLES_PER_READING: usize = 4;

/// `seepd export --config CFG [extra] --from --to` over `[from, to)` (ms), ready to run.
fn backfill(cfg: &std::path::Path, extra: &[&std::ffi::OsStr], (from, to): (i64, i64)) -> Command {
    let iso = |ms: i64| {
        chrono::DateTime::from_timestamp_millis(ms)
            .unwrap()
            .to_rfc3339_opts(chrono::SecondsFormat::Millis, true)
    };
    let mut c = Command::new(seepd_bin());
    c.args(["export", "--config"]).arg(cfg).args(extra);
    c.args(["--from", &iso(from), "--to", &iso(to)]);
    c
}

fn t0_ms() -> i64 {
    // Recent, with a non-zero millisecond part, so that millisecond precision is visible.
    (chrono::Utc::now().timestamp() - 3 * 86_400) * 1000 + 123
}

/// (series name + quantity) → timestamps, for the river gauge.
fn by_series(vm: &Victoria) -> BTreeMap<String, Vec<i64>> {
    let mut out: BTreeMap<String, Vec<i64>> = BTreeMap::new();
    for s in vm.series() {
        let name = format!(
            "{}/{}",
            s.metric["__name__"],
            s.metric.get("quantity").map_or("", String::as_str)
        );
        out.entry(name).or_default().extend(&s.timestamps);
    }
    out
}

/// Wait until VictoriaMetrics holds at least `n` samples.
fn wait_samples(vm: &Victoria, n: usize, log: &std::path::Path) -> usize {
    wait_for(Duration::from_secs(90), || {
        let got = vm.samples();
        (got >= n).then_some(got)
    })
    .unwrap_or_else(|| {
        panic!(
            "VictoriaMetrics has {} of {n} samples; seepd log:\n{}",
            vm.samples(),
            std::fs::read_to_string(log).unwrap_or_default()
        )
    })
}

/// Assert every (series, time) of `times` is present exactly once (or at least once).
fn assert_all_there(vm: &Victoria, times: &[i64], exactly_once: bool) {
    let series = by_series(vm);
    for name in [
        "seepd_reading_value/engineering_value",
        "seepd_reading_value/total_head",
        "seepd_input_raw/",
        "seepd_input_flags/",
    ] {
        let got = series.get(name).cloned().unwrap_or_default();
        let distinct: BTreeSet<i64> = got.iter().copied().collect();
        let want: BTreeSet<i64> = times.iter().copied().collect();
        let missing: Vec<_> = want.difference(&distinct).take(5).collect();
        assert!(missing.is_empty(), "{name}: missing e.g. {missing:?}");
        if exactly_once {
            assert_eq!(got.len(), times.len(), "{name}: duplicates");
        }
    }
}

#[test]
fn live_readings_are_read_back_with_values_tags_and_millisecond_times() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let vm = Victoria::start(dir.path());
    let cfg = export_config(dir.path(), broker.port, &vm.url(), "");
    let d = Daemon::start(&cfg, &dir.path().join("seepd.log"));
    d.wait_connected(1);
    let p = Publisher::connect(broker.port, "pub-export");
    let n = 200;
    let t0 = t0_ms();
    for i in 0..n {
        let t = t0 + i * 1000;
        let depth = 2.0 + i as f64 / 1000.0;
        p.send(
            "demo/AB-LOG1/json",
            format!(r#"{{"time": {t}, "channel": "river", "value": {depth}}}"#),
        );
    }
    p.wait_acked(n as usize, Duration::from_secs(60));
    wait_samples(&vm, n as usize * SAMPLES_PER_READING, &d.log);

    let series = vm.series();
    let head = series
        .iter()
        .find(|s| {
            s.metric["__name__"] == "seepd_reading_value" && s.metric["quantity"] == "total_head"
        })
        .expect("total head series");
    let tags: Vec<(&str, &str)> = head
        .metric
        .iter()
        .map(|(k, v)| (k.as_str(), v.as_str()))
        .collect();
    assert_eq!(
        tags,
        [
            ("__name__", "seepd_reading_value"),
            ("instrument", "AB-RIVER"),
            ("kind", "stage_gauge"),
            ("quantity", "total_head"),
            ("reach", "R2"),
            ("site", "ash-bend"),
            ("unit", "m"),
        ]
    );
    // Values and millisecond times match the database, sample for sample.
    let conn = db(dir.path());
    let mut st = conn
        .prepare(
            "SELECT t_ms, total_head_m FROM readings WHERE instrument = 'AB-RIVER' ORDER BY t_ms",
        )
        .unwrap();
    let stored: Vec<(i64, f64)> = st
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    let mut exported: Vec<(i64, f64)> = head
        .timestamps
        .iter()
        .copied()
        .zip(head.values.iter().copied())
        .collect();
    exported.sort_by_key(|(t, _)| *t);
    assert_eq!(stored.len(), n as usize);
    assert_eq!(exported.len(), stored.len());
    for ((ts, vs), (te, ve)) in stored.iter().zip(&exported) {
        assert_eq!(ts, te);
        assert!((vs - ve).abs() < 1e-9, "{vs} vs {ve} at {ts}");
    }
    assert_eq!(exported[0].0 % 1000, 123, "millisecond precision kept");
    let raw = series
        .iter()
        .find(|s| s.metric["__name__"] == "seepd_input_raw")
        .expect("raw series");
    assert!(raw.values.contains(&2.037), "{:?}", &raw.values[..5]);
    // Once drained, status shows no backlog.
    let status = wait_for(Duration::from_secs(20), || {
        let out = Command::new(seepd_bin())
            .args(["status", "--config"])
            .arg(&cfg)
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&out.stdout).into_owned();
        text.contains("backlog: 0 entries").then_some(text)
    })
    .expect("backlog drained");
    assert!(status.contains(&format!("Readings: {n}")), "{status}");
}

#[test]
fn server_down_then_up_every_point_arrives_once() {
    let dir = tempfile::tempdir().unwrap();
    let mut vm = Victoria::start(dir.path());
    // No broker: the MQTT side keeps retrying; the export worker runs regardless.
    let cfg = export_config(dir.path(), free_port(), &vm.url(), "batch_size = 300");
    let log = dir.path().join("seepd.log");
    let d = Daemon::start(&cfg, &log);
    let t0 = t0_ms();
    let first = prefill(&cfg, 500, t0, 1000, true);
    wait_samples(&vm, first.len() * SAMPLES_PER_READING, &d.log);

    vm.stop();
    let second = prefill(&cfg, 700, t0 + 500_000, 1000, true);
    wait_for(Duration::from_secs(30), || {
        let text = std::fs::read_to_string(&log).unwrap_or_default();
        text.contains("Export write failed").then_some(())
    })
    .expect("seepd noticed the outage");
    // Still down a while: several retries, nothing may be lost or skipped.
    wait_for(Duration::from_secs(30), || {
        let text = std::fs::read_to_string(&log).unwrap_or_default();
        (text.matches("Export write failed").count() >= 3).then_some(())
    })
    .expect("retries during the outage");
    vm.restart();
    let all: Vec<i64> = first.iter().chain(&second).copied().collect();
    wait_samples(&vm, all.len() * SAMPLES_PER_READING, &d.log);
    assert_all_there(&vm, &all, true);
    drop(d);
}

#[test]
fn kill_9_mid_export_loses_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let vm = Victoria::start(dir.path());
    let cfg = export_config(dir.path(), free_port(), &vm.url(), "batch_size = 200");
    let t0 = t0_ms();
    let times = prefill(&cfg, 20_000, t0, 1000, true);
    let log = dir.path().join("seepd.log");
    let mut d = Daemon::start(&cfg, &log);
    // Kill once the cursor has moved but the backlog is not yet drained.
    let moved = wait_for(Duration::from_secs(60), || {
        let points = count(dir.path(), "export_cursor", "points > 0");
        let left = count(dir.path(), "export_queue", "1");
        (points > 0 && left > 0).then_some(left)
    });
    d.kill9();
    assert!(moved.is_some(), "export did not start or finished too fast");
    let left = count(dir.path(), "export_queue", "1");
    assert!(left > 0, "the backlog should not be drained at the kill");

    let d = Daemon::start(&cfg, &log);
    wait_for(Duration::from_secs(120), || {
        (count(dir.path(), "export_queue", "1") == 0).then_some(())
    })
    .unwrap_or_else(|| panic!("backlog not drained after restart"));
    wait_samples(&vm, times.len() * SAMPLES_PER_READING, &d.log);
    // At least once: a batch in flight at the kill may have been written twice.
    assert_all_there(&vm, &times, false);
}

#[test]
fn backfill_sends_exactly_the_requested_range() {
    let dir = tempfile::tempdir().unwrap();
    let vm = Victoria::start(dir.path());
    let cfg = export_config(dir.path(), free_port(), &vm.url(), "batch_size = 64");
    let t0 = t0_ms();
    // Stored before export was configured: nothing queued.
    let times = prefill(&cfg, 300, t0, 1000, false);
    assert_eq!(count(dir.path(), "export_queue", "1"), 0);
    let (from, to) = (times[50], times[250]);
    let out = backfill(&cfg, &[], (from, to)).output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    assert!(stderr.contains("200 readings"), "{stderr}");
    let want = &times[50..250];
    wait_samples(
        &vm,
        want.len() * SAMPLES_PER_READING,
        &dir.path().join("none"),
    );
    assert_all_there(&vm, want, true);
    assert_eq!(
        vm.samples(),
        want.len() * SAMPLES_PER_READING,
        "nothing outside the range"
    );
}

/// `seepd export --db FILE` sends another database's rows (a replay's, say) to the configured
/// server: the database moved away from the configured path is the one read.
#[test]
fn backfill_reads_the_database_given_with_db() {
    let dir = tempfile::tempdir().unwrap();
    let vm = Victoria::start(dir.path());
    let cfg = export_config(dir.path(), free_port(), &vm.url(), "batch_size = 64");
    let times = prefill(&cfg, 40, t0_ms(), 1000, false);
    let config = seepd::config::load_dir(&cfg).unwrap_or_else(|p| panic!("{p}"));
    let elsewhere = dir.path().join("replayed.sqlite");
    std::fs::rename(&config.service.database, &elsewhere).unwrap();
    let db = ["--db".as_ref(), elsewhere.as_os_str()];
    let out = backfill(&cfg, &db, (times[0], times[39] + 1))
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    assert!(stderr.contains("40 readings"), "{stderr}");
    wait_samples(
        &vm,
        times.len() * SAMPLES_PER_READING,
        &dir.path().join("none"),
    );
    assert_all_there(&vm, &times, true);
    assert!(
        !config.service.database.exists(),
        "the configured database was not to be created"
    );
}

/// https with the server's certificate trusted through `ca_file` (a private CA): every point
/// arrives; without the CA file the certificate is refused and nothing is written.
#[test]
fn https_with_a_private_ca_file_delivers_and_an_unknown_certificate_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let (mut vm, cert) = Victoria::start_tls(dir.path());
    let url = format!("https://127.0.0.1:{}", vm.port);
    let export = |cfg: &std::path::Path, from: i64, to: i64| {
        backfill(cfg, &[], (from, to))
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .unwrap()
    };
    // Without the CA file: the certificate is unknown, the write is retried, nothing arrives.
    let plain = tempfile::tempdir().unwrap();
    let cfg = export_config(plain.path(), free_port(), &url, "");
    let t0 = t0_ms();
    let times = prefill(&cfg, 40, t0, 1000, false);
    let mut child = export(&cfg, times[0], times[39] + 1);
    std::thread::sleep(Duration::from_secs(3));
    let _ = child.kill();
    let out = child.wait_with_output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success(), "{stderr}");
    assert!(
        stderr.to_lowercase().contains("certificate"),
        "the refusal names the certificate: {stderr}"
    );
    // With the CA file: every point, once.
    let cfg = export_config(
        dir.path(),
        free_port(),
        &url,
        &format!("ca_file = \"{}\"", cert.display()),
    );
    let times = prefill(&cfg, 40, t0, 1000, false);
    let out = export(&cfg, times[0], times[39] + 1)
        .wait_with_output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    assert!(stderr.contains("40 readings"), "{stderr}");
    vm.restart_plain();
    assert_all_there(&vm, &times, true);
}

/// What the refusing test server saw.
#[derive(Default)]
struct Seen {
    accepted: Vec<String>,
    refused: usize,
}

/// A minimal HTTP/1.1 server on 127.0.0.1:0: 400 with a message for any write whose body
/// contains `marker`, 204 for the rest (keeping what it accepted).
fn refusing_server(marker: &'static str) -> (u16, Arc<Mutex<Seen>>) {
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let port = listener.local_addr().unwrap().port();
    let seen = Arc::new(Mutex::new(Seen::default()));
    let s = Arc::clone(&seen);
    std::thread::spawn(move || {
        for conn in listener.incoming() {
            let Ok(conn) = conn else { continue };
            let s = Arc::clone(&s);
            std::thread::spawn(move || serve(conn, marker, &s));
        }
    });
    (port, seen)
}

fn serve(conn: std::net::TcpStream, marker: &str, seen: &Mutex<Seen>) {
    let mut w = conn.try_clone().unwrap();
    let mut r = BufReader::new(conn);
    loop {
        let mut length = 0usize;
        let mut first = true;
        loop {
            let mut line = String::new();
            if r.read_line(&mut line).unwrap_or(0) == 0 {
                return; // connection closed
            }
            if first {
                assert!(line.starts_with("POST /api/v2/write?"), "{line}");
                assert!(line.contains("precision=ms"), "{line}");
                first = false;
            }
            let lower = line.to_ascii_lowercase();
            if let Some(v) = lower.strip_prefix("content-length:") {
                length = v.trim().parse().unwrap();
            }
            if lower.starts_with("authorization:") {
                assert_eq!(line.trim_end(), "authorization: Token test-token");
            }
            if line == "\r\n" {
                break;
            }
        }
        let mut body = vec![0; length];
        r.read_exact(&mut body).unwrap();
        let body = String::from_utf8(body).unwrap();
        let reply = if body.contains(marker) {
            seen.lock().unwrap().refused += 1;
            let msg = r#"{"code":"invalid","message":"unable to parse the marked point"}"#;
            format!(
                "HTTP/1.1 400 Bad Request\r\nContent-Type: application/json\r\nContent-Length: {}\r\n\r\n{msg}",
                msg.len()
            )
        } else {
            seen.lock().unwrap().accepted.push(body);
            "HTTP/1.1 204 No Content\r\n\r\n".to_string()
        };
        w.write_all(reply.as_bytes()).unwrap();
    }
}

#[test]
fn a_refused_point_is_recorded_and_the_queue_moves_on() {
    let dir = tempfile::tempdir().unwrap();
    // The 38th reading's raw value is 2.037: its input line carries "raw=2.037,".
    let (port, seen) = refusing_server("raw=2.037,");
    let url = format!("http://127.0.0.1:{port}");
    let cfg = export_config(dir.path(), free_port(), &url, "batch_size = 64");
    let t0 = t0_ms();
    let times = prefill(&cfg, 100, t0, 1000, true);
    let log = dir.path().join("seepd.log");
    let _d = Daemon::start(&cfg, &log);
    wait_for(Duration::from_secs(60), || {
        (count(dir.path(), "export_queue", "1") == 0).then_some(())
    })
    .unwrap_or_else(|| {
        panic!(
            "queue blocked; log:\n{}",
            std::fs::read_to_string(&log).unwrap_or_default()
        )
    });
    // Exactly the marked reading was refused, with the server's reply.
    let conn = db(dir.path());
    let (key, t, status, reply, lines): (String, i64, i64, String, String) = conn
        .query_row(
            "SELECT key, t_ms, status, reply, lines FROM export_rejects",
            [],
            |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?)),
        )
        .unwrap();
    assert_eq!((key.as_str(), t, status), ("AB-RIVER", times[37], 400));
    assert!(
        reply.contains("unable to parse the marked point"),
        "{reply}"
    );
    assert!(lines.contains("raw=2.037,"), "{lines}");
    assert_eq!(count(dir.path(), "export_rejects", "1"), 1);
    // Every other reading arrived.
    let seen = seen.lock().unwrap();
    assert!(seen.refused >= 1);
    let accepted = seen.accepted.concat();
    for (i, t) in times.iter().enumerate() {
        let stamp = t.to_string();
        let n = accepted
            .lines()
            .filter(|l| l.starts_with("seepd_input,") && l.rsplit(' ').next() == Some(&stamp))
            .count();
        assert_eq!(n, usize::from(i != 37), "reading {i}");
    }
    let out = Command::new(seepd_bin())
        .args(["status", "--config"])
        .arg(&cfg)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("refused by the server: 1"), "{text}");
}
