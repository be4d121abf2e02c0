//! Due times and periods: daily, weekly and monthly schedules, DST changes in a non-UTC zone
//! (America/Chicago: 2026-03-08 spring forward, 2026-11-01 fall back), month ends.

use chrono::{DateTime, NaiveTime, Utc, Weekday};
use chrono_tz::Tz;

use super::*;

fn utc(s: &str) -> DateTime<Utc> {
    DateTime::parse_from_rfc3339(s).unwrap().with_timezone(&Utc)
}

fn hm(h: u32, m: u32) -> NaiveTime {
    NaiveTime::from_hms_opt(h, m, 0).unwrap()
}

const CHICAGO: Tz = chrono_tz::America::Chicago;

#[test]
fn daily_next_and_last_due() {
    let tz = chrono_tz::UTC;
    let at = hm(7, 30);
    assert_eq!(
        next_due(Every::Daily, at, tz, utc("2026-04-01T07:00:00Z")),
        Some(utc("2026-04-01T07:30:00Z"))
    );
    // Strictly after: at the due instant, the next one is tomorrow.
    assert_eq!(
        next_due(Every::Daily, at, tz, utc("2026-04-01T07:30:00Z")),
        Some(utc("2026-04-02T07:30:00Z"))
    );
    assert_eq!(
        last_due(Every::Daily, at, tz, utc("2026-04-01T07:29:59Z")),
        Some(utc("2026-03-31T07:30:00Z"))
    );
    assert_eq!(
        last_due(Every::Daily, at, tz, utc("2026-04-01T07:30:00Z")),
        Some(utc("2026-04-01T07:30:00Z"))
    );
}

#[test]
fn daily_across_spring_forward_and_fall_back_in_chicago() {
    let at = hm(7, 30);
    // CST (−6) before 2026-03-08, CDT (−5) from then on.
    assert_eq!(
        next_due(Every::Daily, at, CHICAGO, utc("2026-03-07T14:00:00Z")),
        Some(utc("2026-03-08T12:30:00Z"))
    );
    // The day of the change is 23 hours long.
    let (from, to) = period(Every::Daily, CHICAGO, utc("2026-03-09T12:30:00Z")).unwrap();
    assert_eq!(
        (from, to),
        (utc("2026-03-08T06:00:00Z"), utc("2026-03-09T05:00:00Z"))
    );
    assert_eq!((to - from).num_hours(), 23);
    // Fall back: 25 hours.
    let (from, to) = period(Every::Daily, CHICAGO, utc("2026-11-02T13:30:00Z")).unwrap();
    assert_eq!((to - from).num_hours(), 25);
    assert_eq!(from, utc("2026-11-01T05:00:00Z"));
}

#[test]
fn a_time_in_the_gap_moves_forward_and_a_folded_time_takes_the_first() {
    // 02:30 does not exist in Chicago on 2026-03-08: it is 03:30 CDT = 08:30 UTC.
    assert_eq!(
        next_due(
            Every::Daily,
            hm(2, 30),
            CHICAGO,
            utc("2026-03-08T00:00:00Z")
        ),
        Some(utc("2026-03-08T08:30:00Z"))
    );
    // 01:30 occurs twice on 2026-11-01: the first (CDT, 06:30 UTC), once.
    let first = next_due(
        Every::Daily,
        hm(1, 30),
        CHICAGO,
        utc("2026-11-01T00:00:00Z"),
    )
    .unwrap();
    assert_eq!(first, utc("2026-11-01T06:30:00Z"));
    assert_eq!(
        next_due(Every::Daily, hm(1, 30), CHICAGO, first),
        Some(utc("2026-11-02T07:30:00Z"))
    );
}

#[test]
fn weekly_on_a_weekday_and_its_seven_days() {
    let every = Every::Weekly(Weekday::Mon);
    // 2026-04-01 is a Wednesday; the next Monday is 2026-04-06.
    let due = next_due(every, hm(7, 30), CHICAGO, utc("2026-04-01T12:00:00Z")).unwrap();
    assert_eq!(due, utc("2026-04-06T12:30:00Z"));
    assert_eq!(
        last_due(every, hm(7, 30), CHICAGO, utc("2026-04-01T12:00:00Z")),
        Some(utc("2026-03-30T12:30:00Z"))
    );
    let (from, to) = period(every, CHICAGO, due).unwrap();
    assert_eq!(
        (from, to),
        (utc("2026-03-30T05:00:00Z"), utc("2026-04-06T05:00:00Z"))
    );
    // A week across spring forward is 167 hours.
    let (from, to) = period(every, CHICAGO, utc("2026-03-09T12:30:00Z")).unwrap();
    assert_eq!((to - from).num_hours(), 167);
}

#[test]
fn monthly_covers_the_previous_calendar_month_across_month_and_year_ends() {
    let every = Every::Monthly(1);
    let due = next_due(every, hm(6, 0), chrono_tz::UTC, utc("2026-01-31T23:00:00Z")).unwrap();
    assert_eq!(due, utc("2026-02-01T06:00:00Z"));
    assert_eq!(
        period(every, chrono_tz::UTC, due),
        Some((utc("2026-01-01T00:00:00Z"), utc("2026-02-01T00:00:00Z")))
    );
    // February (28 days), and December across the year end.
    let (from, to) = period(every, chrono_tz::UTC, utc("2026-03-01T06:00:00Z")).unwrap();
    assert_eq!((to - from).num_days(), 28);
    assert_eq!(
        period(every, chrono_tz::UTC, utc("2027-01-01T06:00:00Z")),
        Some((utc("2026-12-01T00:00:00Z"), utc("2027-01-01T00:00:00Z")))
    );
    // Day 28 after the 28th of a 31-day month: next month's 28th.
    assert_eq!(
        next_due(
            Every::Monthly(28),
            hm(6, 0),
            chrono_tz::UTC,
            utc("2026-01-29T00:00:00Z")
        ),
        Some(utc("2026-02-28T06:00:00Z"))
    );
    // Local months in Chicago start at local midnight.
    assert_eq!(
        period(every, CHICAGO, utc("2026-04-01T12:00:00Z")),
        Some((utc("2026-03-01T06:00:00Z"), utc("2026-04-01T05:00:00Z")))
    );
}
