//! The InfluxDB v2 write call: `POST {url}/api/v2/write?org=..&bucket=..&precision=ms` with
//! `Authorization: Token ..`, through the `influxdb2` crate (cargo feature `influx`).
//!
//! Owns the client set-up (request timeout, extra CA for https) and the mapping of the server's
//! answer onto `WriteError`. Why `influxdb2`: with `default-features = false` and its `rustls`
//! feature it builds on reqwest 0.11 + rustls (no OpenSSL), and its `RequestError::Http` carries
//! the status and the reply body that the bisection of refused batches needs. We hand it our own
//! line-protocol text (`export::line`) so that every refused point can be traced to its queue
//! entry. It counts only 204 as success; any other 2xx is mapped to success here.

use std::time::Duration;

use anyhow::Context as _;
use influxdb2::api::write::TimestampPrecision;
use influxdb2::RequestError;

use super::{Sink, WriteError};
use crate::config::Export;

/// A client for one server, org and bucket.
pub struct InfluxSink {
    client: influxdb2::Client,
    org: String,
    bucket: String,
}

impl InfluxSink {
    /// Build the client.
    ///
    /// # Errors
    /// An unreadable or invalid CA file, or a URL the client cannot parse.
    pub fn new(e: &Export) -> anyhow::Result<InfluxSink> {
        let mut builder = reqwest::Client::builder()
            .timeout(Duration::from_millis(e.timeout_ms))
            .connect_timeout(Duration::from_millis(e.timeout_ms.min(5000)));
        if let Some(ca) = &e.ca_file {
            let pem = std::fs::read(ca)
                .with_context(|| format!("reading export CA file {}", ca.display()))?;
            let certs = reqwest::Certificate::from_pem_bundle(&pem)
                .with_context(|| format!("export CA file {} is not PEM", ca.display()))?;
            for cert in certs {
                builder = builder.add_root_certificate(cert);
            }
        }
        // influxdb2 panics on a URL it cannot parse: check first (config has checked too).
        reqwest::Url::parse(&e.url).with_context(|| format!("export url {:?}", e.url))?;
        let client = influxdb2::ClientBuilder::with_builder(builder, &e.url, &e.org, &e.token.0)
            .build()
            .context("building the InfluxDB client")?;
        Ok(InfluxSink {
            client,
            org: e.org.clone(),
            bucket: e.bucket.clone(),
        })
    }
}

/// An error with its sources, one line.
fn chain(e: &dyn std::error::Error) -> String {
    let mut s = e.to_string();
    let mut cur = e.source();
    while let Some(c) = cur {
        s.push_str(": ");
        s.push_str(&c.to_string());
        cur = c.source();
    }
    s
}

/// Map a write answer: 2xx is success; 400, 413 and 422 refuse the points; the rest is retried.
pub fn classify(answer: Result<(), RequestError>) -> Result<(), WriteError> {
    match answer {
        Ok(()) => Ok(()),
        Err(RequestError::Http { status, .. }) if status.is_success() => Ok(()),
        Err(RequestError::Http { status, text }) => match status.as_u16() {
            code @ (400 | 413 | 422) => Err(WriteError::Rejected {
                status: code,
                reply: text,
            }),
            code => Err(WriteError::Failed(format!("HTTP {code}: {}", text.trim()))),
        },
        Err(e) => Err(WriteError::Failed(chain(&e))),
    }
}

impl Sink for InfluxSink {
    async fn write(&self, body: String) -> Result<(), WriteError> {
        let answer = self
            .client
            .write_line_protocol_with_precision(
                &self.org,
                &self.bucket,
                body,
                TimestampPrecision::Milliseconds,
            )
            .await;
        classify(answer)
    }
}
