//! seepd's own heartbeat, so that its silence is noticed (`[heartbeat]`): on the MQTT link, a
//! retained last-will message registered at connect (the broker publishes it when seepd dies
//! or loses the link without saying goodbye), a retained "running" message at each connect and
//! every `every_s`, and a retained "stopped" message at a clean shutdown; by email, a daily
//! "seepd is running" message queued in the outbox once per UTC day.
//!
//! Owns the heartbeat payloads and the daily message; the MQTT loop and the writer call it.

use chrono::{DateTime, Utc};
use rumqttc::{AsyncClient, LastWill, MqttOptions, QoS};

use crate::config::Config;
use crate::store::{ReportMessage, Store};

/// The `report_runs` schedule name of the daily email (not a possible `[[report]]` id).
const DAILY: &str = "(heartbeat)";

/// The JSON of a heartbeat message: `state` (`running`, `stopped`, `gone`), the client id and
/// the time it was made (for `gone`: when the will was registered).
pub fn payload(cfg: &Config, state: &str, now: DateTime<Utc>) -> Vec<u8> {
    serde_json::json!({
        "state": state,
        "client_id": cfg.mqtt.client_id,
        "time": now.to_rfc3339(),
    })
    .to_string()
    .into_bytes()
}

/// Register the retained last will (`gone`) on `options` when an MQTT heartbeat is configured.
pub fn set_will(options: &mut MqttOptions, cfg: &Config) {
    if let Some(topic) = cfg.heartbeat.as_ref().and_then(|h| h.topic.as_ref()) {
        options.set_last_will(LastWill::new(
            topic,
            payload(cfg, "gone", Utc::now()),
            QoS::AtLeastOnce,
            true,
        ));
    }
}

/// Publish a retained heartbeat message in `state` (without waiting; a full request queue
/// skips this beat, the next one follows).
pub fn beat(client: &AsyncClient, cfg: &Config, state: &str) {
    let Some(topic) = cfg.heartbeat.as_ref().and_then(|h| h.topic.as_ref()) else {
        return;
    };
    if let Err(e) = client.try_publish(
        topic,
        QoS::AtLeastOnce,
        true,
        payload(cfg, state, Utc::now()),
    ) {
        tracing::warn!(error = %e, "Heartbeat not published");
    }
}

/// The heartbeat period, when an MQTT heartbeat is configured.
pub fn every(cfg: &Config) -> Option<std::time::Duration> {
    let h = cfg.heartbeat.as_ref()?;
    h.topic
        .as_ref()
        .map(|_| std::time::Duration::from_secs(h.every_s))
}

/// Queue today's "seepd is running" email when it is due (at or after `email_at` UTC) and not
/// queued yet; true when queued. Recorded like a report period, so a restart neither skips
/// nor repeats a day.
///
/// # Errors
/// Database errors.
pub fn daily_email(cfg: &Config, store: &mut Store, now: DateTime<Utc>) -> anyhow::Result<bool> {
    let Some(h) = cfg.heartbeat.as_ref().filter(|h| !h.email_to.is_empty()) else {
        return Ok(false);
    };
    let day = now.date_naive();
    let due = day.and_time(h.email_time()).and_utc();
    let day_start = day.and_hms_opt(0, 0, 0).unwrap_or_default().and_utc();
    if now < due || store.report_done(DAILY, day_start.timestamp_millis())? {
        return Ok(false);
    }
    let sites: Vec<&str> = cfg.sites.iter().map(|s| s.name.as_str()).collect();
    let (_, active) = store.alert_summary()?;
    let last = store
        .latest_reading_overall()?
        .map_or("none stored yet".to_string(), |(i, t)| {
            DateTime::from_timestamp_millis(t)
                .map_or_else(String::new, |t| format!("{} from {i}", t.to_rfc3339()))
        });
    let text = format!(
        "seepd is running ({}), watching {}.\n\nOpen alerts: {}\nLatest reading: {last}\n\n\
         This message comes every day at {} UTC. If it does not come, seepd is not running or \
         cannot send mail: look at the server.\n",
        cfg.mqtt.client_id,
        sites.join(", "),
        active.len(),
        h.email_at,
    );
    let html = format!("<pre>{}</pre>", crate::alerts::render::escape(&text));
    let m = ReportMessage {
        schedule: DAILY.into(),
        period_start_ms: day_start.timestamp_millis(),
        period_end_ms: day_start.timestamp_millis() + 86_400_000,
        created_ms: now.timestamp_millis(),
        site: String::new(),
        recipients: h.email_to.clone(),
        subject: format!("seepd is running — {day}"),
        text,
        html,
        message_id: format!("<heartbeat-{day}.{}@seepd>", cfg.mqtt.client_id),
        attachments: Vec::new(),
    };
    Ok(store.queue_report(&m)?.is_some())
}
