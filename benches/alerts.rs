//! Alert latency benchmark (not a test): from a reading's publication to a real Mosquitto to
//! the alert message accepted by a real aiosmtpd, through the real seepd binary (ingest,
//! commit with the rule transition and its outbox row, mail worker, SMTP). No bundle window.
//!
//! Run: `cargo bench --bench alerts` (env SEEPD_BENCH_ALERTS sets the number of alerts,
//! default 1000; under `cargo test`, which runs it without `--bench`, a 20-alert smoke run).
//! Each alert is a river reading above the rule's bound (raise), followed by one back inside
//! (all clear), one at a time. The anchor, measured in the same run: the same message sent
//! straight to the same relay by seepd's SMTP client, as often. Figures go to the README.

#[path = "../tests/common/mod.rs"]
mod common;

use std::io::{Read, Seek, SeekFrom};
use std::time::{Duration, SystemTime, UNIX_EPOCH};

use common::smtp::{alert_config, Opts, SmtpServer};
use common::*;

/// Accepted-message lines (time s, subject) appended since the last call.
struct Tail {
    file: std::path::PathBuf,
    pos: u64,
}

impl Tail {
    fn next(&mut self) -> Vec<(f64, String)> {
        let Ok(mut f) = std::fs::File::open(&self.file) else {
            return Vec::new();
        };
        let _ = f.seek(SeekFrom::Start(self.pos));
        let mut s = String::new();
        let _ = f.read_to_string(&mut s);
        let complete = s.rfind('\n').map_or(0, |i| i + 1);
        self.pos += complete as u64;
        s[..complete]
            .lines()
            .filter_map(|l| {
                let mut parts = l.split('\t');
                let t: f64 = parts.next()?.parse().ok()?;
                let _id = parts.next()?;
                Some((t, parts.next().unwrap_or_default().to_string()))
            })
            .collect()
    }

    /// Wait for an accepted message whose subject contains `what`; its acceptance time.
    fn wait(&mut self, what: &str) -> f64 {
        let end = std::time::Instant::now() + Duration::from_secs(30);
        loop {
            if let Some((t, _)) = self.next().into_iter().find(|(_, s)| s.contains(what)) {
                return t;
            }
            assert!(std::time::Instant::now() < end, "no message {what:?}");
            std::thread::sleep(Duration::from_millis(1));
        }
    }
}

fn now_s() -> f64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0.0, |d| d.as_secs_f64())
}

fn main() {
    let n: usize = std::env::var("SEEPD_BENCH_ALERTS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(if std::env::args().any(|a| a == "--bench") {
            1000
        } else {
            20
        });
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let smtp = SmtpServer::start(dir.path(), Opts::default());
    let cfg = alert_config(
        dir.path(),
        broker.port,
        smtp.port,
        &[
            ("remind_every_s = 14400", "remind_every_s = 0"),
            ("escalate_after_s = 3600", "escalate_after_s = 0"),
            ("deadband = 0.2\n", "deadband = 0.0\n"),
            (
                "persist_readings = 2\npersist_s = 0",
                "persist_readings = 1\npersist_s = 0",
            ),
            ("keep_active_s = 7200", "keep_active_s = 0"),
        ],
    );
    let d = Daemon::start(&cfg, &dir.path().join("seepd.log"));
    d.wait_connected(1);
    let p = Publisher::connect(broker.port, "bench-alerts");
    let mut tail = Tail {
        file: smtp.log.clone(),
        pos: 0,
    };
    let t0 = chrono::Utc::now().timestamp() - 2 * n as i64 - 60;
    let mut lat_ms = Vec::with_capacity(n);
    for i in 0..n {
        let t = t0 + 2 * i as i64;
        let sent = now_s();
        // 98.0 m: above the "act" bound 97.8 (raise); then 92.0 m (all clear).
        p.send("demo/AB-LOG1/json", river_json(t, 8.0));
        let accepted = tail.wait("ACT ash-bend");
        lat_ms.push((accepted - sent) * 1000.0);
        p.send("demo/AB-LOG1/json", river_json(t + 1, 2.0));
        tail.wait("All clear");
    }
    report(
        &format!(
            "alert latency, publish → accepted by the SMTP server, {n} alerts, no bundle window:"
        ),
        lat_ms,
    );
    drop(d);
    // The anchor, in the same run: the last alert message sent again and again straight to the
    // same relay by seepd's own SMTP client (kept connection) — the floor under the figures
    // above, set by the relay (aiosmtpd, in Python) and the machine.
    let smtp_cfg = seepd::config::load_dir(&cfg)
        .unwrap()
        .alerting
        .smtp
        .unwrap();
    let mailer = seepd::notify::Mailer::new(&smtp_cfg).unwrap();
    let store = seepd::store::Store::open(&dir.path().join("seepd.sqlite")).unwrap();
    let mut m = store
        .messages("sent")
        .unwrap()
        .pop()
        .expect("a sent message");
    let mut direct_ms = Vec::with_capacity(n);
    for i in 0..n {
        m.message_id = format!("<bench-anchor-{i}@example.invalid>");
        let t = std::time::Instant::now();
        mailer.send(&m, &m.recipients).unwrap();
        direct_ms.push(t.elapsed().as_secs_f64() * 1000.0);
    }
    report(
        &format!("anchor: the same message straight to the relay, {n} times:"),
        direct_ms,
    );
}

/// Print p50, p99 and max of `ms`.
fn report(title: &str, mut ms: Vec<f64>) {
    ms.sort_by(f64::total_cmp);
    let pct = |q: f64| ms[((ms.len() as f64 * q).ceil() as usize).clamp(1, ms.len()) - 1];
    println!("{title}");
    println!("  p50 {:>7.1} ms", pct(0.50));
    println!("  p99 {:>7.1} ms", pct(0.99));
    println!("  max {:>7.1} ms", ms.last().copied().unwrap_or(0.0));
}
