//! 2,000 malformed payloads of 50 kinds (JSON, CSV and SenML: broken syntax, wrong shapes,
//! NaN and infinity, 70 kB and 10 MB payloads, nesting deeper than any parser should follow,
//! invalid UTF-8, unknown instruments and channels, values out of range, times unreadable, in
//! the future or before installation, a newer SenML version, conflicting duplicates) among
//! 2,000 valid readings: every valid reading is stored, every bad payload is quarantined with
//! the reason expected for its kind, and the stream never stalls.

use std::collections::BTreeMap;
use std::time::{Duration, Instant};

use crate::common::*;
use crate::support::*;

const VALID: i64 = 2_000;
const BAD: usize = 2_000;
/// The 10 MB payload kind is sent this many times (the broker carries every byte).
const HUGE: usize = 3;

const JSON: &str = "demo/AB-LOG1/json";
const CSV: &str = "demo/AB-LOG1/csv";
const SENML: &str = "demo/TH-LOG1/senml";

/// One kind of bad payload: where it goes, how to make the `i`-th one (at past time `t`), and
/// the quarantine reason it must get.
struct Kind {
    topic: &'static str,
    make: Box<dyn Fn(usize, i64) -> Vec<u8>>,
    reason: &'static str,
}

/// Bad payloads written out: `{t}` is a past time, `{i}` the payload's number, `{future}` a
/// time a day ahead, `{old}` a time before the instruments were installed.
const WRITTEN: [(&str, &str, &str); 42] = [
    (JSON, "{not json {i}", "malformed"),
    (JSON, "[1, 2, {i}]", "malformed"),
    (JSON, "{i}", "malformed"),
    (JSON, "\"reading {i}\"", "malformed"),
    (JSON, "null", "malformed"),
    (JSON, r#"{"time":{t},"channel":"river"}"#, "malformed"),
    (
        JSON,
        r#"{"time":{t},"channel":"river","value":"abc"}"#,
        "malformed",
    ),
    (
        JSON,
        r#"{"time":{t},"channel":"river","value":"NaN"}"#,
        "non_finite",
    ),
    (
        JSON,
        r#"{"time":{t},"channel":"river","value":"-inf"}"#,
        "non_finite",
    ),
    (
        JSON,
        r#"{"time":{t},"channel":"river","value":1e400}"#,
        "malformed",
    ),
    (
        JSON,
        r#"{"time":{t},"channel":"99","value":3.0}"#,
        "unknown_instrument",
    ),
    (
        JSON,
        r#"{"time":{t},"instrument":"NOPE-{i}","value":3.0}"#,
        "unknown_instrument",
    ),
    (
        JSON,
        r#"{"time":{t},"channel":"river","value":55.0}"#,
        "out_of_range",
    ),
    (
        JSON,
        r#"{"time":{t},"channel":"river","value":-1.0}"#,
        "out_of_range",
    ),
    (
        JSON,
        r#"{"time":{future},"channel":"river","value":3.0}"#,
        "time_in_future",
    ),
    (
        JSON,
        r#"{"time":{old},"channel":"river","value":3.0}"#,
        "before_install",
    ),
    (
        JSON,
        r#"{"time":"yesterday","channel":"river","value":3.0}"#,
        "bad_time",
    ),
    (
        JSON,
        r#"{"time":{"day":1},"channel":"river","value":3.0}"#,
        "bad_time",
    ),
    (
        JSON,
        r#"{"time":1e20,"channel":"river","value":3.0}"#,
        "bad_time",
    ),
    (JSON, r#"{"time":{t},"readings":[]}"#, "malformed"),
    (JSON, r#"{"time":{t},"readings":[1]}"#, "malformed"),
    (JSON, r#"{"time":{t},"readings":"river"}"#, "malformed"),
    (
        JSON,
        r#"{"time":{t},"channel":"river","value":3.0,"temperature":"NaN"}"#,
        "non_finite",
    ),
    (
        JSON,
        r#"{"time":{t},"channel":"river","value":true}"#,
        "malformed",
    ),
    (
        JSON,
        r#"{"time":{t},"channel":["river"],"value":3.0}"#,
        "malformed",
    ),
    (CSV, "only,{i}\n", "malformed"),
    (CSV, "{t},river,abc\n", "malformed"),
    (CSV, "{t},river,inf\n", "non_finite"),
    (CSV, "yesterday,river,3.0\n", "bad_time"),
    (CSV, "{t},99,3.0\n", "unknown_instrument"),
    (CSV, "\n\n", "malformed"),
    (CSV, "{t},river,55\n", "out_of_range"),
    (SENML, r#"{"bn":"TH-","n":"POOL{i}"}"#, "malformed"),
    (SENML, "[]", "malformed"),
    (
        SENML,
        r#"[{"bver":11,"n":"TH-POOL","v":216.0,"t":{t}}]"#,
        "unsupported_version",
    ),
    (
        SENML,
        r#"[{"n":"TH-POOL","v":216.0,"t":{t},"alarm_":1}]"#,
        "malformed",
    ),
    (SENML, r#"[{"n":"TH-POOL","t":{t}}]"#, "malformed"),
    (
        SENML,
        r#"[{"n":"TH-POOL","vs":"high","t":{t}}]"#,
        "malformed",
    ),
    (SENML, r#"[{"bn":5,"n":"POOL","v":216.0}]"#, "malformed"),
    (
        SENML,
        r#"[{"n":"TH-NOPE","v":1.0,"t":{t}}]"#,
        "unknown_instrument",
    ),
    (
        SENML,
        r#"[{"n":"TH-POOL","v":216.0,"t":"noon"}]"#,
        "bad_time",
    ),
    (
        SENML,
        r#"[{"n":"TH-POOL","v":216.0,"t":{future}}]"#,
        "time_in_future",
    ),
];

/// A river reading at `t` followed by `pad` bytes of padding.
fn padded(t: i64, pad: usize) -> Vec<u8> {
    format!(
        r#"{{"time":{t},"channel":"river","value":3.0,"pad":"{}"}}"#,
        "x".repeat(pad)
    )
    .into_bytes()
}

/// A bad payload made by code: topic, maker, reason.
type Made = (&'static str, fn(usize, i64) -> Vec<u8>, &'static str);

fn kinds() -> Vec<Kind> {
    let mut v: Vec<Kind> = WRITTEN
        .iter()
        .map(|&(topic, template, reason)| Kind {
            topic,
            make: Box::new(move |i, t| {
                let future = chrono::Utc::now().timestamp() + 86_400 + i as i64;
                template
                    .replace("{t}", &t.to_string())
                    .replace("{i}", &i.to_string())
                    .replace("{future}", &future.to_string())
                    .replace("{old}", &format!("\"2001-01-01T00:{:02}:00Z\"", i % 60))
                    .into_bytes()
            }),
            reason,
        })
        .collect();
    let made: [Made; 8] = [
        (JSON, |_, _| Vec::new(), "malformed"),
        // Nesting far deeper than the parser follows, under max_payload_bytes.
        (JSON, |_, _| "[".repeat(60_000).into_bytes(), "malformed"),
        (
            JSON,
            |_, t| {
                format!(
                    r#"{{"time":{t},"value":{}1{}}}"#,
                    "[".repeat(10_000),
                    "]".repeat(10_000)
                )
                .into_bytes()
            },
            "malformed",
        ),
        (JSON, |_, t| padded(t, 70_000), "oversized"),
        (JSON, |_, t| padded(t, 10 << 20), "oversized"),
        (
            JSON,
            |_, t| [&b"\xff\xfe"[..], &padded(t, 0)].concat(),
            "malformed",
        ),
        (
            JSON,
            |_, t| [&b"\xef\xbb\xbf"[..], &padded(t, 0)].concat(),
            "malformed",
        ),
        (JSON, |i, _| vec![0, 0, (i % 251) as u8, 0], "malformed"),
    ];
    v.extend(made.into_iter().map(|(topic, make, reason)| Kind {
        topic,
        make: Box::new(make),
        reason,
    }));
    v
}

#[test]
fn two_thousand_bad_payloads_among_two_thousand_good_ones() {
    let mut rig = Rig::start();
    let (dir, log) = (rig.path().to_path_buf(), rig.log.clone());
    let broker = &rig.broker;
    let p = Publisher::connect_with(broker.port, "pub-payloads", 16 << 20);
    let t0 = chrono::Utc::now().timestamp() - 7 * 86_400;
    let kinds = kinds();
    let huge = kinds
        .iter()
        .position(|k| k.reason == "oversized" && (k.make)(0, 0).len() > 1 << 20);
    let mut expected: BTreeMap<&str, i64> = BTreeMap::new();
    let mut sent_kinds = std::collections::BTreeSet::new();
    let started = Instant::now();
    // Conflicting duplicates (another value for a stored time) go last, once every valid
    // reading is in: 1 in 40 of the bad payloads.
    let conflicts = BAD / 40;
    let mut n = 0;
    let mut huge_sent = 0;
    for i in 0..(BAD - conflicts) {
        let mut k = i % kinds.len();
        if Some(k) == huge {
            if huge_sent == HUGE {
                k = (k + 1) % kinds.len();
            } else {
                huge_sent += 1;
            }
        }
        let kind = &kinds[k];
        // Past times of bad payloads never meet the valid readings' times.
        p.send(kind.topic, (kind.make)(i, t0 + 1_000_000 + i as i64));
        *expected.entry(kind.reason).or_default() += 1;
        sent_kinds.insert(k);
        if n < VALID {
            p.send(JSON, river_json(t0 + n, 2.0 + (n % 1000) as f64 / 1000.0));
            n += 1;
        }
    }
    while n < VALID {
        p.send(JSON, river_json(t0 + n, 2.0 + (n % 1000) as f64 / 1000.0));
        n += 1;
    }
    let stored = wait_for(Duration::from_secs(120), || {
        (count(&dir, "readings", "instrument = 'AB-RIVER'") >= VALID).then_some(())
    });
    assert!(
        stored.is_some(),
        "stalled: {} of {VALID} valid readings stored after {:?}; log:\n{}",
        count(&dir, "readings", "1"),
        started.elapsed(),
        std::fs::read_to_string(&log).unwrap_or_default()
    );
    for c in 0..conflicts as i64 {
        let i = c * (VALID / conflicts as i64);
        p.send(JSON, river_json(t0 + i, 9.5));
    }
    *expected.entry("conflicting_duplicate").or_default() += conflicts as i64;
    let total: i64 = expected.values().sum();
    assert_eq!(total, BAD as i64);
    let done = wait_for(Duration::from_secs(120), || {
        (count(&dir, "quarantine", "1") >= total).then_some(())
    });
    let took = started.elapsed();
    assert!(
        done.is_some(),
        "stalled: {} of {total} bad payloads quarantined",
        count(&dir, "quarantine", "1")
    );
    p.wait_acked(BAD + VALID as usize, Duration::from_secs(30));
    let mut got: BTreeMap<String, i64> = BTreeMap::new();
    let conn = db(&dir);
    let mut st = conn
        .prepare("SELECT reason, count(*) FROM quarantine GROUP BY reason")
        .unwrap();
    for row in st
        .query_map([], |r| Ok((r.get::<_, String>(0)?, r.get::<_, i64>(1)?)))
        .unwrap()
    {
        let (reason, n) = row.unwrap();
        got.insert(reason, n);
    }
    let want: BTreeMap<String, i64> = expected.iter().map(|(k, v)| (k.to_string(), *v)).collect();
    assert_eq!(got, want, "quarantine reasons");
    // Every valid reading stored once, with its own value (the conflicting ones did not win).
    assert_eq!(count(&dir, "readings", "1"), VALID);
    let wrong = count(
        &dir,
        "readings",
        &format!("abs(raw - (2.0 + ((t_ms / 1000 - {t0}) % 1000) / 1000.0)) > 1e-9"),
    );
    assert_eq!(wrong, 0);
    // Each quarantine row says why.
    assert_eq!(count(&dir, "quarantine", "length(detail) < 10"), 0);
    assert!(
        rig.daemon.child.try_wait().unwrap().is_none(),
        "seepd exited"
    );
    figures(
        "payloads",
        &[
            (
                "valid readings",
                format!("{VALID} published, {VALID} stored"),
            ),
            (
                "bad payloads",
                format!(
                    "{BAD} of {} kinds, {total} quarantined",
                    sent_kinds.len() + 1
                ),
            ),
            ("by reason", format!("{want:?}")),
            ("10 MB payloads", HUGE.to_string()),
            ("wall time", secs(took)),
        ],
    );
}
