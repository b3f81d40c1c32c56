//! The anode changes levelled cycle by cycle: each cycle's windows from the day
//! the change before it is planned on, the kept and hand moves applied and re-checked.

use chrono::NaiveDate;
use std::collections::{BTreeMap, HashMap};

use crate::domain::charge::Curve;
use crate::domain::layout::{AnodeKind, OutageWork};
use crate::domain::levelling::{self, Capacity, Task, Unplaced};

use super::calendar::{LOOKAHEAD_DAYS, to_day};
use super::outlook::{Outlook, next_cycle};
use super::report::{Bound, DayOutage, Reason};
use super::{DroppedMove, KeptMove, PlanError, PlanInput};

/// An anode change the levelling handles.
pub(super) struct ChangeJob {
    pub cell: usize,
    pub cycle: usize,
    pub task: Task,
}

/// Where a job ended up.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum Slot {
    /// On a day of the levelling's span (one at or after the plan's length is after the plan).
    Day { day: usize, by: PlacedBy },
    /// Not placed, for this reason.
    Out(Reason),
}

/// What put a job on its day.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum PlacedBy {
    /// The levelling (anode changes or harvests).
    Levelling,
    /// A hand move or a kept (recorded) one.
    Move,
}

pub(super) fn reason_of(u: Unplaced, harvest: bool) -> Reason {
    match (u, harvest) {
        (Unplaced::WindowOutsideHorizon, _) => Reason::WindowOutsideHorizon,
        (_, true) => Reason::NoStrippingCapacity,
        (Unplaced::NoWorkingDayInWindow, false) => Reason::NoWorkingDayInWindow,
        (Unplaced::NoCrewCapacity, false) => Reason::NoCrewCapacity,
        (Unplaced::NoAnodes, false) => Reason::NoAnodes,
    }
}

/// The day of the horizon that `supply` first fails to cover, given the anodes used each day.
pub(super) fn overdrawn(stock: u64, per_day: &[u64], used: &[u64]) -> Option<usize> {
    let (mut have, mut need) = (u128::from(stock), 0u128);
    for (d, (p, u)) in per_day.iter().zip(used).enumerate() {
        have += u128::from(*p);
        need += u128::from(*u);
        if need > have {
            return Some(d);
        }
    }
    None
}

/// The supply left after `used`, in the form [`levelling::level`](crate::domain::levelling::level) takes: a
/// further use through day j must fit every later day's remainder too, so the
/// cumulative supply left through j is the least remainder from j on.
pub(super) fn remaining_supply(stock: u64, per_day: &[u64], used: &[u64]) -> (u64, Vec<u64>) {
    let (mut have, mut need) = (u128::from(stock), 0u128);
    let mut left: Vec<u128> = per_day
        .iter()
        .zip(used)
        .map(|(p, u)| {
            have += u128::from(*p);
            need += u128::from(*u);
            have.saturating_sub(need)
        })
        .collect();
    for j in (0..left.len().saturating_sub(1)).rev() {
        left[j] = left[j].min(left[j + 1]);
    }
    let clip = |x: u128| u64::try_from(x).unwrap_or(u64::MAX);
    let mut prev = 0u128;
    let per: Vec<u64> = left
        .iter()
        .map(|&x| {
            let d = x - prev;
            prev = x;
            clip(d)
        })
        .collect();
    (0, per)
}

/// The anode changes as levelled and moved, and the days' change capacity.
pub(super) struct Changes {
    pub jobs: Vec<ChangeJob>,
    pub slot: Vec<Slot>,
    pub by_cell: HashMap<(usize, usize), usize>,
    /// Each day's change capacity (0: no anode work).
    pub crew: Vec<u32>,
    /// Why a day has no anode work anywhere.
    pub blocked: Vec<Option<String>>,
    pub day_outages: Vec<Vec<DayOutage>>,
    /// Which limit sets the day's change capacity.
    pub change_bound: Bound,
    pub shifts: u32,
    pub exact: bool,
    pub kept_moves: Vec<KeptMove>,
    pub dropped_moves: Vec<DroppedMove>,
}

/// Levels the anode changes cycle by cycle (see [`super::plan`]), pushing
/// each cell's next cycles onto its outlook as its changes are planned.
pub(super) fn level_changes<C: Curve>(
    input: &PlanInput,
    curves: &HashMap<String, C>,
    outlooks: &mut [Outlook],
) -> Result<Changes, PlanError<C::Error>>
where
    C::Error: std::error::Error + 'static,
{
    let cal = &input.calendar;
    let rules = &input.rules;
    let now = input.now;
    let n = cal.len();
    let cells = &input.cells;
    if let Some(c) = rules.crane
        && c.lifts_per_shift < c.per_anode_change + c.per_harvest
    {
        return Err(PlanError::Rule {
            key: "crane_lifts_per_shift",
            message: format!(
                "{} lifts a shift cannot lift one anode change with the crop it pulls ({} + {} lifts)",
                c.lifts_per_shift, c.per_anode_change, c.per_harvest
            ),
        });
    }
    // Each circuit's outage days, over the plan and the look-ahead after it.
    let span_days = n + LOOKAHEAD_DAYS;
    let work_of = |circuit: &str| rules.outage_work.get(circuit).copied().unwrap_or_default();
    let mut down: HashMap<&str, Vec<usize>> = HashMap::new();
    let mut day_outages: Vec<Vec<DayOutage>> = vec![Vec::new(); span_days];
    for (circuit, s) in &rules.outages {
        for (d, list) in day_outages.iter_mut().enumerate() {
            if s.from < cal.start(d + 1) && s.to > cal.start(d) {
                down.entry(circuit.as_str()).or_default().push(d);
                list.push(DayOutage { circuit: circuit.clone(), from: s.from, to: s.to, anode_work: work_of(circuit) });
            }
        }
    }

    // Days without anode work anywhere: the layout's dates, and days on which
    // every circuit with cells is down with anode work forbidden.
    let horizon = span_days;
    let mut circuits: Vec<&str> = cells.iter().map(|c| c.circuit.as_str()).collect();
    circuits.sort_unstable();
    circuits.dedup();
    let mut blocked: Vec<Option<String>> = vec![None; horizon];
    for (d, b) in blocked.iter_mut().enumerate() {
        if rules.no_anode_work.contains(&cal.date(d as i64)) {
            *b = Some("no anode work (layout no_anode_work)".to_string());
            continue;
        }
        let forbidden: Vec<&DayOutage> = day_outages[d].iter().filter(|o| o.anode_work == OutageWork::Forbidden).collect();
        if !circuits.is_empty() && circuits.iter().all(|c| forbidden.iter().any(|o| o.circuit == *c)) {
            let why: Vec<String> = forbidden
                .iter()
                .map(|o| {
                    // on the plant's clock, as the foreman typed the outage
                    format!("outage on {} from {} to {}", o.circuit, cal.days.zone.show(o.from), cal.days.zone.show(o.to))
                })
                .collect();
            *b = Some(why.join("; "));
        }
    }
    // The running loads' changes (a later cycle is of a cell with one of these).
    let has_change = |ci: usize| outlooks[ci].cycles.first().and_then(|c| c.change.as_ref()).is_some_and(|ch| ch.earliest < n as i64);
    let max_cathodes = (0..cells.len()).filter(|&ci| has_change(ci)).map(|ci| cells[ci].params.cathodes_per_cell).max().unwrap_or(1).max(1);
    let strip_cells = rules.harvest_cathodes_per_day / max_cathodes;
    let shifts = rules.shifts_per_day.max(1);
    let crane_cells = rules.crane.map_or(u32::MAX, |c| shifts.saturating_mul(c.lifts_per_shift / (c.per_anode_change + c.per_harvest)));
    let day_cap = rules.crew_cells_per_day.min(strip_cells).min(crane_cells);
    // which limit sets the day's change capacity (the crew's own first)
    let change_bound = if day_cap == rules.crew_cells_per_day {
        Bound::Crew
    } else if day_cap == strip_cells {
        Bound::Stripping
    } else {
        Bound::Crane
    };
    let crew: Vec<u32> = blocked.iter().map(|b| if b.is_some() { 0 } else { day_cap }).collect();
    let (stock, per_day) = rules.supply(horizon);
    // Cycle by cycle: the running loads first, then each next load in the crew
    // and anodes left. A later cycle rests on the change before it: its load is
    // set on the day that change is planned on (levelled, kept or moved), so
    // each cycle's recorded decisions and hand moves are applied before the
    // next cycle's windows are found.
    let mut jobs: Vec<ChangeJob> = Vec::new();
    let mut groups: BTreeMap<(&str, &str, usize), u32> = BTreeMap::new();
    let mut by_cell: HashMap<(usize, usize), usize> = HashMap::new();
    let mut slot: Vec<Slot> = Vec::new();
    let mut crew_left = crew.clone();
    let (mut stock_left, mut per_day_left) = (stock, per_day.clone());
    let mut exact = true;
    let mut seen: Vec<usize> = Vec::new();
    let (mut kept_moves, mut dropped_moves) = (Vec::new(), Vec::new());
    let mut moves_left: Vec<usize> = (0..input.moves.len()).collect();
    let end = cal.start(n);
    // at most one change a day: a bound on the loop whatever the current
    for k in 0..=horizon {
        let mut these = Vec::new();
        let mut any = false;
        for (ci, o) in outlooks.iter().enumerate() {
            let Some(cy) = o.cycles.get(k) else { continue };
            any = true;
            let Some(ch) = &cy.change else { continue };
            if ch.earliest >= n as i64 {
                continue;
            }
            let c = &cells[ci];
            let group = if rules.whole_sections {
                let next = groups.len() as u32;
                Some(*groups.entry((c.circuit.as_str(), c.section.as_str(), k)).or_insert(next))
            } else {
                None
            };
            let (earliest, latest, mut ideal) = (to_day(ch.earliest), to_day(ch.latest), to_day(ch.ideal));
            let outage_days = down.get(c.circuit.as_str()).cloned().unwrap_or_default();
            let days_off = match work_of(&c.circuit) {
                OutageWork::Forbidden => outage_days,
                OutageWork::Preferred => {
                    // the cells are out of circuit anyway: the window's outage day nearest the ideal becomes the ideal
                    let near =
                        outage_days.iter().copied().filter(|d| (earliest..=latest).contains(d)).min_by_key(|d| (d.abs_diff(ideal), *d));
                    ideal = near.unwrap_or(ideal);
                    Vec::new()
                }
            };
            let i = jobs.len();
            jobs.push(ChangeJob {
                cell: ci,
                cycle: k,
                task: Task {
                    cell: format!("{}#{k:03}", c.cell),
                    earliest,
                    latest,
                    ideal,
                    anodes: c.params.anodes_per_cell,
                    group,
                    days_off,
                },
            });
            by_cell.insert((ci, k), i);
            let prev_placed = k == 0 || by_cell.get(&(ci, k - 1)).is_some_and(|&p| matches!(slot[p], Slot::Day { .. }));
            if prev_placed {
                slot.push(Slot::Out(Reason::NoCrewCapacity));
                these.push(i);
            } else {
                slot.push(Slot::Out(Reason::EarlierChangeUnplaced));
            }
        }
        if !any {
            break;
        }
        if !these.is_empty() {
            let tasks: Vec<Task> = these.iter().map(|&i| jobs[i].task.clone()).collect();
            let cap = Capacity { crew: crew_left.clone(), anode_stock: stock_left, anodes_per_day: per_day_left.clone() };
            let out = levelling::level(&tasks, &cap, rules.weights).map_err(PlanError::Level)?;
            exact &= out.exact;
            for (t, d) in out.day.iter().enumerate() {
                if let Some(d) = *d {
                    slot[these[t]] = Slot::Day { day: d, by: PlacedBy::Levelling };
                }
            }
            for (t, u) in &out.unplaced {
                let task = &tasks[*t];
                // a day the earlier cycles filled is a full day, not a day without anode work
                let worked = (task.earliest..=task.latest.min(horizon - 1)).any(|d| crew[d] > 0 && !task.days_off.contains(&d));
                let u = if *u == Unplaced::NoWorkingDayInWindow && worked { Unplaced::NoCrewCapacity } else { *u };
                slot[these[*t]] = Slot::Out(reason_of(u, false));
            }
        }
        let mv = Moves { input, jobs: &jobs, crew: &crew, stock, per_day: &per_day, by_cell: &by_cell };
        // Recorded decisions first (oldest first): each is for the cell's first change, of the running load.
        if k == 0 {
            for kept in &input.kept {
                let drop = |reason: String| DroppedMove {
                    cell: kept.cell.clone(),
                    date: kept.date,
                    by: kept.by.clone(),
                    entry: kept.entry,
                    reason,
                };
                if input.moves.iter().any(|(c, _)| *c == kept.cell) {
                    dropped_moves.push(drop("overridden by a --move of the same cell in this command".to_string()));
                    continue;
                }
                if (kept.date - cal.from).num_days() >= n as i64 {
                    kept_moves.push(KeptMove { applied: false, ..kept.clone() });
                    continue;
                }
                match mv.apply(&mut slot, &mut seen, &kept.cell, kept.date, true) {
                    Ok(()) => kept_moves.push(KeptMove { applied: true, ..kept.clone() }),
                    Err(reason) => dropped_moves.push(drop(reason)),
                }
            }
        }
        // Then this command's hand moves whose date lies in a window of this cycle.
        let mut still = Vec::with_capacity(moves_left.len());
        for m in moves_left {
            let (cell, date) = &input.moves[m];
            let idx = (*date - cal.from).num_days();
            let here = input.cells.iter().position(|c| c.cell == *cell).and_then(|ci| by_cell.get(&(ci, k))).is_some_and(|&i| {
                let t = &jobs[i].task;
                t.earliest as i64 <= idx && idx <= t.latest.min(n - 1) as i64
            });
            if !here {
                still.push(m);
                continue;
            }
            mv.apply(&mut slot, &mut seen, cell, *date, false).map_err(|message| PlanError::Move {
                cell: cell.clone(),
                date: *date,
                message,
            })?;
        }
        moves_left = still;
        // What this cycle's changes leave for the next ones.
        let mut used = vec![0u64; horizon];
        crew_left.clone_from(&crew);
        for (i, s) in slot.iter().enumerate() {
            if let Slot::Day { day: d, .. } = *s
                && d < horizon
            {
                crew_left[d] = crew_left[d].saturating_sub(1);
                used[d] += u64::from(jobs[i].task.anodes);
            }
        }
        (stock_left, per_day_left) = remaining_supply(stock, &per_day, &used);
        // The next loads, set when this cycle's changes are planned (one not
        // placed is assumed on its ideal day, so the changes after it are listed as resting on it).
        for ci in 0..cells.len() {
            let Some(ch) = outlooks[ci].cycles.get(k).and_then(|cy| cy.change.as_ref()) else { continue };
            let at = match by_cell.get(&(ci, k)).map(|&i| slot[i]) {
                Some(Slot::Day { day: d, .. }) if d < n => cal.instant(d, ch.target_at, now),
                Some(Slot::Day { .. }) => continue,
                Some(Slot::Out(_)) | None => ch.assumed_at,
            };
            if at >= end {
                continue;
            }
            let Some(curve) = curves.get(&cells[ci].circuit) else { continue };
            let next = next_cycle(curve, &cells[ci], at, cal, now).map_err(PlanError::Curve)?;
            outlooks[ci].cycles.push(next);
        }
    }
    // A hand move that fits no window: the reason, as the move check gives it.
    for m in moves_left {
        let (cell, date) = &input.moves[m];
        let mv = Moves { input, jobs: &jobs, crew: &crew, stock, per_day: &per_day, by_cell: &by_cell };
        mv.apply(&mut slot, &mut seen, cell, *date, false).map_err(|message| PlanError::Move {
            cell: cell.clone(),
            date: *date,
            message,
        })?;
    }
    let shifts = rules.shifts_per_day.max(1);
    Ok(Changes { jobs, slot, by_cell, crew, blocked, day_outages, change_bound, shifts, exact, kept_moves, dropped_moves })
}

/// What a hand move (or a recorded one) is checked against.
struct Moves<'a> {
    input: &'a PlanInput,
    jobs: &'a [ChangeJob],
    crew: &'a [u32],
    stock: u64,
    per_day: &'a [u64],
    by_cell: &'a HashMap<(usize, usize), usize>,
}

impl Moves<'_> {
    /// Moves `cell`'s change onto `date` in the levelled plan, checked
    /// against the cell's window, its circuit's outages, the day's crew and
    /// the anode supply; returns why it cannot be made otherwise (and changes
    /// nothing then). `first_only`: the move is for the cell's first change
    /// in the plan (a recorded decision); otherwise for whichever of its
    /// changes has the date in its window.
    fn apply(&self, slot: &mut [Slot], seen: &mut Vec<usize>, cell: &str, date: NaiveDate, first_only: bool) -> Result<(), String> {
        let (input, jobs, crew) = (self.input, self.jobs, self.crew);
        let cal = &input.calendar;
        let n = cal.len();
        let Some(ci) = input.cells.iter().position(|c| c.cell == cell) else {
            return Err(format!("unknown cell {cell}"));
        };
        let idx = (date - cal.from).num_days();
        if idx < 0 || idx >= n as i64 {
            return Err(format!("the date is outside the plan ({} to {})", cal.from, cal.date(n as i64 - 1)));
        }
        let d = idx as usize;
        let mine: Vec<usize> = (0..).map_while(|k| self.by_cell.get(&(ci, k)).copied()).collect();
        let Some(&first) = mine.first() else {
            return Err(if input.cells[ci].params.anode_kind == AnodeKind::Inert {
                "it has inert anodes, which are not changed".to_string()
            } else {
                "it has no anode change whose window starts inside the plan".to_string()
            });
        };
        let clipped = |i: usize| (jobs[i].task.earliest, jobs[i].task.latest.min(n - 1));
        let inside = |i: usize| {
            let (a, z) = clipped(i);
            a <= d && d <= z
        };
        let found = if first_only { inside(first).then_some(first) } else { mine.iter().copied().find(|&i| inside(i)) };
        let Some(i) = found else {
            let (a, z) = clipped(first);
            return Err(format!(
                "outside the cell's window ({} to {}, scrap_upper to scrap_lower)",
                cal.date(a as i64),
                cal.date(z as i64)
            ));
        };
        if seen.contains(&i) {
            return Err("the cell's change is moved twice".to_string());
        }
        if slot[i] == Slot::Out(Reason::EarlierChangeUnplaced) {
            return Err("the cell's change before this one is not placed, and this window assumes it".to_string());
        }
        if crew[d] == 0 {
            return Err("there is no anode work that day".to_string());
        }
        if jobs[i].task.days_off.contains(&d) {
            return Err(format!("circuit {} is down for an outage that day, and anode work is forbidden then", input.cells[ci].circuit));
        }
        let on_day = (0..jobs.len()).filter(|&k| k != i && matches!(slot[k], Slot::Day { day: x, .. } if x == d)).count();
        if on_day as u32 >= crew[d] {
            return Err(format!("over capacity: the crew is full that day ({on_day} of {} cells); move another cell away first", crew[d]));
        }
        let before = slot[i];
        slot[i] = Slot::Day { day: d, by: PlacedBy::Move };
        let mut used = vec![0u64; self.per_day.len()];
        for (k, s) in slot.iter().enumerate() {
            if let Slot::Day { day: x, .. } = s
                && let Some(u) = used.get_mut(*x)
            {
                *u += u64::from(jobs[k].task.anodes);
            }
        }
        if let Some(short) = overdrawn(self.stock, self.per_day, &used) {
            slot[i] = before;
            return Err(format!("not enough new anodes: the supply runs short on {}", cal.date(short as i64)));
        }
        seen.push(i);
        Ok(())
    }
}
