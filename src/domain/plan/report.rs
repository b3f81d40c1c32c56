//! What a plan says: its days, jobs, unplaced jobs and warnings (the JSON
//! contract), and the plan assembled from the levelled changes and harvests with each job's prediction.

use chrono::NaiveDate;
use serde::Serialize;
use std::collections::HashMap;

use crate::domain::charge::{Curve, Time, cell_charge};
use crate::domain::layout::OutageWork;
use crate::domain::smoothing;

use super::calendar::{BEYOND_HORIZON_DAYS, Crane};
use super::changes::{Changes, PlacedBy, Slot};
use super::harvests::{Harvests, PlannedCrop};
use super::outlook::Outlook;
use super::{ADVISORY, DroppedMove, KeptMove, PlanError, PlanInput};
use crate::domain::plan_diff::PlanDiff;

/// Why a job is not in the plan.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Reason {
    /// A section's common window starts after the horizon.
    WindowOutsideHorizon,
    /// No day of the window has anode work (the window is too narrow for the working days).
    NoWorkingDayInWindow,
    /// The crew is full on every day of the window.
    NoCrewCapacity,
    /// The stripping machine is full on every day the harvest may move to.
    NoStrippingCapacity,
    /// The anode supply does not cover the change.
    NoAnodes,
    /// The change before it in the same cell is not placed, and this one depends on it.
    EarlierChangeUnplaced,
    /// Levelled to a day after the plan's last day (a later plan places it).
    AfterHorizon,
}

/// Dates of a job's window as planned (`latest: None`: the window does not close in sight).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Window {
    pub earliest: NaiveDate,
    pub ideal: NaiveDate,
    pub latest: Option<NaiveDate>,
}

/// A planned anode change.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AnodeChange {
    pub cell: String,
    pub circuit: String,
    pub section: String,
    /// Predicted remaining anode fraction (the scrap fraction) when changed.
    pub scrap_fraction: f64,
    /// Predicted scrap returned by the cell, kg.
    pub scrap_kg: f64,
    pub overdue: bool,
    /// The instant the prediction is made for.
    pub at: Time,
    /// New anodes the change needs.
    pub anodes: u32,
    pub window: Window,
    pub upper_at: Option<Time>,
    pub target_at: Time,
    pub lower_at: Option<Time>,
    /// 0 for the running load, 1 for the next one (set on the day this one is planned on), …
    pub cycle: usize,
    /// Placed by a hand move.
    pub moved: bool,
}

/// A planned harvest.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Harvest {
    pub cell: String,
    pub circuit: String,
    pub section: String,
    /// Predicted mean mass per cathode, kg.
    pub mass_kg: f64,
    /// Predicted copper on the whole crop, kg.
    pub copper_kg: f64,
    pub cathodes: u32,
    pub overdue: bool,
    pub at: Time,
    pub window: Window,
    /// The crop the anode change pulls (fixed to the change's day).
    pub with_anode_change: bool,
    /// Pulled with the anodes below `light_crop_fraction` of the target mass (see `warnings`).
    pub light: bool,
}

/// What a planned job is (its JSON name: `anode_change`, `harvest`); anode changes sort first.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum JobKind {
    AnodeChange,
    Harvest,
}

impl JobKind {
    /// The name in JSON, CSV and the approved plan's records.
    pub fn name(self) -> &'static str {
        match self {
            JobKind::AnodeChange => "anode_change",
            JobKind::Harvest => "harvest",
        }
    }

    /// The kind of a name [`JobKind::name`] gives.
    pub fn from_name(name: &str) -> Option<JobKind> {
        [JobKind::AnodeChange, JobKind::Harvest].into_iter().find(|k| k.name() == name)
    }
}

/// What a plan warning is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum WarningKind {
    /// The crop pulled with the anodes is below `light_crop_fraction` of its target mass.
    LightLastCrop,
}

/// A job the plan could not place.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnplacedJob {
    pub cell: String,
    pub circuit: String,
    pub section: String,
    pub kind: JobKind,
    pub reason: Reason,
    pub message: String,
    pub window: Window,
    pub overdue: bool,
}

/// A shift's share of the day's anode changes and harvests.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct ShiftLoad {
    /// Anode changes.
    pub load: u32,
    /// The shift's share of the day's crew capacity.
    pub capacity: u32,
    pub harvests: u32,
    /// Crane lifts of its changes (with the crops they pull) and harvests; `None` without a crane budget.
    pub crane_lifts: Option<u32>,
}

/// What held a day's work back: a job wanted the day and this was full.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Bound {
    Crew,
    Stripping,
    Anodes,
    Crane,
}

/// An outage overlapping a production day.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct DayOutage {
    pub circuit: String,
    pub from: Time,
    pub to: Time,
    /// Anode work in the circuit's cells that day.
    pub anode_work: OutageWork,
}

/// Something the foreman should look at before following the plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlanWarning {
    pub kind: WarningKind,
    pub cell: String,
    pub date: NaiveDate,
    pub message: String,
}

/// One production day of the plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlanDay {
    pub date: NaiveDate,
    pub starts_at: Time,
    /// Why there is no anode work this day anywhere (`None`: there is, at least in some circuits).
    pub no_anode_work: Option<String>,
    /// Outages overlapping the day: anode work in that circuit is forbidden or preferred.
    pub outages: Vec<DayOutage>,
    pub anode_changes: Vec<AnodeChange>,
    pub harvests: Vec<Harvest>,
    pub anodes_needed: u64,
    pub anode_tonnes: f64,
    pub scrap_tonnes: f64,
    pub copper_tonnes: f64,
    pub crew_load: u32,
    pub crew_capacity: u32,
    /// The day's changes by shift, filled in shift order (empty with one shift a day).
    pub shifts: Vec<ShiftLoad>,
    pub harvest_cathodes: u64,
    pub harvest_capacity: u32,
    /// New anodes left after the day's changes (`None`: the supply is not limited).
    pub anode_stock: Option<u64>,
    /// New anodes to deliver that day, levelled under `anodes_per_day` (`None`: not limited).
    pub anodes_delivered: Option<u64>,
    /// Crane lifts of the day's jobs, and the day's budget (`None`: no crane budget).
    pub crane_lifts: Option<u32>,
    pub crane_capacity: Option<u32>,
    /// The constraint that kept a job off this day (`None`: none did).
    pub bound_by: Option<Bound>,
}

/// The plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Plan {
    pub schema: u32,
    pub from: NaiveDate,
    pub as_of: Time,
    pub days: Vec<PlanDay>,
    pub unplaced: Vec<UnplacedJob>,
    /// Cells in a cut-out with no end: nothing is planned for them.
    pub out_of_circuit: Vec<String>,
    /// The anode changes, before hand moves, are proven optimal (see [`levelling::Levelled::exact`](crate::domain::levelling::Levelled::exact)).
    pub exact: bool,
    /// The harvests are proven optimal (see [`plan`](super::plan)).
    pub harvests_exact: bool,
    /// Harvests the smoothing moved to another day of their window.
    pub harvests_smoothed: usize,
    pub shifts_per_day: u32,
    /// Recorded moves this plan applies (or whose date lies after it).
    pub kept_moves: Vec<KeptMove>,
    /// Recorded moves this plan could not apply, with the reason.
    pub dropped_moves: Vec<DroppedMove>,
    pub warnings: Vec<PlanWarning>,
    /// What changed since the last approved plan (`None`: no plan approved yet).
    pub since_approved: Option<PlanDiff>,
    pub advisory: &'static str,
}

/// A day's crew capacity split over the shifts (the first shifts take the
/// remainder) and its changes filled in shift order; `with_crop[k]` says
/// whether the k-th change pulls a crop (its lifts count then too). With a
/// crane budget the day's capacity is at most the shifts times the changes
/// one shift can lift, so no shift's share is more than that.
pub(super) fn fill_changes(with_crop: &[bool], capacity: u32, shifts: u32, crane: Option<Crane>) -> Vec<ShiftLoad> {
    let shifts = shifts.max(1);
    let mut rest = with_crop.iter();
    (0..shifts)
        .map(|s| {
            let cap = capacity / shifts + u32::from(s < capacity % shifts);
            let mine: Vec<bool> = rest.by_ref().take(cap as usize).copied().collect();
            let lifts = crane.map(|c| mine.iter().map(|&crop| c.per_anode_change + if crop { c.per_harvest } else { 0 }).sum());
            ShiftLoad { load: mine.len() as u32, capacity: cap, harvests: 0, crane_lifts: lifts }
        })
        .collect()
}

/// Harvests the crane can still take over the day's shifts.
pub(super) fn harvest_room(shifts: &[ShiftLoad], crane: Option<Crane>) -> u32 {
    match crane {
        None => u32::MAX,
        Some(c) => shifts.iter().map(|s| c.lifts_per_shift.saturating_sub(s.crane_lifts.unwrap_or(0)) / c.per_harvest).sum(),
    }
}

/// Puts `k` harvests into the shifts, each into the first shift with the
/// lifts left for it; without a crane budget, evenly (the first shifts take the remainder).
pub(super) fn fill_harvests(shifts: &mut [ShiftLoad], k: u32, crane: Option<Crane>) {
    if crane.is_none() {
        let n = shifts.len() as u32;
        for (i, s) in shifts.iter_mut().enumerate() {
            s.harvests = k / n.max(1) + u32::from((i as u32) < k % n.max(1));
        }
        return;
    }
    for _ in 0..k {
        let fits = |s: &ShiftLoad| crane.is_none_or(|c| s.crane_lifts.unwrap_or(0) + c.per_harvest <= c.lifts_per_shift);
        if let Some(s) = shifts.iter_mut().find(|s| fits(s)) {
            s.harvests += 1;
            if let (Some(c), Some(l)) = (crane, s.crane_lifts.as_mut()) {
                *l += c.per_harvest;
            }
        }
    }
}

/// The plan from the levelled changes and harvests: each job's prediction on
/// its day, the days' totals, what held each day back, the warnings and the stock line.
pub(super) fn assemble<C: Curve>(
    input: &PlanInput,
    curves: &HashMap<String, C>,
    outlooks: &[Outlook],
    changes: Changes,
    harvests: Harvests,
) -> Result<Plan, PlanError<C::Error>>
where
    C::Error: std::error::Error + 'static,
{
    let cal = &input.calendar;
    let rules = &input.rules;
    let now = input.now;
    let n = cal.len();
    let cells = &input.cells;
    let Changes { jobs, slot, crew, blocked, day_outages, change_bound, shifts, exact, kept_moves, dropped_moves, .. } = changes;
    let Harvests {
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
        ..
    } = harvests;
    // What held each day back.
    let supply_limited = rules.anode_stock.is_some() || rules.anodes_per_day.is_some();
    let change_load: Vec<u32> = with_crop.iter().map(|l| l.len() as u32).collect();
    let bound_by: Vec<Option<Bound>> = (0..n)
        .map(|d| {
            if wanted_change[d] && crew[d] > 0 {
                return Some(if change_load[d] >= crew[d] {
                    change_bound
                } else if supply_limited {
                    Bound::Anodes
                } else {
                    // a whole section did not fit in the crew left
                    Bound::Crew
                });
            }
            match wanted_harvest[d] {
                Some(c) if used[d] + c > strip => Some(Bound::Stripping),
                Some(_) if harvests_on[d] >= crane_harvests[d] => Some(Bound::Crane),
                _ => None,
            }
        })
        .collect();

    // Predictions, day by day.
    let mut days: Vec<PlanDay> = (0..n)
        .map(|d| PlanDay {
            date: cal.date(d as i64),
            starts_at: cal.start(d),
            no_anode_work: blocked[d].clone(),
            outages: day_outages[d].clone(),
            anode_changes: Vec::new(),
            harvests: Vec::new(),
            anodes_needed: 0,
            anode_tonnes: 0.0,
            scrap_tonnes: 0.0,
            copper_tonnes: 0.0,
            crew_load: 0,
            crew_capacity: crew[d],
            shifts: Vec::new(),
            harvest_cathodes: 0,
            harvest_capacity: rules.harvest_cathodes_per_day,
            anode_stock: None,
            anodes_delivered: None,
            crane_lifts: rules.crane.map(|_| day_shifts[d].iter().filter_map(|s| s.crane_lifts).sum()),
            crane_capacity: rules.crane.map(|c| c.lifts_per_shift.saturating_mul(shifts)),
            bound_by: bound_by[d],
        })
        .collect();
    let mut out_jobs = Vec::new();
    let window = |earliest: i64, ideal: i64, latest: i64, far: bool| Window {
        earliest: cal.date(earliest),
        ideal: cal.date(ideal),
        latest: (!far).then(|| cal.date(latest)),
    };
    let far = n as i64 + BEYOND_HORIZON_DAYS;
    for (i, j) in jobs.iter().enumerate() {
        let c = &cells[j.cell];
        let cy = &outlooks[j.cell].cycles[j.cycle];
        let Some(ch) = &cy.change else { continue };
        let w = window(ch.earliest, ch.ideal, ch.latest, ch.latest >= far);
        let after = |d: usize| {
            format!("levelled to {}, after the plan's last day {}: a later plan places it", cal.date(d as i64), cal.date(n as i64 - 1))
        };
        match slot[i] {
            Slot::Day { day: d, .. } if d >= n => out_jobs.push(UnplacedJob {
                cell: c.cell.clone(),
                circuit: c.circuit.clone(),
                section: c.section.clone(),
                kind: JobKind::AnodeChange,
                reason: Reason::AfterHorizon,
                message: after(d),
                window: w,
                overdue: ch.overdue,
            }),
            Slot::Day { day: d, by } => {
                let curve = curves.get(&c.circuit);
                let (Some(curve), Some(load)) = (curve, cy.load) else { continue };
                let at = cal.instant(d, ch.target_at, now);
                let q = cell_charge(curve, &c.cutouts, cy.set_at, at).map_err(PlanError::Curve)?.total();
                let scrap_kg = load.remaining_kg(q) * f64::from(load.count);
                let day = &mut days[d];
                let anodes = c.params.anodes_per_cell;
                day.anodes_needed += u64::from(anodes);
                day.anode_tonnes += f64::from(anodes) * c.params.new_anode_kg / 1000.0;
                day.scrap_tonnes += scrap_kg / 1000.0;
                day.crew_load += 1;
                day.anode_changes.push(AnodeChange {
                    cell: c.cell.clone(),
                    circuit: c.circuit.clone(),
                    section: c.section.clone(),
                    scrap_fraction: load.remaining_fraction(q),
                    scrap_kg,
                    overdue: ch.overdue,
                    at,
                    anodes,
                    window: w,
                    upper_at: ch.upper_at,
                    target_at: ch.target_at,
                    lower_at: ch.lower_at,
                    cycle: j.cycle,
                    moved: by == PlacedBy::Move,
                });
            }
            Slot::Out(reason) => out_jobs.push(UnplacedJob {
                cell: c.cell.clone(),
                circuit: c.circuit.clone(),
                section: c.section.clone(),
                kind: JobKind::AnodeChange,
                reason,
                message: change_message(reason, &w),
                window: w,
                overdue: ch.overdue,
            }),
        }
    }
    let mut planned: Vec<PlannedCrop> = fixed;
    for (i, (crop, _)) in floating.into_iter().enumerate() {
        match hslot[i] {
            Slot::Day { day, .. } => planned.push(PlannedCrop { day, ..crop }),
            Slot::Out(reason) => {
                let c = &cells[crop.cell];
                out_jobs.push(UnplacedJob {
                    cell: c.cell.clone(),
                    circuit: c.circuit.clone(),
                    section: c.section.clone(),
                    kind: JobKind::Harvest,
                    reason,
                    message: harvest_message(reason, &crop.window),
                    window: crop.window,
                    overdue: crop.overdue,
                });
            }
        }
    }
    for p in planned {
        let c = &cells[p.cell];
        let Some(curve) = curves.get(&c.circuit) else { continue };
        let at = cal.instant(p.day, p.due, now);
        let q = cell_charge(curve, &c.cutouts, p.from, at).map_err(PlanError::Curve)?.total();
        let cathodes = c.cathodes();
        let copper_kg = cathodes.crop_kg(q);
        let day = &mut days[p.day];
        day.copper_tonnes += copper_kg / 1000.0;
        day.harvest_cathodes += u64::from(cathodes.count);
        day.harvests.push(Harvest {
            cell: c.cell.clone(),
            circuit: c.circuit.clone(),
            section: c.section.clone(),
            mass_kg: cathodes.mean_kg(q),
            copper_kg,
            cathodes: cathodes.count,
            overdue: p.overdue,
            at,
            window: p.window,
            with_anode_change: p.with_change,
            light: false,
        });
    }
    // Light last crops: warned, not re-spread (crops_per_anode_cycle spreads a cycle's crops evenly).
    let mut warnings = Vec::new();
    let cell_of: HashMap<&str, usize> = cells.iter().enumerate().map(|(i, c)| (c.cell.as_str(), i)).collect();
    for day in &mut days {
        for h in day.harvests.iter_mut().filter(|h| h.with_anode_change) {
            let Some(c) = cell_of.get(h.cell.as_str()).map(|&i| &cells[i]) else { continue };
            let target = c.params.cathode_target_kg;
            if c.params.crops_per_anode_cycle.is_none() && h.mass_kg < rules.light_crop_fraction * target {
                h.light = true;
                warnings.push(PlanWarning {
                    kind: WarningKind::LightLastCrop,
                    cell: h.cell.clone(),
                    date: day.date,
                    message: format!(
                        "the crop pulled with the anodes is light: {:.1} kg a cathode against the {target:.1} kg target \
                         (below {:.0} %); set crops_per_anode_cycle to split the anode life into equal crops",
                        h.mass_kg,
                        rules.light_crop_fraction * 100.0
                    ),
                });
            }
        }
    }
    // The stock line: deliveries levelled under the daily preparation limit.
    if rules.anode_stock.is_some() || rules.anodes_per_day.is_some() {
        let (s0, per) = (rules.anode_stock.unwrap_or(0), rules.anodes_per_day.unwrap_or(0));
        let use_per_day: Vec<u64> = days.iter().map(|d| d.anodes_needed).collect();
        let delivered = smoothing::deliveries(s0, per, &use_per_day);
        let mut left = u128::from(s0);
        for (day, x) in days.iter_mut().zip(delivered) {
            left = (left + u128::from(x)).saturating_sub(u128::from(day.anodes_needed));
            day.anodes_delivered = Some(x);
            day.anode_stock = Some(u64::try_from(left).unwrap_or(u64::MAX));
        }
    }
    for day in &mut days {
        day.anode_changes.sort_by(|a, b| a.cell.cmp(&b.cell).then(a.cycle.cmp(&b.cycle)));
        day.harvests.sort_by(|a, b| a.cell.cmp(&b.cell).then(a.at.cmp(&b.at)));
    }
    for (day, sh) in days.iter_mut().zip(day_shifts) {
        day.shifts = if shifts > 1 { sh } else { Vec::new() };
    }
    out_jobs.sort_by(|a, b| a.kind.cmp(&b.kind).then(a.cell.cmp(&b.cell)).then(a.window.ideal.cmp(&b.window.ideal)));
    let out_of_circuit = cells.iter().zip(outlooks).filter(|(_, o)| o.out_of_circuit).map(|(c, _)| c.cell.clone()).collect();
    Ok(Plan {
        schema: 1,
        from: cal.from,
        as_of: now,
        days,
        unplaced: out_jobs,
        out_of_circuit,
        exact,
        harvests_exact,
        harvests_smoothed,
        shifts_per_day: rules.shifts_per_day,
        kept_moves,
        dropped_moves,
        warnings,
        since_approved: None,
        advisory: ADVISORY,
    })
}

fn span(w: &Window) -> String {
    match w.latest {
        Some(l) => format!("{} to {}", w.earliest, l),
        None => format!("from {}", w.earliest),
    }
}

fn change_message(r: Reason, w: &Window) -> String {
    match r {
        Reason::WindowOutsideHorizon => format!("its section's common window ({}) starts after the plan ends", span(w)),
        Reason::NoWorkingDayInWindow => format!("no day with anode work in its window ({}): the window is too narrow", span(w)),
        Reason::NoCrewCapacity | Reason::NoStrippingCapacity => format!("the crew is full on every day of its window ({})", span(w)),
        Reason::NoAnodes => format!("not enough new anodes on any day of its window ({})", span(w)),
        Reason::EarlierChangeUnplaced => "the cell's change before it is not placed, and this window assumes it".to_string(),
        Reason::AfterHorizon => format!("its best day lies after the plan (window {})", span(w)),
    }
}

fn harvest_message(r: Reason, w: &Window) -> String {
    match r {
        Reason::WindowOutsideHorizon => format!("its window ({}) lies outside the plan", span(w)),
        _ => format!("the stripping machine is full on every day the harvest may move to ({})", span(w)),
    }
}
