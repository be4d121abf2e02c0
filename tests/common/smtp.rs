//! A real SMTP server per test: aiosmtpd (`tests/support/smtp_server.py`, run with
//! /usr/bin/python3) on a free loopback port, writing to a Maildir; optional STARTTLS with a
//! self-signed certificate made by the `openssl` CLI (CA:FALSE, subjectAltName 127.0.0.1 and
//! localhost), optional AUTH with a fixed user, optional reject-with-550 mode.

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::Duration;

use super::{free_port, wait_for};

/// The fixed test user for AUTH.
pub const USER: &str = "seepd-test";
pub const PASSWORD: &str = "s3cret-for-tests";

/// Server options.
#[derive(Default, Clone)]
pub struct Opts {
    /// STARTTLS required (certificate in the server's directory).
    pub starttls: bool,
    /// Implicit TLS from the first byte.
    pub implicit_tls: bool,
    pub auth: bool,
    /// 550 for every message.
    pub reject: bool,
    /// Addresses refused with 550 at RCPT TO (the other recipients are accepted).
    pub refuse: Vec<String>,
    /// Addresses deferred with 450 at RCPT TO.
    pub defer: Vec<String>,
}

/// A running aiosmtpd.
pub struct SmtpServer {
    pub port: u16,
    pub dir: PathBuf,
    pub maildir: PathBuf,
    /// One line per accepted message: arrival time (s), Message-ID.
    pub log: PathBuf,
    pub cert: PathBuf,
    opts: Opts,
    child: Option<Child>,
}

/// Make a self-signed server certificate for 127.0.0.1/localhost in `dir`: (cert, key).
pub fn self_signed(dir: &Path) -> (PathBuf, PathBuf) {
    let cert = dir.join("smtp-cert.pem");
    let key = dir.join("smtp-key.pem");
    if !cert.exists() {
        let st = Command::new("openssl")
            .args([
                "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-days", "2",
            ])
            .args(["-subj", "/CN=localhost"])
            .args(["-addext", "subjectAltName=IP:127.0.0.1,DNS:localhost"])
            .args(["-addext", "basicConstraints=critical,CA:FALSE"])
            .arg("-keyout")
            .arg(&key)
            .arg("-out")
            .arg(&cert)
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .status()
            .expect("the openssl CLI (tests/run.sh installs it)");
        assert!(st.success(), "openssl req failed");
    }
    (cert, key)
}

impl SmtpServer {
    /// Start on a free port with its Maildir in `dir/maildir`.
    pub fn start(dir: &Path, opts: Opts) -> SmtpServer {
        Self::start_on(dir, free_port(), opts)
    }

    /// Start on `port` (e.g. a relay that was down and comes up).
    pub fn start_on(dir: &Path, port: u16, opts: Opts) -> SmtpServer {
        let (cert, _) = self_signed(dir);
        let mut s = SmtpServer {
            port,
            dir: dir.to_path_buf(),
            maildir: dir.join("maildir"),
            log: dir.join("smtp-accepted.log"),
            cert,
            opts,
            child: None,
        };
        s.spawn();
        s
    }

    fn spawn(&mut self) {
        let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/support/smtp_server.py");
        let mut cmd = Command::new("/usr/bin/python3");
        cmd.arg(script)
            .args(["--port", &self.port.to_string()])
            .arg("--maildir")
            .arg(&self.maildir)
            .arg("--log")
            .arg(&self.log);
        if self.opts.starttls || self.opts.implicit_tls {
            cmd.arg("--cert")
                .arg(self.dir.join("smtp-cert.pem"))
                .arg("--key")
                .arg(self.dir.join("smtp-key.pem"));
        }
        if self.opts.implicit_tls {
            cmd.arg("--implicit-tls");
        }
        if self.opts.auth {
            cmd.args(["--auth", &format!("{USER}:{PASSWORD}")]);
        }
        if self.opts.reject {
            cmd.arg("--reject");
        }
        for a in &self.opts.refuse {
            cmd.args(["--refuse", a]);
        }
        for a in &self.opts.defer {
            cmd.args(["--defer", a]);
        }
        let child = cmd
            .stdout(Stdio::null())
            .stderr(std::fs::File::create(self.dir.join("smtp-server.err")).unwrap())
            .spawn()
            .expect("/usr/bin/python3 with aiosmtpd (tests/run.sh installs python3-aiosmtpd)");
        self.child = Some(child);
        let port = self.port;
        wait_for(Duration::from_secs(20), || {
            std::net::TcpStream::connect(("127.0.0.1", port)).ok()
        })
        .unwrap_or_else(|| {
            panic!(
                "aiosmtpd did not listen: {}",
                std::fs::read_to_string(self.dir.join("smtp-server.err")).unwrap_or_default()
            )
        });
    }

    /// Stop the server (SIGKILL; the Maildir stays).
    pub fn stop(&mut self) {
        if let Some(mut c) = self.child.take() {
            let _ = c.kill();
            let _ = c.wait();
        }
    }

    /// Every message in the Maildir, raw.
    pub fn messages(&self) -> Vec<String> {
        let mut out = Vec::new();
        for sub in ["new", "cur"] {
            let Ok(rd) = std::fs::read_dir(self.maildir.join(sub)) else {
                continue;
            };
            for e in rd.flatten() {
                out.push(std::fs::read_to_string(e.path()).unwrap_or_default());
            }
        }
        out
    }

    /// (Message-ID, recipient) of every delivery in the Maildir: one per recipient of each
    /// message (aiosmtpd records the envelope recipients in `X-RcptTo`).
    pub fn deliveries(&self) -> Vec<(String, String)> {
        let mut out = Vec::new();
        for m in self.messages() {
            let id = header(&m, "Message-ID").unwrap_or_default();
            for to in header(&m, "X-RcptTo").unwrap_or_default().split(',') {
                out.push((id.clone(), to.trim().to_string()));
            }
        }
        out.sort();
        out
    }

    /// The Message-ID header of every message in the Maildir.
    pub fn message_ids(&self) -> Vec<String> {
        self.messages()
            .iter()
            .filter_map(|m| header(m, "Message-ID"))
            .collect()
    }

    /// Wait until the Maildir holds at least `n` messages.
    pub fn wait_messages(&self, n: usize, timeout: Duration) -> Vec<String> {
        wait_for(timeout, || {
            let m = self.messages();
            (m.len() >= n).then_some(m)
        })
        .unwrap_or_else(|| panic!("expected {n} message(s), got {}", self.messages().len()))
    }
}

impl Drop for SmtpServer {
    fn drop(&mut self) {
        self.stop();
    }
}

/// A header's (unfolded) value.
pub fn header(msg: &str, name: &str) -> Option<String> {
    let mut lines = msg.lines().peekable();
    let prefix = format!("{}:", name.to_ascii_lowercase());
    while let Some(l) = lines.next() {
        if l.is_empty() {
            return None;
        }
        if l.to_ascii_lowercase().starts_with(&prefix) {
            let mut v = l[prefix.len()..].trim().to_string();
            while lines
                .peek()
                .is_some_and(|n| n.starts_with(' ') || n.starts_with('\t'))
            {
                v.push(' ');
                v.push_str(lines.next().unwrap_or_default().trim());
            }
            return Some(v);
        }
    }
    None
}

/// The example configuration (see `example_config`) with alerting made fast for tests: `[smtp]`
/// plain to `smtp_port` on 127.0.0.1, no bundle window, 1 s retry, and `edits` (find, replace)
/// applied to the levee site file.
pub fn alert_config(
    dir: &Path,
    broker_port: u16,
    smtp_port: u16,
    edits: &[(&str, &str)],
) -> PathBuf {
    let cfg = super::example_config(dir, broker_port);
    let service = cfg.join("seepd.toml");
    let mut text = std::fs::read_to_string(&service).unwrap();
    text.push_str(&format!(
        "\n[smtp]\nhost = \"127.0.0.1\"\nport = {smtp_port}\nsecurity = \"plain\"\n\
         from = \"seepd@example.invalid\"\ntimeout_s = 5\nretry_min_s = 1\nretry_max_s = 2\n"
    ));
    std::fs::write(&service, text).unwrap();
    for f in ["levee-ash-bend.toml", "dam-tarn.toml"] {
        let p = cfg.join(f);
        let mut text = std::fs::read_to_string(&p)
            .unwrap()
            .replace("bundle_window_s = 30", "bundle_window_s = 0");
        if f.starts_with("levee") {
            for (a, b) in edits {
                assert!(
                    text.contains(a),
                    "edit target {a:?} not in the example site file"
                );
                text = text.replacen(a, b, 1);
            }
        }
        std::fs::write(&p, text).unwrap();
    }
    cfg
}
