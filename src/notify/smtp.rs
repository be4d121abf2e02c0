//! The SMTP side of the outbox worker (lettre, rustls): build the transport from `[smtp]`,
//! build each message (text and HTML alternatives, stable Message-ID, Date from the outbox
//! row; with the row's attachments, a multipart/mixed message whose first part is that body and
//! whose other parts are the attached files) and classify failures as transient (retry) or permanent (dead-letter).

use std::time::{Duration, UNIX_EPOCH};

use lettre::message::header::ContentType;
use lettre::message::{Attachment, Mailbox, MultiPart};
use lettre::transport::smtp::authentication::Credentials;
use lettre::transport::smtp::client::{Certificate, CertificateStore, Tls, TlsParameters};
use lettre::{Message, SmtpTransport, Transport};

use crate::config::{Smtp, SmtpSecurity};
use crate::store::outbox::Queued;

/// Why a message was not accepted.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum SendError {
    /// Connection, TLS or 4xx: try again later.
    Transient(String),
    /// 5xx reply or an unbuildable message: never retried.
    Permanent(String),
}

/// A configured SMTP client.
pub struct Mailer {
    transport: SmtpTransport,
    from: Mailbox,
}

impl Mailer {
    /// Build the transport (no connection is made yet).
    ///
    /// # Errors
    /// Unreadable CA file or bad addresses.
    pub fn new(smtp: &Smtp) -> anyhow::Result<Mailer> {
        let tls_params = || -> anyhow::Result<TlsParameters> {
            let mut b = TlsParameters::builder(smtp.host.clone());
            if let Some(ca) = &smtp.ca_file {
                let pem = std::fs::read(ca)
                    .map_err(|e| anyhow::anyhow!("reading SMTP ca_file {}: {e}", ca.display()))?;
                b = b
                    .certificate_store(CertificateStore::None)
                    .add_root_certificate(Certificate::from_pem(&pem)?);
            }
            Ok(b.build_rustls()?)
        };
        let tls = match smtp.security {
            SmtpSecurity::Starttls => Tls::Required(tls_params()?),
            SmtpSecurity::Tls => Tls::Wrapper(tls_params()?),
            SmtpSecurity::Plain => Tls::None,
        };
        let mut b = SmtpTransport::builder_dangerous(smtp.host.clone())
            .port(smtp.port)
            .tls(tls)
            .timeout(Some(Duration::from_secs(smtp.timeout_s)));
        if let (Some(user), Some(pass)) = (&smtp.username, &smtp.password) {
            b = b.credentials(Credentials::new(user.clone(), pass.0.clone()));
        }
        Ok(Mailer {
            transport: b.build(),
            from: format!("seepd <{}>", smtp.from).parse()?,
        })
    }

    /// Build the message of an outbox row (the same bytes at every attempt, except for the
    /// transport's own headers).
    ///
    /// # Errors
    /// Bad recipient addresses (a permanent failure).
    pub fn message(&self, m: &Queued) -> Result<Message, SendError> {
        let mut b = Message::builder()
            .from(self.from.clone())
            .subject(m.subject.clone())
            .message_id(Some(m.message_id.clone()))
            .date(UNIX_EPOCH + Duration::from_millis(m.created_ms.max(0) as u64));
        for r in &m.recipients {
            let to: Mailbox = r
                .parse()
                .map_err(|e| SendError::Permanent(format!("recipient {r:?}: {e}")))?;
            b = b.to(to);
        }
        let body = MultiPart::alternative_plain_html(m.text.clone(), m.html.clone());
        let body = if m.attachments.is_empty() {
            body
        } else {
            let mut mixed = MultiPart::mixed().multipart(body);
            for a in &m.attachments {
                let ct = ContentType::parse(&a.content_type).map_err(|e| {
                    SendError::Permanent(format!("attachment {:?} content type: {e}", a.name))
                })?;
                mixed = mixed.singlepart(Attachment::new(a.name.clone()).body(a.data.clone(), ct));
            }
            mixed
        };
        b.multipart(body)
            .map_err(|e| SendError::Permanent(format!("building the message: {e}")))
    }

    /// Send one outbox message.
    ///
    /// # Errors
    /// `Transient` for connection/TLS failures and 4xx, `Permanent` for 5xx.
    pub fn send(&self, m: &Queued) -> Result<(), SendError> {
        let msg = self.message(m)?;
        match self.transport.send(&msg) {
            Ok(_) => Ok(()),
            Err(e) if e.is_permanent() => Err(SendError::Permanent(e.to_string())),
            Err(e) => Err(SendError::Transient(e.to_string())),
        }
    }
}
