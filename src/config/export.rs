//! Reading the `[export]` table of `seepd.toml`: the InfluxDB v2 server, the token secret, batch
//! and timing settings, and which series are exported.
//!
//! Owns those keys, their defaults and checks (located problems, all at once). Reads only the
//! token and CA files the table names; never connects to anything.

use std::path::Path;

use super::limits;
use super::model::Export;
use super::problem::Cx;
use super::reader::Tbl;
use super::service::{read_secret, resolve, Env};

/// Keys of `[export]`.
const KEYS: [&str; 13] = [
    "url",
    "org",
    "bucket",
    "token_env",
    "token_file",
    "ca_file",
    "batch_size",
    "flush_interval_ms",
    "series",
    "enabled",
    "retry_min_ms",
    "retry_max_ms",
    "timeout_ms",
];

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

/// Read `[export]`; `None` (with problems recorded) when anything is wrong.
pub(crate) fn read(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path, env: Env<'_>) -> Option<Export> {
    t.check_keys(cx, &KEYS);
    let before = cx.problems.len();
    let url = t.req_string(cx, "url");
    if let Some(u) = &url {
        if let Err(e) = check_url(u) {
            t.problem_at(cx, "url", format!("key \"url\" is {u:?}: {e}"));
        }
    }
    let org = t.req_string(cx, "org").filter(|s| !s.trim().is_empty());
    let bucket = t.req_string(cx, "bucket").filter(|s| !s.trim().is_empty());
    for (key, v) in [("org", &org), ("bucket", &bucket)] {
        if v.is_none() && t.peek_str(key).is_some() {
            t.problem_at(cx, key, format!("key \"{key}\" is empty"));
        }
    }
    let token = read_secret(cx, t, dir, env, "token", "the InfluxDB API token");
    if token.is_none() && !t.has("token_env") && !t.has("token_file") {
        t.missing(
            cx,
            "token_env",
            " (or \"token_file\"): expected where the API token is",
        );
    }
    let ca_file = t.nonempty(cx, "ca_file").map(|f| resolve(dir, &f));
    if let Some(p) = &ca_file {
        if !p.is_file() {
            t.problem_at(
                cx,
                "ca_file",
                format!("ca_file {} does not exist or is not a file", p.display()),
            );
        }
    }
    let (readings, derived) = read_series(cx, t);
    let (max, backoff) = (limits::EXPORT_MS, limits::BACKOFF_MS);
    let e = Export {
        url: url.unwrap_or_default().trim_end_matches('/').to_string(),
        org: org.unwrap_or_default(),
        bucket: bucket.unwrap_or_default(),
        token: token.unwrap_or(super::model::Secret(String::new())),
        ca_file,
        batch_size: t.int_in(cx, "batch_size", 1, 1_000_000, 5000) as usize,
        flush_interval_ms: t.int_in(cx, "flush_interval_ms", 1, max, 1000) as u64,
        readings,
        derived,
        enabled: t.boolean(cx, "enabled", true),
        retry_min_ms: t.int_in(cx, "retry_min_ms", 1, backoff, 500) as u64,
        retry_max_ms: t.int_in(cx, "retry_max_ms", 1, backoff, 30_000) as u64,
        timeout_ms: t.int_in(cx, "timeout_ms", 1, max, 10_000) as u64,
    };
    if e.retry_min_ms > e.retry_max_ms {
        t.problem_at(
            cx,
            "retry_min_ms",
            format!(
                "retry_min_ms is {} but retry_max_ms is {}; expected min <= max",
                e.retry_min_ms, e.retry_max_ms
            ),
        );
    }
    (cx.problems.len() == before).then_some(e)
}

/// `series = ["readings", "derived"]` (the default): which series are exported.
fn read_series(cx: &mut Cx<'_>, t: &Tbl<'_>) -> (bool, bool) {
    if !t.has("series") {
        return (true, true);
    }
    let expected = format!("an array of one or both of: {}", SERIES.join(", "));
    let Some(names) = t.string_array(cx, "series", &expected) else {
        return (true, true);
    };
    let mut chosen = (false, false);
    for name in &names {
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
