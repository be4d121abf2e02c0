//! The live MQTT path: subscribe, hand each message to the writer, commit, then acknowledge.
//!
//! Owns the rumqttc event loop (polled in this task, never blocked) and the writer thread (the
//! only user of the store while running). Guarantee: a QoS 1 message is acknowledged to the
//! broker only after everything it produced (readings or quarantine rows) is committed, and
//! acknowledgements go out in arrival order. Redeliveries are harmless: inserts are idempotent.

use std::future::Future;
use std::sync::Arc;
use std::time::{Duration, Instant};

use anyhow::Context as _;
use chrono::{DateTime, Utc};
use rumqttc::{AsyncClient, Event, MqttOptions, Packet, Publish, QoS, TlsConfiguration, Transport};
use tokio::sync::{mpsc, oneshot};

use crate::alerts::live::{Live, TICK};
use crate::config::{Config, Mqtt};
use crate::engine::{Engine, Message, Outcome};
use crate::ingest::progress::{Counters, QuarantineLog};
use crate::store::Store;

/// Messages waiting for the writer; the broker's in-flight window bounds QoS 1 traffic anyway.
const WRITER_QUEUE: usize = 8192;
/// Requests (acks, subscribes) waiting for the event loop.
const REQUEST_QUEUE: usize = 16384;

/// Build the rumqttc options from the configuration.
///
/// # Errors
/// TLS files that cannot be read.
pub fn mqtt_options(m: &Mqtt) -> anyhow::Result<MqttOptions> {
    let mut o = MqttOptions::new(&m.client_id, &m.host, m.port);
    o.set_keep_alive(Duration::from_secs(m.keep_alive_s.max(5)))
        .set_clean_session(!m.persistent_session)
        .set_manual_acks(true)
        .set_max_packet_size(m.max_packet_bytes, m.max_packet_bytes)
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

/// A message on its way to the writer, with its arrival time.
struct Arrived {
    publish: Publish,
    arrival: DateTime<Utc>,
}

/// Run live ingestion until `shutdown` resolves, then stop taking messages, commit what was
/// taken, acknowledge it, disconnect, and return — all within the shutdown deadline.
///
/// # Errors
/// Bad TLS files; the writer thread dying.
pub async fn run(
    cfg: Arc<Config>,
    store: Store,
    engine: Engine,
    alerts: Live,
    counters: Arc<Counters>,
    shutdown: impl Future<Output = ()>,
) -> anyhow::Result<()> {
    let options = mqtt_options(&cfg.mqtt)?;
    let (client, mut eventloop) = AsyncClient::new(options, REQUEST_QUEUE);
    let (tx, rx) = mpsc::channel::<Arrived>(WRITER_QUEUE);
    let (done_tx, mut done_rx) = oneshot::channel::<()>();
    let writer = {
        let client = client.clone();
        let cfg = Arc::clone(&cfg);
        let rt = tokio::runtime::Handle::current();
        let counters = Arc::clone(&counters);
        std::thread::Builder::new()
            .name("seepd-writer".into())
            .spawn(move || {
                writer_loop(rx, store, engine, alerts, &client, &rt, &cfg, &counters);
                let _ = done_tx.send(());
            })?
    };

    tokio::pin!(shutdown);
    let mut tx = Some(tx);
    let mut link = Link::new(&cfg.mqtt);
    let deadline_len = Duration::from_secs(cfg.service.shutdown_deadline_s);
    let mut deadline: Option<tokio::time::Instant> = None;
    loop {
        let stop_at =
            deadline.unwrap_or_else(|| tokio::time::Instant::now() + Duration::from_secs(86_400));
        tokio::select! {
            biased;
            _ = &mut shutdown, if deadline.is_none() => {
                tracing::info!("Shutdown requested: no new messages; committing and acknowledging what was taken");
                tx = None; // the writer drains its queue, commits, acks, then reports done
                deadline = Some(tokio::time::Instant::now() + deadline_len);
            }
            _ = &mut done_rx => break,
            _ = tokio::time::sleep_until(stop_at), if deadline.is_some() => {
                tracing::error!(deadline_s = deadline_len.as_secs(), "Shutdown deadline passed before the writer finished; unacknowledged messages will be redelivered");
                return Ok(());
            }
            ev = eventloop.poll() => match ev {
                Ok(ev) => link.on_event(ev, &client, &cfg, tx.as_ref()).await,
                Err(e) => {
                    let wait = link.on_error(&e);
                    tokio::select! {
                        _ = tokio::time::sleep(wait) => {}
                        _ = &mut shutdown, if deadline.is_none() => {
                            tx = None;
                            deadline = Some(tokio::time::Instant::now() + deadline_len);
                        }
                    }
                }
            },
        }
    }
    let _ = writer.join();
    // The acks are queued ahead of the disconnect; poll until it has gone out.
    if link.connected {
        let _ = client.try_disconnect();
        let end = tokio::time::Instant::now() + Duration::from_secs(2);
        loop {
            match tokio::time::timeout_at(end, eventloop.poll()).await {
                Ok(Ok(Event::Outgoing(rumqttc::Outgoing::Disconnect))) | Ok(Err(_)) | Err(_) => {
                    break
                }
                Ok(Ok(_)) => {}
            }
        }
    }
    tracing::info!("Disconnected from broker (shutdown)");
    Ok(())
}

/// Connection bookkeeping: logging once per connect/disconnect, resubscribing, backoff.
struct Link {
    connected: bool,
    failures: u32,
    min: Duration,
    max: Duration,
}

impl Link {
    fn new(m: &Mqtt) -> Link {
        Link {
            connected: false,
            failures: 0,
            min: Duration::from_millis(m.reconnect_min_ms.max(1)),
            max: Duration::from_millis(m.reconnect_max_ms.max(m.reconnect_min_ms.max(1))),
        }
    }

    async fn on_event(
        &mut self,
        ev: Event,
        client: &AsyncClient,
        cfg: &Config,
        tx: Option<&mpsc::Sender<Arrived>>,
    ) {
        match ev {
            Event::Incoming(Packet::ConnAck(ack)) => {
                self.connected = true;
                self.failures = 0;
                tracing::info!(
                    host = %cfg.mqtt.host,
                    port = cfg.mqtt.port,
                    session_present = ack.session_present,
                    "Connected to broker"
                );
                if !ack.session_present {
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
            }
            Event::Incoming(Packet::Publish(publish)) => {
                // While stopping (tx gone) a message is neither stored nor acknowledged: the
                // broker keeps it for the next session.
                if let Some(tx) = tx {
                    let arrived = Arrived {
                        publish,
                        arrival: Utc::now(),
                    };
                    if tx.send(arrived).await.is_err() {
                        tracing::error!("Writer has stopped; message left unacknowledged");
                    }
                }
            }
            Event::Incoming(Packet::SubAck(ack))
                if ack
                    .return_codes
                    .iter()
                    .any(|c| matches!(c, rumqttc::SubscribeReasonCode::Failure)) =>
            {
                tracing::error!(pkid = ack.pkid, "Broker refused a subscription");
            }
            _ => {}
        }
    }

    /// Log the error (once per disconnect, then sparsely) and return how long to wait.
    fn on_error(&mut self, e: &rumqttc::ConnectionError) -> Duration {
        if self.connected {
            tracing::warn!(error = %e, "Disconnected from broker; reconnecting");
        } else if self.failures.is_power_of_two() || self.failures == 0 {
            tracing::warn!(error = %e, attempts = self.failures + 1, "Cannot reach broker; retrying");
        }
        self.connected = false;
        self.failures = self.failures.saturating_add(1);
        let factor = 1u32 << self.failures.min(16).saturating_sub(1);
        (self.min * factor).min(self.max)
    }
}

/// The writer: batch, process, evaluate the alert rules, commit readings and alert rows in one
/// transaction (retrying until it succeeds), then acknowledge in order. Between batches (and
/// at least every `TICK` during a stream) it ticks the rules' timers.
#[allow(clippy::too_many_arguments)]
fn writer_loop(
    mut rx: mpsc::Receiver<Arrived>,
    mut store: Store,
    mut engine: Engine,
    mut alerts: Live,
    client: &AsyncClient,
    rt: &tokio::runtime::Handle,
    cfg: &Config,
    counters: &Counters,
) {
    let max_n = cfg.service.commit_max_readings.max(1);
    let max_t = Duration::from_millis(cfg.service.commit_max_ms);
    let mut qlog = QuarantineLog::new(Duration::from_secs(60));
    let mut ack_failed = false;
    loop {
        if let Some(new) = alerts.take_reload() {
            crate::reload::apply(new, &mut store, &mut engine, &mut alerts);
        }
        // The timer must be created inside the runtime: build it in the async block.
        let first = match rt.block_on(async { tokio::time::timeout(TICK, rx.recv()).await }) {
            Ok(Some(a)) => a,
            Ok(None) => break,
            Err(_) => {
                alerts.tick(&mut store);
                continue;
            }
        };
        let started = Instant::now();
        let mut batch = vec![first];
        while batch.len() < max_n && started.elapsed() < max_t {
            match rx.try_recv() {
                Ok(a) => batch.push(a),
                Err(_) => break,
            }
        }
        let mut out = Outcome::default();
        for a in &batch {
            let msg = Message {
                topic: a.publish.topic.clone(),
                payload: a.publish.payload.to_vec(),
                arrival: a.arrival,
                redelivered: a.publish.dup,
            };
            out.append(engine.process(&msg));
        }
        let aw = alerts.evaluate_outcome(&out);
        let Outcome {
            readings,
            derived,
            quarantined,
            flag_updates,
        } = out;
        alerts.before_commit(&aw);
        let mut wait = Duration::from_millis(100);
        let stats = loop {
            match store.write_batch_flagged(&readings, &derived, &quarantined, &flag_updates, &aw) {
                Ok(s) => break s,
                Err(e) => {
                    tracing::error!(error = %e, messages = batch.len(), "Commit failed; retrying (nothing acknowledged)");
                    std::thread::sleep(wait);
                    wait = (wait * 2).min(Duration::from_secs(5));
                }
            }
        };
        alerts.committed(&aw);
        counters.add(batch.len(), &stats);
        for q in &quarantined {
            qlog.note(q);
        }
        for a in &batch {
            if let Err(e) = rt.block_on(client.ack(&a.publish)) {
                if !ack_failed {
                    tracing::error!(error = %e, "Cannot queue acknowledgement; the broker will redeliver");
                    ack_failed = true;
                }
            }
        }
        if alerts.tick_due() {
            alerts.tick(&mut store);
        }
    }
    qlog.flush();
}
