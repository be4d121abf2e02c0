//! When a scheduled report is due and which period it covers: pure functions of the schedule,
//! the site's time zone and a time passed in (no clock reads, no I/O).
//!
//! Local times that do not exist (a spring-forward gap) move forward by the gap; local times
//! that occur twice (fall back) take the first occurrence. Periods run from local midnight to
//! local midnight, so a day may be 23 or 25 hours long.

use chrono::{DateTime, Datelike, Days, LocalResult, Months, NaiveDate, NaiveDateTime, NaiveTime};
use chrono::{TimeZone, Utc};
use chrono_tz::Tz;

use crate::config::Every;

/// How far to look for a due date (a monthly schedule is due at least every 31 days).
const SEARCH_DAYS: u64 = 70;

/// The UTC instant of a local date and time: the first of two in a fold, and after a gap the
/// same wall-clock time shifted forward by the gap.
pub fn local_instant(tz: Tz, date: NaiveDate, at: NaiveTime) -> Option<DateTime<Utc>> {
    let naive = NaiveDateTime::new(date, at);
    match tz.from_local_datetime(&naive) {
        LocalResult::Single(t) | LocalResult::Ambiguous(t, _) => Some(t.with_timezone(&Utc)),
        LocalResult::None => {
            // Gaps are at most a few hours; the offset before the gap gives the instant that
            // wall clocks skipped over.
            let before = tz
                .from_local_datetime(&(naive - chrono::Duration::hours(3)))
                .earliest()?;
            let offset = chrono::Offset::fix(before.offset());
            let t = offset.from_local_datetime(&naive).single()?;
            Some(t.with_timezone(&Utc))
        }
    }
}

fn is_due_date(every: Every, d: NaiveDate) -> bool {
    match every {
        Every::Daily => true,
        Every::Weekly(w) => d.weekday() == w,
        Every::Monthly(day) => d.day() == day,
    }
}

/// The first due time strictly after `after`.
pub fn next_due(
    every: Every,
    at: NaiveTime,
    tz: Tz,
    after: DateTime<Utc>,
) -> Option<DateTime<Utc>> {
    let start = after
        .with_timezone(&tz)
        .date_naive()
        .checked_sub_days(Days::new(1))?;
    start
        .iter_days()
        .take(SEARCH_DAYS as usize)
        .filter(|d| is_due_date(every, *d))
        .filter_map(|d| local_instant(tz, d, at))
        .find(|t| *t > after)
}

/// The latest due time at or before `now` (the period to catch up on at start).
pub fn last_due(every: Every, at: NaiveTime, tz: Tz, now: DateTime<Utc>) -> Option<DateTime<Utc>> {
    let mut d = now
        .with_timezone(&tz)
        .date_naive()
        .checked_add_days(Days::new(1))?;
    for _ in 0..SEARCH_DAYS {
        if is_due_date(every, d) {
            if let Some(t) = local_instant(tz, d, at).filter(|t| *t <= now) {
                return Some(t);
            }
        }
        d = d.pred_opt()?;
    }
    None
}

/// The period [from, to) a report due at `due` covers: the previous local day (daily), the
/// previous 7 local days (weekly) or the previous calendar month (monthly), ending at the local
/// midnight that starts the due date.
pub fn period(every: Every, tz: Tz, due: DateTime<Utc>) -> Option<(DateTime<Utc>, DateTime<Utc>)> {
    let date = due.with_timezone(&tz).date_naive();
    let (first, last) = match every {
        Every::Daily => (date.checked_sub_days(Days::new(1))?, date),
        Every::Weekly(_) => (date.checked_sub_days(Days::new(7))?, date),
        Every::Monthly(_) => {
            let this_month = date.with_day(1)?;
            (this_month.checked_sub_months(Months::new(1))?, this_month)
        }
    };
    Some((
        local_instant(tz, first, NaiveTime::MIN)?,
        local_instant(tz, last, NaiveTime::MIN)?,
    ))
}

#[cfg(test)]
mod tests;
