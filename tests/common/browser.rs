//! A headless Chromium driven over WebDriver (chromedriver from Debian's `chromium-driver`)
//! with the plain HTTP client of `web.rs`: open a page, type, click, read the page, run a
//! script, take a screenshot. Only what the web-page tests need.

#![allow(dead_code)]

use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::Duration;

use serde_json::{json, Value};

use super::web;

/// The W3C WebDriver element key.
const ELEMENT: &str = "element-6066-11e4-a52e-4f735466cecf";

/// A chromedriver process and one browser session.
pub struct Browser {
    driver: Child,
    port: u16,
    session: String,
}

fn call(port: u16, method: &str, path: &str, body: &Value) -> Value {
    let text = body.to_string();
    let a = web::request(
        port,
        method,
        path,
        &[("Content-Type", "application/json")],
        if method == "GET" || method == "DELETE" {
            b""
        } else {
            text.as_bytes()
        },
    );
    let v: Value = serde_json::from_str(&a.body)
        .unwrap_or_else(|e| panic!("chromedriver {method} {path}: {e}: {}", a.body));
    assert_eq!(a.status, 200, "chromedriver {method} {path}: {v}");
    v["value"].clone()
}

impl Browser {
    /// Start chromedriver on a free port and a headless Chromium `width` × `height` CSS pixels
    /// (profile in `dir`).
    pub fn start(dir: &Path, width: u32, height: u32) -> Browser {
        let port = super::common::free_port();
        let driver = Command::new("chromedriver")
            .arg(format!("--port={port}"))
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("chromedriver (tests/run.sh installs chromium-driver)");
        super::common::wait_for(Duration::from_secs(20), || {
            std::net::TcpStream::connect(("127.0.0.1", port)).ok()
        })
        .expect("chromedriver listening");
        let profile = dir.join("chromium-profile");
        let caps = json!({"capabilities": {"alwaysMatch": {
            "browserName": "chrome",
            "goog:chromeOptions": {
                "binary": "/usr/bin/chromium",
                "args": ["--headless=new", "--no-sandbox", "--disable-gpu",
                         "--disable-dev-shm-usage", "--hide-scrollbars",
                         format!("--window-size={width},{height}"),
                         format!("--user-data-dir={}", profile.display())],
                "mobileEmulation": {"deviceMetrics": {"width": width, "height": height, "pixelRatio": 2.0}}
            }
        }}});
        let v = call(port, "POST", "/session", &caps);
        let session = v["sessionId"].as_str().expect("a session id").to_string();
        Browser {
            driver,
            port,
            session,
        }
    }

    fn s(&self, method: &str, path: &str, body: Value) -> Value {
        call(
            self.port,
            method,
            &format!("/session/{}{path}", self.session),
            &body,
        )
    }

    pub fn goto(&self, url: &str) {
        self.s("POST", "/url", json!({ "url": url }));
    }

    pub fn url(&self) -> String {
        self.s("GET", "/url", json!({}))
            .as_str()
            .unwrap_or("")
            .to_string()
    }

    pub fn source(&self) -> String {
        self.s("GET", "/source", json!({}))
            .as_str()
            .unwrap_or("")
            .to_string()
    }

    /// Wait until the page's source contains `text` (after a click that navigates).
    pub fn wait_text(&self, text: &str) -> String {
        super::common::wait_for(Duration::from_secs(30), || {
            let s = self.source();
            s.contains(text).then_some(s)
        })
        .unwrap_or_else(|| panic!("the page never showed {text:?}: {}", self.source()))
    }

    fn find(&self, css: &str) -> String {
        let v = self.s(
            "POST",
            "/element",
            json!({"using": "css selector", "value": css}),
        );
        v[ELEMENT].as_str().expect("an element").to_string()
    }

    pub fn type_into(&self, css: &str, text: &str) {
        let e = self.find(css);
        self.s("POST", &format!("/element/{e}/clear"), json!({}));
        self.s(
            "POST",
            &format!("/element/{e}/value"),
            json!({ "text": text }),
        );
    }

    pub fn click(&self, css: &str) {
        let e = self.find(css);
        self.s("POST", &format!("/element/{e}/click"), json!({}));
    }

    /// Run `script` (a function body) and return its value.
    pub fn script(&self, script: &str) -> Value {
        self.s(
            "POST",
            "/execute/sync",
            json!({ "script": script, "args": [] }),
        )
    }

    /// Whether the page fits the window's width (no sideways scrolling).
    pub fn fits_width(&self) -> bool {
        self.script(
            "return document.documentElement.scrollWidth <= window.innerWidth && \
             [...document.querySelectorAll('table, svg, form, input')].every(\
               e => e.getBoundingClientRect().right <= window.innerWidth + 1);",
        )
        .as_bool()
        .unwrap_or(false)
    }

    /// A PNG of the whole page (the window is grown to the page's height first).
    pub fn screenshot(&self, to: &Path) {
        let b64 = self.s("GET", "/screenshot", json!({}));
        let png = base64(b64.as_str().expect("base64 PNG"));
        assert!(png.starts_with(b"\x89PNG"), "a PNG");
        std::fs::write(to, png).unwrap();
    }
}

impl Drop for Browser {
    fn drop(&mut self) {
        let _ = web::request(
            self.port,
            "DELETE",
            &format!("/session/{}", self.session),
            &[],
            b"",
        );
        let _ = self.driver.kill();
        let _ = self.driver.wait();
    }
}

fn base64(s: &str) -> Vec<u8> {
    let val = |c: u8| -> Option<u32> {
        Some(match c {
            b'A'..=b'Z' => c - b'A',
            b'a'..=b'z' => c - b'a' + 26,
            b'0'..=b'9' => c - b'0' + 52,
            b'+' => 62,
            b'/' => 63,
            _ => return None,
        } as u32)
    };
    let mut out = Vec::with_capacity(s.len() * 3 / 4);
    let (mut acc, mut bits) = (0u32, 0);
    for c in s.bytes().filter_map(val) {
        acc = (acc << 6) | c;
        bits += 6;
        if bits >= 8 {
            bits -= 8;
            out.push((acc >> bits) as u8);
            acc &= (1 << bits) - 1;
        }
    }
    out
}
