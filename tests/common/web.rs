//! Helpers of the web-page tests: a small HTTP/1.1 client over a TCP socket (no client
//! library; also speaks WebDriver's JSON to chromedriver), an `[http]` table for a test
//! configuration, the link out of an alert email (quoted-printable undone), and cookies.

#![allow(dead_code)]

use std::io::{Read, Write};
use std::net::TcpStream;
use std::path::Path;
use std::time::Duration;

/// One HTTP answer.
#[derive(Debug, Clone)]
pub struct Answer {
    pub status: u16,
    /// Header names lower-cased.
    pub headers: Vec<(String, String)>,
    pub body: String,
}

impl Answer {
    pub fn header(&self, name: &str) -> Option<&str> {
        self.headers
            .iter()
            .find(|(k, _)| k == name)
            .map(|(_, v)| v.as_str())
    }
}

/// A request to 127.0.0.1:`port`. `headers` are added as given.
pub fn request(
    port: u16,
    method: &str,
    path: &str,
    headers: &[(&str, &str)],
    body: &[u8],
) -> Answer {
    let mut s = TcpStream::connect(("127.0.0.1", port)).expect("connect");
    s.set_read_timeout(Some(Duration::from_secs(60))).unwrap();
    let mut head = format!(
        "{method} {path} HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\nConnection: close\r\nContent-Length: {}\r\n",
        body.len()
    );
    for (k, v) in headers {
        head.push_str(&format!("{k}: {v}\r\n"));
    }
    head.push_str("\r\n");
    s.write_all(head.as_bytes()).unwrap();
    s.write_all(body).unwrap();
    // Read the head, then exactly Content-Length bytes when given (some servers keep the
    // connection open despite `Connection: close`), else to the end.
    let mut raw = Vec::new();
    let mut buf = [0u8; 16384];
    loop {
        let n = s.read(&mut buf).unwrap();
        raw.extend_from_slice(&buf[..n]);
        let Some(split) = raw.windows(4).position(|w| w == b"\r\n\r\n") else {
            if n == 0 {
                break;
            }
            continue;
        };
        let head = String::from_utf8_lossy(&raw[..split]).to_ascii_lowercase();
        let length = head
            .lines()
            .find_map(|l| l.strip_prefix("content-length:"))
            .and_then(|v| v.trim().parse::<usize>().ok());
        match length {
            Some(len) if raw.len() >= split + 4 + len => break,
            _ if n == 0 => break,
            _ => {}
        }
    }
    parse(&raw)
}

fn parse(raw: &[u8]) -> Answer {
    let split = raw
        .windows(4)
        .position(|w| w == b"\r\n\r\n")
        .expect("a header block");
    let head = String::from_utf8_lossy(&raw[..split]).into_owned();
    let mut body = raw[split + 4..].to_vec();
    let mut lines = head.lines();
    let status = lines
        .next()
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|c| c.parse().ok())
        .unwrap_or(0);
    let headers: Vec<(String, String)> = lines
        .filter_map(|l| l.split_once(':'))
        .map(|(k, v)| (k.trim().to_ascii_lowercase(), v.trim().to_string()))
        .collect();
    if headers
        .iter()
        .any(|(k, v)| k == "transfer-encoding" && v.contains("chunked"))
    {
        body = unchunk(&body);
    }
    Answer {
        status,
        headers,
        body: String::from_utf8_lossy(&body).into_owned(),
    }
}

fn unchunk(mut b: &[u8]) -> Vec<u8> {
    let mut out = Vec::new();
    while let Some(eol) = b.windows(2).position(|w| w == b"\r\n") {
        let size = usize::from_str_radix(
            String::from_utf8_lossy(&b[..eol])
                .split(';')
                .next()
                .unwrap_or("0")
                .trim(),
            16,
        )
        .unwrap_or(0);
        if size == 0 {
            break;
        }
        out.extend_from_slice(&b[eol + 2..eol + 2 + size]);
        b = &b[eol + 2 + size + 2..];
    }
    out
}

pub fn get(port: u16, path: &str, cookie: Option<&str>) -> Answer {
    match cookie {
        Some(c) => request(port, "GET", path, &[("Cookie", c)], b""),
        None => request(port, "GET", path, &[], b""),
    }
}

/// A form POST; `extra` headers (Cookie, Origin) as given.
pub fn post_form(port: u16, path: &str, extra: &[(&str, &str)], fields: &[(&str, &str)]) -> Answer {
    let body: Vec<String> = fields
        .iter()
        .map(|(k, v)| format!("{}={}", enc(k), enc(v)))
        .collect();
    let mut headers = vec![("Content-Type", "application/x-www-form-urlencoded")];
    headers.extend_from_slice(extra);
    request(port, "POST", path, &headers, body.join("&").as_bytes())
}

/// Percent-encoding for form values.
pub fn enc(s: &str) -> String {
    s.bytes()
        .map(|b| match b {
            b'A'..=b'Z' | b'a'..=b'z' | b'0'..=b'9' | b'-' | b'_' | b'.' | b'~' => {
                (b as char).to_string()
            }
            _ => format!("%{b:02X}"),
        })
        .collect()
}

/// Append an `[http]` table on `port` (and `extra` keys) to the service file of `cfg`.
pub fn add_http(cfg: &Path, port: u16, extra: &str) {
    let p = cfg.join("seepd.toml");
    let mut text = std::fs::read_to_string(&p).unwrap();
    text.push_str(&format!(
        "\n[http]\nbind = \"127.0.0.1:{port}\"\npublic_base_url = \"http://127.0.0.1:{port}/\"\n{extra}\n"
    ));
    std::fs::write(&p, text).unwrap();
}

/// Wait until the web pages answer `/healthz`.
pub fn wait_up(port: u16) {
    for _ in 0..200 {
        if let Ok(mut s) = TcpStream::connect(("127.0.0.1", port)) {
            let _ = s.write_all(b"GET /healthz HTTP/1.0\r\n\r\n");
            let mut r = String::new();
            if s.read_to_string(&mut r).is_ok() && r.contains("200") {
                return;
            }
        }
        std::thread::sleep(Duration::from_millis(100));
    }
    panic!("the web pages never answered on port {port}");
}

/// A raw email with quoted-printable soft breaks and escapes undone.
pub fn unqp(raw: &str) -> String {
    let joined = raw.replace("=\r\n", "").replace("=\n", "");
    let b = joined.as_bytes();
    let mut out = Vec::with_capacity(b.len());
    let mut i = 0;
    while i < b.len() {
        if b[i] == b'=' && i + 2 < b.len() {
            if let Ok(v) = u8::from_str_radix(&joined[i + 1..i + 3], 16) {
                out.push(v);
                i += 3;
                continue;
            }
        }
        out.push(b[i]);
        i += 1;
    }
    String::from_utf8_lossy(&out).into_owned()
}

/// The acknowledgement links in an email, as path (`/ack/...`) after `base`.
pub fn ack_paths(raw: &str) -> Vec<String> {
    let text = unqp(raw);
    let mut out: Vec<String> = Vec::new();
    for (i, _) in text.match_indices("/ack/") {
        let token: String = text[i + 5..]
            .chars()
            .take_while(|c| c.is_ascii_hexdigit() || *c == '.')
            .collect();
        let p = format!("/ack/{token}");
        if !out.contains(&p) {
            out.push(p);
        }
    }
    out
}

/// `name=value` of the session cookie set by an answer.
pub fn session_cookie(a: &Answer) -> Option<String> {
    a.headers
        .iter()
        .filter(|(k, _)| k == "set-cookie")
        .map(|(_, v)| v.split(';').next().unwrap_or("").to_string())
        .find(|c| c.starts_with("seepd_session=") && c.len() > "seepd_session=".len())
}

/// The value of the hidden `csrf` field of a page.
pub fn csrf(page: &str) -> Option<String> {
    let i = page.find("name=\"csrf\" value=\"")? + "name=\"csrf\" value=\"".len();
    Some(page[i..].split('"').next()?.to_string())
}

/// Add user `name` with `password` and `role` through `seepd user add` (password on standard
/// input).
pub fn add_user(bin: &str, cfg: &Path, name: &str, password: &str, role: &str) {
    let mut child = std::process::Command::new(bin)
        .args(["user", "add", name, "--role", role, "--config"])
        .arg(cfg)
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    child
        .stdin
        .take()
        .unwrap()
        .write_all(format!("{password}\n").as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(
        out.status.success(),
        "seepd user add: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Sign in; the session cookie.
pub fn sign_in(port: u16, name: &str, password: &str) -> String {
    let a = post_form(
        port,
        "/login",
        &[],
        &[("user", name), ("password", password), ("next", "/")],
    );
    assert_eq!(a.status, 303, "sign-in: {}", a.body);
    session_cookie(&a).expect("a session cookie")
}

/// seepd on the example configuration with `[http]` on `port` (plus `extra` keys), connected
/// to a broker of its own, the pages answering.
pub fn page_rig(port: u16, extra: &str) -> super::common::Rig {
    let rig = super::common::Rig::start_with(|dir, mqtt| {
        let cfg = super::common::example_config(dir, mqtt);
        add_http(&cfg, port, extra);
        cfg
    });
    wait_up(port);
    rig
}

/// seepd with the pages on, a broker and an SMTP server of its own; a quiet policy (no
/// reminders, no escalation). Fields drop in order: the daemon first, the directory last.
pub struct MailRig {
    pub daemon: super::common::Daemon,
    pub smtp: super::common::smtp::SmtpServer,
    pub broker: super::common::Broker,
    pub cfg: std::path::PathBuf,
    pub log: std::path::PathBuf,
    /// The pages' port.
    pub port: u16,
    pub dir: tempfile::TempDir,
}

pub fn mail_rig() -> MailRig {
    use super::common::smtp::{alert_config, Opts, SmtpServer};
    let dir = tempfile::tempdir().unwrap();
    let broker = super::common::Broker::start(dir.path());
    let smtp = SmtpServer::start(dir.path(), Opts::default());
    let cfg = alert_config(
        dir.path(),
        broker.port,
        smtp.port,
        &[
            ("remind_every_s = 14400", "remind_every_s = 0"),
            ("escalate_after_s = 3600", "escalate_after_s = 0"),
        ],
    );
    let port = super::common::free_port();
    add_http(&cfg, port, "");
    let log = dir.path().join("seepd.log");
    let daemon = super::common::Daemon::start(&cfg, &log);
    daemon.wait_connected(1);
    wait_up(port);
    MailRig {
        daemon,
        smtp,
        broker,
        cfg,
        log,
        port,
        dir,
    }
}
