//! Delivery rules: chunking, bisection of refused requests, stopping at a failure. The sink here
//! is an in-process rule (which lines a server would refuse); the real servers are exercised in
//! `tests/export.rs`.

use std::sync::Mutex;

use super::*;

/// Refuses any body containing `bad`, fails while `down`, records every body it accepts.
struct Rule {
    bad: &'static str,
    down: bool,
    accepted: Mutex<Vec<String>>,
    requests: Mutex<usize>,
}

impl Sink for Rule {
    async fn write(&self, body: String) -> Result<(), WriteError> {
        *self.requests.lock().unwrap() += 1;
        if self.down {
            return Err(WriteError::Failed("connection refused".into()));
        }
        if body.contains(self.bad) {
            return Err(WriteError::Rejected {
                status: 400,
                reply: format!("bad line: {}", self.bad),
            });
        }
        self.accepted.lock().unwrap().push(body);
        Ok(())
    }
}

fn items(n: usize) -> Vec<Encoded> {
    (0..n)
        .map(|i| Encoded {
            lines: format!("m v={i} {i}\nm w={i} {i}\n"),
            points: 2,
        })
        .collect()
}

fn rule(bad: &'static str, down: bool) -> Rule {
    Rule {
        bad,
        down,
        accepted: Mutex::new(Vec::new()),
        requests: Mutex::new(0),
    }
}

#[test]
fn chunks_respect_the_point_limit_and_keep_order() {
    let c: Vec<_> = chunks(&items(5), 4).into_iter().collect();
    assert_eq!(c, [(0, 2), (2, 4), (4, 5)]);
    // An entry larger than the limit still goes, alone.
    let c: Vec<_> = chunks(&items(2), 1).into_iter().collect();
    assert_eq!(c, [(0, 1), (1, 2)]);
}

#[tokio::test]
async fn a_refused_point_is_isolated_and_the_rest_go_through() {
    let sink = rule("v=5 ", false);
    let stop = crate::shutdown::Shutdown::new(Duration::ZERO);
    let all = items(16);
    let out = deliver(&sink, &all, 100, &stop).await;
    assert_eq!(out.done, 16);
    assert_eq!(out.error, None);
    assert_eq!(out.points, 30);
    assert_eq!(out.rejected, [(5, 400, "bad line: v=5 ".to_string())]);
    let accepted = sink.accepted.lock().unwrap().concat();
    for (i, e) in all.iter().enumerate() {
        assert_eq!(accepted.contains(&e.lines), i != 5, "entry {i}");
    }
    // 1 + bisection down a path of depth log2(16) = 4, two requests per level.
    assert_eq!(*sink.requests.lock().unwrap(), 9);
}

#[tokio::test]
async fn a_failure_stops_delivery_without_advancing() {
    let sink = rule("never", true);
    let stop = crate::shutdown::Shutdown::new(Duration::ZERO);
    let out = deliver(&sink, &items(3), 100, &stop).await;
    assert_eq!(out.done, 0);
    assert_eq!(out.points, 0);
    assert!(out.error.is_some());
}

#[tokio::test]
async fn empty_entries_are_done_without_a_request() {
    let sink = rule("never", true);
    let stop = crate::shutdown::Shutdown::new(Duration::ZERO);
    let out = deliver(&sink, &[Encoded::default(), Encoded::default()], 10, &stop).await;
    assert_eq!((out.done, out.error), (2, None));
    assert_eq!(*sink.requests.lock().unwrap(), 0);
}

#[test]
fn backoff_doubles_up_to_its_cap() {
    let e = Export {
        url: String::new(),
        org: String::new(),
        bucket: String::new(),
        token: crate::config::Secret(String::new()),
        ca_file: None,
        batch_size: 1,
        flush_interval_ms: 1,
        readings: true,
        derived: true,
        enabled: true,
        retry_min_ms: 100,
        retry_max_ms: 500,
        timeout_ms: 1,
    };
    let mut b = super::backoff(&e);
    let waits: Vec<u64> = (0..5).map(|_| b.fail().as_millis() as u64).collect();
    assert_eq!(waits, [100, 200, 400, 500, 500]);
}
