//! The `[http]` table of `seepd.toml`: where the on-call web pages listen, the public address
//! used in email links, anonymous read access, how long an acknowledgement link stays valid,
//! and the readiness limit on the age of the last commit.
//!
//! Owns those keys, their defaults and checks (every problem located, all at once). Reads no
//! file and opens no socket.

use std::net::SocketAddr;

use super::de::{self, Int, Text};
use super::limits;
use super::problem::Cx;
use super::reader::Tbl;

/// Default listening address: loopback only.
pub const DEFAULT_BIND: &str = "127.0.0.1:8480";

/// The validated `[http]` table.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Http {
    /// Address and port the server listens on (loopback unless configured otherwise).
    pub bind: SocketAddr,
    /// The address people reach the pages at (behind a reverse proxy, the proxy's), without a
    /// trailing slash: acknowledgement links in emails start with it.
    pub public_base_url: String,
    /// Pages readable without signing in (acting on an alert still needs a session or a link).
    pub allow_anonymous: bool,
    /// An acknowledgement link stays valid this long after the reading that caused the message
    /// (hours).
    pub ack_link_valid_h: u32,
    /// `/readyz` fails when the last commit is older than this (s); `None`: commit age is shown
    /// but not judged (a quiet network is not a fault by itself).
    pub ready_commit_age_s: Option<u64>,
    /// `/readyz` stays ready while the broker link is down and being retried for less than
    /// this (s): a short reconnect is not an outage.
    pub ready_reconnect_s: u64,
}

impl Http {
    /// Cookies carry `Secure` when people reach the pages over HTTPS.
    pub fn secure_cookies(&self) -> bool {
        self.public_base_url.starts_with("https://")
    }
}

/// `[http]` as written; defaults and checks in `read`.
#[derive(serde::Deserialize)]
struct Raw {
    bind: Option<Text>,
    public_base_url: Option<Text>,
    #[serde(default)]
    allow_anonymous: bool,
    ack_link_valid_h: Option<Int<1, { limits::YEAR_S / 3600 }>>,
    ready_commit_age_s: Option<Int<1, { limits::YEAR_S }>>,
    ready_reconnect_s: Option<Int<0, 3600>>,
}

/// Read `[http]`; `None` (with problems recorded) when anything is wrong.
pub(crate) fn read(cx: &mut Cx<'_>, t: &Tbl<'_>) -> Option<Http> {
    let before = cx.problems.len();
    let raw: Raw = de::table(cx, t)?;
    let bind_text = raw.bind.map_or_else(|| DEFAULT_BIND.into(), |b| b.0);
    let bind = bind_text.parse::<SocketAddr>().ok();
    if bind.is_none() {
        t.problem_at(
            cx,
            "bind",
            format!(
                "bind {bind_text:?} is not an address and port; expected e.g. \"{DEFAULT_BIND}\" \
                 (loopback) or \"0.0.0.0:8480\" (every interface)"
            ),
        );
    }
    let public_base_url = match raw.public_base_url {
        Some(Text(u)) => match check_base_url(&u) {
            Ok(()) => Some(u.trim_end_matches('/').to_string()),
            Err(e) => {
                t.problem_at(cx, "public_base_url", format!("public_base_url {u:?}: {e}"));
                None
            }
        },
        None => bind.map(|b| format!("http://{b}")),
    };
    let http = Http {
        bind: bind?,
        public_base_url: public_base_url?,
        allow_anonymous: raw.allow_anonymous,
        ack_link_valid_h: raw.ack_link_valid_h.map_or(72, |h| h.0 as u32),
        ready_commit_age_s: raw.ready_commit_age_s.map(Int::u64),
        ready_reconnect_s: raw.ready_reconnect_s.map_or(30, Int::u64),
    };
    (cx.problems.len() == before).then_some(http)
}

/// `http://` or `https://`, a host, an optional path; no query, fragment or credentials.
fn check_base_url(url: &str) -> Result<(), String> {
    let rest = url
        .strip_prefix("http://")
        .or_else(|| url.strip_prefix("https://"))
        .ok_or("expected a URL starting with http:// or https://")?;
    if rest.is_empty() || rest.starts_with('/') {
        return Err("expected a host after the scheme".into());
    }
    if rest.contains(['?', '#']) {
        return Err("expected no query or fragment".into());
    }
    if rest.split('/').next().is_some_and(|a| a.contains('@')) {
        return Err("expected no credentials in the URL".into());
    }
    if rest.contains(char::is_whitespace) {
        return Err("expected no spaces".into());
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::check_base_url;

    #[test]
    fn base_urls() {
        assert!(check_base_url("https://levee.example.invalid/seepd/").is_ok());
        assert!(check_base_url("http://127.0.0.1:8480").is_ok());
        assert!(check_base_url("ftp://x").is_err());
        assert!(check_base_url("https://").is_err());
        assert!(check_base_url("https://u:p@x").is_err());
        assert!(check_base_url("https://x/?a=1").is_err());
    }
}
