//! Reading the service file (`seepd.toml`): `[service]`, `[mqtt]` (with TLS and the password
//! secret) and the `[[subscription]]` topic patterns; `[export]` is read by `config::export`.
//!
//! Owns the keys, defaults and checks of those tables. Reads only the files the configuration
//! names (password, TLS); never connects to anything.

use std::path::{Path, PathBuf};

use super::de::{self, Int, Text};
use super::model::{
    EpochUnit, Export, JsonFields, Mqtt, PayloadFormat, Secret, Service, Subscription, Tls,
};
use super::problem::Cx;
use super::reader::Tbl;

/// Placeholders a subscription pattern may use, each as one whole topic level.
pub(crate) const PLACEHOLDERS: [&str; 4] = ["{logger}", "{channel}", "{instrument}", "{site}"];

/// Everything the service file holds; `None` parts had problems (already reported).
pub(crate) struct ServiceFile {
    pub service: Option<Service>,
    /// `[export]`, when present and valid.
    pub export: Option<Export>,
    pub mqtt: Option<Mqtt>,
    pub subscriptions: Vec<Subscription>,
    /// The mail relay, if configured (and valid).
    pub smtp: Option<super::alerting::Smtp>,
    /// The on-call web pages (`[http]`, read by `web::config`), when present and valid.
    pub http: Option<crate::config::http::Http>,
    /// `[heartbeat]`, when present and valid.
    pub heartbeat: Option<super::heartbeat::Heartbeat>,
}

/// Where the loader looks up environment variables (the process environment, or a test's map).
pub(crate) type Env<'e> = &'e dyn Fn(&str) -> Option<String>;

/// Resolve a configured path against the configuration directory.
pub(crate) fn resolve(dir: &Path, p: &str) -> PathBuf {
    let p = Path::new(p);
    if p.is_absolute() {
        p.to_path_buf()
    } else {
        dir.join(p)
    }
}

/// A file a table names (relative to the configuration directory), which must exist; a
/// problem at `key` otherwise (the file is kept, as the table is refused anyway).
pub(crate) fn existing_file(
    cx: &mut Cx<'_>,
    t: &Tbl<'_>,
    dir: &Path,
    key: &str,
    name: Option<impl AsRef<Path>>,
) -> Option<PathBuf> {
    let path = dir.join(name?);
    if !path.is_file() {
        let shown = path.display();
        t.problem_at(
            cx,
            key,
            format!("{key} {shown} does not exist or is not a file"),
        );
    }
    Some(path)
}

/// Read the service file's root table.
pub(crate) fn read(cx: &mut Cx<'_>, root: &Tbl<'_>, dir: &Path, env: Env<'_>) -> ServiceFile {
    root.check_keys(
        cx,
        &[
            "service",
            "mqtt",
            "subscription",
            "smtp",
            "export",
            "http",
            "heartbeat",
        ],
    );
    let service = match root.part(cx, "service", "[service]") {
        Some(t) => read_service(cx, &t, dir),
        None if root.has("service") => None,
        None => Some(Service {
            database: dir.join("seepd.sqlite"),
            ..Service::default()
        }),
    };
    let mqtt = match root.part(cx, "mqtt", "[mqtt]") {
        Some(t) => read_mqtt(cx, &t, dir, env),
        None if root.has("mqtt") => None,
        None => Some(Mqtt::default()),
    };
    let export = root
        .part(cx, "export", "[export]")
        .and_then(|t| super::export::read(cx, &t, dir, env));
    let mut subscriptions: Vec<Subscription> = Vec::new();
    for mut t in root.tables(cx, "subscription") {
        if let Some(s) = read_subscription(cx, &mut t) {
            if let Some(first) = subscriptions.iter().find(|o| o.filter == s.filter) {
                t.problem_at(
                    cx,
                    "pattern",
                    format!(
                        "pattern {:?} subscribes to {:?}, the same filter as pattern {:?}; \
                         expected each subscription to have its own filter",
                        s.pattern, s.filter, first.pattern
                    ),
                );
                continue;
            }
            subscriptions.push(s);
        }
    }
    if !root.has("subscription") {
        root.problem(
            cx,
            "no [[subscription]] table; expected at least one (without one seepd receives nothing)",
        );
    }
    let smtp = root
        .part(cx, "smtp", "[smtp]")
        .and_then(|t| super::smtp::read(cx, &t, dir, env));
    let http = root
        .part(cx, "http", "[http]")
        .and_then(|t| crate::config::http::read(cx, &t));
    let heartbeat = root
        .part(cx, "heartbeat", "[heartbeat]")
        .and_then(|t| super::heartbeat::read(cx, &t, smtp.is_some()));
    ServiceFile {
        service,
        export,
        mqtt,
        subscriptions,
        smtp,
        http,
        heartbeat,
    }
}

fn read_service(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path) -> Option<Service> {
    let before = cx.problems.len();
    let mut s: Service = de::table(cx, t)?;
    s.database = dir.join(&s.database);
    if s.clock_skew_s > s.max_future_s && t.has("clock_skew_s") {
        t.problem_at(
            cx,
            "clock_skew_s",
            format!(
                "clock_skew_s is {} but max_future_s is {}; expected clock_skew_s <= max_future_s",
                s.clock_skew_s, s.max_future_s
            ),
        );
    }
    (cx.problems.len() == before).then_some(s)
}

/// The keys of `[mqtt]` that `Mqtt` does not keep as written.
#[derive(serde::Deserialize)]
struct MqttSecret {
    password_env: Option<Text>,
    password_file: Option<Text>,
    /// `[mqtt.tls]`, read as a table of its own.
    #[serde(rename = "tls")]
    _tls: Option<de::Nested>,
}

fn read_mqtt(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path, env: Env<'_>) -> Option<Mqtt> {
    let before = cx.problems.len();
    let (mut m, r): (Mqtt, MqttSecret) = de::table2(cx, t)?;
    let keys = (r.password_env.map(|v| v.0), r.password_file.map(|v| v.0));
    m.password = read_secret(cx, (t, dir, env), "password", "the MQTT password", keys);
    if m.password.is_some() && m.username.is_none() {
        t.problem(
            cx,
            "a password is configured but \"username\" is not; expected both or neither",
        );
    }
    m.tls = t
        .part(cx, "tls", "[mqtt.tls]")
        .and_then(|tls| read_tls(cx, &tls, dir));
    let (min, max) = (m.reconnect_min_ms, m.reconnect_max_ms);
    t.min_max(cx, ("reconnect_min_ms", min), ("reconnect_max_ms", max));
    (cx.problems.len() == before).then_some(m)
}

/// A secret from `{name}_env` (an environment variable) or `{name}_file` (a file, trimmed), not
/// both (`keys`: their values as read); `what` names it in messages. `None` when neither key is
/// set or on a problem.
pub(crate) fn read_secret(
    cx: &mut Cx<'_>,
    (t, dir, env): (&Tbl<'_>, &Path, Env<'_>),
    name: &str,
    what: &str,
    keys: (Option<String>, Option<String>),
) -> Option<Secret> {
    let env_key = format!("{name}_env");
    let file_key = format!("{name}_file");
    match keys {
        (Some(_), Some(_)) => {
            t.problem_at(
                cx,
                &file_key,
                format!("both \"{env_key}\" and \"{file_key}\" are set; expected only one"),
            );
            None
        }
        (Some(var), None) => {
            match env(&var) {
                Some(v) if !v.is_empty() => Some(Secret(v)),
                _ => {
                    t.problem_at(
                    cx,
                    &env_key,
                    format!("environment variable {var} ({env_key}) is unset or empty; expected {what}"),
                );
                    None
                }
            }
        }
        (None, Some(file)) => {
            let path = resolve(dir, &file);
            match std::fs::read_to_string(&path) {
                Ok(text) if !text.trim().is_empty() => Some(Secret(text.trim().to_string())),
                Ok(_) => {
                    t.problem_at(
                        cx,
                        &file_key,
                        format!("{file_key} {} is empty; expected {what}", path.display()),
                    );
                    None
                }
                Err(e) => {
                    t.problem_at(
                        cx,
                        &file_key,
                        format!("{file_key} {} cannot be read: {e}", path.display()),
                    );
                    None
                }
            }
        }
        (None, None) => None,
    }
}

/// `[mqtt.tls]` as written.
#[derive(serde::Deserialize)]
struct RawTls {
    ca_file: Option<String>,
    client_cert_file: Option<String>,
    client_key_file: Option<String>,
}

fn read_tls(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path) -> Option<Tls> {
    let before = cx.problems.len();
    let r: RawTls = de::table(cx, t)?;
    let mut file = |key: &str, name: Option<String>| existing_file(cx, t, dir, key, name);
    let ca_file = file("ca_file", r.ca_file);
    let client_cert_file = file("client_cert_file", r.client_cert_file);
    let client_key_file = file("client_key_file", r.client_key_file);
    let ca_file = t.need(cx, "ca_file", ca_file);
    if client_cert_file.is_some() != client_key_file.is_some() {
        t.problem(
            cx,
            "expected both client_cert_file and client_key_file, or neither",
        );
    }
    let tls = Tls {
        ca_file: ca_file?,
        client_cert_file,
        client_key_file,
    };
    (cx.problems.len() == before).then_some(tls)
}

/// Check a pattern's levels and derive the MQTT filter (placeholders become `+`).
pub(crate) fn pattern_filter(pattern: &str) -> Result<String, String> {
    if pattern.is_empty() {
        return Err("expected a topic such as \"site/{logger}/json\"".into());
    }
    if pattern.contains('#') || pattern.contains('+') {
        return Err(format!(
            "it contains an MQTT wildcard (# or +); expected placeholders instead: {}",
            PLACEHOLDERS.join(", ")
        ));
    }
    let mut used: Vec<&str> = Vec::new();
    let mut levels: Vec<&str> = Vec::new();
    for level in pattern.split('/') {
        if !(level.contains('{') || level.contains('}')) {
            levels.push(level);
            continue;
        }
        if !PLACEHOLDERS.contains(&level) {
            return Err(format!(
                "level {level:?} is not a placeholder; expected a whole level that is one of: {}",
                PLACEHOLDERS.join(", ")
            ));
        }
        if used.contains(&level) {
            return Err(format!(
                "it uses {level} twice; expected each placeholder at most once"
            ));
        }
        used.push(level);
        levels.push("+");
    }
    Ok(levels.join("/"))
}

/// `[[subscription]]` as written; checks in `read_subscription`.
#[derive(serde::Deserialize)]
struct RawSubscription {
    pattern: Option<String>,
    format: Option<PayloadFormat>,
    qos: Option<Int<0, 1>>,
    epoch_unit: Option<EpochUnit>,
    /// `[subscription.json]`, read as a table of its own.
    #[serde(rename = "json")]
    _json: Option<de::Nested>,
}

fn read_subscription(cx: &mut Cx<'_>, t: &mut Tbl<'_>) -> Option<Subscription> {
    let before = cx.problems.len();
    let r: RawSubscription = de::table(cx, t)?;
    let pattern = t.need(cx, "pattern", r.pattern);
    if let Some(p) = &pattern {
        t.what = format!("subscription {p:?}");
    }
    let filter = pattern.as_deref().and_then(|p| match pattern_filter(p) {
        Ok(f) => Some(f),
        Err(e) => {
            t.problem_at(cx, "pattern", format!("key \"pattern\": {e}"));
            None
        }
    });
    let format = t.need(cx, "format", r.format);
    let mut json = JsonFields::default();
    if let Some(j) = t.sub(cx, "json", "[subscription.json]") {
        if format.is_some_and(|f| f != PayloadFormat::Json) {
            t.problem_at(
                cx,
                "json",
                "[subscription.json] is set but format is not \"json\"; expected it only with format = \"json\"",
            );
        }
        json = de::table(cx, &j).unwrap_or(json);
    }
    let (qos, epoch_unit) = (
        r.qos.map_or(1, |q| q.0 as u8),
        r.epoch_unit.unwrap_or(EpochUnit::Auto),
    );
    let sub = Subscription {
        pattern: pattern?,
        filter: filter?,
        qos,
        format: format?,
        epoch_unit,
        json,
    };
    (cx.problems.len() == before).then_some(sub)
}
