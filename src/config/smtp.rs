//! Reading `[smtp]` in the service file: the mail relay for alert messages.
//!
//! Owns its keys, defaults and checks; STARTTLS is the default and the only choice besides
//! implicit TLS for a relay that is not on loopback. Reads the password and CA files the table
//! names; never connects.

use std::net::IpAddr;
use std::path::Path;

use super::alerting::{Smtp, SmtpSecurity};
use super::de::{self, Text};
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

/// `from`: a plain address (`plain_address`).
pub(crate) fn address<'de, D: serde::Deserializer<'de>>(d: D) -> Result<String, D::Error> {
    let Text(f) = <Text as serde::Deserialize>::deserialize(d)?;
    if !plain_address(&f) {
        let message = format!("is {f:?}, expected an address such as seepd@example.org");
        return Err(serde::de::Error::custom(message));
    }
    Ok(f)
}

/// The keys of `[smtp]` that `Smtp` does not keep as written.
#[derive(serde::Deserialize)]
struct Keys {
    password_env: Option<Text>,
    password_file: Option<Text>,
}

/// Read `[smtp]`; `None` if it has problems (reported).
pub(crate) fn read(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path, env: Env<'_>) -> Option<Smtp> {
    let before = cx.problems.len();
    let (mut s, k): (Smtp, Keys) = de::table2(cx, t)?;
    t.require(cx, &["host"]);
    if !s.host.is_empty() && !is_loopback(&s.host) && s.security == SmtpSecurity::Plain {
        t.problem_at(
            cx,
            "security",
            format!(
                "security = \"plain\" with host {:?}, which is not on loopback; expected \
                 \"starttls\" or \"tls\" (plain is only for a relay on 127.0.0.1/::1/localhost)",
                s.host
            ),
        );
    }
    if !t.has("port") {
        s.port = match s.security {
            SmtpSecurity::Starttls => 587,
            SmtpSecurity::Tls => 465,
            SmtpSecurity::Plain => 25,
        };
    }
    let keys = (k.password_env.map(|v| v.0), k.password_file.map(|v| v.0));
    s.password = read_secret(cx, (t, dir, env), "password", "the SMTP password", keys);
    if s.password.is_some() != s.username.is_some() {
        t.problem(
            cx,
            "expected both \"username\" and a password (password_env or password_file), or neither",
        );
    }
    s.ca_file = existing_file(cx, t, dir, "ca_file", s.ca_file);
    if !t.has("from") {
        t.missing(cx, "from", " (the sender address of alert messages)");
    }
    let (min, max) = (s.retry_min_s, s.retry_max_s);
    t.min_max(cx, ("retry_min_s", min), ("retry_max_s", max));
    (cx.problems.len() == before).then_some(s)
}
