//! The plant's clock face: its time zone, how a foreman's typed time becomes
//! an instant, and the production day that starts at the layout's `day_starts_at`.

use chrono::{DateTime, Duration, FixedOffset, LocalResult, NaiveDate, NaiveDateTime, NaiveTime, Offset, TimeZone, Utc};
use chrono_tz::Tz;
use std::fmt;

use super::charge::Time;

/// A plant's time zone: an IANA name, or a fixed offset such as `+02:00`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum PlantZone {
    Named(Tz),
    Fixed(FixedOffset),
}

/// Why a time or zone was not accepted.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum TimeError {
    #[error("'{0}' is not a time: use RFC 3339 (2026-03-01T06:00:00Z) or YYYY-MM-DD HH:MM in the plant's time zone")]
    Unparsed(String),
    #[error("'{0}' does not exist in {1} (the clocks skip it for daylight saving)")]
    Skipped(String, String),
    #[error("'{0}' happens twice in {1} (daylight saving ends): add an offset, e.g. {2}")]
    Ambiguous(String, String, String),
    #[error("'{0}' is not a time zone: use an IANA name such as Europe/Madrid, UTC, or an offset such as +02:00")]
    Zone(String),
    #[error("'{0}' is not a time of day: use HH:MM")]
    DayStart(String),
}

impl PlantZone {
    pub fn parse(s: &str) -> Result<Self, TimeError> {
        let s = s.trim();
        if let Ok(tz) = s.parse::<Tz>() {
            return Ok(PlantZone::Named(tz));
        }
        if let Ok(dt) = DateTime::parse_from_rfc3339(&format!("2000-01-01T00:00:00{s}")) {
            return Ok(PlantZone::Fixed(*dt.offset()));
        }
        Err(TimeError::Zone(s.to_string()))
    }

    /// The name as written in a layout.
    pub fn name(&self) -> String {
        match self {
            PlantZone::Named(tz) => tz.name().to_string(),
            PlantZone::Fixed(o) => o.to_string(),
        }
    }

    fn resolve(&self, local: NaiveDateTime) -> LocalResult<Time> {
        match self {
            PlantZone::Named(tz) => tz.from_local_datetime(&local).map(|d| d.with_timezone(&Utc)),
            PlantZone::Fixed(o) => o.from_local_datetime(&local).map(|d| d.with_timezone(&Utc)),
        }
    }

    /// Local wall-clock time of an instant.
    pub fn local(&self, t: Time) -> NaiveDateTime {
        match self {
            PlantZone::Named(tz) => t.with_timezone(tz).naive_local(),
            PlantZone::Fixed(o) => t.with_timezone(o).naive_local(),
        }
    }

    fn offset_at(&self, t: Time) -> FixedOffset {
        match self {
            PlantZone::Named(tz) => tz.offset_from_utc_datetime(&t.naive_utc()).fix(),
            PlantZone::Fixed(o) => *o,
        }
    }

    /// Parses RFC 3339, or `YYYY-MM-DD HH:MM` (also with `T` and seconds) as
    /// local time in this zone; a skipped local time is rejected and an
    /// ambiguous one needs an explicit offset.
    pub fn parse_time(&self, s: &str) -> Result<Time, TimeError> {
        let s = s.trim();
        if let Ok(dt) = DateTime::parse_from_rfc3339(s) {
            return Ok(dt.with_timezone(&Utc));
        }
        let local = ["%Y-%m-%d %H:%M", "%Y-%m-%d %H:%M:%S", "%Y-%m-%dT%H:%M", "%Y-%m-%dT%H:%M:%S"]
            .iter()
            .find_map(|f| NaiveDateTime::parse_from_str(s, f).ok())
            .ok_or_else(|| TimeError::Unparsed(s.to_string()))?;
        match self.resolve(local) {
            LocalResult::Single(t) => Ok(t),
            LocalResult::None => Err(TimeError::Skipped(s.to_string(), self.name())),
            LocalResult::Ambiguous(a, _) => {
                let example = format!("{}{}", local.format("%Y-%m-%dT%H:%M:00"), self.offset_at(a));
                Err(TimeError::Ambiguous(s.to_string(), self.name(), example))
            }
        }
    }

    /// An instant written as the plant's wall clock shows it.
    pub fn show(&self, t: Time) -> String {
        self.local(t).format("%Y-%m-%d %H:%M").to_string()
    }
}

impl fmt::Display for PlantZone {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.name())
    }
}

/// The plant's production-day calendar.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ProductionDays {
    pub zone: PlantZone,
    pub day_starts_at: NaiveTime,
}

/// Parses `HH:MM`.
pub fn parse_day_start(s: &str) -> Result<NaiveTime, TimeError> {
    NaiveTime::parse_from_str(s.trim(), "%H:%M").map_err(|_| TimeError::DayStart(s.to_string()))
}

impl ProductionDays {
    /// The production day an instant belongs to.
    pub fn day_of(&self, t: Time) -> NaiveDate {
        let local = self.zone.local(t);
        let shifted = local - (self.day_starts_at - NaiveTime::MIN);
        shifted.date()
    }

    /// The instant a production day starts (if the local start is skipped by
    /// daylight saving, the first instant after the gap).
    pub fn start_of(&self, day: NaiveDate) -> Time {
        let local = day.and_time(self.day_starts_at);
        for minutes in 0..=180 {
            match self.zone.resolve(local + chrono::Duration::minutes(minutes)) {
                LocalResult::Single(t) | LocalResult::Ambiguous(t, _) => return t,
                LocalResult::None => continue,
            }
        }
        Utc.from_utc_datetime(&local)
    }
}

/// One shift of a production day split into `of` equal shifts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Shift {
    pub day: NaiveDate,
    /// 0 is the day's first shift.
    pub index: u32,
    pub of: u32,
    pub start: Time,
    pub end: Time,
}

impl ProductionDays {
    /// The shift an instant falls in, with `per_day` equal shifts a production
    /// day (a day that daylight saving makes 23 or 25 h long has shorter or longer shifts).
    pub fn shift_at(&self, t: Time, per_day: u32) -> Shift {
        let of = per_day.max(1);
        let day = self.day_of(t);
        let (start, end) = (self.start_of(day), self.start_of(day + Duration::days(1)));
        let len = ((end - start).num_seconds() / i64::from(of)).max(1);
        let index = ((t - start).num_seconds() / len).clamp(0, i64::from(of) - 1) as u32;
        let at = |k: i64| if k >= i64::from(of) { end } else { start + Duration::seconds(k * len) };
        Shift { day, index, of, start: at(i64::from(index)), end: at(i64::from(index) + 1) }
    }

    /// The first shift of the production day after `s`'s.
    pub fn next_day_first_shift(&self, s: &Shift) -> Shift {
        self.shift_at(self.start_of(s.day + Duration::days(1)), s.of)
    }
}

impl Shift {
    pub fn is_last(&self) -> bool {
        self.index + 1 == self.of
    }

    /// What a foreman calls the shift: the one holding 02:00 on the plant clock
    /// is the night shift; of two, the other is the day shift; of three, the
    /// ones holding 10:00 and 18:00 are the morning and afternoon shifts; else
    /// `shift 2 of 4`. One shift a day has no name (`None`).
    pub fn name(&self, zone: PlantZone) -> Option<String> {
        if self.of == 1 {
            return None;
        }
        let holds = |hh: u32| {
            let (a, b) = (zone.local(self.start).time(), zone.local(self.end).time());
            let h = NaiveTime::from_hms_opt(hh, 0, 0).unwrap_or(NaiveTime::MIN);
            if a <= b { a <= h && h < b } else { h >= a || h < b }
        };
        Some(
            match self.of {
                _ if holds(2) => "night shift",
                2 => "day shift",
                3 if holds(10) => "morning shift",
                3 if holds(18) => "afternoon shift",
                _ => return Some(format!("shift {} of {}", self.index + 1, self.of)),
            }
            .to_string(),
        )
    }
}

/// How long a resolved warning stays news; older ones fold into a count on screen.
pub const NEWS_FOR: Duration = Duration::hours(24);

/// Whether something that ended at `end` is old news at `now`.
pub fn is_old(end: Time, now: Time) -> bool {
    now - end > NEWS_FOR
}

/// A length of time as a foreman reads it: `57 min`, `1.5 h`, `14 h`, `2.3 d`
/// (the sign is dropped; see [`relative`]).
pub fn span_text(d: Duration) -> String {
    let min = (d.num_seconds().abs() as f64 / 60.0).round();
    let h = min / 60.0;
    if min < 60.0 {
        format!("{min:.0} min")
    } else if h < 10.0 {
        let t = format!("{h:.1}");
        format!("{} h", t.strip_suffix(".0").unwrap_or(&t))
    } else if h < 48.0 {
        format!("{h:.0} h")
    } else {
        format!("{:.1} d", h / 24.0)
    }
}

/// When `t` is, seen from `now`: `in 57 min`, `57 min ago`, `now` (within a minute).
pub fn relative(t: Time, now: Time) -> String {
    let d = t - now;
    if d.num_seconds().abs() < 30 {
        "now".to_string()
    } else if d > Duration::zero() {
        format!("in {}", span_text(d))
    } else {
        format!("{} ago", span_text(d))
    }
}

/// A signed time to something in at most five characters, for a tile:
/// `57m`, `5h`, `2.3d`, `12d`, and `-57m` when it is past.
pub fn compact(d: Duration) -> String {
    let sign = if d < Duration::zero() { "-" } else { "" };
    let min = (d.num_seconds().abs() as f64 / 60.0).round();
    let h = min / 60.0;
    let body = if min < 60.0 {
        format!("{min:.0}m")
    } else if h < 48.0 {
        format!("{h:.0}h")
    } else if h < 240.0 {
        format!("{:.1}d", h / 24.0)
    } else {
        format!("{:.0}d", (h / 24.0).min(999.0))
    };
    format!("{sign}{body}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rfc3339_and_local_times() {
        let z = PlantZone::parse("Europe/Madrid").unwrap();
        assert_eq!(z.parse_time("2026-03-01T06:00:00Z").unwrap().to_rfc3339(), "2026-03-01T06:00:00+00:00");
        // Madrid is UTC+1 in winter (IANA tz database)
        assert_eq!(z.parse_time("2026-03-01 07:00").unwrap().to_rfc3339(), "2026-03-01T06:00:00+00:00");
        assert!(matches!(z.parse_time("01/03/2026"), Err(TimeError::Unparsed(_))));
    }

    #[test]
    fn daylight_saving_edges() {
        // EU clocks go forward at 02:00 on 29 March 2026 and back at 03:00 on 25 October 2026
        let z = PlantZone::parse("Europe/Madrid").unwrap();
        assert!(matches!(z.parse_time("2026-03-29 02:30"), Err(TimeError::Skipped(..))));
        let e = z.parse_time("2026-10-25 02:30").unwrap_err();
        assert!(e.to_string().contains("+02:00"), "{e}");
        assert!(z.parse_time("2026-10-25T02:30:00+01:00").is_ok());
    }

    #[test]
    fn durations_read_at_a_glance() {
        let now = Utc.with_ymd_and_hms(2026, 12, 1, 4, 58, 0).unwrap();
        assert_eq!(relative(now + Duration::minutes(57), now), "in 57 min");
        assert_eq!(relative(now - Duration::minutes(57), now), "57 min ago");
        assert_eq!(relative(now + Duration::hours(5), now), "in 5 h");
        assert_eq!(relative(now + Duration::minutes(90), now), "in 1.5 h");
        assert_eq!(relative(now + Duration::minutes(55 * 60 + 12), now), "in 2.3 d");
        assert_eq!(relative(now + Duration::seconds(10), now), "now");
        assert_eq!(compact(Duration::minutes(57)), "57m");
        assert_eq!(compact(Duration::minutes(-3)), "-3m");
        assert_eq!(compact(Duration::hours(30)), "30h");
        assert_eq!(compact(Duration::hours(60)), "2.5d");
        assert_eq!(compact(Duration::days(-12)), "-12d");
        for m in [-100_000i64, -3000, -61, -1, 0, 59, 2879, 14_399, 100_000, 10_000_000] {
            assert!(compact(Duration::minutes(m)).chars().count() <= 5, "{m}");
            assert!(!compact(Duration::minutes(m)).contains("-0"), "{m}");
        }
    }

    #[test]
    fn shifts_of_a_production_day_and_their_names() {
        let z = PlantZone::parse("Europe/Madrid").unwrap();
        let days = ProductionDays { zone: z, day_starts_at: parse_day_start("06:00").unwrap() };
        // 04:58 local on 2 December is still production day 1 December, its night shift
        let t = z.parse_time("2026-12-02 04:58").unwrap();
        let s = days.shift_at(t, 2);
        assert_eq!((s.day, s.index, s.is_last()), (NaiveDate::from_ymd_opt(2026, 12, 1).unwrap(), 1, true));
        assert_eq!(z.show(s.start), "2026-12-01 18:00");
        assert_eq!(s.name(z).as_deref(), Some("night shift"));
        let next = days.next_day_first_shift(&s);
        assert_eq!((z.show(next.start), z.show(next.end)), ("2026-12-02 06:00".to_string(), "2026-12-02 18:00".to_string()));
        assert_eq!(next.name(z).as_deref(), Some("day shift"));
        let three: Vec<Option<String>> =
            [6, 14, 22].iter().map(|h| days.shift_at(z.parse_time(&format!("2026-12-02 {h:02}:30")).unwrap(), 3).name(z)).collect();
        assert_eq!(three, [Some("morning shift".into()), Some("afternoon shift".into()), Some("night shift".into())]);
        assert_eq!(days.shift_at(t, 1).name(z), None);
    }

    #[test]
    fn fixed_offset_zone_and_production_day() {
        let z = PlantZone::parse("+02:00").unwrap();
        let days = ProductionDays { zone: z, day_starts_at: parse_day_start("06:00").unwrap() };
        // 03:00 UTC is 05:00 local: still the previous production day
        let t = z.parse_time("2026-03-02T03:00:00Z").unwrap();
        assert_eq!(days.day_of(t), NaiveDate::from_ymd_opt(2026, 3, 1).unwrap());
        let start = days.start_of(NaiveDate::from_ymd_opt(2026, 3, 2).unwrap());
        assert_eq!(start.to_rfc3339(), "2026-03-02T04:00:00+00:00");
        assert!(PlantZone::parse("Mars/Olympus").is_err());
    }
}
