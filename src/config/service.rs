//! Reading the service file (`seepd.toml`): `[service]`, `[mqtt]` (with TLS and the password
//! secret) and the `[[subscription]]` topic patterns; `[export]` is read by `config::export`.
//!
//! Owns the keys, defaults and checks of those tables. Reads only the files the configuration
//! names (password, TLS); never connects to anything.

use std::path::{Path, PathBuf};

use super::limits;
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
    let service = match root.sub(cx, "service", "[service]") {
        Some(mut t) => {
            t.what = "[service]".into();
            read_service(cx, &t, dir)
        }
        None if root.has("service") => None,
        None => Some(default_service(dir)),
    };
    let mqtt = match root.sub(cx, "mqtt", "[mqtt]") {
        Some(mut t) => {
            t.what = "[mqtt]".into();
            read_mqtt(cx, &t, dir, env)
        }
        None if root.has("mqtt") => None,
        None => Some(default_mqtt()),
    };
    let export = root.sub(cx, "export", "[export]").and_then(|mut t| {
        t.what = "[export]".into();
        super::export::read(cx, &t, dir, env)
    });
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
    let smtp = root.sub(cx, "smtp", "[smtp]").and_then(|mut t| {
        t.what = "[smtp]".into();
        super::smtp::read(cx, &t, dir, env)
    });
    let http = root.sub(cx, "http", "[http]").and_then(|mut t| {
        t.what = "[http]".into();
        crate::config::http::read(cx, &t)
    });
    let heartbeat_at = root
        .sub(cx, "heartbeat", "[heartbeat]")
        .and_then(|t| t.span());
    let heartbeat = super::heartbeat::read(cx, heartbeat_at, smtp.is_some());
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

fn default_service(dir: &Path) -> Service {
    Service {
        database: dir.join("seepd.sqlite"),
        commit_max_readings: 500,
        commit_max_ms: 50,
        max_payload_bytes: 65536,
        max_future_s: 600,
        clock_skew_s: 60,
        barometer_max_age_s: 7200,
        shutdown_deadline_s: 10,
    }
}

fn default_mqtt() -> Mqtt {
    Mqtt {
        host: "127.0.0.1".into(),
        port: 1883,
        client_id: "seepd".into(),
        username: None,
        password: None,
        tls: None,
        persistent_session: true,
        keep_alive_s: 30,
        max_packet_bytes: 1_048_576,
        reconnect_min_ms: 500,
        reconnect_max_ms: 30_000,
    }
}

fn read_service(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path) -> Option<Service> {
    t.check_keys(
        cx,
        &[
            "database",
            "commit_max_readings",
            "commit_max_ms",
            "max_payload_bytes",
            "max_future_s",
            "clock_skew_s",
            "barometer_max_age_s",
            "shutdown_deadline_s",
        ],
    );
    let d = default_service(dir);
    let before = cx.problems.len();
    let database = t
        .nonempty(cx, "database")
        .map_or(d.database, |p| resolve(dir, &p));
    // Defaults come from `default_service` alone.
    let s = Service {
        database,
        commit_max_readings: t.int_in(
            cx,
            "commit_max_readings",
            1,
            limits::COMMIT_READINGS,
            d.commit_max_readings as i64,
        ) as usize,
        commit_max_ms: t.int_in(
            cx,
            "commit_max_ms",
            0,
            limits::COMMIT_MS,
            d.commit_max_ms as i64,
        ) as u64,
        max_payload_bytes: t.int_in(
            cx,
            "max_payload_bytes",
            1,
            limits::MQTT_PACKET_BYTES,
            d.max_payload_bytes as i64,
        ) as usize,
        max_future_s: t.int_in(cx, "max_future_s", 0, limits::FUTURE_S, d.max_future_s),
        clock_skew_s: t.int_in(cx, "clock_skew_s", 0, limits::FUTURE_S, d.clock_skew_s),
        barometer_max_age_s: t.int_in(
            cx,
            "barometer_max_age_s",
            0,
            limits::BAROMETER_AGE_S,
            d.barometer_max_age_s,
        ),
        shutdown_deadline_s: t.int_in(
            cx,
            "shutdown_deadline_s",
            1,
            limits::SHUTDOWN_S,
            d.shutdown_deadline_s as i64,
        ) as u64,
    };
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

fn read_mqtt(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path, env: Env<'_>) -> Option<Mqtt> {
    t.check_keys(
        cx,
        &[
            "host",
            "port",
            "client_id",
            "username",
            "password_env",
            "password_file",
            "persistent_session",
            "keep_alive_s",
            "max_packet_bytes",
            "reconnect_min_ms",
            "reconnect_max_ms",
            "tls",
        ],
    );
    let d = default_mqtt();
    let before = cx.problems.len();
    let backoff = limits::BACKOFF_MS;
    let username = t.nonempty(cx, "username");
    let password = read_password(cx, t, dir, env, "MQTT");
    if password.is_some() && username.is_none() {
        t.problem(
            cx,
            "a password is configured but \"username\" is not; expected both or neither",
        );
    }
    let tls = t.sub(cx, "tls", "[mqtt.tls]").and_then(|mut tls| {
        tls.what = "[mqtt.tls]".into();
        read_tls(cx, &tls, dir)
    });
    let m = Mqtt {
        host: t.nonempty(cx, "host").unwrap_or(d.host),
        port: t.int_in(cx, "port", 1, 65535, i64::from(d.port)) as u16,
        client_id: t.nonempty(cx, "client_id").unwrap_or(d.client_id),
        username,
        password,
        tls,
        persistent_session: t.boolean(cx, "persistent_session", d.persistent_session),
        keep_alive_s: t.int_in(cx, "keep_alive_s", 0, 65535, d.keep_alive_s as i64) as u64,
        max_packet_bytes: t.int_in(
            cx,
            "max_packet_bytes",
            1,
            limits::MQTT_PACKET_BYTES,
            d.max_packet_bytes as i64,
        ) as usize,
        reconnect_min_ms: t.int_in(
            cx,
            "reconnect_min_ms",
            0,
            backoff,
            d.reconnect_min_ms as i64,
        ) as u64,
        reconnect_max_ms: t.int_in(
            cx,
            "reconnect_max_ms",
            0,
            backoff,
            d.reconnect_max_ms as i64,
        ) as u64,
    };
    if m.reconnect_min_ms > m.reconnect_max_ms {
        t.problem_at(
            cx,
            "reconnect_min_ms",
            format!(
                "reconnect_min_ms is {} but reconnect_max_ms is {}; expected min <= max",
                m.reconnect_min_ms, m.reconnect_max_ms
            ),
        );
    }
    (cx.problems.len() == before).then_some(m)
}

/// A password from `password_env` or `password_file` (not both); `whose` names it (MQTT, SMTP).
pub(crate) fn read_password(
    cx: &mut Cx<'_>,
    t: &Tbl<'_>,
    dir: &Path,
    env: Env<'_>,
    whose: &str,
) -> Option<Secret> {
    read_secret(
        cx,
        t,
        dir,
        env,
        "password",
        &format!("the {whose} password"),
    )
}

/// A secret from `{name}_env` (an environment variable) or `{name}_file` (a file, trimmed), not
/// both; `what` names it in messages. `None` when neither key is set or on a problem.
pub(crate) fn read_secret(
    cx: &mut Cx<'_>,
    t: &Tbl<'_>,
    dir: &Path,
    env: Env<'_>,
    name: &str,
    what: &str,
) -> Option<Secret> {
    let env_key = format!("{name}_env");
    let file_key = format!("{name}_file");
    let var = t.nonempty(cx, &env_key);
    let file = t.nonempty(cx, &file_key);
    match (var, file) {
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

fn read_tls(cx: &mut Cx<'_>, t: &Tbl<'_>, dir: &Path) -> Option<Tls> {
    t.check_keys(cx, &["ca_file", "client_cert_file", "client_key_file"]);
    let before = cx.problems.len();
    let file = |cx: &mut Cx<'_>, key: &str, req: bool| -> Option<std::path::PathBuf> {
        let s = if req {
            t.req_string(cx, key)?
        } else {
            t.string(cx, key)?
        };
        let path = resolve(dir, &s);
        if !path.is_file() {
            t.problem_at(
                cx,
                key,
                format!("{key} {} does not exist or is not a file", path.display()),
            );
        }
        Some(path)
    };
    let ca_file = file(cx, "ca_file", true);
    let client_cert_file = file(cx, "client_cert_file", false);
    let client_key_file = file(cx, "client_key_file", false);
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

fn read_subscription(cx: &mut Cx<'_>, t: &mut Tbl<'_>) -> Option<Subscription> {
    t.check_keys(cx, &["pattern", "format", "qos", "epoch_unit", "json"]);
    let before = cx.problems.len();
    let pattern = t.req_string(cx, "pattern");
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
    let format = t.choice(
        cx,
        "format",
        true,
        &[
            ("json", PayloadFormat::Json),
            ("senml", PayloadFormat::Senml),
            ("csv", PayloadFormat::Csv),
        ],
    );
    let qos = t.opt_int_in(cx, "qos", 0, 1, false).unwrap_or(1) as u8;
    let epoch_unit = t
        .choice(
            cx,
            "epoch_unit",
            false,
            &[
                ("auto", EpochUnit::Auto),
                ("s", EpochUnit::Seconds),
                ("ms", EpochUnit::Milliseconds),
            ],
        )
        .unwrap_or(EpochUnit::Auto);
    let mut json = JsonFields::default();
    if let Some(j) = t.sub(cx, "json", "[subscription.json]") {
        let names = [
            "time",
            "instrument",
            "channel",
            "value",
            "temperature",
            "readings",
        ];
        j.check_keys(cx, &names);
        if format.is_some_and(|f| f != PayloadFormat::Json) {
            t.problem_at(
                cx,
                "json",
                "[subscription.json] is set but format is not \"json\"; expected it only with format = \"json\"",
            );
        }
        let fields = [
            &mut json.time,
            &mut json.instrument,
            &mut json.channel,
            &mut json.value,
            &mut json.temperature,
            &mut json.readings,
        ];
        for (name, field) in names.iter().zip(fields) {
            if let Some(v) = j.nonempty(cx, name) {
                *field = v;
            }
        }
    }
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
