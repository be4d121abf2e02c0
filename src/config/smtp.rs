//! Reading `[smtp]` in the service file: the mail relay for alert messages.
//!
//! Owns its keys, defaults and checks; STARTTLS is the default and the only choice besides
//! implicit TLS for a relay that is not on loopback. Reads the password and CA files the table
//! names; never connects.

use std::net::IpAddr;
use std::path::Path;

use super::alerting::{Smtp, SmtpSecurity};
use super::de::{self, Int, Text};
use super::limits;
use super::problem::Cx;
use super::reader::Tbl;
use super::service::{existing_file, read_secret, Env};

/// Whether `host` is a loopback name or address (plain SMTP is allowed only there).
pub fn is_loopback(host: &str) -> bool {
    let h = host.trim_start_matches('[').trim_end_matches(']');
    h.eq_ignore_ascii_case("localhost") || h.parse::<IpAddr>().is_ok_and(|ip| ip.is_loopback())
}

/// Whether `addr` is a plain `local@domain` address safe to put in a header.
pub(crate) fn plain_address(addr: &str) -> bool {
    let ok_chars = addr
        .chars()
        .all(|c| c.is_ascii_graphic() && !"<>()[],;:\"\\".contains(c));
    let mut parts = addr.split('@');
    let (Some(local), Some(domain), None) = (parts.next(), parts.next(), parts.next()) else {
        return false;
    };
    ok_chars && !local.is_empty() && domain.contains('.') && !domain.starts_with('.')
}

/// `[smtp]` as written; defaults and checks in `read`.
#[derive(serde::Deserialize)]
struct Raw {
    host: Option<Text>,
    port: Option<Int<1, 65535>>,
    security: Option<SmtpSecurity>,
    username: Option<Text>,
    password_env: Option<Text>,
    password_file: Option<Text>,
    ca_file: Option<Text>,
    from: Option<Text>,
    timeout_s: Option<Int<1, 3600>>,
    retry_min_s: Option<Int<1, { limits::MAIL_RETRY_S }>>,
    retry_max_s: Option<Int<1, { limits::MAIL_RETRY_S }>>,
}

/// Read `[smtp]`; `None` if it has problems (reported).
pub(crate) fn read(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path, env: Env<'_>) -> Option<Smtp> {
    let before = cx.problems.len();
    let raw: Raw = de::table(cx, t)?;
    let host = t.need(cx, "host", raw.host.map(|h| h.0));
    let security = raw.security.unwrap_or(SmtpSecurity::Starttls);
    if let Some(h) = host.as_deref().filter(|h| !is_loopback(h)) {
        if security == SmtpSecurity::Plain {
            t.problem_at(
                cx,
                "security",
                format!(
                    "security = \"plain\" with host {h:?}, which is not on loopback; expected \
                     \"starttls\" or \"tls\" (plain is only for a relay on 127.0.0.1/::1/localhost)"
                ),
            );
        }
    }
    let default_port = match security {
        SmtpSecurity::Starttls => 587,
        SmtpSecurity::Tls => 465,
        SmtpSecurity::Plain => 25,
    };
    let username = raw.username.map(|u| u.0);
    let keys = (
        raw.password_env.map(|v| v.0),
        raw.password_file.map(|v| v.0),
    );
    let password = read_secret(cx, (t, dir, env), "password", "the SMTP password", keys);
    if password.is_some() != username.is_some() {
        t.problem(
            cx,
            "expected both \"username\" and a password (password_env or password_file), or neither",
        );
    }
    let ca_file = existing_file(cx, t, dir, "ca_file", raw.ca_file.map(|f| f.0));
    if !t.has("from") {
        t.missing(cx, "from", " (the sender address of alert messages)");
    }
    let from = raw.from.map(|f| f.0);
    if let Some(f) = from.as_deref().filter(|f| !plain_address(f)) {
        t.problem_at(
            cx,
            "from",
            format!("key \"from\" is {f:?}, expected an address such as seepd@example.org"),
        );
    }
    let retry_min_s = raw.retry_min_s.map_or(5, Int::u64);
    let retry_max_s = raw.retry_max_s.map_or(600, Int::u64);
    t.min_max(
        cx,
        ("retry_min_s", retry_min_s),
        ("retry_max_s", retry_max_s),
    );
    let smtp = Smtp {
        host: host?,
        port: raw.port.map_or(default_port, |p| p.0 as u16),
        security,
        username,
        password,
        ca_file,
        from: from?,
        timeout_s: raw.timeout_s.map_or(30, Int::u64),
        retry_min_s,
        retry_max_s,
    };
    (cx.problems.len() == before).then_some(smtp)
}
