//! The embedded MQTT broker for the demo (rumqttd), on a free loopback port.

use std::net::TcpListener;

/// Start rumqttd on 127.0.0.1 at a free port, in a thread of its own; returns the port.
///
/// # Errors
/// No free port, or a bad broker configuration.
pub fn start() -> anyhow::Result<u16> {
    let port = TcpListener::bind("127.0.0.1:0")?.local_addr()?.port();
    let text = format!(
        r#"
id = 0
[router]
id = 0
max_connections = 100
max_outgoing_packet_count = 200
max_segment_size = 104857600
max_segment_count = 10

[v4.1]
name = "demo"
listen = "127.0.0.1:{port}"
next_connection_delay_ms = 1
[v4.1.connections]
connection_timeout_ms = 60000
max_payload_size = 1048576
max_inflight_count = 200
dynamic_filters = true
"#
    );
    let cfg: rumqttd::Config = toml::from_str(&text)?;
    std::thread::Builder::new()
        .name("demo-broker".into())
        .spawn(move || {
            let mut broker = rumqttd::Broker::new(cfg);
            if let Err(e) = broker.start() {
                tracing::error!(error = %e, "Embedded broker stopped");
            }
        })?;
    // Wait until it accepts connections.
    for _ in 0..100 {
        if std::net::TcpStream::connect(("127.0.0.1", port)).is_ok() {
            return Ok(port);
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    anyhow::bail!("embedded broker did not start listening on port {port}")
}
