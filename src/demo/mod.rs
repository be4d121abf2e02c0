//! `seepd demo`: an embedded broker (rumqttd) on a free loopback port, the service itself, and
//! simulated loggers for the invented demo site publishing at accelerated time, with a live
//! summary. Everything here is demo-only; the data are invented.

mod broker;
pub mod sim;

use std::io::Write;
use std::sync::Arc;
use std::time::Duration;

use anyhow::Context as _;
use chrono::{TimeZone, Utc};
use rumqttc::{AsyncClient, MqttOptions, QoS};

use crate::ingest::progress::Counters;
use crate::shutdown::Shutdown;
use crate::store::Store;

pub use crate::scenario::{example_config, EXAMPLE_CONFIG};

/// Run the demo until `shutdown` is requested (or after `days` simulated days).
///
/// # Errors
/// Broker start-up or database errors.
pub async fn run(
    seconds_per_day: f64,
    days: Option<u32>,
    shutdown: Shutdown,
) -> anyhow::Result<()> {
    let dir = tempfile_dir()?;
    let mut cfg = example_config(&dir)?;
    let port = broker::start().context("starting the embedded broker")?;
    cfg.mqtt.port = port;
    cfg.mqtt.host = "127.0.0.1".into();
    cfg.service.database = dir.join("demo.sqlite");
    cfg.http = Some(demo_http()?);
    let cfg = Arc::new(cfg);
    println!(
        "seepd demo: embedded broker on 127.0.0.1:{port}; database {}",
        cfg.service.database.display()
    );
    if let Some(h) = &cfg.http {
        println!(
            "Web pages: {}/  (open to anyone on this machine; no sign-in in the demo)",
            h.public_base_url
        );
    }
    println!("Invented site, invented data. Press Ctrl-C to stop.\n");

    let counters = Arc::new(Counters::default());
    let service = tokio::spawn(crate::service::run(
        Arc::clone(&cfg),
        Arc::clone(&counters),
        shutdown.clone(),
    ));

    let total_days = days.unwrap_or(sim::SCENARIO_DAYS);
    let start = Utc::now() - chrono::Duration::days(i64::from(sim::SCENARIO_DAYS));
    let start = Utc
        .timestamp_opt(start.timestamp() - start.timestamp() % 3600, 0)
        .single()
        .unwrap_or(start);
    let sim = sim::Sim::new(&cfg, start.timestamp_millis())?;
    let loggers = tokio::spawn(publish_loop(
        port,
        sim,
        start,
        seconds_per_day,
        total_days,
        shutdown.clone(),
    ));

    let db = cfg.service.database.clone();
    let summary = {
        let stop = shutdown.clone();
        let counters = Arc::clone(&counters);
        tokio::spawn(async move {
            while !stop.sleep(Duration::from_secs(3)).await {
                print_summary(&db, &counters);
            }
        })
    };

    tokio::select! {
        () = shutdown.wait() => println!("\nStopping..."),
        r = loggers => {
            if let Ok(Err(e)) = r { eprintln!("simulated loggers: {e:#}"); }
            if days.is_some() {
                tokio::time::sleep(Duration::from_secs(2)).await;
            } else {
                println!("\nScenario finished; the service keeps running. Press Ctrl-C to stop.");
                shutdown.wait().await;
            }
        }
    }
    shutdown.request();
    let _ = summary.await;
    match service.await {
        Ok(r) => r?,
        Err(e) => anyhow::bail!("service task failed: {e}"),
    }
    print_summary(&cfg.service.database, &counters);
    draw_flow_nets(&cfg);
    println!(
        "Demo stopped cleanly. Database kept at {}",
        cfg.service.database.display()
    );
    Ok(())
}

/// The flow net of each section with a seepage model, at the latest stored levels, as an SVG
/// file beside the database (what `seepd section` draws).
fn draw_flow_nets(cfg: &crate::config::Config) {
    let Ok(store) = crate::store::Store::open(&cfg.service.database) else {
        return;
    };
    for s in cfg.objects.sections.iter().filter(|s| s.model.is_some()) {
        let path = cfg
            .service
            .database
            .with_file_name(format!("flownet-{}.svg", s.id));
        // At the pool gauge's latest reading (the demo's days run faster than the clock).
        let now = Utc::now();
        let at = store
            .head_at(&s.pool_gauge, now.timestamp_millis())
            .ok()
            .flatten()
            .and_then(|(t, _, _)| chrono::DateTime::from_timestamp_millis(t))
            .unwrap_or(now);
        match crate::section_cmd::render(cfg, &store, &s.id, at) {
            Ok(svg) => match std::fs::write(&path, svg) {
                Ok(()) => println!("Flow net of section {} drawn: {}", s.id, path.display()),
                Err(e) => eprintln!("cannot write {}: {e}", path.display()),
            },
            Err(e) => eprintln!("section {}: {e:#}", s.id),
        }
    }
}

/// The demo's web pages: loopback, port 8480 when free (else any free port), readable
/// without signing in.
fn demo_http() -> anyhow::Result<crate::config::http::Http> {
    let listener = std::net::TcpListener::bind("127.0.0.1:8480")
        .or_else(|_| std::net::TcpListener::bind("127.0.0.1:0"))
        .context("finding a free port for the web pages")?;
    let bind = listener.local_addr()?;
    drop(listener);
    Ok(crate::config::http::Http {
        bind,
        public_base_url: format!("http://{bind}"),
        allow_anonymous: true,
        ack_link_valid_h: 72,
        ready_commit_age_s: None,
        ready_reconnect_s: 30,
    })
}

fn tempfile_dir() -> anyhow::Result<std::path::PathBuf> {
    let dir = std::env::temp_dir().join(format!("seepd-demo-{}", std::process::id()));
    std::fs::create_dir_all(&dir)?;
    Ok(dir)
}

/// Publish the scenario: one hourly round of every logger per simulated hour.
async fn publish_loop(
    port: u16,
    sim: sim::Sim,
    start: chrono::DateTime<Utc>,
    seconds_per_day: f64,
    days: u32,
    stop: Shutdown,
) -> anyhow::Result<()> {
    let mut o = MqttOptions::new(
        format!("demo-loggers-{}", std::process::id()),
        "127.0.0.1",
        port,
    );
    o.set_keep_alive(Duration::from_secs(30)).set_inflight(200);
    let (client, mut el) = AsyncClient::new(o, 1000);
    tokio::spawn(async move {
        loop {
            if el.poll().await.is_err() {
                tokio::time::sleep(Duration::from_millis(200)).await;
            }
        }
    });
    let per_hour = Duration::from_secs_f64((seconds_per_day / 24.0).max(0.001));
    for hour in 0..(days * 24) {
        let t = start + chrono::Duration::hours(i64::from(hour));
        for (topic, payload) in sim.messages(hour, t) {
            client
                .publish(topic, QoS::AtLeastOnce, false, payload)
                .await?;
        }
        tokio::select! {
            _ = tokio::time::sleep(per_hour) => {}
            () = stop.wait() => return Ok(()),
        }
    }
    Ok(())
}

fn print_summary(db: &std::path::Path, counters: &Counters) {
    let Ok(store) = Store::open(db) else { return };
    let (messages, stored, dups, quarantined) = counters.snapshot();
    let mut s = String::new();
    s.push_str(&format!(
        "--- {} messages, {stored} readings stored, {dups} duplicates, {quarantined} quarantined ---\n",
        messages
    ));
    if let Ok(latest) = store.latest_all() {
        for l in latest {
            let t = Utc
                .timestamp_millis_opt(l.t_ms)
                .single()
                .map(|t| t.format("%Y-%m-%d %H:%M").to_string())
                .unwrap_or_default();
            match l.total_head_m {
                Some(h) => s.push_str(&format!(
                    "  {:<10} {t}  head/elevation {h:8.3} m\n",
                    l.instrument
                )),
                None => s.push_str(&format!(
                    "  {:<10} {t}  pressure {:8.3} kPa\n",
                    l.instrument,
                    l.pressure_kpa.unwrap_or(f64::NAN)
                )),
            }
        }
    }
    if let Ok(derived) = store.latest_derived() {
        const SHOWN: [&str; 12] = [
            "vertical_gradient",
            "exit_gradient",
            "factor_of_safety",
            "expected_excess_head",
            "measured_excess_head",
            "effective_x3",
            "exit_elevation",
            "seepage_face_height",
            "model_exit_elevation",
            "model_seepage_face_height",
            "model_flow",
            "model_residual",
        ];
        for d in derived
            .iter()
            .filter(|d| SHOWN.contains(&d.quantity.as_str()))
        {
            match d.value {
                Some(v) if v != 0.0 && v.abs() < 1e-3 => s.push_str(&format!(
                    "  {:<10} {:<22} {v:9.2e} {}\n",
                    d.object, d.quantity, d.unit
                )),
                Some(v) => s.push_str(&format!(
                    "  {:<10} {:<22} {v:9.3} {}\n",
                    d.object, d.quantity, d.unit
                )),
                None => s.push_str(&format!(
                    "  {:<10} {:<22}         — ({})\n",
                    d.object,
                    d.quantity,
                    d.reason.as_deref().unwrap_or("no value")
                )),
            }
        }
    }
    let (raised, active) = store.alert_summary().unwrap_or_default();
    s.push_str(&format!(
        "  alerts: {raised} raised so far, {} active",
        active.len()
    ));
    for (rule, level, object) in &active {
        s.push_str(&format!("; {rule} at {level:?} on {object}"));
    }
    s.push_str(" (no mail relay in the demo: messages wait in the outbox)\n");
    if let Ok(q) = store.quarantine_counts() {
        if !q.is_empty() {
            let parts: Vec<String> = q.iter().map(|(r, n)| format!("{r}={n}")).collect();
            s.push_str(&format!("  quarantine: {}\n", parts.join(", ")));
        }
    }
    let mut out = std::io::stdout().lock();
    let _ = out.write_all(s.as_bytes());
    let _ = out.flush();
}
