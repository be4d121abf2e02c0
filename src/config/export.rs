//! Reading the `[export]` table of `seepd.toml`: the InfluxDB v2 server, the token secret, batch
//! and timing settings, and which series are exported.
//!
//! Owns those keys, their defaults and checks (located problems, all at once). Reads only the
//! token and CA files the table names; never connects to anything.

use std::path::Path;

use super::de::{self, Text};
use super::model::Export;
use super::problem::Cx;
use super::reader::Tbl;
use super::service::{existing_file, read_secret, Env};

/// Series names accepted in `series`.
const SERIES: [&str; 2] = ["readings", "derived"];

/// Check an export URL: `http://` or `https://`, a host, an optional port, and no path, query
/// or credentials (the write path is appended to the server root).
pub(crate) fn check_url(url: &str) -> Result<(), String> {
    let rest = url
        .strip_prefix("http://")
        .or_else(|| url.strip_prefix("https://"))
        .ok_or("expected a URL starting with http:// or https://")?;
    let authority = rest.strip_suffix('/').unwrap_or(rest);
    if authority.contains(['/', '?', '#']) {
        return Err(
            "expected the server root without a path, e.g. \"http://127.0.0.1:8086\"".into(),
        );
    }
    if authority.contains('@') {
        return Err("credentials do not belong in the URL; use token_env or token_file".into());
    }
    let (host, port) = if let Some(v6) = authority.strip_prefix('[') {
        let (h, after) = v6.split_once(']').ok_or("unclosed [ in the host")?;
        (h, after.strip_prefix(':'))
    } else {
        match authority.rsplit_once(':') {
            Some((h, p)) => (h, Some(p)),
            None => (authority, None),
        }
    };
    let host_ok = !host.is_empty()
        && host
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '.' | '-' | ':' | '_'));
    if !host_ok {
        return Err(format!("host {host:?} is not a host name or address"));
    }
    if let Some(p) = port {
        if p.parse::<u16>().map_or(true, |p| p == 0) {
            return Err(format!("port {p:?} is not a port number (1-65535)"));
        }
    }
    Ok(())
}

/// `url`: a server root (`check_url`), kept without a trailing slash.
pub(crate) fn server_root<'de, D: serde::Deserializer<'de>>(d: D) -> Result<String, D::Error> {
    let u = <String as serde::Deserialize>::deserialize(d)?;
    check_url(&u).map_err(|e| serde::de::Error::custom(format!("is {u:?}: {e}")))?;
    Ok(u.trim_end_matches('/').to_string())
}

/// The keys of `[export]` that `Export` does not keep as written.
#[derive(serde::Deserialize)]
struct Keys {
    token_env: Option<Text>,
    token_file: Option<Text>,
    series: Option<Vec<String>>,
}

/// Read `[export]`; `None` (with problems recorded) when anything is wrong.
pub(crate) fn read(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path, env: Env<'_>) -> Option<Export> {
    let before = cx.problems.len();
    let (mut e, k): (Export, Keys) = de::table2(cx, t)?;
    t.require(cx, &["url", "org", "bucket"]);
    let keys = (k.token_env.map(|v| v.0), k.token_file.map(|v| v.0));
    let token = read_secret(cx, (t, dir, env), "token", "the InfluxDB API token", keys);
    if token.is_none() && !t.has("token_env") && !t.has("token_file") {
        t.missing(
            cx,
            "token_env",
            " (or \"token_file\"): expected where the API token is",
        );
    }
    e.token = token.unwrap_or_default();
    e.ca_file = existing_file(cx, t, dir, "ca_file", e.ca_file);
    if let Some(names) = k.series {
        (e.readings, e.derived) = read_series(cx, t, &names);
    }
    t.min_max(
        cx,
        ("retry_min_ms", e.retry_min_ms),
        ("retry_max_ms", e.retry_max_ms),
    );
    (cx.problems.len() == before).then_some(e)
}

/// `series = ["readings", "derived"]` (the default): which series are exported.
fn read_series(cx: &mut Cx<'_>, t: &Tbl<'_>, names: &[String]) -> (bool, bool) {
    let expected = format!("an array of one or both of: {}", SERIES.join(", "));
    let mut chosen = (false, false);
    for name in names {
        match name.as_str() {
            "readings" => chosen.0 = true,
            "derived" => chosen.1 = true,
            other => t.problem_at(
                cx,
                "series",
                format!("key \"series\" has {other:?}; expected {expected}"),
            ),
        }
    }
    if names.is_empty() {
        t.problem_at(
            cx,
            "series",
            format!("key \"series\" is empty; expected {expected} (or enabled = false)"),
        );
    }
    chosen
}

#[cfg(test)]
mod tests {
    use super::check_url;

    #[test]
    fn urls_are_checked() {
        for ok in [
            "http://127.0.0.1:8086",
            "https://influx.example:443/",
            "http://[::1]:8086",
            "http://localhost",
        ] {
            assert_eq!(check_url(ok), Ok(()), "{ok}");
        }
        for bad in [
            "127.0.0.1:8086",
            "ftp://h",
            "http://h/api",
            "http://u:p@h",
            "http://h:0",
            "http://h:99999",
            "http://",
            "http://h h",
        ] {
            assert!(check_url(bad).is_err(), "{bad}");
        }
    }
}
