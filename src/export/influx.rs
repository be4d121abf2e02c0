//! The InfluxDB v2 write call: `POST {url}/api/v2/write?org=..&bucket=..&precision=ms` with
//! `Authorization: Token ..` (cargo feature `influx`).
//!
//! Owns the HTTP/1.1 client (hyper 1's connection API, already in the tree through the web
//! server; TLS by rustls with the ring provider, the web PKI roots and an optional extra CA file)
//! and the mapping of the server's answer onto `WriteError`. One connection is kept between
//! writes; a kept connection the server has closed is replaced once, at once (a write is
//! idempotent: the same point at the same time overwrites itself). We send our own
//! line-protocol text (`export::line`) so that every refused point can be traced to its queue
//! entry. Any 2xx is success.

use std::sync::Arc;
use std::time::Duration;

use anyhow::{bail, Context as _};
use bytes::Bytes;
use http_body_util::{BodyExt, Full};
use hyper::client::conn::http1::SendRequest;
use hyper::header::{HeaderValue, ACCEPT, AUTHORIZATION, CONTENT_TYPE, HOST};
use hyper::{Request, Uri};
use hyper_util::rt::TokioIo;
use rustls::pki_types::ServerName;
use tokio::io::{AsyncRead, AsyncWrite};
use tokio::net::TcpStream;
use tokio::sync::Mutex;
use tokio_rustls::TlsConnector;

use super::{Sink, WriteError};
use crate::config::Export;

type Sender = SendRequest<Full<Bytes>>;

/// A client for one server, org and bucket.
pub struct InfluxSink {
    /// Host to connect to (brackets of an IPv6 literal removed).
    host: String,
    port: u16,
    /// The `Host` header: the URL's authority as written.
    authority: HeaderValue,
    /// TLS for an `https` URL: the connector and the name the certificate must carry.
    tls: Option<(TlsConnector, ServerName<'static>)>,
    /// Path (with the URL's own prefix) and query of the write call.
    target: String,
    /// `Token ...`; marked sensitive so that it is never printed with the request.
    token: HeaderValue,
    /// Limit on connecting, sending and reading the answer of one write.
    timeout: Duration,
    /// The connection kept from the previous write, if any.
    kept: Mutex<Option<Sender>>,
}

impl InfluxSink {
    /// Build the client (no connection is made here).
    ///
    /// # Errors
    /// A URL that is not `http://` or `https://` with a host, an unreadable CA file or one with
    /// no PEM certificate, a token that cannot be a header.
    pub fn new(e: &Export) -> anyhow::Result<InfluxSink> {
        let uri: Uri = e
            .url
            .parse()
            .with_context(|| format!("export url {:?}", e.url))?;
        let https = match uri.scheme_str() {
            Some("http") => false,
            Some("https") => true,
            _ => bail!("export url {:?}: expected http:// or https://", e.url),
        };
        let (Some(host), Some(authority)) = (uri.host(), uri.authority()) else {
            bail!("export url {:?} has no host", e.url);
        };
        let host = host
            .trim_start_matches('[')
            .trim_end_matches(']')
            .to_string();
        let port = uri.port_u16().unwrap_or(if https { 443 } else { 80 });
        let query = serde_urlencoded::to_string([
            ("org", e.org.as_str()),
            ("bucket", e.bucket.as_str()),
            ("precision", "ms"),
        ])?;
        let target = format!("{}/api/v2/write?{query}", uri.path().trim_end_matches('/'));
        let tls = if https {
            let name = ServerName::try_from(host.clone())
                .with_context(|| format!("export url {:?}: host is not a TLS name", e.url))?;
            Some((TlsConnector::from(Arc::new(tls_config(e)?)), name))
        } else {
            None
        };
        let mut token = HeaderValue::from_str(&format!("Token {}", e.token.0))
            .context("the export token cannot be sent in a header")?;
        token.set_sensitive(true);
        Ok(InfluxSink {
            host,
            port,
            authority: HeaderValue::from_str(authority.as_str())?,
            tls,
            target,
            token,
            timeout: Duration::from_millis(e.timeout_ms),
            kept: Mutex::new(None),
        })
    }

    /// A new connection, through TLS for `https`.
    async fn connect(&self) -> Result<Sender, String> {
        let tcp = TcpStream::connect((self.host.as_str(), self.port))
            .await
            .map_err(|e| format!("connecting to {}:{}: {e}", self.host, self.port))?;
        let _ = tcp.set_nodelay(true);
        match &self.tls {
            None => handshake(tcp).await,
            Some((connector, name)) => {
                let stream = connector
                    .connect(name.clone(), tcp)
                    .await
                    .map_err(|e| format!("TLS with {}:{}: {e}", self.host, self.port))?;
                handshake(stream).await
            }
        }
    }

    /// Post `body` on the kept connection or a new one; a kept connection that fails before an
    /// answer is replaced once.
    async fn post(&self, body: Bytes) -> Result<(u16, String), String> {
        let mut kept = self.kept.lock().await;
        let (mut send, fresh) = match kept.take().filter(|s| !s.is_closed()) {
            Some(s) => (s, false),
            None => (self.connect().await?, true),
        };
        let answer = match self.exchange(&mut send, body.clone()).await {
            Err(_) if !fresh => {
                send = self.connect().await?;
                self.exchange(&mut send, body).await
            }
            other => other,
        }?;
        *kept = Some(send);
        Ok(answer)
    }

    /// One request and its whole answer.
    async fn exchange(&self, send: &mut Sender, body: Bytes) -> Result<(u16, String), String> {
        send.ready().await.map_err(|e| chain(&e))?;
        let req = Request::post(self.target.as_str())
            .header(HOST, self.authority.clone())
            .header(AUTHORIZATION, self.token.clone())
            .header(CONTENT_TYPE, "text/plain; charset=utf-8")
            .header(ACCEPT, "application/json")
            .body(Full::new(body))
            .map_err(|e| e.to_string())?;
        let resp = send.send_request(req).await.map_err(|e| chain(&e))?;
        let status = resp.status().as_u16();
        let bytes = resp
            .into_body()
            .collect()
            .await
            .map_err(|e| chain(&e))?
            .to_bytes();
        Ok((status, String::from_utf8_lossy(&bytes).into_owned()))
    }
}

/// rustls with the ring provider, the web PKI roots, and the CA file's certificates if one is
/// configured.
fn tls_config(e: &Export) -> anyhow::Result<rustls::ClientConfig> {
    let mut roots = rustls::RootCertStore::empty();
    roots.extend(webpki_roots::TLS_SERVER_ROOTS.iter().cloned());
    if let Some(ca) = &e.ca_file {
        let pem = std::fs::read(ca)
            .with_context(|| format!("reading export CA file {}", ca.display()))?;
        let mut n = 0;
        for cert in rustls_pemfile::certs(&mut pem.as_slice()) {
            let cert = cert.with_context(|| format!("export CA file {}", ca.display()))?;
            roots
                .add(cert)
                .with_context(|| format!("export CA file {}", ca.display()))?;
            n += 1;
        }
        if n == 0 {
            bail!("export CA file {} holds no PEM certificate", ca.display());
        }
    }
    Ok(rustls::ClientConfig::builder_with_provider(Arc::new(
        rustls::crypto::ring::default_provider(),
    ))
    .with_safe_default_protocol_versions()?
    .with_root_certificates(roots)
    .with_no_client_auth())
}

/// The HTTP/1.1 handshake on `io`; the connection is driven by a task of its own, which ends
/// when the server closes it or the sender is dropped.
async fn handshake<T>(io: T) -> Result<Sender, String>
where
    T: AsyncRead + AsyncWrite + Unpin + Send + 'static,
{
    let (send, conn) = hyper::client::conn::http1::handshake(TokioIo::new(io))
        .await
        .map_err(|e| chain(&e))?;
    tokio::spawn(async move {
        let _ = conn.await;
    });
    Ok(send)
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
pub fn classify(status: u16, reply: String) -> Result<(), WriteError> {
    match status {
        200..=299 => Ok(()),
        400 | 413 | 422 => Err(WriteError::Rejected { status, reply }),
        code => Err(WriteError::Failed(format!("HTTP {code}: {}", reply.trim()))),
    }
}

impl Sink for InfluxSink {
    async fn write(&self, body: String) -> Result<(), WriteError> {
        let ms = self.timeout.as_millis();
        match tokio::time::timeout(self.timeout, self.post(Bytes::from(body))).await {
            Ok(Ok((status, reply))) => classify(status, reply),
            Ok(Err(e)) => Err(WriteError::Failed(e)),
            Err(_) => Err(WriteError::Failed(format!(
                "no answer from {}:{} within {ms} ms",
                self.host, self.port
            ))),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::{classify, WriteError};

    #[test]
    fn answers_are_classified() {
        assert_eq!(classify(204, String::new()), Ok(()));
        assert_eq!(classify(200, "{}".into()), Ok(()));
        assert_eq!(
            classify(400, "bad line".into()),
            Err(WriteError::Rejected {
                status: 400,
                reply: "bad line".into()
            })
        );
        assert!(matches!(
            classify(413, String::new()),
            Err(WriteError::Rejected { status: 413, .. })
        ));
        assert!(
            matches!(classify(401, "no".into()), Err(WriteError::Failed(m)) if m == "HTTP 401: no")
        );
        assert!(matches!(
            classify(503, String::new()),
            Err(WriteError::Failed(_))
        ));
    }
}
