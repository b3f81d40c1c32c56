//! The plan's production days and its rules: the calendar of days from the
//! first one (with the look-ahead after them) and the `[plan]` keys as the plan uses them.

use chrono::{Duration, NaiveDate};
use std::collections::BTreeMap;

use crate::domain::charge::{Span, Time};
use crate::domain::layout::OutageWork;
use crate::domain::levelling::Weights;
use crate::domain::plant_time::ProductionDays;

/// Days beyond the horizon that a window's far end is clipped to. Only days
/// inside the horizon can be chosen, and a common shift of the ideal day
/// beyond the horizon changes every in-horizon cost of that task by the same
/// amount, so the clip never changes which plan is best.
pub(super) const BEYOND_HORIZON_DAYS: i64 = 366;

/// Anode changes are levelled over the plan's days and up to this many days
/// after it, under the same crew, supply and no-work rules, so that a change
/// whose best day lies just after the plan goes there (and is reported as
/// after the plan) instead of being crowded onto the plan's last days early.
pub const LOOKAHEAD_DAYS: usize = 14;

/// The plan's production days: `len` days from `from`, each starting at the
/// layout's `day_starts_at` in the plant's zone (and [`LOOKAHEAD_DAYS`] more after them).
#[derive(Debug, Clone, PartialEq)]
pub struct Calendar {
    pub days: ProductionDays,
    pub from: NaiveDate,
    len: usize,
    starts: Vec<Time>,
}

impl Calendar {
    pub fn new(days: ProductionDays, from: NaiveDate, len: usize) -> Calendar {
        let starts = (0..=len + LOOKAHEAD_DAYS).map(|i| days.start_of(from + Duration::days(i as i64))).collect();
        Calendar { days, from, len, starts }
    }

    /// Days in the horizon.
    pub fn len(&self) -> usize {
        self.len
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The date of day index `i` (which may lie outside the horizon).
    pub fn date(&self, i: i64) -> NaiveDate {
        self.from + Duration::days(i)
    }

    /// The instant day `i` starts (`i == len()`: the end of the horizon; up to
    /// [`LOOKAHEAD_DAYS`] more are known).
    pub fn start(&self, i: usize) -> Time {
        self.starts[i.min(self.starts.len() - 1)]
    }

    /// The day index of an instant: negative before the horizon, `len()` or more after it.
    pub fn index(&self, t: Time) -> i64 {
        (self.days.day_of(t) - self.from).num_days()
    }

    /// The instant of day `d` nearest `wanted`, never before `now`: where a job
    /// planned on `d` is assumed done (on its due day, at its due time).
    pub fn instant(&self, d: usize, wanted: Time, now: Time) -> Time {
        let lo = self.start(d).max(now);
        let hi = self.start(d + 1) - Duration::seconds(1);
        if hi <= lo { lo } else { wanted.clamp(lo, hi) }
    }
}

/// What constrains the plan (the layout's `[plan]` keys after command-line overrides).
#[derive(Debug, Clone, PartialEq)]
pub struct Rules {
    /// Cells the crew can change in a day.
    pub crew_cells_per_day: u32,
    /// Shifts the day's crew capacity is split over (for the report only).
    pub shifts_per_day: u32,
    /// Cathodes the stripping machine handles in a day.
    pub harvest_cathodes_per_day: u32,
    /// Anode-change weights: cost per day early and per day late.
    pub weights: Weights,
    /// New anodes on hand at the start of the first day.
    pub anode_stock: Option<u64>,
    /// New anodes prepared each day, usable from that day on.
    pub anodes_per_day: Option<u64>,
    /// Production days without anode work.
    pub no_anode_work: Vec<NaiveDate>,
    /// Logged outages (past and planned), by circuit name: a production day
    /// that overlaps one concerns only that circuit's cells (see `outage_work`).
    pub outages: Vec<(String, Span)>,
    /// Per circuit: anode work on its outage days is forbidden (a circuit not
    /// listed) or preferred (the window's outage day nearest the ideal becomes the ideal).
    pub outage_work: BTreeMap<String, OutageWork>,
    /// Change each section's cells on one common day.
    pub whole_sections: bool,
    /// The crane-lift budget (`None`: no limit).
    pub crane: Option<Crane>,
    /// Level the harvests' daily cathodes after the cap-only levelling (see [`plan`](super::plan)).
    pub smooth_harvests: bool,
    /// A crop pulled with the anodes lighter than this fraction of its
    /// `cathode_target_kg` is warned about.
    pub light_crop_fraction: f64,
}

/// The crane-lift budget of a shift and what each job takes of it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Crane {
    pub lifts_per_shift: u32,
    pub per_anode_change: u32,
    pub per_harvest: u32,
}

impl Rules {
    /// The anode supply as [`levelling::level`](crate::domain::levelling::level) takes it. Both unset: no limit.
    /// Either set: the supply is limited, and the unset part counts as none
    /// (no stock on hand, or no deliveries).
    pub(super) fn supply(&self, days: usize) -> (u64, Vec<u64>) {
        match (self.anode_stock, self.anodes_per_day) {
            (None, None) => (u64::MAX, vec![0; days]),
            (s, p) => (s.unwrap_or(0), vec![p.unwrap_or(0); days]),
        }
    }
}

pub(super) fn to_day(i: i64) -> usize {
    usize::try_from(i.max(0)).unwrap_or(usize::MAX)
}
