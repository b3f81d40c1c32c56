//! The harvests levelled against the stripping machine and the crane lifts the
//! changes leave, the crops pulled with the anodes fixed to their days, then smoothed.

use crate::domain::charge::Time;
use crate::domain::levelling::{self, Capacity, Task, Weights};
use crate::domain::smoothing::{self, DayLimits, Placed};

use super::calendar::to_day;
use super::changes::{Changes, PlacedBy, Slot, reason_of};
use super::outlook::Outlook;
use super::report::{Reason, ShiftLoad, Window, fill_changes, fill_harvests, harvest_room};
use super::{PlanError, PlanInput};

/// Harvest lateness costs twice a day early: an over-heavy crop grows nodules
/// and shorts (common practice, no source).
pub const HARVEST_WEIGHTS: Weights = Weights { early: 1.0, late: 2.0 };

/// Days a harvest may move from its due day, either way.
pub const HARVEST_SLACK_DAYS: i64 = 1;

/// A harvest placed on a day, before its mass is predicted.
pub(super) struct PlannedCrop {
    pub cell: usize,
    pub day: usize,
    pub from: Time,
    pub due: Time,
    pub overdue: bool,
    pub window: Window,
    pub with_change: bool,
}

/// The harvests as levelled and smoothed, with what the days have left.
pub(super) struct Harvests {
    /// Each day's changes (task id, whether it pulls a crop), in id order.
    pub with_crop: Vec<Vec<(String, bool)>>,
    pub day_shifts: Vec<Vec<ShiftLoad>>,
    /// Harvests the crane can still take each day.
    pub crane_harvests: Vec<u32>,
    /// Crops pulled with the anode changes, on their change's day.
    pub fixed: Vec<PlannedCrop>,
    pub floating: Vec<(PlannedCrop, Task)>,
    pub hslot: Vec<Slot>,
    /// Cathodes stripped each day.
    pub used: Vec<u64>,
    pub harvests_on: Vec<u32>,
    pub strip: u64,
    pub wanted_change: Vec<bool>,
    pub wanted_harvest: Vec<Option<u64>>,
    pub harvests_exact: bool,
    pub harvests_smoothed: usize,
}

/// Levels the harvests around the planned changes (see [`super::plan`]).
pub(super) fn level_harvests<E: std::error::Error + 'static>(
    input: &PlanInput,
    outlooks: &[Outlook],
    changes: &Changes,
) -> Result<Harvests, PlanError<E>> {
    let cal = &input.calendar;
    let rules = &input.rules;
    let now = input.now;
    let n = cal.len();
    let cells = &input.cells;
    let Changes { jobs, slot, by_cell, crew, shifts, .. } = changes;
    let shifts = *shifts;
    // The day's changes in shifts, and the crane lifts they leave for harvests.
    let pulls_crop = |i: usize| outlooks[jobs[i].cell].cycles[jobs[i].cycle].last_crop_from.is_some();
    let mut with_crop: Vec<Vec<(String, bool)>> = vec![Vec::new(); n];
    for (i, s) in slot.iter().enumerate() {
        if let Slot::Day { day: d, .. } = *s
            && d < n
        {
            with_crop[d].push((jobs[i].task.cell.clone(), pulls_crop(i)));
        }
    }
    let mut day_shifts: Vec<Vec<ShiftLoad>> = with_crop
        .iter_mut()
        .enumerate()
        .map(|(d, list)| {
            list.sort();
            let crops: Vec<bool> = list.iter().map(|x| x.1).collect();
            fill_changes(&crops, crew[d], shifts, rules.crane)
        })
        .collect();
    let crane_harvests: Vec<u32> = day_shifts.iter().map(|s| harvest_room(s, rules.crane)).collect();

    // Harvests: the crops pulled with the changes are fixed; the others level.
    let change_day = |ci: usize, k: usize| -> Option<Option<usize>> {
        by_cell.get(&(ci, k)).map(|&i| match slot[i] {
            Slot::Day { day: d, .. } => Some(d),
            Slot::Out(_) => None,
        })
    };
    let mut fixed: Vec<PlannedCrop> = Vec::new();
    let mut floating: Vec<(PlannedCrop, Task)> = Vec::new();
    for (ci, o) in outlooks.iter().enumerate() {
        let c = &cells[ci];
        for (k, cy) in o.cycles.iter().enumerate() {
            // a cycle whose change before it is unplaced is not planned
            if k > 0 && !matches!(change_day(ci, k - 1), Some(Some(_))) {
                break;
            }
            let own = change_day(ci, k);
            let lo = if k > 0 { change_day(ci, k - 1).flatten().map_or(0, |p| p as i64 + 1) } else { 0 };
            let hi = match own {
                Some(Some(d)) => (d as i64 - 1).min(n as i64 - 1),
                _ => n as i64 - 1,
            };
            // A crop that cannot be pulled in its own window (due on or after
            // its change's day, as levelled) stays in and joins the next one.
            let mut carry: Option<(Time, bool)> = None;
            for (h, hv) in cy.harvests.iter().enumerate() {
                let (earliest, ideal, latest) = if hv.before_start {
                    (0, 0, HARVEST_SLACK_DAYS.min(hi))
                } else {
                    ((hv.day - HARVEST_SLACK_DAYS).max(lo).max(0), hv.day.max(lo), (hv.day + HARVEST_SLACK_DAYS).min(hi))
                };
                if earliest > latest || ideal > hi {
                    carry = carry.or(Some((hv.crop_from, hv.overdue)));
                    continue;
                }
                let crop = PlannedCrop {
                    cell: ci,
                    day: to_day(ideal),
                    from: carry.take().map_or(hv.crop_from, |c| c.0),
                    due: hv.due_at,
                    overdue: hv.overdue,
                    window: Window { earliest: cal.date(earliest), ideal: cal.date(ideal), latest: Some(cal.date(latest)) },
                    with_change: false,
                };
                let task = Task {
                    cell: format!("{}#{k:03}#{h:03}", c.cell),
                    earliest: to_day(earliest),
                    latest: to_day(latest),
                    ideal: to_day(ideal),
                    anodes: 0,
                    group: None,
                    days_off: Vec::new(),
                };
                floating.push((crop, task));
            }
            if let (Some(Some(d)), Some(last), Some(ch)) = (own, cy.last_crop_from, &cy.change)
                && d < n
            {
                fixed.push(PlannedCrop {
                    cell: ci,
                    day: d,
                    from: carry.map_or(last, |c| c.0),
                    due: ch.target_at,
                    // overdue when its forecast time (the change's, or a crop's it carries) has passed
                    overdue: ch.target_at <= now || carry.is_some_and(|c| c.1),
                    window: Window { earliest: cal.date(d as i64), ideal: cal.date(d as i64), latest: Some(cal.date(d as i64)) },
                    with_change: true,
                });
            }
        }
    }
    let strip = u64::from(rules.harvest_cathodes_per_day);
    let mut used = vec![0u64; n];
    for f in &fixed {
        used[f.day] += u64::from(cells[f.cell].params.cathodes_per_cell);
    }
    let counts: Vec<u32> = floating.iter().map(|f| cells[f.0.cell].params.cathodes_per_cell).collect();
    let widest = counts.iter().copied().max().unwrap_or(1).max(1);
    let htasks: Vec<Task> = floating.iter().map(|f| f.1.clone()).collect();
    let hcap = Capacity {
        crew: used.iter().zip(&crane_harvests).map(|(u, k)| ((strip.saturating_sub(*u) / u64::from(widest)) as u32).min(*k)).collect(),
        anode_stock: u64::MAX,
        anodes_per_day: vec![0; n],
    };
    let hout = levelling::level(&htasks, &hcap, HARVEST_WEIGHTS).map_err(PlanError::Level)?;
    let mut hslot: Vec<Slot> = hout
        .day
        .iter()
        .map(|d| d.map_or(Slot::Out(Reason::NoStrippingCapacity), |d| Slot::Day { day: d, by: PlacedBy::Levelling }))
        .collect();
    for (i, u) in &hout.unplaced {
        hslot[*i] = Slot::Out(reason_of(*u, true));
    }
    let mut harvests_on = vec![0u32; n];
    for (i, s) in hslot.iter().enumerate() {
        if let Slot::Day { day: d, .. } = s {
            used[*d] += u64::from(counts[i]);
            harvests_on[*d] += 1;
        }
    }
    // Fit what is left into the cathodes and crane lifts still free, cheapest day first.
    for i in 0..hslot.len() {
        if !matches!(hslot[i], Slot::Out(Reason::NoStrippingCapacity)) {
            continue;
        }
        let t = &floating[i].1;
        let mut days: Vec<usize> = (t.earliest..=t.latest.min(n.saturating_sub(1))).collect();
        let cost = |d: usize| {
            if d < t.ideal { (t.ideal - d) as f64 * HARVEST_WEIGHTS.early } else { (d - t.ideal) as f64 * HARVEST_WEIGHTS.late }
        };
        days.sort_by(|a, b| cost(*a).total_cmp(&cost(*b)).then(a.cmp(b)));
        if let Some(d) = days.into_iter().find(|d| used[*d] + u64::from(counts[i]) <= strip && harvests_on[*d] < crane_harvests[*d]) {
            used[d] += u64::from(counts[i]);
            harvests_on[d] += 1;
            hslot[i] = Slot::Day { day: d, by: PlacedBy::Levelling };
        }
    }
    // Every harvest on its due day is optimal whatever the cathode counts.
    let all_due = hslot.iter().zip(&floating).all(|(s, f)| *s == Slot::Day { day: f.1.ideal, by: PlacedBy::Levelling });
    let capped_exact = all_due || (hout.exact && counts.iter().all(|c| *c == widest));
    // Days a job wanted and did not get (from the capped plan, before smoothing):
    // between its ideal day and the day it got, or its whole window when unplaced.
    let mut wanted_change = vec![false; n];
    let mut wanted_harvest: Vec<Option<u64>> = vec![None; n];
    let mark = |flags: &mut dyn FnMut(usize), t: &Task, got: Option<usize>| {
        let ideal = t.ideal.clamp(t.earliest, t.latest);
        let days = match got {
            Some(d) if d > ideal => ideal..d,
            Some(d) => d + 1..ideal + 1,
            None => t.earliest..t.latest.saturating_add(1),
        };
        for d in days.filter(|d| *d < n && !t.days_off.contains(d)) {
            flags(d);
        }
    };
    for (i, s) in slot.iter().enumerate() {
        match *s {
            Slot::Day { day: d, by: PlacedBy::Levelling } => mark(&mut |x| wanted_change[x] = true, &jobs[i].task, Some(d)),
            Slot::Out(Reason::NoCrewCapacity | Reason::NoAnodes) => mark(&mut |x| wanted_change[x] = true, &jobs[i].task, None),
            _ => {}
        }
    }
    for (i, s) in hslot.iter().enumerate() {
        let c = u64::from(counts[i]);
        let mut flag = |x: usize| wanted_harvest[x] = Some(wanted_harvest[x].map_or(c, |m: u64| m.min(c)));
        match *s {
            Slot::Day { day: d, .. } => mark(&mut flag, &floating[i].1, Some(d)),
            Slot::Out(_) => mark(&mut flag, &floating[i].1, None),
        }
    }
    // Smoothing: harvests move inside their windows to even out the daily cathodes.
    let mut harvests_smoothed = 0;
    if rules.smooth_harvests {
        let mut placed: Vec<(usize, Placed)> = hslot
            .iter()
            .enumerate()
            .filter_map(|(i, s)| match *s {
                Slot::Day { day, .. } => {
                    let t = &floating[i].1;
                    let p =
                        Placed { day, earliest: t.earliest, latest: t.latest.min(n - 1), ideal: t.ideal, cathodes: u64::from(counts[i]) };
                    Some((i, p))
                }
                Slot::Out(_) => None,
            })
            .collect();
        let mut ps: Vec<Placed> = placed.iter().map(|x| x.1).collect();
        let limits = DayLimits { cathodes: vec![strip; n], harvests: crane_harvests.clone() };
        harvests_smoothed = smoothing::smooth(&mut ps, &mut used, &mut harvests_on, &limits, HARVEST_WEIGHTS);
        for ((i, _), p) in placed.iter_mut().zip(&ps) {
            hslot[*i] = Slot::Day { day: p.day, by: PlacedBy::Levelling };
        }
    }
    let harvests_exact = capped_exact && harvests_smoothed == 0;
    for (d, sh) in day_shifts.iter_mut().enumerate() {
        fill_harvests(sh, harvests_on[d], rules.crane);
    }
    Ok(Harvests {
        with_crop,
        day_shifts,
        crane_harvests,
        fixed,
        floating,
        hslot,
        used,
        harvests_on,
        strip,
        wanted_change,
        wanted_harvest,
        harvests_exact,
        harvests_smoothed,
    })
}
