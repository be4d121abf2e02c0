//! The live MQTT path: subscribe, hand each message to the writer thread, and keep the link
//! alive. The writer commits, then acknowledges (see `ingest::writer`).
//!
//! Owns the rumqttc event loop, polled in this task and never blocked on anything but the
//! network: messages go to the writer over an unbounded channel whose length the writer's flow
//! control bounds (it holds acknowledgements back when the queue is long, so the broker stops
//! sending), reconnect backoff is a timer of this loop (shutdown is watched throughout), and a
//! stop is bounded by `shutdown_deadline_s`. Guarantee: a QoS 1 message is acknowledged to the
//! broker only after everything it produced is committed, in arrival order, on the connection it
//! came on. Redeliveries are harmless: inserts are idempotent.

use std::sync::atomic::Ordering;
use std::sync::Arc;
use std::time::Duration;

use anyhow::Context as _;
use chrono::Utc;
use rumqttc::{AsyncClient, Event, MqttOptions, Packet, QoS, TlsConfiguration, Transport};
use tokio::sync::{mpsc, oneshot};

use crate::alerts::live::Live;
use crate::config::{Config, Mqtt};
use crate::engine::Engine;
use crate::ingest::link::{Link, SharedLink};
use crate::ingest::progress::Counters;
use crate::ingest::writer::{Arrived, Flow, Writer, QOS0_DROP_AT};
use crate::shutdown::Shutdown;
use crate::store::Store;

/// Requests (acks, subscribes) waiting for the event loop; the writer never blocks on it.
const REQUEST_QUEUE: usize = 4096;
/// The largest MQTT packet there is (remaining length 268,435,455 plus the fixed header).
/// Incoming packets are accepted up to this, so that seepd's own `max_payload_bytes` check
/// quarantines an oversized payload instead of the client dropping the link on it forever.
pub const MQTT_MAX_PACKET: usize = 268_435_460;

/// Build the rumqttc options from the configuration.
///
/// # Errors
/// TLS files that cannot be read.
pub fn mqtt_options(m: &Mqtt) -> anyhow::Result<MqttOptions> {
    let mut o = MqttOptions::new(&m.client_id, &m.host, m.port);
    o.set_keep_alive(Duration::from_secs(m.keep_alive_s.max(5)))
        .set_clean_session(!m.persistent_session)
        .set_manual_acks(true)
        .set_max_packet_size(MQTT_MAX_PACKET, m.max_packet_bytes)
        .set_request_channel_capacity(REQUEST_QUEUE)
        .set_inflight(100);
    if let Some(user) = &m.username {
        let pass = m.password.as_ref().map(|s| s.0.clone()).unwrap_or_default();
        o.set_credentials(user, pass);
    }
    if let Some(tls) = &m.tls {
        let ca = std::fs::read(&tls.ca_file)
            .with_context(|| format!("reading MQTT CA file {}", tls.ca_file.display()))?;
        let client_auth = match (&tls.client_cert_file, &tls.client_key_file) {
            (Some(c), Some(k)) => Some((
                std::fs::read(c).with_context(|| format!("reading {}", c.display()))?,
                std::fs::read(k).with_context(|| format!("reading {}", k.display()))?,
            )),
            _ => None,
        };
        o.set_transport(Transport::tls_with_config(TlsConfiguration::Simple {
            ca,
            alpn: None,
            client_auth,
        }));
    }
    Ok(o)
}

/// The shutdown deadline passed before the writer had committed and acknowledged what it took.
#[derive(Debug, thiserror::Error)]
#[error("shutdown deadline of {0} s passed before ingestion stopped; unacknowledged messages will be redelivered")]
pub struct DeadlinePassed(pub u64);

/// Run live ingestion until `shutdown` is requested, then stop taking messages, commit what was
/// taken, acknowledge it, disconnect, and return — all within the shutdown deadline.
///
/// `link_state` receives the broker link state as it changes (for status and health).
///
/// # Errors
/// Bad TLS files; the writer thread dying; `DeadlinePassed`.
pub async fn run(
    cfg: Arc<Config>,
    store: Store,
    engine: Engine,
    alerts: Live,
    counters: Arc<Counters>,
    link_state: SharedLink,
    shutdown: Shutdown,
) -> anyhow::Result<()> {
    let mut options = mqtt_options(&cfg.mqtt)?;
    crate::heartbeat::set_will(&mut options, &cfg);
    let beat_every = crate::heartbeat::every(&cfg);
    let mut beat = tokio::time::interval(beat_every.unwrap_or(Duration::from_secs(3600)));
    beat.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
    let (client, mut eventloop) = AsyncClient::new(options, REQUEST_QUEUE);
    let (tx, rx) = mpsc::unbounded_channel::<Arrived>();
    let flow = Arc::new(Flow::default());
    let mut link = Link::new(&cfg.mqtt, link_state);
    let (done_tx, mut done_rx) = oneshot::channel::<()>();
    let writer = {
        let w = Writer {
            store,
            engine,
            alerts,
            cfg: Arc::clone(&cfg),
            counters: Arc::clone(&counters),
            client: client.clone(),
            flow: Arc::clone(&flow),
            link: link.shared(),
            shutdown: shutdown.clone(),
            watchdog: crate::sdnotify::Watchdog::from_env(),
        };
        let rt = tokio::runtime::Handle::current();
        std::thread::Builder::new()
            .name("seepd-writer".into())
            .spawn(move || {
                w.run(rx, &rt);
                let _ = done_tx.send(());
            })?
    };

    let mut tx = Some(tx);
    let deadline_len = shutdown.deadline();
    let far = || tokio::time::Instant::now() + Duration::from_secs(86_400);
    let mut deadline: Option<tokio::time::Instant> = None;
    let mut retry_at: Option<tokio::time::Instant> = None;
    let mut generation = 0u64;
    loop {
        let stopping = deadline.is_some();
        tokio::select! {
            biased;
            () = shutdown.wait(), if !stopping => {
                tracing::info!("Shutdown requested: no new messages; committing and acknowledging what was taken");
                tx = None; // wakes the writer; what it has not taken stays unacknowledged
                deadline = Some(tokio::time::Instant::from_std(shutdown.end()));
            }
            _ = &mut done_rx => break,
            _ = tokio::time::sleep_until(deadline.unwrap_or_else(far)), if stopping => {
                tracing::error!(deadline_s = deadline_len.as_secs(), "Shutdown deadline passed before the writer finished; unacknowledged messages will be redelivered");
                return Err(DeadlinePassed(deadline_len.as_secs()).into());
            }
            _ = tokio::time::sleep_until(retry_at.unwrap_or_else(far)), if retry_at.is_some() => {
                retry_at = None;
            }
            _ = beat.tick(), if beat_every.is_some() && !stopping && link.connected() => {
                crate::heartbeat::beat(&client, &cfg, "running");
            }
            // While stopping with the link down there is nothing to flush: no new attempts.
            ev = eventloop.poll(), if retry_at.is_none() && (!stopping || link.connected()) => match ev {
                Ok(Event::Incoming(Packet::ConnAck(ack))) => {
                    generation += 1;
                    flow.generation.store(generation, Ordering::Release);
                    flow.connected.store(true, Ordering::Release);
                    link.up(ack.session_present, Utc::now());
                    if !ack.session_present {
                        subscribe(&client, &cfg);
                    }
                    crate::heartbeat::beat(&client, &cfg, "running");
                }
                Ok(Event::Incoming(Packet::Publish(publish))) => {
                    // While stopping (tx gone) a message is neither stored nor acknowledged:
                    // the broker keeps it for the next session.
                    if let Some(tx) = &tx {
                        let waiting = flow.queued.load(Ordering::Relaxed);
                        if publish.qos == QoS::AtMostOnce && waiting >= QOS0_DROP_AT {
                            if flow.dropped_qos0.fetch_add(1, Ordering::Relaxed) == 0 {
                                tracing::warn!(waiting, topic = %publish.topic, "Too many messages waiting: dropping QoS 0 messages (QoS 0 is at most once; use QoS 1)");
                            }
                        } else {
                            flow.queued.fetch_add(1, Ordering::Relaxed);
                            let arrived = Arrived { publish, arrival: Utc::now(), generation };
                            if tx.send(arrived).is_err() {
                                tracing::error!("Writer has stopped; message left unacknowledged");
                            }
                        }
                    }
                }
                Ok(Event::Incoming(Packet::SubAck(ack)))
                    if ack
                        .return_codes
                        .iter()
                        .any(|c| matches!(c, rumqttc::SubscribeReasonCode::Failure)) =>
                {
                    tracing::error!(pkid = ack.pkid, "Broker refused a subscription");
                }
                Ok(_) => {}
                Err(e) => {
                    flow.connected.store(false, Ordering::Release);
                    let wait = link.down(&e, Utc::now());
                    retry_at = Some(tokio::time::Instant::now() + wait);
                }
            },
        }
    }
    if writer.join().is_err() {
        anyhow::bail!("the writer thread panicked; unacknowledged messages will be redelivered");
    }
    // The acks are queued ahead of the disconnect; poll until it has gone out (within the
    // deadline).
    if link.connected() {
        // A clean stop: say so (the broker sends the will only when the link breaks).
        crate::heartbeat::beat(&client, &cfg, "stopped");
        let _ = client.try_disconnect();
        let end = deadline
            .unwrap_or_else(|| tokio::time::Instant::now() + Duration::from_secs(2))
            .min(tokio::time::Instant::now() + Duration::from_secs(5));
        loop {
            match tokio::time::timeout_at(end, eventloop.poll()).await {
                Ok(Ok(Event::Outgoing(rumqttc::Outgoing::Disconnect))) | Ok(Err(_)) | Err(_) => {
                    break
                }
                Ok(Ok(_)) => {}
            }
        }
        tracing::info!("Disconnected from broker (shutdown)");
    }
    Ok(())
}

/// Subscribe to every configured filter (the broker had no session for us).
fn subscribe(client: &AsyncClient, cfg: &Config) {
    for s in &cfg.subscriptions {
        let qos = if s.qos == 0 {
            QoS::AtMostOnce
        } else {
            QoS::AtLeastOnce
        };
        if let Err(e) = client.try_subscribe(s.filter.clone(), qos) {
            tracing::error!(filter = %s.filter, error = %e, "Subscribe request failed");
        }
    }
    tracing::info!(
        count = cfg.subscriptions.len(),
        "Subscribed (broker had no session)"
    );
}
