//! The SMTP side of the outbox worker (lettre's SMTP connection, rustls): build each message
//! (text and HTML alternatives, stable Message-ID, Date from the outbox row; with the row's
//! attachments, a multipart/mixed message whose first part is that body and whose other parts
//! are the attached files) and run one SMTP transaction per attempt, recipient by recipient.
//!
//! Recipients are judged one by one at RCPT TO: one refused address must not silence the
//! others, so the message goes to every accepted recipient and each refusal comes back with
//! the server's reply (5xx: never retried; 4xx: retried later). The whole message body and its
//! terminating `.` go out in one write: written separately, Nagle's algorithm holds the small
//! terminator until the relay's delayed acknowledgement (about 40 ms per message). A connection
//! is kept for the next message for up to `KEEP` (a burst of alerts pays for one connection,
//! TLS handshake and login); one the relay closed meanwhile is noticed at MAIL FROM and replaced
//! before anything is sent. Must not decide what to send or touch the database.

use std::cell::RefCell;
use std::fmt;
use std::time::{Duration, Instant, UNIX_EPOCH};

use lettre::message::header::ContentType;
use lettre::message::{Attachment, Mailbox, MultiPart};
use lettre::transport::smtp::authentication::{Credentials, DEFAULT_MECHANISMS};
use lettre::transport::smtp::client::{
    Certificate, CertificateStore, SmtpConnection, TlsParameters,
};
use lettre::transport::smtp::commands::{Data, Mail, Rcpt, Rset};
use lettre::transport::smtp::extension::{ClientId, Extension, MailBodyParameter, MailParameter};
use lettre::{Address, Message};

use crate::config::{Smtp, SmtpSecurity};
use crate::store::outbox::{Queued, RcptOutcome};

/// Why a whole attempt failed (no recipient got the message).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum SendError {
    /// Connection, TLS, authentication or a 4xx to the whole transaction: try again later.
    Transient(String),
    /// A 5xx to the whole transaction (sender or data refused) or an unbuildable message: no
    /// recipient will ever get it.
    Permanent(String),
}

/// The outcome of one attempt per recipient, in the order asked.
pub type Delivery = Vec<(String, RcptOutcome)>;

/// How long an idle connection is kept for the next message (relays close idle ones after a
/// few minutes; RFC 5321 §4.5.3.2 asks servers to wait at least 5).
const KEEP: Duration = Duration::from_secs(30);

/// Why a transaction failed: an answer of the relay, or a connection that was already closed
/// (no answer at all to the first command).
enum Failed {
    Send(SendError),
    Closed(String),
}

/// A connection kept between messages, and when it was last used.
struct Kept {
    conn: SmtpConnection,
    used: Instant,
}

/// How the connection is secured.
enum Security {
    Plain,
    Starttls(TlsParameters),
    Wrapper(TlsParameters),
}

/// A configured SMTP client. Used from one thread (the mail worker's).
pub struct Mailer {
    host: String,
    port: u16,
    timeout: Duration,
    security: Security,
    credentials: Option<Credentials>,
    hello: ClientId,
    from: Mailbox,
    /// The connection of the last message, while it is fresh enough to reuse.
    kept: RefCell<Option<Kept>>,
}

impl Drop for Mailer {
    fn drop(&mut self) {
        if let Some(mut k) = self.kept.take() {
            let _ = k.conn.quit();
        }
    }
}

impl Mailer {
    /// Build the client (no connection is made yet).
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
        let security = match smtp.security {
            SmtpSecurity::Starttls => Security::Starttls(tls_params()?),
            SmtpSecurity::Tls => Security::Wrapper(tls_params()?),
            SmtpSecurity::Plain => Security::Plain,
        };
        let credentials = match (&smtp.username, &smtp.password) {
            (Some(user), Some(pass)) => Some(Credentials::new(user.clone(), pass.0.clone())),
            _ => None,
        };
        Ok(Mailer {
            host: smtp.host.clone(),
            port: smtp.port,
            timeout: Duration::from_secs(smtp.timeout_s),
            security,
            credentials,
            hello: ClientId::default(),
            from: format!("seepd <{}>", smtp.from).parse()?,
            kept: RefCell::new(None),
        })
    }

    /// Build the message of an outbox row (the same bytes at every attempt). Its To: header
    /// names every recipient of the row, whoever is left to deliver to.
    ///
    /// # Errors
    /// Bad recipient addresses (a permanent failure).
    pub fn message(&self, m: &Queued) -> Result<Message, SendError> {
        let mut b = Message::builder()
            .from(self.from.clone())
            .subject(m.subject.clone())
            .message_id(Some(m.message_id.clone()))
            .date(UNIX_EPOCH + Duration::from_millis(m.created_ms.max(0) as u64));
        // One conversation per alert: In-Reply-To names the first alert's thread, References
        // every alert the message is about.
        if let Some(first) = m.references.first() {
            b = b
                .in_reply_to(first.clone())
                .references(m.references.join(" "));
        }
        for r in &m.recipients {
            b = b.to(Mailbox::new(None, address(r)?));
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

    /// Send outbox message `m` to `recipients` (those of its recipients still to be served) in
    /// one SMTP transaction: every recipient the relay accepts at RCPT TO gets it.
    ///
    /// # Errors
    /// `Transient` when no recipient could be tried or the transaction failed for all of them
    /// for now (connection, TLS, 4xx); `Permanent` for a 5xx to the sender or the data, or a
    /// message that cannot be built.
    pub fn send(&self, m: &Queued, recipients: &[String]) -> Result<Delivery, SendError> {
        let email = self.message(m)?.formatted();
        let to = recipients
            .iter()
            .map(|r| address(r))
            .collect::<Result<Vec<_>, _>>()?;
        let kept = self.kept.take().filter(|k| k.used.elapsed() < KEEP);
        if let Some(mut k) = kept {
            match self.transaction(&mut k.conn, &email, recipients, to.clone()) {
                Err(Failed::Closed(_)) => k.conn.abort(),
                Err(Failed::Send(e)) => {
                    k.conn.abort();
                    return Err(e);
                }
                Ok(d) => return Ok(self.keep(k.conn, d)),
            }
        }
        let mut conn = self.connect()?;
        match self.transaction(&mut conn, &email, recipients, to) {
            Ok(d) => Ok(self.keep(conn, d)),
            Err(f) => {
                conn.abort();
                Err(match f {
                    Failed::Send(e) => e,
                    Failed::Closed(e) => SendError::Transient(e),
                })
            }
        }
    }

    /// Keep `conn` for the next message (after a RSET if no data went out, so that no
    /// transaction is left open).
    fn keep(&self, mut conn: SmtpConnection, d: Delivery) -> Delivery {
        let sent = d.iter().any(|(_, o)| *o == RcptOutcome::Accepted);
        if sent || conn.command(Rset).is_ok() {
            *self.kept.borrow_mut() = Some(Kept {
                conn,
                used: Instant::now(),
            });
        } else {
            conn.abort();
        }
        d
    }

    /// Connect, secure and authenticate.
    fn connect(&self) -> Result<SmtpConnection, SendError> {
        let wrapper = match &self.security {
            Security::Wrapper(p) => Some(p),
            _ => None,
        };
        let transient = |what: &str, e: lettre::transport::smtp::Error| {
            SendError::Transient(format!("{what}: {e}"))
        };
        let mut conn = SmtpConnection::connect(
            (self.host.as_str(), self.port),
            Some(self.timeout),
            &self.hello,
            wrapper,
            None,
        )
        .map_err(|e| transient("connecting to the mail relay", e))?;
        if let Security::Starttls(p) = &self.security {
            conn.starttls(p, &self.hello)
                .map_err(|e| transient("STARTTLS", e))?;
        }
        if let Some(c) = &self.credentials {
            conn.auth(DEFAULT_MECHANISMS, c)
                .map_err(|e| transient("authentication", e))?;
        }
        Ok(conn)
    }

    /// MAIL FROM, one RCPT TO per recipient, and the data to the accepted ones.
    fn transaction(
        &self,
        conn: &mut SmtpConnection,
        email: &[u8],
        recipients: &[String],
        to: Vec<Address>,
    ) -> Result<Delivery, Failed> {
        let info = conn.server_info();
        let mut params = Vec::new();
        let refuse = |why: &str| Err(Failed::Send(SendError::Permanent(why.into())));
        if to.iter().any(|a| !AsRef::<str>::as_ref(a).is_ascii()) {
            if !info.supports_feature(Extension::SmtpUtfEight) {
                return refuse(
                    "a recipient address is not ASCII and the relay does not offer SMTPUTF8",
                );
            }
            params.push(MailParameter::SmtpUtfEight);
        }
        if !email.is_ascii() {
            if !info.supports_feature(Extension::EightBitMime) {
                return refuse("the message is not ASCII and the relay does not offer 8BITMIME");
            }
            params.push(MailParameter::Body(MailBodyParameter::EightBitMime));
        }
        conn.command(Mail::new(Some(self.from.email.clone()), params))
            .map_err(|e| {
                // No reply at all, or 421 (closing): the relay closed the connection (a kept
                // one that timed out). Nothing was sent: a fresh connection can try again.
                let closing = e.status().is_some_and(|c| c.to_string() == "421");
                if closing || !(e.is_permanent() || e.is_transient()) {
                    Failed::Closed(format!("MAIL FROM: {e}"))
                } else {
                    Failed::Send(classify("MAIL FROM", &e))
                }
            })?;
        let mut delivery: Delivery = Vec::with_capacity(recipients.len());
        for (name, address) in recipients.iter().zip(to) {
            let outcome = match conn.command(Rcpt::new(address, Vec::new())) {
                Ok(_) => RcptOutcome::Accepted,
                Err(e) if e.is_permanent() => RcptOutcome::Refused(format!("RCPT TO: {e}")),
                Err(e) => RcptOutcome::Deferred(format!("RCPT TO: {e}")),
            };
            delivery.push((name.clone(), outcome));
        }
        if !delivery.iter().any(|(_, o)| *o == RcptOutcome::Accepted) {
            return Ok(delivery);
        }
        // Lettre's messages are UTF-8 (binary parts are base64); anything else goes the slow way.
        let data = conn
            .command(Data)
            .and_then(|_| match std::str::from_utf8(email) {
                Ok(text) => conn.command(Terminated(text)),
                Err(_) => conn.message(email),
            });
        if let Err(e) = data {
            // The data went to no one: each accepted recipient shares the fate of the whole.
            let fate = match classify("DATA", &e) {
                SendError::Permanent(r) => RcptOutcome::Refused(r),
                SendError::Transient(r) => RcptOutcome::Deferred(r),
            };
            for (_, o) in delivery
                .iter_mut()
                .filter(|(_, o)| *o == RcptOutcome::Accepted)
            {
                *o = fate.clone();
            }
        }
        Ok(delivery)
    }
}

/// A 5xx is permanent, anything else (4xx, network, TLS) transient.
fn classify(step: &str, e: &lettre::transport::smtp::Error) -> SendError {
    if e.is_permanent() {
        SendError::Permanent(format!("{step}: {e}"))
    } else {
        SendError::Transient(format!("{step}: {e}"))
    }
}

fn address(r: &str) -> Result<Address, SendError> {
    r.parse()
        .map_err(|e| SendError::Permanent(format!("recipient {r:?}: {e}")))
}

/// The message data as SMTP sends it after DATA, written as one piece: dot-stuffed (a line
/// that starts with `.` gets another, RFC 5321 §4.5.2) and ended by `CRLF . CRLF`.
struct Terminated<'a>(&'a str);

impl fmt::Display for Terminated<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut line_start = true;
        let mut after_cr = false;
        let mut out = String::with_capacity(self.0.len() + 64);
        for c in self.0.chars() {
            if line_start && c == '.' {
                out.push('.');
            }
            out.push(c);
            line_start = after_cr && c == '\n';
            after_cr = c == '\r';
        }
        out.push_str("\r\n.\r\n");
        f.write_str(&out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn data_is_dot_stuffed_and_terminated_once() {
        let body = ".first\r\nplain\r\n..two\r\nmid.dot\r\n.\r\nend";
        assert_eq!(
            Terminated(body).to_string(),
            "..first\r\nplain\r\n...two\r\nmid.dot\r\n..\r\nend\r\n.\r\n"
        );
        // A bare LF does not start a line (only CRLF does, as SMTP reads it).
        assert_eq!(Terminated("a\n.b").to_string(), "a\n.b\r\n.\r\n");
    }
}
