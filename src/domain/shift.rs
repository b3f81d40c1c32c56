//! Shifts and accounting periods on the plant's calendar: the production day
//! (from `day_starts_at`) cut into `shifts_per_day` equal shifts, and the month.
//!
//! A production day is usually 24 h but 23 or 25 h across a daylight-saving
//! change; its shifts share that day's length equally, so they always tile it.

use chrono::{Datelike, Duration, NaiveDate};
use serde::Serialize;

use super::charge::Time;
use super::plant_time::ProductionDays;

/// One shift of a production day: `[start, end)`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Shift {
    /// The production day the shift belongs to.
    pub day: NaiveDate,
    /// 1-based number of the shift in its day.
    pub number: u32,
    /// Shifts in that day.
    pub of: u32,
    pub start: Time,
    pub end: Time,
}

/// The start of shift `k` (0-based, `k == n` is the next day's start) of `day`.
fn boundary(days: &ProductionDays, day: NaiveDate, k: u32, n: u32) -> Time {
    let a = days.start_of(day);
    let Some(next) = day.succ_opt() else { return a };
    let b = days.start_of(next);
    let len_ms = (b - a).num_milliseconds();
    a + Duration::milliseconds(len_ms * i64::from(k) / i64::from(n.max(1)))
}

/// The shift that instant `t` falls in.
pub fn shift_of(days: &ProductionDays, shifts_per_day: u32, t: Time) -> Shift {
    let n = shifts_per_day.max(1);
    let day = days.day_of(t);
    let mut k = 0;
    while k + 1 < n && boundary(days, day, k + 1, n) <= t {
        k += 1;
    }
    Shift { day, number: k + 1, of: n, start: boundary(days, day, k, n), end: boundary(days, day, k + 1, n) }
}

/// The shift before `s`.
pub fn previous_shift(days: &ProductionDays, shifts_per_day: u32, s: &Shift) -> Shift {
    shift_of(days, shifts_per_day, s.start - Duration::seconds(1))
}

/// The shift after `s`.
pub fn next_shift(days: &ProductionDays, shifts_per_day: u32, s: &Shift) -> Shift {
    shift_of(days, shifts_per_day, s.end)
}

/// The start of the accounting month `t` falls in: the start of the production
/// day of the 1st of the month of `t`'s production day.
pub fn month_start(days: &ProductionDays, t: Time) -> Time {
    let d = days.day_of(t);
    days.start_of(d.with_day(1).unwrap_or(d))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::domain::plant_time::{PlantZone, parse_day_start};

    fn madrid() -> ProductionDays {
        ProductionDays { zone: PlantZone::parse("Europe/Madrid").unwrap(), day_starts_at: parse_day_start("06:00").unwrap() }
    }

    fn utc(s: &str) -> Time {
        chrono::DateTime::parse_from_rfc3339(s).unwrap().to_utc()
    }

    #[test]
    fn two_shifts_from_six_in_winter() {
        // Madrid is UTC+1 in winter (IANA tz database): 06:00 local is 05:00 UTC.
        let d = madrid();
        let s = shift_of(&d, 2, utc("2026-03-02T12:00:00Z"));
        assert_eq!((s.number, s.of), (1, 2));
        assert_eq!(s.start, utc("2026-03-02T05:00:00Z"));
        assert_eq!(s.end, utc("2026-03-02T17:00:00Z"));
        // 03:00 local on the 3rd still belongs to the 2nd's second shift
        let s2 = shift_of(&d, 2, utc("2026-03-03T02:00:00Z"));
        assert_eq!((s2.day, s2.number), (NaiveDate::from_ymd_opt(2026, 3, 2).unwrap(), 2));
        assert_eq!(previous_shift(&d, 2, &s2), s);
        assert_eq!(next_shift(&d, 2, &s), s2);
        assert_eq!(next_shift(&d, 2, &s2).start, utc("2026-03-03T05:00:00Z"));
    }

    #[test]
    fn boundaries_belong_to_the_shift_they_start() {
        let d = madrid();
        let s = shift_of(&d, 3, utc("2026-03-02T13:00:00Z"));
        assert_eq!(s.number, 2);
        assert_eq!(s.start, utc("2026-03-02T13:00:00Z"));
        assert_eq!(s.end - s.start, Duration::hours(8));
    }

    #[test]
    fn shifts_tile_a_day_shortened_by_daylight_saving() {
        // EU clocks go forward on 29 March 2026 (02:00 → 03:00 local): that production day lasts 23 h.
        let d = madrid();
        let day = NaiveDate::from_ymd_opt(2026, 3, 28).unwrap();
        let first = shift_of(&d, 2, d.start_of(day));
        let second = next_shift(&d, 2, &first);
        assert_eq!(first.end, second.start);
        assert_eq!(second.end, d.start_of(day.succ_opt().unwrap()));
        assert_eq!((second.end - first.start).num_hours(), 23);
        assert_eq!(second.day, day);
    }

    #[test]
    fn one_shift_is_the_whole_day_and_the_month_starts_on_the_first() {
        let d = madrid();
        let s = shift_of(&d, 1, utc("2026-03-02T12:00:00Z"));
        assert_eq!(s.end - s.start, Duration::hours(24));
        // 1 March 2026 06:00 local (UTC+1) = 05:00 UTC
        assert_eq!(month_start(&d, utc("2026-03-17T12:00:00Z")), utc("2026-03-01T05:00:00Z"));
        // 04:00 local on 1 April is still the production day of 31 March: March's month
        assert_eq!(month_start(&d, utc("2026-04-01T02:00:00Z")), utc("2026-03-01T05:00:00Z"));
    }
}
