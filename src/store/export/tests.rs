//! Export queue tests against real SQLite files in a temp dir.

use super::super::{DerivedRow, ReadingRow, Store};
use super::*;
use crate::quality::Flags;

fn row(instrument: &str, t_ms: i64, raw: f64) -> ReadingRow {
    ReadingRow {
        instrument: instrument.into(),
        t_ms,
        arrival_ms: t_ms,
        raw,
        temperature_c: None,
        baro_kpa: None,
        eng_value: raw,
        eng_unit: "m",
        pressure_kpa: None,
        pressure_head_m: None,
        total_head_m: Some(raw),
        flags: Flags::empty(),
    }
}

fn derived(object: &str, t_ms: i64, value: Option<f64>) -> DerivedRow {
    DerivedRow {
        object: object.into(),
        quantity: "gradient".into(),
        t_ms,
        value,
        unit: "1",
        reason: None,
        inputs: vec!["P1".into()],
    }
}

#[test]
fn nothing_is_queued_unless_export_is_on() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("q.sqlite");
    let mut s = Store::open(&path).unwrap();
    s.write_batch(&[row("P1", 1, 1.0)], &[derived("C1", 1, Some(0.1))], &[])
        .unwrap();
    let q = ExportQueue::open(&path).unwrap();
    assert_eq!(q.backlog().unwrap().entries, 0);
}

#[test]
fn new_rows_are_queued_in_commit_order_and_duplicates_are_not() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("q.sqlite");
    let mut s = Store::open(&path).unwrap();
    s.set_export_queue(QueueMode {
        readings: true,
        derived: true,
    });
    s.write_batch(&[row("P2", 5, 2.0), row("P1", 9, 1.0)], &[], &[])
        .unwrap();
    // A redelivery (duplicate) is not queued again; a derived recomputation is.
    s.write_batch(&[row("P2", 5, 7.0)], &[derived("C1", 5, Some(0.2))], &[])
        .unwrap();
    s.write_batch(&[], &[derived("C1", 5, Some(0.3))], &[])
        .unwrap();
    let mut q = ExportQueue::open(&path).unwrap();
    let page = q.page(10).unwrap();
    let keys: Vec<(&str, i64)> = page.iter().map(|e| (e.key.as_str(), e.t_ms)).collect();
    assert_eq!(keys, [("P2", 5), ("P1", 9), ("C1", 5), ("C1", 5)]);
    assert!(page.windows(2).all(|w| w[0].seq < w[1].seq));
    let Some(ExportRow::Reading(r)) = &page[0].row else {
        panic!("{:?}", page[0])
    };
    assert_eq!(r.raw, 2.0, "the first stored value is the one exported");
    let Some(ExportRow::Derived(d)) = &page[3].row else {
        panic!("{:?}", page[3])
    };
    assert_eq!(d.value, Some(0.3));

    // Acknowledge the first two: the cursor moves, they leave the queue, one reject recorded.
    let reject = RejectRow {
        series: Series::Reading,
        key: "P1".into(),
        quantity: String::new(),
        t_ms: 9,
        status: 400,
        reply: "bad".into(),
        lines: "x".into(),
    };
    q.commit(page[1].seq, 5, &[reject], 1000).unwrap();
    let b = q.backlog().unwrap();
    assert_eq!((b.entries, b.points, b.rejected), (2, 5, 1));
    assert_eq!(b.last_ok_ms, Some(1000));
    assert!(b.oldest_queued_ms.is_some());
    let next = q.page(10).unwrap();
    assert_eq!(next.len(), 2);
    assert_eq!(next[0].seq, page[2].seq);
    let left: i64 = q
        .conn()
        .query_row("SELECT count(*) FROM export_queue", [], |r| r.get(0))
        .unwrap();
    assert_eq!(left, 2, "acknowledged entries are deleted");

    // Sequence numbers are never reused after the queue empties.
    q.commit(page[3].seq, 2, &[], 2000).unwrap();
    s.write_batch(&[row("P3", 1, 3.0)], &[], &[]).unwrap();
    let last = q.page(10).unwrap();
    assert_eq!(last.len(), 1);
    assert!(last[0].seq > page[3].seq);
}

#[test]
fn range_reads_page_by_time() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("q.sqlite");
    let mut s = Store::open(&path).unwrap();
    let rows: Vec<ReadingRow> = (0..10).map(|i| row("P1", i * 10, i as f64)).collect();
    s.write_batch(&rows, &[derived("C1", 20, None)], &[])
        .unwrap();
    let q = ExportQueue::open(&path).unwrap();
    assert_eq!(q.reading_instruments().unwrap(), ["P1"]);
    let got = q.readings_between("P1", 15, 80, 3).unwrap();
    let times: Vec<i64> = got
        .iter()
        .filter_map(|r| match r {
            ExportRow::Reading(p) => Some(p.t_ms),
            ExportRow::Derived(_) => None,
        })
        .collect();
    assert_eq!(times, [20, 30, 40]);
    assert_eq!(
        q.derived_series().unwrap(),
        [("C1".to_string(), "gradient".to_string())]
    );
    assert_eq!(
        q.derived_between("C1", "gradient", 0, 100, 10)
            .unwrap()
            .len(),
        1
    );
}
