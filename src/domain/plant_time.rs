//! The plant's clock face: its time zone, how a foreman's typed time becomes
//! an instant, and the production day that starts at the layout's `day_starts_at`.

use chrono::{DateTime, FixedOffset, LocalResult, NaiveDate, NaiveDateTime, NaiveTime, Offset, TimeZone, Utc};
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
