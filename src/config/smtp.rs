//! Reading `[smtp]` in the service file: the mail relay for alert messages.
//!
//! Owns its keys, defaults and checks; STARTTLS is the default and the only choice besides
//! implicit TLS for a relay that is not on loopback. Reads the password and CA files the table
//! names; never connects.

use std::net::IpAddr;
use std::path::Path;

use super::alerting::{Smtp, SmtpSecurity};
use super::limits;
use super::problem::Cx;
use super::reader::Tbl;
use super::service::{read_password, resolve, Env};

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

/// Read `[smtp]`; `None` if it has problems (reported).
pub(crate) fn read(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path, env: Env<'_>) -> Option<Smtp> {
    t.check_keys(
        cx,
        &[
            "host",
            "port",
            "security",
            "username",
            "password_env",
            "password_file",
            "ca_file",
            "from",
            "timeout_s",
            "retry_min_s",
            "retry_max_s",
        ],
    );
    let before = cx.problems.len();
    let host = t.nonempty(cx, "host");
    if !t.has("host") {
        t.missing(cx, "host", "");
    }
    let security = t
        .choice(
            cx,
            "security",
            false,
            &[
                ("starttls", SmtpSecurity::Starttls),
                ("tls", SmtpSecurity::Tls),
                ("plain", SmtpSecurity::Plain),
            ],
        )
        .unwrap_or(SmtpSecurity::Starttls);
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
    let port = t.int_in(cx, "port", 1, 65535, default_port) as u16;
    let username = t.nonempty(cx, "username");
    let password = read_password(cx, t, dir, env, "SMTP");
    if password.is_some() != username.is_some() {
        t.problem(
            cx,
            "expected both \"username\" and a password (password_env or password_file), or neither",
        );
    }
    let ca_file = t.nonempty(cx, "ca_file").map(|s| resolve(dir, &s));
    if let Some(p) = ca_file.as_ref().filter(|p| !p.is_file()) {
        t.problem_at(
            cx,
            "ca_file",
            format!("ca_file {} does not exist or is not a file", p.display()),
        );
    }
    let from = t.nonempty(cx, "from");
    if !t.has("from") {
        t.missing(cx, "from", " (the sender address of alert messages)");
    }
    if let Some(f) = from.as_deref().filter(|f| !plain_address(f)) {
        t.problem_at(
            cx,
            "from",
            format!("key \"from\" is {f:?}, expected an address such as seepd@example.org"),
        );
    }
    let max = limits::MAIL_RETRY_S;
    let timeout_s = t.int_in(cx, "timeout_s", 1, 3600, 30) as u64;
    let retry_min_s = t.int_in(cx, "retry_min_s", 1, max, 5) as u64;
    let retry_max_s = t.int_in(cx, "retry_max_s", 1, max, 600) as u64;
    if retry_min_s > retry_max_s {
        t.problem_at(
            cx,
            "retry_min_s",
            format!("retry_min_s is {retry_min_s} but retry_max_s is {retry_max_s}; expected min <= max"),
        );
    }
    let smtp = Smtp {
        host: host?,
        port,
        security,
        username,
        password,
        ca_file,
        from: from?,
        timeout_s,
        retry_min_s,
        retry_max_s,
    };
    (cx.problems.len() == before).then_some(smtp)
}
