//! Signed acknowledgement links: `ack.<payload>.<mac>`, where the payload names the purpose
//! (`ack`), the alert, its level and an expiry, and the MAC is HMAC-SHA256 under the service's
//! web key. The key is 32 random bytes generated at first start and kept beside the database
//! in a file readable by its owner only (0600); it is never logged or shown.
//!
//! Owns the token format, signing and checking, the key file, and the process-wide link maker
//! that `alerts::render` asks for the link of each message (none when `[http]` is off).

use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::sync::RwLock;

use ring::hmac;
use ring::rand::{SecureRandom, SystemRandom};

/// What a token authorises; only acknowledgement exists.
const PURPOSE: &str = "ack";

/// The web key (HMAC-SHA256), loaded from or created in its file.
#[derive(Clone)]
pub struct Key(hmac::Key);

impl std::fmt::Debug for Key {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Key(***)")
    }
}

/// Where the web key of database `db` lives.
pub fn key_path(db: &Path) -> PathBuf {
    let mut name = db.file_name().unwrap_or_default().to_os_string();
    name.push(".web-key");
    db.with_file_name(name)
}

/// Fill `buf` from the system's secure random source.
///
/// # Errors
/// The random source failed.
pub fn random(buf: &mut [u8]) -> anyhow::Result<()> {
    SystemRandom::new()
        .fill(buf)
        .map_err(|_| anyhow::anyhow!("the system random source failed"))
}

impl Key {
    /// Load the key of database `db`, creating it (0600) on first use.
    ///
    /// # Errors
    /// The file cannot be read or created, or holds something else than a key.
    pub fn load_or_create(db: &Path) -> anyhow::Result<Key> {
        let path = key_path(db);
        match std::fs::read_to_string(&path) {
            Ok(text) => {
                let bytes = from_hex(text.trim())
                    .filter(|b| b.len() == 32)
                    .ok_or_else(|| {
                        anyhow::anyhow!(
                            "web key file {} is not 64 hex digits; remove it to make a new one \
                             (links already sent stop working)",
                            path.display()
                        )
                    })?;
                Ok(Key::from_bytes(&bytes))
            }
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                let mut bytes = [0u8; 32];
                random(&mut bytes)?;
                let mut opts = std::fs::OpenOptions::new();
                opts.write(true).create_new(true);
                #[cfg(unix)]
                {
                    use std::os::unix::fs::OpenOptionsExt as _;
                    opts.mode(0o600);
                }
                let mut f = opts.open(&path).map_err(|e| {
                    anyhow::anyhow!("creating web key file {}: {e}", path.display())
                })?;
                writeln!(f, "{}", hex(&bytes))?;
                f.sync_all()?;
                tracing::info!(file = %path.display(), "Created the web key (mode 0600)");
                Ok(Key::from_bytes(&bytes))
            }
            Err(e) => Err(anyhow::anyhow!(
                "reading web key file {}: {e}",
                path.display()
            )),
        }
    }

    /// A key from raw bytes (tests, and the file).
    pub fn from_bytes(bytes: &[u8]) -> Key {
        Key(hmac::Key::new(hmac::HMAC_SHA256, bytes))
    }

    /// A token for acknowledging `alert` at `level`, valid until `expires_s` (Unix seconds).
    pub fn sign(&self, alert: i64, level: &str, expires_s: i64) -> String {
        let payload = format!("{PURPOSE}\n{alert}\n{level}\n{expires_s}");
        let mac = hmac::sign(&self.0, payload.as_bytes());
        format!("{}.{}", hex(payload.as_bytes()), hex(mac.as_ref()))
    }

    /// A MAC of `text` under this key (session CSRF tokens).
    pub fn mac(&self, text: &str) -> String {
        hex(hmac::sign(&self.0, text.as_bytes()).as_ref())
    }

    /// Check `token` as of `now_s`.
    ///
    /// # Errors
    /// Why the token is refused.
    pub fn verify(&self, token: &str, now_s: i64) -> Result<AckClaim, Refused> {
        let (p, m) = token.split_once('.').ok_or(Refused::Malformed)?;
        let payload = from_hex(p).ok_or(Refused::Malformed)?;
        let mac = from_hex(m).ok_or(Refused::Malformed)?;
        hmac::verify(&self.0, &payload, &mac).map_err(|_| Refused::Forged)?;
        let text = String::from_utf8(payload).map_err(|_| Refused::Malformed)?;
        let mut parts = text.split('\n');
        let (Some(purpose), Some(alert), Some(level), Some(exp), None) = (
            parts.next(),
            parts.next(),
            parts.next(),
            parts.next(),
            parts.next(),
        ) else {
            return Err(Refused::Malformed);
        };
        if purpose != PURPOSE {
            return Err(Refused::Malformed);
        }
        let alert = alert.parse().map_err(|_| Refused::Malformed)?;
        let expires_s: i64 = exp.parse().map_err(|_| Refused::Malformed)?;
        let claim = AckClaim {
            alert,
            level: level.to_string(),
            expires_s,
        };
        if now_s > expires_s {
            return Err(Refused::Expired(claim));
        }
        Ok(claim)
    }
}

/// What a valid token allows.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct AckClaim {
    pub alert: i64,
    pub level: String,
    pub expires_s: i64,
}

/// Why a token is refused.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Refused {
    /// Not a token of ours at all (cut short, edited).
    Malformed,
    /// The signature does not match: not made with this service's key.
    Forged,
    /// Genuine but past its expiry.
    Expired(AckClaim),
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

fn from_hex(s: &str) -> Option<Vec<u8>> {
    if s.len() % 2 != 0 || !s.is_ascii() {
        return None;
    }
    (0..s.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&s[i..i + 2], 16).ok())
        .collect()
}

/// What the email renderer needs to make links: the public base URL, the key, the validity.
struct Links {
    base_url: String,
    key: Key,
    valid_s: i64,
}

/// The link maker of this process (set by `seepd run` when `[http]` is configured).
static LINKS: RwLock<Option<Links>> = RwLock::new(None);

/// Make acknowledgement links from now on (called once `[http]` is up).
pub fn install_links(base_url: &str, key: Key, valid_h: u32) {
    let links = Links {
        base_url: base_url.trim_end_matches('/').to_string(),
        key,
        valid_s: i64::from(valid_h) * 3600,
    };
    if let Ok(mut g) = LINKS.write() {
        *g = Some(links);
    }
}

/// Stop making links (the web server stopped).
pub fn remove_links() {
    if let Ok(mut g) = LINKS.write() {
        *g = None;
    }
}

/// The acknowledgement link for `alert` at `level` in a message about a value at `t_ms`, when
/// the web pages are on; valid for `ack_link_valid_h` from `t_ms`.
pub fn ack_link(alert: i64, level: &str, t_ms: i64) -> Option<String> {
    let g = LINKS.read().ok()?;
    let l = g.as_ref()?;
    let token = l.key.sign(alert, level, t_ms / 1000 + l.valid_s);
    Some(format!("{}/ack/{token}", l.base_url))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_token_verifies_only_unchanged_in_time_under_its_key() {
        let k = Key::from_bytes(&[7; 32]);
        let t = k.sign(42, "alarm", 1_000);
        assert_eq!(
            k.verify(&t, 999),
            Ok(AckClaim {
                alert: 42,
                level: "alarm".into(),
                expires_s: 1_000
            })
        );
        assert!(matches!(k.verify(&t, 1_001), Err(Refused::Expired(_))));
        let other = Key::from_bytes(&[8; 32]);
        assert_eq!(other.verify(&t, 999), Err(Refused::Forged));
        // A changed alert number in the payload breaks the signature.
        let (_, mac) = t.split_once('.').unwrap();
        let edited = format!("{}.{mac}", hex(b"ack\n43\nalarm\n1000"));
        assert_eq!(k.verify(&edited, 999), Err(Refused::Forged));
        assert_eq!(k.verify("nonsense", 0), Err(Refused::Malformed));
    }

    #[test]
    fn the_key_file_is_made_once_owner_only_and_read_back() {
        let dir = tempfile::tempdir().unwrap();
        let db = dir.path().join("x.sqlite");
        let a = Key::load_or_create(&db).unwrap();
        let b = Key::load_or_create(&db).unwrap();
        assert_eq!(b.verify(&a.sign(1, "x", 10), 0).map(|c| c.alert), Ok(1));
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt as _;
            let mode = std::fs::metadata(key_path(&db))
                .unwrap()
                .permissions()
                .mode();
            assert_eq!(mode & 0o777, 0o600);
        }
    }
}
