//! Users, sessions and CSRF: argon2 password hashes in `web_users` (managed by `seepd user`),
//! sessions in memory (a restart signs everyone out), the session cookie (HttpOnly,
//! SameSite=Strict, Secure behind HTTPS), one CSRF token per session checked on every form
//! POST, a same-origin check on every POST, and a limit on failed sign-ins.
//!
//! Owns who may look and act; the pages ask `Web::viewer` and `Web::check_post`.

use std::collections::{HashMap, VecDeque};
use std::sync::Mutex;
use std::time::{Duration, Instant};

use argon2::password_hash::{PasswordHash, PasswordHasher, PasswordVerifier, SaltString};
use argon2::Argon2;
use axum::extract::{Form, Query, State};
use axum::http::{header, HeaderMap, HeaderValue, StatusCode};
use axum::response::{IntoResponse, Redirect, Response};
use serde::Deserialize;

use super::html::{self, escape, Frame};
use super::{Shared, Web};
use crate::store::pages::Role;

/// Name of the session cookie.
const COOKIE: &str = "seepd_session";
/// A session ends this long after sign-in.
const SESSION_TTL: Duration = Duration::from_secs(12 * 3600);
/// At most this many failed sign-ins per minute (all users together), then a pause.
const FAILURES_PER_MIN: usize = 10;

/// A signed-in person.
#[derive(Debug, Clone)]
pub struct Session {
    pub user: String,
    /// The token every form of this session carries.
    pub csrf: String,
    expires: Instant,
}

/// Sessions and the sign-in failure window.
#[derive(Default)]
pub struct Sessions {
    by_id: Mutex<HashMap<String, Session>>,
    failures: Mutex<VecDeque<Instant>>,
}

/// Who is asking: a session, or nobody (allowed only with anonymous read access).
#[derive(Debug, Clone)]
pub struct Viewer {
    pub session: Option<Session>,
    pub sign_in: bool,
}

impl Viewer {
    /// The header frame for pages shown to this viewer.
    pub fn frame(&self) -> Frame<'_> {
        Frame {
            user: self.session.as_ref().map(|s| s.user.as_str()),
            sign_in: self.sign_in,
            csrf: self.session.as_ref().map(|s| s.csrf.as_str()),
        }
    }
}

/// Hash `password` with argon2id and a random salt (PHC string).
///
/// # Errors
/// The random source or the hasher failed.
pub fn hash_password(password: &str) -> anyhow::Result<String> {
    let mut salt = [0u8; 16];
    crate::ack_token::random(&mut salt)?;
    let salt = SaltString::encode_b64(&salt).map_err(|e| anyhow::anyhow!("salt: {e}"))?;
    Ok(Argon2::default()
        .hash_password(password.as_bytes(), &salt)
        .map_err(|e| anyhow::anyhow!("hashing the password: {e}"))?
        .to_string())
}

fn password_ok(password: &str, hash: &str) -> bool {
    PasswordHash::new(hash)
        .map(|h| {
            Argon2::default()
                .verify_password(password.as_bytes(), &h)
                .is_ok()
        })
        .unwrap_or(false)
}

fn random_hex() -> String {
    let mut b = [0u8; 32];
    // Without a random source there can be no session: an empty id never matches a lookup.
    if crate::ack_token::random(&mut b).is_err() {
        return String::new();
    }
    b.iter().map(|x| format!("{x:02x}")).collect()
}

/// Equal without an early exit (tokens).
fn same(a: &str, b: &str) -> bool {
    a.len() == b.len()
        && a.bytes()
            .zip(b.bytes())
            .fold(0u8, |acc, (x, y)| acc | (x ^ y))
            == 0
}

fn cookie_value(headers: &HeaderMap) -> Option<String> {
    headers
        .get_all(header::COOKIE)
        .iter()
        .filter_map(|v| v.to_str().ok())
        .flat_map(|v| v.split(';'))
        .filter_map(|kv| kv.trim().split_once('='))
        .find(|(k, _)| *k == COOKIE)
        .map(|(_, v)| v.to_string())
}

impl Web {
    /// The session of a request, if it has a live one.
    pub fn session(&self, headers: &HeaderMap) -> Option<Session> {
        let id = cookie_value(headers)?;
        let mut map = self.sessions.by_id.lock().ok()?;
        let now = Instant::now();
        map.retain(|_, s| s.expires > now);
        map.get(&id).cloned()
    }

    /// Who may see a page: a session, or anyone when `allow_anonymous`; otherwise the
    /// redirect to the sign-in page (back to `here` afterwards).
    pub fn viewer(&self, headers: &HeaderMap, here: &str) -> Result<Viewer, Response> {
        let session = self.session(headers);
        if session.is_none() && !self.http.allow_anonymous {
            let to = format!("/login?next={}", percent(here));
            return Err(Redirect::to(&to).into_response());
        }
        Ok(Viewer {
            session,
            sign_in: true,
        })
    }

    /// A form POST that changes something: same origin, a session, and its CSRF token.
    pub fn check_post(&self, headers: &HeaderMap, csrf: &str) -> Result<Session, Response> {
        self.same_origin(headers)?;
        let Some(s) = self.session(headers) else {
            return Err(Redirect::to("/login").into_response());
        };
        if !same(&s.csrf, csrf) {
            return Err(refuse_csrf());
        }
        Ok(s)
    }

    /// A form POST that changes something (acknowledge, silence, manual reading): as
    /// `check_post`, and the user's role, read from the database now (a role taken away or a
    /// user removed counts at once), must be responder; otherwise 403.
    pub async fn check_change(&self, headers: &HeaderMap, csrf: &str) -> Result<Session, Response> {
        let s = self.check_post(headers, csrf)?;
        let user = s.user.clone();
        let role = self
            .read(move |st| Ok(st.user(&user)?.map(|(_, r)| r)))
            .await;
        match role {
            Ok(Some(Role::Responder)) => Ok(s),
            Ok(_) => {
                tracing::warn!(user = %s.user, "Web change refused: the user is not a responder");
                Err(html::message(
                    StatusCode::FORBIDDEN,
                    "Not allowed",
                    &format!(
                        "{} may read these pages but not change anything (role viewer). Ask an \
                         administrator for the responder role (seepd user add --role responder).",
                        s.user
                    ),
                    &Frame {
                        user: Some(&s.user),
                        sign_in: true,
                        csrf: Some(&s.csrf),
                    },
                ))
            }
            Err(e) => Err(super::failed(
                &e,
                &Frame {
                    user: Some(&s.user),
                    sign_in: true,
                    csrf: Some(&s.csrf),
                },
            )),
        }
    }

    /// Whether the signed-in user of `viewer` may change things (for showing the forms; the
    /// POSTs check again).
    pub async fn may_change(&self, viewer: &Viewer) -> bool {
        let Some(s) = &viewer.session else {
            return false;
        };
        let user = s.user.clone();
        matches!(
            self.read(move |st| Ok(st.user(&user)?.map(|(_, r)| r)))
                .await,
            Ok(Some(Role::Responder))
        )
    }

    /// Refuse a POST whose `Origin` (or, without one, `Referer`) is another site.
    pub fn same_origin(&self, headers: &HeaderMap) -> Result<(), Response> {
        let host = headers
            .get(header::HOST)
            .and_then(|h| h.to_str().ok())
            .unwrap_or("");
        let from = headers
            .get(header::ORIGIN)
            .or_else(|| headers.get(header::REFERER))
            .and_then(|h| h.to_str().ok());
        let Some(from) = from else { return Ok(()) };
        let authority = from
            .split_once("://")
            .map_or("", |(_, r)| r.split('/').next().unwrap_or(""));
        let base_authority = self
            .http
            .public_base_url
            .split_once("://")
            .map_or("", |(_, r)| r.split('/').next().unwrap_or(""));
        if authority == host || authority == base_authority {
            Ok(())
        } else {
            Err(refuse_csrf())
        }
    }
}

fn refuse_csrf() -> Response {
    html::message(
        StatusCode::FORBIDDEN,
        "Refused",
        "This form did not come from a seepd page of this session (cross-site request or an \
         expired form). Open the page again and resend.",
        &Frame {
            user: None,
            sign_in: true,
            csrf: None,
        },
    )
}

/// Percent-encode a path for a query value.
pub fn percent(s: &str) -> String {
    s.bytes()
        .map(|b| match b {
            b'A'..=b'Z' | b'a'..=b'z' | b'0'..=b'9' | b'/' | b'-' | b'_' | b'.' => {
                (b as char).to_string()
            }
            _ => format!("%{b:02X}"),
        })
        .collect()
}

#[derive(Deserialize)]
pub struct Next {
    next: Option<String>,
}

/// Only a local path is a place to go back to.
fn safe_next(next: Option<&str>) -> String {
    match next {
        Some(n) if n.starts_with('/') && !n.starts_with("//") && !n.contains('\\') => n.into(),
        _ => "/".into(),
    }
}

fn login_page(next: &str, error: Option<&str>) -> String {
    let err = error.map_or_else(String::new, |e| {
        format!("<div class=\"card warn\"><p>{}</p></div>", escape(e))
    });
    let body = format!(
        "<h1>Sign in</h1>{err}<form method=\"post\" action=\"/login\">\
         <input type=\"hidden\" name=\"next\" value=\"{}\">\
         <label for=\"user\">User name</label><input id=\"user\" name=\"user\" autocomplete=\"username\" required>\
         <label for=\"password\">Password</label><input id=\"password\" name=\"password\" type=\"password\" autocomplete=\"current-password\" required>\
         <button type=\"submit\">Sign in</button></form>\
         <p class=\"note\">Users are added on the server with <code>seepd user add NAME --config DIR</code>.</p>",
        escape(next)
    );
    html::page(
        "Sign in",
        &Frame {
            user: None,
            sign_in: false,
            csrf: None,
        },
        &body,
    )
}

/// GET /login
pub async fn login_form(Query(q): Query<Next>) -> Response {
    html::respond(
        StatusCode::OK,
        login_page(&safe_next(q.next.as_deref()), None),
    )
}

#[derive(Deserialize)]
pub struct LoginForm {
    user: String,
    password: String,
    next: Option<String>,
}

/// POST /login
pub async fn login(
    State(web): State<Shared>,
    headers: HeaderMap,
    Form(f): Form<LoginForm>,
) -> Response {
    if let Err(r) = web.same_origin(&headers) {
        return r;
    }
    let next = safe_next(f.next.as_deref());
    {
        let Ok(mut fails) = web.sessions.failures.lock() else {
            return html::respond(StatusCode::INTERNAL_SERVER_ERROR, String::new());
        };
        let now = Instant::now();
        while fails
            .front()
            .is_some_and(|t| now.duration_since(*t) > Duration::from_secs(60))
        {
            fails.pop_front();
        }
        if fails.len() >= FAILURES_PER_MIN {
            return html::respond(
                StatusCode::TOO_MANY_REQUESTS,
                login_page(
                    &next,
                    Some(
                        "Too many failed sign-ins in the last minute; wait a minute and try again.",
                    ),
                ),
            );
        }
    }
    let db = web.cfg.service.database.clone();
    let user = f.user.trim().to_string();
    let password = f.password;
    let u2 = user.clone();
    let ok = tokio::task::spawn_blocking(move || {
        let store = crate::store::Store::open(&db).ok()?;
        let (hash, _) = store.user(&u2).ok()??;
        Some(password_ok(&password, &hash))
    })
    .await
    .ok()
    .flatten()
    .unwrap_or(false);
    if !ok {
        if let Ok(mut fails) = web.sessions.failures.lock() {
            fails.push_back(Instant::now());
        }
        tracing::warn!(user = %user, "Web sign-in refused");
        return html::respond(
            StatusCode::UNAUTHORIZED,
            login_page(&next, Some("User name or password not recognised.")),
        );
    }
    let id = random_hex();
    let session = Session {
        user: user.clone(),
        csrf: random_hex(),
        expires: Instant::now() + SESSION_TTL,
    };
    if id.is_empty() || session.csrf.is_empty() {
        return html::respond(StatusCode::INTERNAL_SERVER_ERROR, String::new());
    }
    if let Ok(mut map) = web.sessions.by_id.lock() {
        map.insert(id.clone(), session);
    }
    tracing::info!(user = %user, "Web sign-in");
    let cookie = format!(
        "{COOKIE}={id}; Path=/; HttpOnly; SameSite=Strict; Max-Age={}{}",
        SESSION_TTL.as_secs(),
        if web.http.secure_cookies() {
            "; Secure"
        } else {
            ""
        }
    );
    let mut r = Redirect::to(&next).into_response();
    if let Ok(v) = HeaderValue::from_str(&cookie) {
        r.headers_mut().insert(header::SET_COOKIE, v);
    }
    r
}

#[derive(Deserialize)]
pub struct CsrfOnly {
    csrf: String,
}

/// POST /logout
pub async fn logout(
    State(web): State<Shared>,
    headers: HeaderMap,
    Form(f): Form<CsrfOnly>,
) -> Response {
    if let Err(r) = web.check_post(&headers, &f.csrf) {
        return r;
    }
    if let (Some(id), Ok(mut map)) = (cookie_value(&headers), web.sessions.by_id.lock()) {
        map.remove(&id);
    }
    let mut r = Redirect::to("/login").into_response();
    r.headers_mut().insert(
        header::SET_COOKIE,
        HeaderValue::from_static("seepd_session=; Path=/; HttpOnly; SameSite=Strict; Max-Age=0"),
    );
    r
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hashes_verify_only_their_password() {
        let h = hash_password("correct horse").unwrap();
        assert!(h.starts_with("$argon2id$"));
        assert!(password_ok("correct horse", &h));
        assert!(!password_ok("wrong", &h));
        assert!(!password_ok("x", "not a hash"));
    }

    #[test]
    fn only_local_paths_are_followed() {
        assert_eq!(safe_next(Some("/alerts/3")), "/alerts/3");
        assert_eq!(safe_next(Some("//evil.example")), "/");
        assert_eq!(safe_next(Some("https://evil.example")), "/");
    }
}
