//! Reading the `[export]` table of `seepd.toml`: the InfluxDB v2 server, the token secret, batch
//! and timing settings, and which series are exported.
//!
//! Owns those keys, their defaults and checks (located problems, all at once). Reads only the
//! token and CA files the table names; never connects to anything.

use std::path::Path;

use super::de::{self, Int, Text};
use super::limits;
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

/// `[export]` as written; defaults and checks in `read`.
#[derive(serde::Deserialize)]
struct Raw {
    url: Option<String>,
    org: Option<Text>,
    bucket: Option<Text>,
    token_env: Option<Text>,
    token_file: Option<Text>,
    ca_file: Option<Text>,
    batch_size: Option<Int<1, 1_000_000>>,
    flush_interval_ms: Option<Int<1, { limits::EXPORT_MS }>>,
    series: Option<Vec<String>>,
    enabled: Option<bool>,
    retry_min_ms: Option<Int<1, { limits::BACKOFF_MS }>>,
    retry_max_ms: Option<Int<1, { limits::BACKOFF_MS }>>,
    timeout_ms: Option<Int<1, { limits::EXPORT_MS }>>,
}

/// Read `[export]`; `None` (with problems recorded) when anything is wrong.
pub(crate) fn read(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path, env: Env<'_>) -> Option<Export> {
    let before = cx.problems.len();
    let raw: Raw = de::table(cx, t)?;
    let url = t.need(cx, "url", raw.url);
    if let Some(u) = &url {
        if let Err(e) = check_url(u) {
            t.problem_at(cx, "url", format!("key \"url\" is {u:?}: {e}"));
        }
    }
    let org = t.need(cx, "org", raw.org.map(|o| o.0));
    let bucket = t.need(cx, "bucket", raw.bucket.map(|b| b.0));
    let keys = (raw.token_env.map(|v| v.0), raw.token_file.map(|v| v.0));
    let token = read_secret(cx, (t, dir, env), "token", "the InfluxDB API token", keys);
    if token.is_none() && !t.has("token_env") && !t.has("token_file") {
        t.missing(
            cx,
            "token_env",
            " (or \"token_file\"): expected where the API token is",
        );
    }
    let (readings, derived) = read_series(cx, t, raw.series);
    let e = Export {
        url: url.unwrap_or_default().trim_end_matches('/').to_string(),
        org: org.unwrap_or_default(),
        bucket: bucket.unwrap_or_default(),
        token: token.unwrap_or(super::model::Secret(String::new())),
        ca_file: existing_file(cx, t, dir, "ca_file", raw.ca_file.map(|f| f.0)),
        batch_size: raw.batch_size.map_or(5000, |b| b.0 as usize),
        flush_interval_ms: raw.flush_interval_ms.map_or(1000, Int::u64),
        readings,
        derived,
        enabled: raw.enabled.unwrap_or(true),
        retry_min_ms: raw.retry_min_ms.map_or(500, Int::u64),
        retry_max_ms: raw.retry_max_ms.map_or(30_000, Int::u64),
        timeout_ms: raw.timeout_ms.map_or(10_000, Int::u64),
    };
    t.min_max(
        cx,
        ("retry_min_ms", e.retry_min_ms),
        ("retry_max_ms", e.retry_max_ms),
    );
    (cx.problems.len() == before).then_some(e)
}

/// `series = ["readings", "derived"]` (the default): which series are exported.
fn read_series(cx: &mut Cx<'_>, t: &Tbl<'_>, names: Option<Vec<String>>) -> (bool, bool) {
    let expected = format!("an array of one or both of: {}", SERIES.join(", "));
    let Some(names) = names else {
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
