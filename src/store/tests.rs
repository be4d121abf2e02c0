//! Store tests against real SQLite files in a temp dir.

use super::*;
use crate::quality::Reason;

fn row(instrument: &str, t_ms: i64, raw: f64) -> ReadingRow {
    ReadingRow {
        instrument: instrument.into(),
        t_ms,
        arrival_ms: t_ms + 5,
        raw,
        temperature_c: Some(12.5),
        baro_kpa: None,
        eng_value: raw,
        eng_unit: "kPa",
        pressure_kpa: Some(raw),
        pressure_head_m: Some(raw / 9.81),
        total_head_m: Some(100.0 + raw / 9.81),
        flags: Flags::empty(),
    }
}

fn bad(topic: &str, payload: &[u8], redelivered: bool) -> QuarantineRow {
    QuarantineRow {
        received_ms: 1,
        topic: topic.into(),
        reason: Reason::Malformed,
        detail: "expected JSON".into(),
        payload: payload.to_vec(),
        redelivered,
    }
}

#[test]
fn inserts_are_idempotent_on_instrument_and_time() {
    let dir = tempfile::tempdir().unwrap();
    let mut s = Store::open(&dir.path().join("a.sqlite")).unwrap();
    let st = s
        .write_batch(&[row("P1", 1000, 10.0), row("P1", 2000, 11.0)], &[], &[])
        .unwrap();
    assert_eq!((st.inserted, st.duplicates), (2, 0));
    // A redelivery of the first and one new reading.
    let st = s
        .write_batch(&[row("P1", 1000, 99.0), row("P2", 1000, 12.0)], &[], &[])
        .unwrap();
    assert_eq!((st.inserted, st.duplicates), (1, 1));
    assert_eq!(s.count_readings().unwrap(), 3);
    // The first write wins: the redelivered value did not overwrite it.
    assert_eq!(s.reading("P1", 1000).unwrap().unwrap().0, 10.0);
}

#[test]
fn reopen_keeps_data_and_schema_version() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("b.sqlite");
    {
        let mut s = Store::open(&path).unwrap();
        s.write_batch(&[row("P1", 1, 1.0)], &[], &[bad("t", b"x", false)])
            .unwrap();
    }
    let s = Store::open(&path).unwrap();
    assert_eq!(s.count_readings().unwrap(), 1);
    assert_eq!(
        s.quarantine_counts().unwrap(),
        vec![("malformed".to_string(), 1)]
    );
    let v: i64 = s
        .conn()
        .pragma_query_value(None, "user_version", |r| r.get(0))
        .unwrap();
    assert_eq!(v, SCHEMA_VERSION);
    let mode: String = s
        .conn()
        .pragma_query_value(None, "journal_mode", |r| r.get(0))
        .unwrap();
    assert_eq!(mode, "wal");
    let sync: i64 = s
        .conn()
        .pragma_query_value(None, "synchronous", |r| r.get(0))
        .unwrap();
    assert_eq!(sync, 2, "synchronous=FULL");
}

#[test]
fn newer_schema_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("c.sqlite");
    drop(Store::open(&path).unwrap());
    let c = Connection::open(&path).unwrap();
    c.pragma_update(None, "user_version", SCHEMA_VERSION + 1)
        .unwrap();
    drop(c);
    assert!(matches!(Store::open(&path), Err(StoreError::TooNew { .. })));
}

#[test]
fn redelivered_quarantine_is_not_stored_twice() {
    let mut s = Store::open_in_memory().unwrap();
    s.write_batch(&[], &[], &[bad("t/1", b"{", false)]).unwrap();
    let st = s.write_batch(&[], &[], &[bad("t/1", b"{", true)]).unwrap();
    assert_eq!(st.quarantined, 0);
    // A fresh (not redelivered) identical message is a new event and is stored.
    let st = s.write_batch(&[], &[], &[bad("t/1", b"{", false)]).unwrap();
    assert_eq!(st.quarantined, 1);
}

#[test]
fn latest_per_instrument() {
    let mut s = Store::open_in_memory().unwrap();
    s.write_batch(
        &[row("P1", 1, 1.0), row("P1", 3, 3.0), row("P2", 2, 2.0)],
        &[],
        &[],
    )
    .unwrap();
    let l = s.latest_all().unwrap();
    assert_eq!(l.len(), 2);
    assert_eq!((l[0].instrument.as_str(), l[0].t_ms), ("P1", 3));
    assert_eq!(s.barometer_since("P1", 2).unwrap(), vec![(3, 3.0)]);
}

#[test]
fn concurrent_opens_of_a_fresh_database_both_succeed() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("race.sqlite");
    let handles: Vec<_> = (0..4)
        .map(|_| {
            let p = path.clone();
            std::thread::spawn(move || Store::open(&p).map(|_| ()))
        })
        .collect();
    for h in handles {
        let r = h.join().unwrap();
        assert!(r.is_ok(), "{r:?}");
    }
}

/// A second reading for a stored (instrument, time) with another value is no redelivery: the
/// first value is kept and the other recorded (once, however often it comes back).
#[test]
fn a_conflicting_duplicate_is_recorded_once_and_the_first_value_kept() {
    let dir = tempfile::tempdir().unwrap();
    let mut s = Store::open(&dir.path().join("c.sqlite")).unwrap();
    s.write_batch(&[row("P1", 1000, 10.0)], &[], &[]).unwrap();
    // The same value again: a plain redelivery, nothing recorded.
    let st = s.write_batch(&[row("P1", 1000, 10.0)], &[], &[]).unwrap();
    assert_eq!((st.duplicates, st.conflicts, st.quarantined), (1, 0, 0));
    // Another value, twice (a redelivery of the conflicting message), and another temperature.
    for _ in 0..2 {
        let st = s.write_batch(&[row("P1", 1000, 10.5)], &[], &[]).unwrap();
        assert_eq!((st.duplicates, st.conflicts), (1, 1));
    }
    let mut warmer = row("P1", 1000, 10.0);
    warmer.temperature_c = Some(13.0);
    s.write_batch(&[warmer], &[], &[]).unwrap();
    assert_eq!(s.reading("P1", 1000).unwrap().unwrap().0, 10.0);
    assert_eq!(
        s.quarantine_counts().unwrap(),
        vec![("conflicting_duplicate".to_string(), 2)]
    );
    let (detail, payload): (String, String) = s
        .conn()
        .query_row(
            "SELECT detail, CAST(payload AS TEXT) FROM quarantine ORDER BY id LIMIT 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .unwrap();
    assert!(detail.contains("instrument P1"), "{detail}");
    assert!(
        detail.contains(
            "value 10.5 (temperature 12.5) differs from the stored 10 (temperature 12.5)"
        ),
        "{detail}"
    );
    let v: serde_json::Value = serde_json::from_str(&payload).unwrap();
    assert_eq!(v["instrument"], "P1");
    assert_eq!(v["value"], 10.5);
}

/// A reading stamped ahead of the clock seeds nothing at start: the latest reading and the
/// seeding read-back skip it, so a restart does not bring back what it would have hidden.
#[test]
fn readings_stamped_ahead_seed_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let mut s = Store::open(&dir.path().join("d.sqlite")).unwrap();
    let mut ahead = row("P1", 9_000, 3.0);
    ahead.flags.insert(Flags::TIME_AHEAD);
    s.write_batch(&[row("P1", 1_000, 1.0), ahead], &[], &[])
        .unwrap();
    let latest = s.latest_all().unwrap();
    assert_eq!((latest.len(), latest[0].t_ms), (1, 1_000));
    let seed = s.readings_since("P1", 0).unwrap();
    assert_eq!(seed.iter().map(|r| r.t_ms).collect::<Vec<_>>(), vec![1_000]);
}
