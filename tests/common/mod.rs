//! Test harness: real Mosquitto brokers and real seepd processes on free loopback ports, each
//! test in its own temp directory. Polls until ready instead of sleeping blindly.
#![allow(dead_code)]

pub mod smtp;

use std::io::Write;
use std::net::{TcpListener, TcpStream};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

/// A free TCP port on 127.0.0.1 (bound then released).
pub fn free_port() -> u16 {
    TcpListener::bind("127.0.0.1:0")
        .unwrap()
        .local_addr()
        .unwrap()
        .port()
}

/// Poll `f` every 50 ms until it returns Some or `timeout` passes.
pub fn wait_for<T>(timeout: Duration, mut f: impl FnMut() -> Option<T>) -> Option<T> {
    let end = Instant::now() + timeout;
    loop {
        if let Some(v) = f() {
            return Some(v);
        }
        if Instant::now() > end {
            return None;
        }
        std::thread::sleep(Duration::from_millis(50));
    }
}

/// A Mosquitto broker started for one test.
pub struct Broker {
    pub port: u16,
    dir: PathBuf,
    child: Option<Child>,
    /// Mosquitto's per-client window of unacknowledged QoS 1 messages.
    inflight: u32,
}

impl Broker {
    /// Start Mosquitto on a free port with persistence in `dir`.
    pub fn start(dir: &Path) -> Broker {
        Broker::start_with_inflight(dir, 100)
    }

    /// As `start`, with `max_inflight_messages` set to `inflight` (Mosquitto's default is 20).
    pub fn start_with_inflight(dir: &Path, inflight: u32) -> Broker {
        let mut b = Broker {
            port: free_port(),
            dir: dir.to_path_buf(),
            child: None,
            inflight,
        };
        b.spawn();
        b
    }

    fn spawn(&mut self) {
        let conf = self.dir.join("mosquitto.conf");
        let mut f = std::fs::File::create(&conf).unwrap();
        writeln!(
            f,
            "listener {port} 127.0.0.1\nallow_anonymous true\npersistence true\n\
             user {user}\n\
             persistence_location {dir}/\nautosave_interval 1\nmax_queued_messages 0\n\
             max_inflight_messages {inflight}\nmessage_size_limit 0\nlog_dest file {dir}/mosquitto.log\n",
            port = self.port,
            inflight = self.inflight,
            dir = self.dir.display(),
            // Started as root, Mosquitto drops to the `mosquitto` user and could then not write
            // its persistence file in our temp dir; run it as the user we are.
            user = current_user()
        )
        .unwrap();
        let child = Command::new(mosquitto_path())
            .arg("-c")
            .arg(&conf)
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("mosquitto must be installed (tests/run.sh installs it)");
        self.child = Some(child);
        let port = self.port;
        wait_for(Duration::from_secs(10), || {
            TcpStream::connect(("127.0.0.1", port)).ok()
        })
        .expect("mosquitto did not start listening");
    }

    /// The broker's log so far (for failure messages).
    pub fn log(&self) -> String {
        std::fs::read_to_string(self.dir.join("mosquitto.log")).unwrap_or_default()
    }

    /// Stop with SIGTERM (Mosquitto saves its persistence file) and wait for it.
    pub fn stop(&mut self) {
        if let Some(mut c) = self.child.take() {
            let _ = Command::new("kill")
                .arg("-TERM")
                .arg(c.id().to_string())
                .status();
            let _ = c.wait();
        }
    }

    /// Start again on the same port with the same persistence.
    pub fn restart(&mut self) {
        self.stop();
        self.spawn();
    }

    /// Start again on the same port with its store emptied (every session and queued message
    /// forgotten, as after a broker replaced or reinstalled).
    pub fn restart_empty(&mut self) {
        self.stop();
        let _ = std::fs::remove_file(self.dir.join("mosquitto.db"));
        self.spawn();
    }
}

impl Drop for Broker {
    fn drop(&mut self) {
        if let Some(mut c) = self.child.take() {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

/// The name of the user running the tests (for Mosquitto's `user` option).
fn current_user() -> String {
    Command::new("id")
        .arg("-un")
        .output()
        .ok()
        .and_then(|o| String::from_utf8(o.stdout).ok())
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .unwrap_or_else(|| "root".into())
}

fn mosquitto_path() -> &'static str {
    if Path::new("/usr/sbin/mosquitto").exists() {
        "/usr/sbin/mosquitto"
    } else {
        "mosquitto"
    }
}

/// The seepd binary under test.
pub fn seepd_bin() -> &'static str {
    env!("CARGO_BIN_EXE_seepd")
}

/// Edit `file` in the configuration directory `cfg`: each (find, replace) once, the text to
/// find must be there.
pub fn edit(cfg: &Path, file: &str, edits: &[(&str, &str)]) {
    let path = cfg.join(file);
    let mut text = std::fs::read_to_string(&path).unwrap();
    for (find, replace) in edits {
        assert!(text.contains(find), "{find:?} not in {file}");
        text = text.replacen(find, replace, 1);
    }
    std::fs::write(&path, text).unwrap();
}

/// Run the seepd binary to completion: (exit code, stdout, stderr).
pub fn seepd_output(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(seepd_bin()).args(args).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Step the alert rules of `cfg` with river-stage readings (one per hour from a fixed time)
/// and commit what they decide into `store`; returns the writes (alerts, messages).
pub fn river_alerts(
    cfg: seepd::config::Config,
    store: &mut seepd::store::Store,
    heads_m: &[f64],
) -> seepd::store::AlertWrites {
    let mut ev = seepd::alerts::Evaluator::new(std::sync::Arc::new(cfg));
    let t0 = 1_772_366_400_000_i64;
    let mut writes = seepd::store::AlertWrites::default();
    for (i, head) in heads_m.iter().enumerate() {
        let t = t0 + i as i64 * 3_600_000;
        let obs = seepd::alerts::Observation {
            object: "AB-RIVER".into(),
            quantity: "total_head".into(),
            t_ms: t,
            value: Some(*head),
            unit: "m".into(),
            reason: None,
        };
        // The toe piezometer reports too (its no-data rule stays quiet).
        let pz = seepd::alerts::Observation {
            object: "AB-PZ-1A".into(),
            quantity: "engineering_value".into(),
            unit: "digits".into(),
            ..obs.clone()
        };
        writes.extend(ev.evaluate(&[obs, pz], t));
    }
    store.write_alerts(&writes).unwrap();
    writes
}

/// Copy the example configuration into `dir/config`, pointed at `port` and `dir/seepd.sqlite`,
/// with a unique client id. Returns the config directory.
pub fn example_config(dir: &Path, port: u16) -> PathBuf {
    let cfg = dir.join("config");
    std::fs::create_dir_all(&cfg).unwrap();
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    for e in std::fs::read_dir(&src).unwrap() {
        let p = e.unwrap().path();
        if p.extension().is_some_and(|x| x == "toml") {
            let mut text = std::fs::read_to_string(&p).unwrap();
            if p.file_name().is_some_and(|n| n == "seepd.toml") {
                text = text
                    .replace("port = 1883", &format!("port = {port}"))
                    .replace(
                        "database = \"seepd.sqlite\"",
                        &format!("database = \"{}\"", dir.join("seepd.sqlite").display()),
                    )
                    .replace(
                        "client_id = \"seepd-demo\"",
                        &format!("client_id = \"seepd-test-{port}\""),
                    )
                    .replace("reconnect_max_ms = 30000", "reconnect_max_ms = 1000")
                    .replace("reconnect_min_ms = 500", "reconnect_min_ms = 100");
            }
            std::fs::write(cfg.join(p.file_name().unwrap()), text).unwrap();
        }
    }
    cfg
}

/// A seepd `run` process.
pub struct Daemon {
    pub child: Child,
    pub log: PathBuf,
}

impl Daemon {
    pub fn start(config: &Path, log: &Path) -> Daemon {
        Daemon::start_env(config, log, &[])
    }

    /// As `start`, with extra environment variables (e.g. `SEEPD_TEST_PAUSE_AT`).
    pub fn start_env(config: &Path, log: &Path, env: &[(&str, &str)]) -> Daemon {
        Daemon::start_cmd(Command::new(seepd_bin()), config, log, env)
    }

    /// `start` under a file-size limit (RLIMIT_FSIZE, soft `bytes`, hard unlimited), set with
    /// the `prlimit` tool, which then runs seepd in its own place (same process id).
    pub fn start_limited(config: &Path, log: &Path, bytes: u64) -> Daemon {
        let mut cmd = Command::new("prlimit");
        cmd.arg(format!("--fsize={bytes}:unlimited"))
            .arg("--")
            .arg(seepd_bin());
        Daemon::start_cmd(cmd, config, log, &[])
    }

    fn start_cmd(mut cmd: Command, config: &Path, log: &Path, env: &[(&str, &str)]) -> Daemon {
        let out = std::fs::OpenOptions::new()
            .create(true)
            .append(true)
            .open(log)
            .unwrap();
        let child = cmd
            .args(["run", "--config"])
            .arg(config)
            .env("SEEPD_LOG", "info")
            .envs(env.iter().copied())
            .stdout(Stdio::null())
            .stderr(out)
            .spawn()
            .unwrap();
        Daemon {
            child,
            log: log.to_path_buf(),
        }
    }

    /// Wait until the log says it has connected.
    pub fn wait_connected(&self, times: usize) {
        let log = self.log.clone();
        wait_for(Duration::from_secs(20), || {
            let text = std::fs::read_to_string(&log).unwrap_or_default();
            (text.matches("Connected to broker").count() >= times).then_some(())
        })
        .unwrap_or_else(|| {
            panic!(
                "seepd did not connect; log:\n{}",
                std::fs::read_to_string(&self.log).unwrap_or_default()
            )
        });
    }

    pub fn kill9(&mut self) {
        let _ = self.child.kill(); // SIGKILL
        let _ = self.child.wait();
    }

    /// SIGTERM and wait; returns the exit code and how long it took.
    pub fn terminate(&mut self) -> (Option<i32>, Duration) {
        let t = Instant::now();
        let _ = Command::new("kill")
            .arg("-TERM")
            .arg(self.child.id().to_string())
            .status();
        let status = self.child.wait().unwrap();
        (status.code(), t.elapsed())
    }
}

impl Drop for Daemon {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

/// A running seepd on the example configuration with a broker of its own, in a temp dir. Its
/// fields drop in order: the daemon, then the broker, then the directory.
pub struct Rig {
    pub daemon: Daemon,
    pub broker: Broker,
    pub cfg: PathBuf,
    pub log: PathBuf,
    pub dir: tempfile::TempDir,
}

impl Rig {
    /// The example configuration (`example_config`), seepd connected.
    pub fn start() -> Rig {
        Rig::start_with(example_config)
    }

    /// A configuration made by `make(dir, broker_port)`, seepd connected.
    pub fn start_with(make: impl FnOnce(&Path, u16) -> PathBuf) -> Rig {
        let dir = tempfile::tempdir().unwrap();
        let broker = Broker::start(dir.path());
        let cfg = make(dir.path(), broker.port);
        let log = dir.path().join("seepd.log");
        let daemon = Daemon::start(&cfg, &log);
        daemon.wait_connected(1);
        Rig {
            daemon,
            broker,
            cfg,
            log,
            dir,
        }
    }

    /// The test directory (database, logs).
    pub fn path(&self) -> &Path {
        self.dir.path()
    }

    /// The seepd log so far.
    pub fn log_text(&self) -> String {
        std::fs::read_to_string(&self.log).unwrap_or_default()
    }
}

/// A QoS 1 publisher with a persistent session that survives broker restarts, driven from a
/// thread of its own. `publish_all` returns once the broker has acknowledged every message.
pub struct Publisher {
    rt: tokio::runtime::Runtime,
    client: rumqttc::AsyncClient,
    acked: std::sync::Arc<std::sync::atomic::AtomicUsize>,
}

impl Publisher {
    pub fn connect(port: u16, id: &str) -> Publisher {
        Publisher::connect_with(port, id, 1 << 20)
    }

    /// `connect` with a larger packet limit (for oversized payloads).
    pub fn connect_with(port: u16, id: &str, max_packet_bytes: usize) -> Publisher {
        let rt = tokio::runtime::Builder::new_multi_thread()
            .worker_threads(1)
            .enable_all()
            .build()
            .unwrap();
        let mut o = rumqttc::MqttOptions::new(id, "127.0.0.1", port);
        o.set_clean_session(false)
            .set_keep_alive(Duration::from_secs(5))
            .set_inflight(50)
            .set_max_packet_size(max_packet_bytes, max_packet_bytes);
        let (client, mut el) = rumqttc::AsyncClient::new(o, 100_000);
        let acked = std::sync::Arc::new(std::sync::atomic::AtomicUsize::new(0));
        let a = acked.clone();
        rt.spawn(async move {
            loop {
                match el.poll().await {
                    Ok(rumqttc::Event::Incoming(rumqttc::Packet::PubAck(_))) => {
                        a.fetch_add(1, std::sync::atomic::Ordering::SeqCst);
                    }
                    Ok(_) => {}
                    Err(_) => tokio::time::sleep(Duration::from_millis(100)).await,
                }
            }
        });
        Publisher { rt, client, acked }
    }

    /// Queue a QoS 1 message (does not wait for the broker).
    pub fn send(&self, topic: &str, payload: impl Into<Vec<u8>>) {
        let payload = payload.into();
        self.rt
            .block_on(
                self.client
                    .publish(topic, rumqttc::QoS::AtLeastOnce, false, payload),
            )
            .unwrap();
    }

    /// Number of PUBACKs received so far.
    pub fn acked(&self) -> usize {
        self.acked.load(std::sync::atomic::Ordering::SeqCst)
    }

    /// Wait until `n` messages in total have been acknowledged by the broker.
    pub fn wait_acked(&self, n: usize, timeout: Duration) {
        wait_for(timeout, || (self.acked() >= n).then_some(()))
            .unwrap_or_else(|| panic!("broker acknowledged {} of {n}", self.acked()));
    }
}

/// Open the test database read-only-ish (a second connection; WAL allows it).
pub fn db(dir: &Path) -> rusqlite::Connection {
    let c = rusqlite::Connection::open(dir.join("seepd.sqlite")).unwrap();
    c.busy_timeout(Duration::from_secs(5)).unwrap();
    c
}

/// Count of rows in `table` matching `where_`, or 0 when the database is not there yet.
pub fn count(dir: &Path, table: &str, where_: &str) -> i64 {
    if !dir.join("seepd.sqlite").exists() {
        return 0;
    }
    db(dir)
        .query_row(
            &format!("SELECT count(*) FROM {table} WHERE {where_}"),
            [],
            |r| r.get(0),
        )
        .unwrap_or(0)
}

/// A JSON reading message for the levee logger's river channel (depth above datum, metres).
pub fn river_json(t_s: i64, depth_m: f64) -> String {
    format!(r#"{{"time": {t_s}, "channel": "river", "value": {depth_m}}}"#)
}

/// A VictoriaMetrics server started for one test (it accepts the InfluxDB v2 write API).
pub struct Victoria {
    pub port: u16,
    data: PathBuf,
    /// Serve https with this (certificate, key) instead of http.
    tls: Option<(PathBuf, PathBuf)>,
    child: Option<Child>,
}

impl Victoria {
    /// Start on a free port with its data in `dir/vm`.
    pub fn start(dir: &Path) -> Victoria {
        Victoria::start_on(dir, free_port())
    }

    /// Start on `port` (e.g. one a seepd is already configured for).
    pub fn start_on(dir: &Path, port: u16) -> Victoria {
        let mut v = Victoria {
            port,
            data: dir.join("vm"),
            tls: None,
            child: None,
        };
        v.spawn();
        v
    }

    /// Start serving https with a self-signed certificate for 127.0.0.1: (server, cert file).
    pub fn start_tls(dir: &Path) -> (Victoria, PathBuf) {
        let (cert, key) = smtp::self_signed(dir);
        let mut v = Victoria {
            port: free_port(),
            data: dir.join("vm"),
            tls: Some((cert.clone(), key)),
            child: None,
        };
        v.spawn();
        (v, cert)
    }

    /// Restart on the same port and data, serving plain http (to read back what came by https).
    pub fn restart_plain(&mut self) {
        self.stop();
        self.tls = None;
        self.spawn();
    }

    fn spawn(&mut self) {
        let bin = if Path::new("/usr/bin/victoria-metrics").exists() {
            "/usr/bin/victoria-metrics"
        } else {
            "victoria-metrics"
        };
        let mut cmd = Command::new(bin);
        cmd.arg(format!("-httpListenAddr=127.0.0.1:{}", self.port))
            .arg(format!("-storageDataPath={}", self.data.display()))
            .arg("-retentionPeriod=100y")
            .arg("-loggerLevel=ERROR")
            .stdout(Stdio::null())
            .stderr(Stdio::null());
        if let Some((cert, key)) = &self.tls {
            cmd.arg("-tls")
                .arg(format!("-tlsCertFile={}", cert.display()))
                .arg(format!("-tlsKeyFile={}", key.display()));
        }
        let child = cmd
            .spawn()
            .expect("victoria-metrics must be installed (tests/run.sh installs it)");
        self.child = Some(child);
        let port = self.port;
        if self.tls.is_some() {
            // No plain-http health check over TLS: wait until it accepts connections.
            wait_for(Duration::from_secs(30), || {
                TcpStream::connect(("127.0.0.1", port)).ok()
            })
            .expect("victoria-metrics (https) did not start listening");
            return;
        }
        wait_for(Duration::from_secs(30), || {
            let (status, _) = http_get(port, "/health").ok()?;
            (status == 200).then_some(())
        })
        .expect("victoria-metrics did not become healthy");
    }

    /// Base URL for seepd's `[export] url`.
    pub fn url(&self) -> String {
        format!("http://127.0.0.1:{}", self.port)
    }

    /// Stop it (SIGTERM: it flushes) and wait.
    pub fn stop(&mut self) {
        if let Some(mut c) = self.child.take() {
            let _ = Command::new("kill")
                .arg("-TERM")
                .arg(c.id().to_string())
                .status();
            let _ = c.wait();
        }
    }

    /// Start again on the same port with the same data.
    pub fn restart(&mut self) {
        self.stop();
        self.spawn();
    }

    /// Every stored series: flush, then read `/api/v1/export` (JSON lines).
    pub fn series(&self) -> Vec<VmSeries> {
        let (status, _) = http_get(self.port, "/internal/force_flush").expect("force_flush");
        assert_eq!(status, 200, "force_flush");
        let q = "/api/v1/export?match%5B%5D=%7B__name__%3D~%22.%2B%22%7D";
        let (status, body) = http_get(self.port, q).expect("export");
        assert_eq!(status, 200, "export: {body}");
        body.lines()
            .filter(|l| !l.trim().is_empty())
            .map(|l| serde_json::from_str(l).expect("export line is JSON"))
            .collect()
    }

    /// Number of samples stored across all series.
    pub fn samples(&self) -> usize {
        self.series().iter().map(|s| s.timestamps.len()).sum()
    }
}

impl Drop for Victoria {
    fn drop(&mut self) {
        if let Some(mut c) = self.child.take() {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

/// One series from VictoriaMetrics' export.
#[derive(Debug, serde::Deserialize)]
pub struct VmSeries {
    pub metric: std::collections::BTreeMap<String, String>,
    pub values: Vec<f64>,
    pub timestamps: Vec<i64>,
}

/// A plain HTTP/1.0 GET to 127.0.0.1:`port` (no client library): (status, body).
pub fn http_get(port: u16, path: &str) -> std::io::Result<(u16, String)> {
    use std::io::Read;
    let mut s = TcpStream::connect(("127.0.0.1", port))?;
    s.set_read_timeout(Some(Duration::from_secs(30)))?;
    write!(s, "GET {path} HTTP/1.0\r\nHost: 127.0.0.1\r\n\r\n")?;
    let mut raw = Vec::new();
    s.read_to_end(&mut raw)?;
    let text = String::from_utf8_lossy(&raw).into_owned();
    let (head, body) = text.split_once("\r\n\r\n").unwrap_or((&text, ""));
    let status = head
        .split_whitespace()
        .nth(1)
        .and_then(|c| c.parse().ok())
        .unwrap_or(0);
    Ok((status, body.to_string()))
}

/// `example_config` plus an `[export]` section to `url` (token from a file) and `extra` keys.
pub fn export_config(dir: &Path, mqtt_port: u16, url: &str, extra: &str) -> PathBuf {
    let cfg = example_config(dir, mqtt_port);
    std::fs::write(cfg.join("influx-token"), "test-token\n").unwrap();
    let mut text = std::fs::read_to_string(cfg.join("seepd.toml")).unwrap();
    text.push_str(&format!(
        "\n[export]\nurl = \"{url}\"\norg = \"seepd-test\"\nbucket = \"seepd\"\n\
         token_file = \"influx-token\"\nflush_interval_ms = 100\nretry_min_ms = 50\n\
         retry_max_ms = 400\ntimeout_ms = 5000\n{extra}\n"
    ));
    std::fs::write(cfg.join("seepd.toml"), text).unwrap();
    cfg
}

/// Store `n` readings of the river gauge (one every `step_ms` from `t0_ms`, distinct values)
/// straight into the database of `cfg`, queued for export when `queue` is set. Returns the
/// reading times.
pub fn prefill(cfg: &Path, n: usize, t0_ms: i64, step_ms: i64, queue: bool) -> Vec<i64> {
    use seepd::store::{export::QueueMode, ReadingRow, Store};
    let config = seepd::config::load_dir(cfg).unwrap_or_else(|p| panic!("{p}"));
    let mut store = Store::open(&config.service.database).unwrap();
    store.sync_instruments(&config, chrono::Utc::now()).unwrap();
    store.set_export_queue(QueueMode {
        readings: queue,
        derived: queue,
    });
    let times: Vec<i64> = (0..n as i64).map(|i| t0_ms + i * step_ms).collect();
    for chunk in times.chunks(5000) {
        let rows: Vec<ReadingRow> = chunk
            .iter()
            .map(|&t| {
                let depth = (2000 + (t - t0_ms) / step_ms % 1000) as f64 / 1000.0;
                ReadingRow {
                    instrument: "AB-RIVER".into(),
                    t_ms: t,
                    arrival_ms: t,
                    raw: depth,
                    temperature_c: None,
                    baro_kpa: None,
                    eng_value: 90.0 + depth,
                    eng_unit: "m",
                    pressure_kpa: None,
                    pressure_head_m: None,
                    total_head_m: Some(90.0 + depth),
                    flags: Default::default(),
                }
            })
            .collect();
        store.write_batch(&rows, &[], &[]).unwrap();
    }
    times
}

/// Parse a document seepd wrote (SVG, or the report's XHTML-style HTML with its doctype) as
/// XML; panics with the parser's message and the document if it is not well-formed.
pub fn well_formed(doc: &str) -> roxmltree::Document<'_> {
    let opt = roxmltree::ParsingOptions {
        allow_dtd: true,
        ..roxmltree::ParsingOptions::default()
    };
    roxmltree::Document::parse_with_options(doc, opt)
        .unwrap_or_else(|e| panic!("not well-formed XML: {e}\n{doc}"))
}
