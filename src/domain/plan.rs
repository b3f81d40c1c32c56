//! The anode-change and harvest plan: each cell's change windows and crop dues
//! from its charge curve, levelled over production days against crew, stripping machine and anodes.
//!
//! How a plan is made, in three steps:
//!
//! 1. **Outlook** ([`outlook`]): for each cell, from its running anode load, the
//!    times its remaining anode fraction reaches `scrap_upper` (the window
//!    opens), `scrap_target` (the ideal change) and `scrap_lower` (the window
//!    closes), found with [`cell_time_reaching`] on the circuit's curve (the
//!    projection after the last reading is the estimate). Between changes come
//!    the cathode crops, each due when [`crop_target`] says, the rule the
//!    forecast's `harvest_due` uses too (one timeline): at its target mass
//!    (`cathode_target_kg` mean per cathode), or, where `crops_per_anode_cycle`
//!    = k is set, at k equal parts of the anode life's charge (set → ideal
//!    change); a crop due at or after the change goes with the anodes. Each
//!    crop is assumed pulled at its due time (one due before the plan starts,
//!    at the start of the plan) and the next starts then. Inert-anode cells
//!    have no anode changes, only crops at their target mass. A crop is
//!    overdue when its due time has passed; work due before the plan starts is
//!    planned from the first day.
//! 2. **Levelling** ([`plan`]), cycle by cycle: the running loads' changes go
//!    through [`levelling::level`] (crew per day, days without anode work, each
//!    circuit's own outage days, anode supply, crane lifts, whole sections as
//!    groups), then the kept moves (recorded decisions) and the hand moves are
//!    applied to the levelled plan one by one and each is re-checked. Each next
//!    load is then assumed set on the day its change before it is planned on
//!    (at the instant of that day nearest the change's ideal time), with
//!    `anodes_per_cell` new anodes of `new_anode_kg` each; its window and crops
//!    follow from that, and it is levelled in the capacity left. Harvests
//!    are levelled next against the stripping machine and the crane lifts
//!    left, with the last crop of each cycle fixed to its anode-change day,
//!    then smoothed inside their windows ([`smoothing::smooth`]). Anode
//!    deliveries are levelled under the daily preparation limit
//!    ([`smoothing::deliveries`]), giving each day's stock line.
//! 3. **Prediction**: every planned job is given the instant of its day nearest
//!    its due time (never before now), and the anode fraction, scrap and
//!    cathode mass are predicted there on the same curve.

use chrono::{Duration, NaiveDate};
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};

use super::anode::AnodeLoad;
use super::charge::{Curve, OpenSpan, Span, Time, cell_charge, cell_time_reaching};
use super::forecast::{CellInput, CropDue, crop_target};
use super::layout::{AnodeKind, OutageWork};
use super::levelling::{self, Capacity, LevelError, Task, Unplaced, Weights};
use super::plan_diff::PlanDiff;
use super::plant_time::ProductionDays;
use super::smoothing::{self, DayLimits, Placed};

/// The caution every plan carries (DOMAIN.md, "Cautions the tool must carry").
pub const ADVISORY: &str = "This plan is advisory: it is predicted from the logged current and the layout's rules and does not \
replace the foreman's judgement. Anode lifts, lock-out and acid handling follow site procedures, local codes and qualified engineers.";

/// Harvest lateness costs twice a day early: an over-heavy crop grows nodules
/// and shorts (common practice, no source).
pub const HARVEST_WEIGHTS: Weights = Weights { early: 1.0, late: 2.0 };

/// Days a harvest may move from its due day, either way.
pub const HARVEST_SLACK_DAYS: i64 = 1;

/// Days beyond the horizon that a window's far end is clipped to. Only days
/// inside the horizon can be chosen, and a common shift of the ideal day
/// beyond the horizon changes every in-horizon cost of that task by the same
/// amount, so the clip never changes which plan is best.
const BEYOND_HORIZON_DAYS: i64 = 366;

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
    /// Level the harvests' daily cathodes after the cap-only levelling (see [`plan`]).
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
    /// The anode supply as [`levelling::level`] takes it. Both unset: no limit.
    /// Either set: the supply is limited, and the unset part counts as none
    /// (no stock on hand, or no deliveries).
    fn supply(&self, days: usize) -> (u64, Vec<u64>) {
        match (self.anode_stock, self.anodes_per_day) {
            (None, None) => (u64::MAX, vec![0; days]),
            (s, p) => (s.unwrap_or(0), vec![p.unwrap_or(0); days]),
        }
    }
}

/// Everything a plan is made from.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanInput {
    pub now: Time,
    pub calendar: Calendar,
    pub rules: Rules,
    /// Every cell as of now: the forecast's snapshot (its learnt cathode
    /// efficiency and anode factor set the windows, the crops and the scrap tonnes).
    pub cells: Vec<CellInput>,
    /// Hand moves of a cell's anode change to another day, applied in order.
    pub moves: Vec<(String, NaiveDate)>,
    /// Recorded decisions, oldest first: each moves the cell's first change
    /// in the plan while that is feasible, and is dropped with the reason otherwise.
    pub kept: Vec<KeptMove>,
}

/// A hand move recorded in the event log (`plan --move CELL=DATE --keep`).
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct KeptMove {
    pub cell: String,
    pub date: NaiveDate,
    /// Initials of who kept it.
    pub by: String,
    /// The event log entry that records it (`undo` takes it back).
    pub entry: i64,
    /// `false`: its date lies after the plan's last day, so this plan does not show it.
    pub applied: bool,
}

/// A recorded decision that the plan could not apply.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct DroppedMove {
    pub cell: String,
    pub date: NaiveDate,
    pub by: String,
    pub entry: i64,
    pub reason: String,
}

/// When a change is due, on the days of the plan.
#[derive(Debug, Clone, PartialEq)]
pub struct ChangeDue {
    /// The remaining fraction reaches `scrap_upper` (the window opens).
    pub upper_at: Option<Time>,
    /// It reaches `scrap_target` (the ideal change).
    pub target_at: Time,
    /// It reaches `scrap_lower` (the window closes); `None`: not in sight.
    pub lower_at: Option<Time>,
    /// Day indices of the window as planned: an overdue change opens on day 0
    /// and prefers it; `latest` is clipped [`BEYOND_HORIZON_DAYS`] past the horizon.
    pub earliest: i64,
    pub ideal: i64,
    pub latest: i64,
    /// The ideal time had already passed when the plan begins.
    pub overdue: bool,
    /// Where the change is assumed done before it is levelled: the ideal
    /// time, or the start of the plan when overdue ([`outlook`], and the
    /// cycles after a change the plan could not place).
    pub assumed_at: Time,
}

/// A crop due for harvest before the anode change that ends its cycle.
#[derive(Debug, Clone, PartialEq)]
pub struct HarvestDue {
    pub crop_from: Time,
    /// The forecast's `harvest_due` for the crop (the same crossing).
    pub due_at: Time,
    /// Day index of the due time (0 when due before the plan starts).
    pub day: i64,
    /// The due time has passed (as the forecast says).
    pub overdue: bool,
    /// Due before the plan starts (overdue, or the plan starts on a later day): planned from the first day.
    pub before_start: bool,
    /// Where the crop is assumed pulled (the next one starts then).
    pub assumed_at: Time,
}

/// One anode load of a cell in the plan's view (inert cells have one, with no load).
#[derive(Debug, Clone, PartialEq)]
pub struct Cycle {
    pub set_at: Time,
    pub load: Option<AnodeLoad>,
    pub change: Option<ChangeDue>,
    pub harvests: Vec<HarvestDue>,
    /// When the crop that the anode change pulls began (`None`: no crop).
    pub last_crop_from: Option<Time>,
}

/// A cell's cycles over the horizon.
#[derive(Debug, Clone, PartialEq)]
pub struct Outlook {
    pub cycles: Vec<Cycle>,
    /// The cell is in a cut-out with no end: nothing can be predicted for it.
    pub out_of_circuit: bool,
}

/// Time at which the cell's charge since `from` reaches the charge that takes
/// `load` down to `fraction`; `None` if never (or not in sight).
fn reaching<C: Curve>(curve: &C, cutouts: &[OpenSpan], from: Time, load: &AnodeLoad, fraction: f64) -> Result<Option<Time>, C::Error> {
    match load.charge_to_fraction_ah(fraction) {
        Some(q) => cell_time_reaching(curve, cutouts, from, q),
        None => Ok(None),
    }
}

fn change_due<C: Curve>(
    curve: &C,
    cell: &CellInput,
    set_at: Time,
    load: &AnodeLoad,
    cal: &Calendar,
    now: Time,
) -> Result<Option<ChangeDue>, C::Error> {
    let p = &cell.params;
    let Some(target_at) = reaching(curve, &cell.cutouts, set_at, load, p.scrap_target)? else {
        return Ok(None);
    };
    let upper_at = reaching(curve, &cell.cutouts, set_at, load, p.scrap_upper)?;
    let lower_at = reaching(curve, &cell.cutouts, set_at, load, p.scrap_lower)?;
    let start = cal.start(0).max(now);
    let overdue = target_at < start;
    let far = cal.len() as i64 + BEYOND_HORIZON_DAYS;
    let (earliest, ideal) = if overdue { (0, 0) } else { (cal.index(upper_at.unwrap_or(target_at)).max(0), cal.index(target_at).min(far)) };
    let latest = lower_at.map_or(far, |t| cal.index(t)).clamp(ideal, far);
    Ok(Some(ChangeDue {
        upper_at,
        target_at,
        lower_at,
        earliest: earliest.min(ideal),
        ideal,
        latest,
        overdue,
        assumed_at: if overdue { start } else { target_at },
    }))
}

/// The crops due from `crop_from` until the cycle's change (a crop due at or
/// after the change's ideal time goes with it) or the end of the horizon, each
/// at the time [`crop_target`] gives the forecast too; returns them and when the
/// crop that the change pulls begins.
#[allow(clippy::too_many_arguments)]
fn crops<C: Curve>(
    curve: &C,
    cell: &CellInput,
    crop_from: Time,
    set_at: Time,
    load: Option<&AnodeLoad>,
    change: Option<&ChangeDue>,
    cal: &Calendar,
    now: Time,
) -> Result<(Vec<HarvestDue>, Time), C::Error> {
    let n = cal.len() as i64;
    let start = cal.start(0).max(now);
    let mut out = Vec::new();
    let mut from = crop_from;
    // the charge from the set to `from`, known when the crop before was pulled on its part of the life
    let mut since_set = None;
    // at most one crop a day: a bound on the loop whatever the current
    for _ in 0..=cal.len() {
        let target = crop_target(curve, cell, load.map(|l| (set_at, l)), from, since_set)?;
        if matches!(target.due, CropDue::LifePart { i, k, .. } if i >= k) {
            break; // the last part of the life is the anode change's own crop
        }
        let Some(due_at) = cell_time_reaching(curve, &cell.cutouts, target.from, target.due.ah())? else { break };
        if change.is_some_and(|c| due_at >= c.target_at) || cal.index(due_at) >= n {
            break;
        }
        let before_start = due_at < start;
        let assumed_at = if before_start { start } else { due_at };
        out.push(HarvestDue { crop_from: from, due_at, day: cal.index(due_at).max(0), overdue: due_at <= now, before_start, assumed_at });
        since_set = match target.due {
            CropDue::LifePart { ah, .. } if !before_start => Some(ah),
            _ => None,
        };
        from = assumed_at;
    }
    Ok((out, from))
}

/// One anode load's cycle from `set_at`: its change window and the crops before it.
fn cycle<C: Curve>(
    curve: &C,
    cell: &CellInput,
    set_at: Time,
    load: AnodeLoad,
    crop: Option<Time>,
    cal: &Calendar,
    now: Time,
) -> Result<Cycle, C::Error> {
    let change = change_due(curve, cell, set_at, &load, cal, now)?;
    let (harvests, last_crop_from) = match crop {
        Some(c0) => {
            let (h, last) = crops(curve, cell, c0, set_at, Some(&load), change.as_ref(), cal, now)?;
            (h, Some(last))
        }
        None => (Vec::new(), None),
    };
    Ok(Cycle { set_at, load: Some(load), change, harvests, last_crop_from })
}

/// The cycle of the load that a change made at `at` sets: `anodes_per_cell`
/// new anodes of `new_anode_kg` each, its first crop starting then too.
fn next_cycle<C: Curve>(curve: &C, cell: &CellInput, at: Time, cal: &Calendar, now: Time) -> Result<Cycle, C::Error> {
    let p = &cell.params;
    cycle(curve, cell, at, cell.anode_load(p.anodes_per_cell, p.new_anode_kg), Some(at), cal, now)
}

/// A cell's running cycle only (an inert cell's crops, with no change; nothing without anodes).
fn first_cycle<C: Curve>(cell: &CellInput, curve: &C, cal: &Calendar, now: Time) -> Result<Outlook, C::Error> {
    let out_of_circuit = cell.cutouts.iter().any(|c| c.from <= now && c.to.is_none());
    let mut cycles = Vec::new();
    if cell.params.anode_kind == AnodeKind::Inert {
        if let Some(c0) = cell.crop_started {
            let (harvests, _) = crops(curve, cell, c0, c0, None, None, cal, now)?;
            cycles.push(Cycle { set_at: cell.load.map_or(c0, |l| l.0), load: None, change: None, harvests, last_crop_from: None });
        }
    } else if let Some((set_at, count, kg)) = cell.load {
        cycles.push(cycle(curve, cell, set_at, cell.anode_load(count, kg), cell.crop_started, cal, now)?);
    }
    Ok(Outlook { cycles, out_of_circuit })
}

/// A cell's anode cycles and crops over the calendar, on its circuit's curve
/// as of `now`, each change assumed made at [`ChangeDue::assumed_at`] (its
/// ideal time): the cell on its own, before levelling. [`plan`] starts each
/// next cycle from the day its change is planned on instead.
pub fn outlook<C: Curve>(cell: &CellInput, curve: &C, cal: &Calendar, now: Time) -> Result<Outlook, C::Error> {
    let mut o = first_cycle(cell, curve, cal, now)?;
    let end = cal.start(cal.len());
    // at most one change a day: a bound on the loop whatever the current
    for _ in 0..=cal.len() {
        let Some(next) = o.cycles.last().and_then(|c| c.change.as_ref()).map(|c| c.assumed_at).filter(|t| *t < end) else { break };
        o.cycles.push(next_cycle(curve, cell, next, cal, now)?);
    }
    Ok(o)
}

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

/// A job the plan could not place.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct UnplacedJob {
    pub cell: String,
    pub circuit: String,
    pub section: String,
    /// `anode_change` or `harvest`.
    pub kind: &'static str,
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
    /// `light_last_crop`.
    pub kind: &'static str,
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
    /// The anode changes, before hand moves, are proven optimal (see [`levelling::Levelled::exact`]).
    pub exact: bool,
    /// The harvests are proven optimal (see [`plan`]).
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

/// Why a plan could not be made.
#[derive(Debug, thiserror::Error)]
pub enum PlanError<E: std::error::Error + 'static> {
    #[error(transparent)]
    Curve(E),
    /// A hand move that cannot be made.
    #[error("{cell}={date}: {message}")]
    Move { cell: String, date: NaiveDate, message: String },
    /// A planning rule that cannot be used, with the `[plan]` key it concerns.
    #[error("plan.{key}: {message}")]
    Rule { key: &'static str, message: String },
    #[error("levelling: {0}")]
    Level(LevelError),
}

/// An anode change the levelling handles.
struct ChangeJob {
    cell: usize,
    cycle: usize,
    task: Task,
}

/// A harvest placed on a day, before its mass is predicted.
struct PlannedCrop {
    cell: usize,
    day: usize,
    from: Time,
    due: Time,
    overdue: bool,
    window: Window,
    with_change: bool,
}

/// Where each job ended up.
#[derive(Clone, Copy, PartialEq)]
enum Slot {
    Day(usize, bool),
    Out(Reason),
}

fn reason_of(u: Unplaced, harvest: bool) -> Reason {
    match (u, harvest) {
        (Unplaced::WindowOutsideHorizon, _) => Reason::WindowOutsideHorizon,
        (_, true) => Reason::NoStrippingCapacity,
        (Unplaced::NoWorkingDayInWindow, false) => Reason::NoWorkingDayInWindow,
        (Unplaced::NoCrewCapacity, false) => Reason::NoCrewCapacity,
        (Unplaced::NoAnodes, false) => Reason::NoAnodes,
    }
}

fn to_day(i: i64) -> usize {
    usize::try_from(i.max(0)).unwrap_or(usize::MAX)
}

/// The day of the horizon that `supply` first fails to cover, given the anodes used each day.
fn overdrawn(stock: u64, per_day: &[u64], used: &[u64]) -> Option<usize> {
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

/// The supply left after `used`, in the form [`levelling::level`] takes: a
/// further use through day j must fit every later day's remainder too, so the
/// cumulative supply left through j is the least remainder from j on.
fn remaining_supply(stock: u64, per_day: &[u64], used: &[u64]) -> (u64, Vec<u64>) {
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

/// A day's crew capacity split over the shifts (the first shifts take the
/// remainder) and its changes filled in shift order; `with_crop[k]` says
/// whether the k-th change pulls a crop (its lifts count then too). With a
/// crane budget the day's capacity is at most the shifts times the changes
/// one shift can lift, so no shift's share is more than that.
fn fill_changes(with_crop: &[bool], capacity: u32, shifts: u32, crane: Option<Crane>) -> Vec<ShiftLoad> {
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
fn harvest_room(shifts: &[ShiftLoad], crane: Option<Crane>) -> u32 {
    match crane {
        None => u32::MAX,
        Some(c) => shifts.iter().map(|s| c.lifts_per_shift.saturating_sub(s.crane_lifts.unwrap_or(0)) / c.per_harvest).sum(),
    }
}

/// Puts `k` harvests into the shifts, each into the first shift with the
/// lifts left for it; without a crane budget, evenly (the first shifts take the remainder).
fn fill_harvests(shifts: &mut [ShiftLoad], k: u32, crane: Option<Crane>) {
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

/// Makes the plan.
///
/// Guaranteed: no day's anode changes exceed its crew capacity (0 on a day
/// without anode work; otherwise `crew_cells_per_day`, and never more than the
/// stripping machine can take of the crops those changes pull, nor than the
/// shifts' crane lifts allow with each change lifting its crop too); no
/// change of a circuit whose anode work is forbidden during outages is on a
/// day that overlaps one of its outages (other circuits' cells keep working;
/// a day is without anode work for all only when every circuit is down, or
/// it is a `no_anode_work` date); no shift's crane lifts exceed
/// `lifts_per_shift` (changes fill the shifts in order, harvests go to the
/// first shift with lifts left); the cumulative
/// anode supply is never overdrawn; no day's harvests exceed
/// `harvest_cathodes_per_day` cathodes; every anode change whose window starts
/// inside the horizon is placed inside its window or listed in `unplaced` with
/// its reason, and so is every harvest due inside the horizon (when a cell's
/// change is unplaced, the crop it would pull and its later cycles are not
/// planned, and those later changes are listed as
/// [`Reason::EarlierChangeUnplaced`]).
///
/// Anode changes are levelled cycle by cycle, and each next load's window is
/// counted from the day its change before it ends up on (levelled, kept or
/// moved). They are exact whenever [`levelling::level`] reports `exact` for
/// every cycle (see its documentation), each cycle in the capacity its
/// earlier cycles and their moves leave. A hand move is applied to the levelled plan: it
/// takes the cell (out of its section's common day, with `whole_sections`)
/// to a day inside its window that has a free crew place and is refused
/// otherwise, or when the anodes would then run short; other cells stay where
/// the levelling put them.
///
/// Harvests are levelled with the same solver: each harvest may move
/// [`HARVEST_SLACK_DAYS`] either way from its due day (an overdue one is due
/// on day 0), a day late costing [`HARVEST_WEIGHTS`]; the crops pulled with
/// anode changes are fixed first. The solver counts cells, so its day capacity
/// is the free cathodes divided by the largest cathode count among the
/// harvests: when every harvest has the same cathode count that is the true
/// capacity and the harvests are exact (`harvests_exact`); so they are when
/// every harvest is on its due day. Otherwise the machine is still never over
/// capacity, harvests left over are then fitted into the cathodes still free,
/// cheapest day first, and no optimality is claimed.
///
/// With `smooth_harvests`, the capped harvests are then moved one at a time
/// to another day of their window while that lowers the sum of squared daily
/// cathodes (ties: while it lowers the distance from the due days), within
/// the same cathode and crane limits: never a harvest more unplaced, never a
/// spread worse than the capped plan's; `harvests_exact` is then true only if
/// nothing moved.
///
/// Kept moves (recorded decisions, oldest first) move the cell's first change
/// in the plan under the same checks as a hand move; one that fails is listed
/// in `dropped_moves` with the reason instead of failing the plan, and one
/// whose cell also has a hand move is overridden by it.
///
/// Each day's `bound_by` names the limit that kept a job off it: a change
/// levelled away from its ideal day (or unplaced) marks the days between, and
/// the day is bound by what set its change capacity (crew, stripping machine
/// or crane) when full, else by the anodes; otherwise a harvest displaced in
/// the capped levelling marks them, bound by the stripping machine when it
/// cannot take that harvest, or the crane when its lifts are used up.
///
/// Anode changes are levelled over the plan and [`LOOKAHEAD_DAYS`] after it;
/// one levelled to a day after the plan is listed as [`Reason::AfterHorizon`].
pub fn plan<C: Curve>(input: &PlanInput, curves: &HashMap<String, C>) -> Result<Plan, PlanError<C::Error>>
where
    C::Error: std::error::Error + 'static,
{
    let cal = &input.calendar;
    let rules = &input.rules;
    let now = input.now;
    let n = cal.len();
    for (key, w) in [("early_weight", rules.weights.early), ("late_weight", rules.weights.late)] {
        if !(w.is_finite() && w > 0.0) {
            return Err(PlanError::Rule { key, message: format!("{w} is not a weight: it must be a number greater than zero") });
        }
    }
    let cells = &input.cells;
    let mut outlooks: Vec<Outlook> = Vec::with_capacity(cells.len());
    for c in cells {
        let o = match curves.get(&c.circuit) {
            Some(curve) => first_cycle(c, curve, cal, now).map_err(PlanError::Curve)?,
            None => Outlook { cycles: Vec::new(), out_of_circuit: false },
        };
        outlooks.push(o);
    }

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
            let prev_placed = k == 0 || by_cell.get(&(ci, k - 1)).is_some_and(|&p| matches!(slot[p], Slot::Day(..)));
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
                    slot[these[t]] = Slot::Day(d, false);
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
            if let Slot::Day(d, _) = *s
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
                Some(Slot::Day(d, _)) if d < n => cal.instant(d, ch.target_at, now),
                Some(Slot::Day(..)) => continue,
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
    // The day's changes in shifts, and the crane lifts they leave for harvests.
    let pulls_crop = |i: usize| outlooks[jobs[i].cell].cycles[jobs[i].cycle].last_crop_from.is_some();
    let mut with_crop: Vec<Vec<(String, bool)>> = vec![Vec::new(); n];
    for (i, s) in slot.iter().enumerate() {
        if let Slot::Day(d, _) = *s
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
            Slot::Day(d, _) => Some(d),
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
    let mut hslot: Vec<Slot> = hout.day.iter().map(|d| d.map_or(Slot::Out(Reason::NoStrippingCapacity), |d| Slot::Day(d, false))).collect();
    for (i, u) in &hout.unplaced {
        hslot[*i] = Slot::Out(reason_of(*u, true));
    }
    let mut harvests_on = vec![0u32; n];
    for (i, s) in hslot.iter().enumerate() {
        if let Slot::Day(d, _) = s {
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
            hslot[i] = Slot::Day(d, false);
        }
    }
    // Every harvest on its due day is optimal whatever the cathode counts.
    let all_due = hslot.iter().zip(&floating).all(|(s, f)| *s == Slot::Day(f.1.ideal, false));
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
            Slot::Day(d, false) => mark(&mut |x| wanted_change[x] = true, &jobs[i].task, Some(d)),
            Slot::Out(Reason::NoCrewCapacity | Reason::NoAnodes) => mark(&mut |x| wanted_change[x] = true, &jobs[i].task, None),
            _ => {}
        }
    }
    for (i, s) in hslot.iter().enumerate() {
        let c = u64::from(counts[i]);
        let mut flag = |x: usize| wanted_harvest[x] = Some(wanted_harvest[x].map_or(c, |m: u64| m.min(c)));
        match *s {
            Slot::Day(d, _) => mark(&mut flag, &floating[i].1, Some(d)),
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
                Slot::Day(day, _) => {
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
            hslot[*i] = Slot::Day(p.day, false);
        }
    }
    let harvests_exact = capped_exact && harvests_smoothed == 0;
    for (d, sh) in day_shifts.iter_mut().enumerate() {
        fill_harvests(sh, harvests_on[d], rules.crane);
    }
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
            Slot::Day(d, _) if d >= n => out_jobs.push(UnplacedJob {
                cell: c.cell.clone(),
                circuit: c.circuit.clone(),
                section: c.section.clone(),
                kind: "anode_change",
                reason: Reason::AfterHorizon,
                message: after(d),
                window: w,
                overdue: ch.overdue,
            }),
            Slot::Day(d, moved) => {
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
                    moved,
                });
            }
            Slot::Out(reason) => out_jobs.push(UnplacedJob {
                cell: c.cell.clone(),
                circuit: c.circuit.clone(),
                section: c.section.clone(),
                kind: "anode_change",
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
            Slot::Day(day, _) => planned.push(PlannedCrop { day, ..crop }),
            Slot::Out(reason) => {
                let c = &cells[crop.cell];
                out_jobs.push(UnplacedJob {
                    cell: c.cell.clone(),
                    circuit: c.circuit.clone(),
                    section: c.section.clone(),
                    kind: "harvest",
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
                    kind: "light_last_crop",
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
    out_jobs.sort_by(|a, b| a.kind.cmp(b.kind).then(a.cell.cmp(&b.cell)).then(a.window.ideal.cmp(&b.window.ideal)));
    let out_of_circuit = cells.iter().zip(&outlooks).filter(|(_, o)| o.out_of_circuit).map(|(c, _)| c.cell.clone()).collect();
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
        let on_day = (0..jobs.len()).filter(|&k| k != i && matches!(slot[k], Slot::Day(x, _) if x == d)).count();
        if on_day as u32 >= crew[d] {
            return Err(format!("over capacity: the crew is full that day ({on_day} of {} cells); move another cell away first", crew[d]));
        }
        let before = slot[i];
        slot[i] = Slot::Day(d, true);
        let mut used = vec![0u64; self.per_day.len()];
        for (k, s) in slot.iter().enumerate() {
            if let Slot::Day(x, _) = s
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::domain::charge::{MemoryCurve, RawReading};
    use crate::domain::layout::CellParams;
    use crate::domain::plant_time::{PlantZone, parse_day_start};
    use chrono::{TimeZone, Utc};

    // The DOMAIN.md plant check (derived from CODATA 2018 F and IUPAC M(Cu)):
    // 50 anodes × 380 kg, 51 cathodes, 30 kA flat, w_Cu 0.995, η_a 1.0, η_c 0.96, lug 20 kg.
    // By hand: ECE = 3600·63.546/(2·96 485.332 12) = 1.185 486 g/(A·h); each anode carries
    // 30 000/50 = 600 A and loses 1.185 486e-3 · 600 / 0.995 = 0.714 871 kg/h. Loss to
    // fraction f is (1 − f)·380 kg:
    //   f = 0.25: 285 kg / 0.714 871 = 398.67 h
    //   f = 0.15: 323 kg / 0.714 871 = 451.83 h (DOMAIN.md: 451.8 h)
    //   f = 0.10: 342 kg / 0.714 871 = 478.41 h
    // Each cathode gains 1.185 486e-3 · 30 000 · 0.96 / 51 = 0.669 456 kg/h: 120 kg after
    // 179.25 h (DOMAIN.md).
    const UPPER_H: f64 = 398.67;
    const TARGET_H: f64 = 451.83;
    const LOWER_H: f64 = 478.41;
    const CATHODE_KG_PER_H: f64 = 0.669_456;

    fn t0() -> Time {
        Utc.with_ymd_and_hms(2026, 3, 1, 0, 0, 0).unwrap()
    }
    fn at(h: f64) -> Time {
        t0() + Duration::milliseconds((h * 3_600_000.0) as i64)
    }
    fn hours_after_t0(t: Time) -> f64 {
        (t - t0()).num_milliseconds() as f64 / 3_600_000.0
    }
    fn date(y: i32, m: u32, d: u32) -> NaiveDate {
        NaiveDate::from_ymd_opt(y, m, d).unwrap()
    }
    /// 30 kA flat from t0 to `now_h`, read hourly; the estimate after it is the same 30 kA.
    fn flat(now_h: u32) -> HashMap<String, MemoryCurve> {
        let rs: Vec<RawReading> = (0..=now_h).map(|h| RawReading { t: at(f64::from(h)), amps: 30_000.0 }).collect();
        HashMap::from([("C1".to_string(), MemoryCurve::build(&rs, &[], &[], at(f64::from(now_h))))])
    }
    /// Production days in UTC starting at `start` (HH:MM).
    fn calendar(start: &str, now: Time, len: usize) -> Calendar {
        let days = ProductionDays { zone: PlantZone::parse("UTC").unwrap(), day_starts_at: parse_day_start(start).unwrap() };
        Calendar::new(days, days.day_of(now), len)
    }
    fn rules(crew: u32) -> Rules {
        Rules {
            crew_cells_per_day: crew,
            shifts_per_day: 1,
            harvest_cathodes_per_day: 2000,
            // the layout defaults: a day late costs three days early (common practice, no source)
            weights: Weights { early: 1.0, late: 3.0 },
            anode_stock: None,
            anodes_per_day: None,
            no_anode_work: Vec::new(),
            outages: Vec::new(),
            outage_work: BTreeMap::new(),
            whole_sections: false,
            crane: None,
            smooth_harvests: true,
            light_crop_fraction: 0.6,
        }
    }
    /// A plant-check cell (CellParams::default() is the plant check) with a load set at `set_h`.
    fn cell(id: &str, set_h: f64) -> CellInput {
        CellInput {
            cell: id.to_string(),
            circuit: "C1".into(),
            section: "A".into(),
            params: CellParams::default(),
            load: Some((at(set_h), 50, 380.0)),
            crop_started: Some(at(set_h)),
            cutouts: Vec::new(),
            last_crop_efficiency: None,
            last_voltage: None,
            shorts: None,
            learnt: crate::domain::learn::CellLearnt::layout(&CellParams::default()),
            left_out: Vec::new(),
        }
    }
    fn input(now_h: u32, start: &str, len: usize, rules: Rules, cells: Vec<CellInput>) -> PlanInput {
        let now = at(f64::from(now_h));
        PlanInput { now, calendar: calendar(start, now, len), rules, cells, moves: Vec::new(), kept: Vec::new() }
    }
    fn changes(p: &Plan) -> Vec<(usize, &AnodeChange)> {
        p.days.iter().enumerate().flat_map(|(d, x)| x.anode_changes.iter().map(move |c| (d, c))).collect()
    }
    fn harvests(p: &Plan) -> Vec<(usize, &Harvest)> {
        p.days.iter().enumerate().flat_map(|(d, x)| x.harvests.iter().map(move |h| (d, h))).collect()
    }

    #[test]
    fn learnt_efficiencies_move_the_window_and_the_crops() {
        // A cell whose anodes dissolve at a learnt factor of 0.90 reaches 15 % after
        // 451.83 h / 0.90 = 502.0 h (the plant check, derived); its crops plate at a learnt 0.88.
        let mut c = cell("A01", 0.0);
        c.learnt.anode.value = 0.90;
        c.learnt.cathode.value = 0.88;
        let inp = input(240, "20:00", 30, rules(8), vec![c]);
        let curves = flat(240);
        let o = outlook(&inp.cells[0], &curves["C1"], &inp.calendar, inp.now).unwrap();
        let ch = o.cycles[0].change.as_ref().unwrap();
        assert!((hours_after_t0(ch.target_at) - TARGET_H / 0.90).abs() < 0.01, "{:?}", ch.target_at);
        // the first crop reaches 120 kg a cathode after 179.25 h × 0.96 / 0.88 = 195.5 h
        let h = hours_after_t0(o.cycles[0].harvests[0].due_at);
        assert!((h - 179.25 * 0.96 / 0.88).abs() < 0.05, "{h}");
    }

    #[test]
    fn plant_check_window_and_ideal_day_with_a_day_start_that_matters() {
        // Days start at 20:00 UTC, so a crossing in the evening before 20:00 belongs to the
        // previous production day. Now is 2026-03-11 00:00Z, in the production day 2026-03-10.
        let inp = input(240, "20:00", 30, rules(8), vec![cell("A01", 0.0)]);
        assert_eq!(inp.calendar.from, date(2026, 3, 10));
        let curves = flat(240);
        let o = outlook(&inp.cells[0], &curves["C1"], &inp.calendar, inp.now).unwrap();
        let ch = o.cycles[0].change.as_ref().unwrap();
        assert!((hours_after_t0(ch.upper_at.unwrap()) - UPPER_H).abs() < 0.01, "{:?}", ch.upper_at);
        assert!((hours_after_t0(ch.target_at) - TARGET_H).abs() < 0.01, "{:?}", ch.target_at);
        assert!((hours_after_t0(ch.lower_at.unwrap()) - LOWER_H).abs() < 0.01, "{:?}", ch.lower_at);
        // 398.67 h = 03-17 14:40Z → day 03-16 (index 6; the calendar date would give 7);
        // 451.83 h = 03-19 19:50Z → day 03-18 (index 8, not 9); 478.41 h = 03-20 22:25Z → day 03-20 (index 10).
        assert_eq!((ch.earliest, ch.ideal, ch.latest), (6, 8, 10));
        assert!(!ch.overdue);

        let p = plan(&inp, &curves).unwrap();
        let cs = changes(&p);
        let first = cs.iter().find(|(_, c)| c.cycle == 0).unwrap();
        assert_eq!(first.0, 8);
        assert_eq!(p.days[8].date, date(2026, 3, 18));
        assert_eq!(first.1.window, Window { earliest: date(2026, 3, 16), ideal: date(2026, 3, 18), latest: Some(date(2026, 3, 20)) });
        // on its ideal day the change is predicted at its ideal time: 15 % left
        assert!((first.1.scrap_fraction - 0.15).abs() < 1e-6, "{}", first.1.scrap_fraction);
        // 50 anodes × 380 kg = 19.0 t of new anodes; scrap 50 × 0.15 × 380 kg = 2.85 t (by hand)
        assert_eq!(p.days[8].anodes_needed, 50);
        assert!((p.days[8].anode_tonnes - 19.0).abs() < 1e-9);
        assert!((p.days[8].scrap_tonnes - 2.85).abs() < 1e-5);
    }

    #[test]
    fn the_next_load_assumes_the_first_change_on_its_ideal_day() {
        // Same cell over 30 days: the second load is set at 451.83 h with 50 × 380 kg, so its
        // crossings are at 451.83 + 398.67 = 850.50 h (04-05 10:30Z → day 04-04, index 25),
        // 903.66 h (04-07 15:40Z → day 04-06, index 27) and 930.24 h (04-08 18:14Z → day 04-07, index 28).
        let inp = input(240, "20:00", 30, rules(8), vec![cell("A01", 0.0)]);
        let curves = flat(240);
        let o = outlook(&inp.cells[0], &curves["C1"], &inp.calendar, inp.now).unwrap();
        // a third load follows the second's ideal (04-07, inside the 30 days), its window after the plan
        assert_eq!(o.cycles.len(), 3);
        assert!(o.cycles[2].change.as_ref().is_some_and(|c| c.earliest >= 30));
        let second = &o.cycles[1];
        assert!((hours_after_t0(second.set_at) - TARGET_H).abs() < 0.01);
        let load = second.load.unwrap();
        assert_eq!((load.count, load.initial_kg), (50, 380.0));
        let ch = second.change.as_ref().unwrap();
        assert!((hours_after_t0(ch.target_at) - 2.0 * TARGET_H).abs() < 0.02);
        assert_eq!((ch.earliest, ch.ideal, ch.latest), (25, 27, 28));
        let p = plan(&inp, &curves).unwrap();
        let cs = changes(&p);
        assert_eq!(cs.iter().map(|(d, c)| (*d, c.cycle)).collect::<Vec<_>>(), vec![(8, 0), (27, 1)]);
    }

    #[test]
    fn the_next_load_starts_on_the_day_its_change_is_levelled_or_moved_to() {
        // Two plant-check cells set together, one crew place a day: both are ideal on 03-18
        // (index 8, days from 20:00), one goes a day early (cheaper than late), to the end of
        // 03-17's production day (03-18T19:59:59Z, 427.9997 h). Its next load is set then, so its
        // next change is ideal 451.83 h later (879.83 h = 04-06 15:50Z → day 04-05, index 26), not
        // at 2 × 451.83 = 903.66 h as the outlook on its own assumes (index 27).
        let inp = input(240, "20:00", 30, rules(1), vec![cell("A01", 0.0), cell("A02", 0.0)]);
        let curves = flat(240);
        let p = plan(&inp, &curves).unwrap();
        let cs = changes(&p);
        let of = |cell: &str, k: usize| cs.iter().find(|(_, c)| c.cell == cell && c.cycle == k).map(|(d, c)| (*d, *c)).unwrap();
        let early = if of("A01", 0).0 == 7 { "A01" } else { "A02" };
        assert_eq!(of(early, 0).0, 7);
        assert!((hours_after_t0(of(early, 0).1.at) - 427.9997).abs() < 0.001);
        for id in ["A01", "A02"] {
            let (first, next) = (of(id, 0).1, of(id, 1).1);
            assert!((hours_after_t0(next.target_at) - hours_after_t0(first.at) - TARGET_H).abs() < 0.01, "{id}: {:?}", next.target_at);
        }
        assert_eq!(of(early, 1).1.window.ideal, date(2026, 4, 5));
        assert!((hours_after_t0(of(early, 1).1.target_at) - 879.83).abs() < 0.01);
        // a hand move of a cell's first change to 03-16 (index 6): its next load is set at the end
        // of that day (03-17T19:59:59Z, 403.9997 h), its next ideal 451.83 h later (855.83 h)
        let mut m = input(240, "20:00", 30, rules(8), vec![cell("A01", 0.0)]);
        m.moves = vec![("A01".into(), date(2026, 3, 16))];
        let p = plan(&m, &curves).unwrap();
        let cs = changes(&p);
        let first = cs.iter().find(|(_, c)| c.cycle == 0).unwrap().1;
        let next = cs.iter().find(|(_, c)| c.cycle == 1).unwrap().1;
        assert!(first.moved && (hours_after_t0(first.at) - 403.9997).abs() < 0.001);
        assert!((hours_after_t0(next.target_at) - 855.83).abs() < 0.01, "{:?}", next.target_at);
        // the first crop of the next load starts at the moved change too: 120 kg after 179.25 h (03-25 07:15Z → day 03-24)
        let h = harvests(&p).into_iter().find(|(_, h)| (hours_after_t0(h.at) - (403.9997 + 179.25)).abs() < 0.01);
        assert!(h.is_some_and(|(_, h)| (h.mass_kg - 120.0).abs() < 1e-3), "{:?}", harvests(&p));
    }

    #[test]
    fn the_plans_crops_are_the_forecasts_harvest_times() {
        // One rule for both (crop_target): the forecast's harvest_due of the running crop is
        // the plan's first crop time, with and without crops_per_anode_cycle. A crop begun
        // 100 h after the set: with 3 crops the next part of the life is the second (301.22 h,
        // at least half a crop of 150.61 h after 100 h); at target mass, 100 + 179.25 = 279.25 h.
        use crate::domain::forecast::forecast_cell;
        let curves = flat(120);
        for (k, want_h) in [(Some(3), 2.0 * TARGET_H / 3.0), (None, 100.0 + 179.25)] {
            let mut c = cell("A01", 0.0);
            c.crop_started = Some(at(100.0));
            c.params.crops_per_anode_cycle = k;
            let inp = input(120, "20:00", 20, rules(8), vec![c]);
            let f = forecast_cell(&inp.cells[0], &curves["C1"], inp.now).unwrap();
            let k_due = f.cathode.as_ref().unwrap().harvest_due.unwrap();
            assert!((hours_after_t0(k_due) - want_h).abs() < 0.01, "{k:?}: {k_due}");
            let w = f.cathode.as_ref().unwrap().harvest_window.unwrap();
            assert!(w.early <= k_due && k_due <= w.late, "{k:?}: {w:?}");
            let p = plan(&inp, &curves).unwrap();
            let (_, h) = harvests(&p).into_iter().min_by_key(|(_, h)| h.at).unwrap();
            assert_eq!(h.at, k_due, "{k:?}");
            assert!(!h.overdue);
        }
    }

    #[test]
    fn crops_split_the_anode_life_in_three_and_the_last_goes_with_the_change() {
        // crops_per_anode_cycle = 3: boundaries at 451.83/3 = 150.61 h (03-07 06:37Z → day 03-06, index 5)
        // and 301.22 h (03-13 13:13Z → day 03-12, index 11); the third crop goes with the change
        // (03-19 19:50Z → day 03-18, index 17). Each crop: 0.669 456 kg/h × 150.61 h = 100.83 kg.
        let mut c = cell("A01", 0.0);
        c.params.crops_per_anode_cycle = Some(3);
        let inp = input(24, "20:00", 20, rules(8), vec![c]);
        let p = plan(&inp, &flat(24)).unwrap();
        let hs = harvests(&p);
        assert_eq!(hs.iter().map(|(d, h)| (*d, h.with_anode_change)).collect::<Vec<_>>(), vec![(5, false), (11, false), (17, true)]);
        for (_, h) in &hs {
            assert!((h.mass_kg - CATHODE_KG_PER_H * TARGET_H / 3.0).abs() < 0.01, "{}", h.mass_kg);
            assert!(!h.overdue);
        }
        assert_eq!(changes(&p).iter().map(|(d, _)| *d).collect::<Vec<_>>(), vec![17]);
        // copper: 51 cathodes × 100.83 kg = 5.142 t on the change day (by hand)
        assert!((p.days[17].copper_tonnes - 51.0 * CATHODE_KG_PER_H * TARGET_H / 3.0 / 1000.0).abs() < 1e-5);
    }

    #[test]
    fn crops_at_target_mass_between_changes() {
        // No crops_per_anode_cycle: 120 kg after 179.25 h (03-08 11:15Z → day 03-07, index 6), the next
        // after 358.5 h (03-15 22:30Z → day 03-15, index 14); the last crop, 358.5 → 451.83 h, goes with the
        // change: 0.669 456 × 93.33 h = 62.48 kg.
        let inp = input(24, "20:00", 20, rules(8), vec![cell("A01", 0.0)]);
        let p = plan(&inp, &flat(24)).unwrap();
        let hs = harvests(&p);
        assert_eq!(hs.iter().map(|(d, _)| *d).collect::<Vec<_>>(), vec![6, 14, 17]);
        assert!((hs[0].1.mass_kg - 120.0).abs() < 1e-3, "{}", hs[0].1.mass_kg);
        assert!((hs[1].1.mass_kg - 120.0).abs() < 1e-3, "{}", hs[1].1.mass_kg);
        assert!((hs[2].1.mass_kg - CATHODE_KG_PER_H * (TARGET_H - 358.5)).abs() < 0.01, "{}", hs[2].1.mass_kg);
        assert!(hs[2].1.with_anode_change);
    }

    #[test]
    fn overdue_change_goes_on_the_first_day_marked_overdue() {
        // Now is 460 h after the set: past the ideal (451.83 h), before scrap_lower (478.41 h).
        // At now: 1 − 460 × 0.714 871 / 380 = 0.134 63 left (by hand).
        let inp = input(460, "06:00", 5, rules(8), vec![cell("A01", 0.0)]);
        let p = plan(&inp, &flat(460)).unwrap();
        let cs = changes(&p);
        assert_eq!(cs.len(), 1);
        assert_eq!(cs[0].0, 0);
        assert!(cs[0].1.overdue);
        assert_eq!(cs[0].1.at, inp.now);
        assert!((cs[0].1.scrap_fraction - 0.134_63).abs() < 1e-4, "{}", cs[0].1.scrap_fraction);
    }

    #[test]
    fn inert_cells_have_harvests_and_no_anode_changes() {
        // An inert cell whose crop began at t0; now 200 h: the 120 kg harvest (179.25 h) is overdue, on day 0,
        // with 0.669 456 × 200 = 133.89 kg at now (by hand).
        let mut c = cell("L1", 0.0);
        c.params.anode_kind = AnodeKind::Inert;
        let inp = input(200, "06:00", 14, rules(8), vec![c]);
        let p = plan(&inp, &flat(200)).unwrap();
        assert!(changes(&p).is_empty());
        let hs = harvests(&p);
        assert!(!hs.is_empty());
        assert_eq!(hs[0].0, 0);
        assert!(hs[0].1.overdue);
        assert!((hs[0].1.mass_kg - CATHODE_KG_PER_H * 200.0).abs() < 0.01, "{}", hs[0].1.mass_kg);
        // the next crop starts at now and is due 179.25 h later, not overdue
        assert!(hs.iter().skip(1).all(|(_, h)| !h.overdue && (h.mass_kg - 120.0).abs() < 1e-3));
    }

    #[test]
    fn a_wave_of_thirty_cells_spreads_early_rather_than_late() {
        // 30 cells set together; scrap_lower 0.07 (26.6 kg, above the 20 kg lugs) widens the window:
        // 0.07 is reached after 353.4 kg / 0.714 871 = 494.36 h. Days start 08:00 UTC, so the
        // ideal (03-19 19:50Z) is day 03-19, the window opens 03-17 (14:40Z) and closes 03-21 (14:21Z).
        let cells: Vec<CellInput> = (1..=30)
            .map(|i| {
                let mut c = cell(&format!("A{i:02}"), 0.0);
                c.params.scrap_lower = 0.07;
                c
            })
            .collect();
        let inp = input(24, "08:00", 28, rules(8), cells);
        let p = plan(&inp, &flat(24)).unwrap();
        assert!(p.exact);
        assert!(p.unplaced.is_empty(), "{:?}", p.unplaced);
        let ideal = (date(2026, 3, 19) - inp.calendar.from).num_days() as usize;
        let mut per_day = vec![0; 28];
        for (d, c) in changes(&p) {
            assert!(d + 2 >= ideal && d <= ideal + 2, "{} on day {d}", c.cell);
            per_day[d] += 1;
        }
        assert!(per_day.iter().all(|n| *n <= 8), "{per_day:?}");
        // By hand, early 1 and late 3 a day: 8 on the ideal day, 8 a day early (1 each), 8 two days
        // early (2 each, cheaper than 3 for a day late), the last 6 a day late.
        assert_eq!(&per_day[ideal - 2..=ideal + 2], &[8, 8, 8, 6, 0]);
        let early: usize = per_day[..ideal].iter().sum();
        let late: usize = per_day[ideal + 1..].iter().sum();
        assert!(early > late, "early {early} late {late}");
    }

    #[test]
    fn days_without_anode_work_are_avoided() {
        // The ideal day 03-18 (20:00 day start, as above) overlaps a planned outage; 03-17 is a no-work date.
        let mut r = rules(8);
        r.outages = vec![(
            "C1".into(),
            Span { from: Utc.with_ymd_and_hms(2026, 3, 19, 10, 0, 0).unwrap(), to: Utc.with_ymd_and_hms(2026, 3, 19, 14, 0, 0).unwrap() },
        )];
        r.no_anode_work = vec![date(2026, 3, 17)];
        let inp = input(240, "20:00", 14, r, vec![cell("A01", 0.0)]);
        let p = plan(&inp, &flat(240)).unwrap();
        assert_eq!(p.days[8].crew_capacity, 0);
        assert!(p.days[8].no_anode_work.as_deref().unwrap_or("").contains("outage on C1"));
        assert_eq!(p.days[7].crew_capacity, 0);
        // a day late costs 3, two days early 2: the window 03-16 … 03-20 leaves 03-16 (index 6)
        assert_eq!(changes(&p).iter().map(|(d, _)| *d).collect::<Vec<_>>(), vec![6]);
    }

    #[test]
    fn the_anode_supply_is_never_overdrawn() {
        // Three changes of 50 anodes each in the same window, 100 anodes in stock and none delivered.
        let mut r = rules(8);
        r.anode_stock = Some(100);
        let cells = vec![cell("A01", 0.0), cell("A02", 0.0), cell("A03", 0.0)];
        let inp = input(240, "20:00", 14, r, cells);
        let p = plan(&inp, &flat(240)).unwrap();
        let used: u64 = p.days.iter().map(|d| d.anodes_needed).sum();
        assert_eq!(used, 100);
        assert_eq!(p.unplaced.len(), 1);
        assert_eq!(p.unplaced[0].reason, Reason::NoAnodes);
        assert_eq!(p.unplaced[0].cell, "A03", "ties go by cell id");
    }

    #[test]
    fn stripping_capacity_holds_with_unequal_cathode_counts() {
        // Sixteen cells due within a few days: half with 51 cathodes, half with 41 (40 anodes), and a
        // stripping machine of 200 cathodes a day: at most 3 cells of 51 a day, or more with the smaller ones.
        let cells: Vec<CellInput> = (1..=16)
            .map(|i| {
                let mut c = cell(&format!("A{i:02}"), 0.0);
                if i % 2 == 0 {
                    c.params.anodes_per_cell = 40;
                    c.params.cathodes_per_cell = 41;
                    c.load = Some((t0(), 40, 380.0));
                }
                c
            })
            .collect();
        let mut r = rules(8);
        r.harvest_cathodes_per_day = 200;
        let inp = input(100, "06:00", 5, r, cells);
        let p = plan(&inp, &flat(100)).unwrap();
        for d in &p.days {
            let n: u64 = d.harvests.iter().map(|h| u64::from(h.cathodes)).sum();
            assert_eq!(n, d.harvest_cathodes);
            assert!(n <= 200, "{}: {n}", d.date);
            for h in &d.harvests {
                let l = h.window.latest.unwrap();
                assert!(h.window.earliest <= d.date && d.date <= l, "{} {}", h.cell, d.date);
                assert!(l - h.window.ideal <= Duration::days(1) && h.window.ideal - h.window.earliest <= Duration::days(1));
            }
        }
        let placed = harvests(&p).len();
        let left: Vec<&UnplacedJob> = p.unplaced.iter().filter(|u| u.kind == "harvest").collect();
        assert_eq!(placed + left.len(), 16, "each cell's one crop is placed or listed");
        assert!(!left.is_empty() && left.iter().all(|u| u.reason == Reason::NoStrippingCapacity));
        assert!(!p.harvests_exact);
    }

    #[test]
    fn hand_moves_are_checked_against_window_and_capacity() {
        let run = |crew: u32, moves: Vec<(&str, NaiveDate)>| {
            let mut inp = input(240, "20:00", 14, rules(crew), vec![cell("A01", 0.0), cell("A02", 0.0)]);
            inp.moves = moves.into_iter().map(|(c, d)| (c.to_string(), d)).collect();
            plan(&inp, &flat(240))
        };
        // inside the window 03-16 … 03-20
        let p = run(8, vec![("A02", date(2026, 3, 19))]).unwrap();
        let moved: Vec<(usize, &str, bool)> = changes(&p).iter().map(|(d, c)| (*d, c.cell.as_str(), c.moved)).collect();
        assert_eq!(moved, vec![(8, "A01", false), (9, "A02", true)]);
        // outside it
        let e = run(8, vec![("A02", date(2026, 3, 21))]).unwrap_err();
        assert!(matches!(&e, PlanError::Move { message, .. } if message.contains("outside the cell's window")), "{e}");
        // onto a full day: with one cell a day the levelling gives A01 03-17 and A02 its ideal 03-18
        // (one day early costs 1 either way; ties go to the smaller day in cell-id order)
        let p = run(1, vec![]).unwrap();
        assert_eq!(changes(&p).iter().map(|(d, c)| (*d, c.cell.as_str())).collect::<Vec<_>>(), vec![(7, "A01"), (8, "A02")]);
        let e = run(1, vec![("A02", date(2026, 3, 17))]).unwrap_err();
        assert!(matches!(&e, PlanError::Move { message, .. } if message.contains("over capacity")), "{e}");
        // after moving A01 away first, the day is free
        let p = run(1, vec![("A01", date(2026, 3, 20)), ("A02", date(2026, 3, 17))]).unwrap();
        assert_eq!(changes(&p).iter().map(|(d, c)| (*d, c.cell.as_str())).collect::<Vec<_>>(), vec![(7, "A02"), (10, "A01")]);
        assert!(matches!(run(8, vec![("Z99", date(2026, 3, 18))]), Err(PlanError::Move { .. })));
    }

    #[test]
    fn whole_sections_change_on_one_day() {
        let mut r = rules(8);
        r.whole_sections = true;
        // A02 set 20 h later than A01: its window 03-17 … 03-21, its ideal 03-19; common window 03-17 … 03-20
        let inp = input(240, "20:00", 14, r, vec![cell("A01", 0.0), cell("A02", 20.0)]);
        let p = plan(&inp, &flat(240)).unwrap();
        let days: Vec<usize> = changes(&p).iter().map(|(d, _)| *d).collect();
        assert_eq!(days.len(), 2);
        assert_eq!(days[0], days[1]);
    }

    #[test]
    fn shifts_split_the_day() {
        let shift = |load, capacity| ShiftLoad { load, capacity, harvests: 0, crane_lifts: None };
        assert_eq!(fill_changes(&[false; 5], 8, 2, None), vec![shift(4, 4), shift(1, 4)]);
        let caps: Vec<u32> = fill_changes(&[], 7, 3, None).iter().map(|s| s.capacity).collect();
        assert_eq!(caps, vec![3, 2, 2]);
        assert_eq!(fill_changes(&[false; 3], 8, 1, None), vec![shift(3, 8)]);
        // with a crane of 9 lifts a shift, 2 a change and 2 a harvest: a change with its crop is 4 lifts,
        // one without it 2; the 9 − 8 = 1 lift left in the first shift takes no harvest, the 9 − 6 in the
        // second takes one (by hand)
        let crane = Some(Crane { lifts_per_shift: 9, per_anode_change: 2, per_harvest: 2 });
        let mut sh = fill_changes(&[true, true, true, false], 4, 2, crane);
        assert_eq!(sh.iter().map(|s| s.crane_lifts).collect::<Vec<_>>(), vec![Some(8), Some(6)]);
        assert_eq!(harvest_room(&sh, crane), 1);
        fill_harvests(&mut sh, 1, crane);
        assert_eq!(sh.iter().map(|s| (s.harvests, s.crane_lifts)).collect::<Vec<_>>(), vec![(0, Some(8)), (1, Some(8))]);
        // without a crane budget the harvests are split evenly over the shifts
        let mut sh = fill_changes(&[true; 3], 8, 3, None);
        fill_harvests(&mut sh, 5, None);
        assert_eq!(sh.iter().map(|s| s.harvests).collect::<Vec<_>>(), vec![2, 2, 1]);
    }

    #[test]
    fn remaining_supply_keeps_what_later_days_need() {
        // stock 100, 50 a day; 150 used on day 1: cumulative 150, 200, 250 less 0, 150, 150 → 150, 50, 100;
        // a use on day 0 must also fit day 1, so 50, 50, 100 are left (by hand).
        let (stock, per) = remaining_supply(100, &[50, 50, 50], &[0, 150, 0]);
        assert_eq!(stock, 0);
        assert_eq!(per, vec![50, 0, 50]);
        assert_eq!(overdrawn(100, &[50, 50, 50], &[0, 201, 0]), Some(1));
        assert_eq!(overdrawn(100, &[50, 50, 50], &[0, 200, 50]), None);
    }

    /// `flat` on two circuits, C1 and C2.
    fn flat2(now_h: u32) -> HashMap<String, MemoryCurve> {
        let mut c = flat(now_h);
        let one = c["C1"].clone();
        c.insert("C2".to_string(), one);
        c
    }
    fn on(circuit: &str, id: &str) -> CellInput {
        CellInput { circuit: circuit.to_string(), ..cell(id, 0.0) }
    }
    fn outage_on(circuit: &str, from_h: f64, to_h: f64) -> (String, Span) {
        (circuit.to_string(), Span { from: at(from_h), to: at(to_h) })
    }
    /// Day index of each cell's change.
    fn change_days(p: &Plan) -> BTreeMap<String, usize> {
        changes(p).iter().map(|(d, c)| (c.cell.clone(), *d)).collect()
    }

    #[test]
    fn an_outage_on_one_circuit_leaves_the_other_circuits_changes_where_they_are() {
        // Five cells on C1 and five on C2, all set at t0: ideal 451.83 h = 03-19 19:50Z → day 03-18
        // (days start 20:00; index 8). A 3-h outage on C1 that day (03-19 10:00–13:00Z).
        let cells: Vec<CellInput> =
            (1..=5).map(|i| on("C1", &format!("A{i:02}"))).chain((1..=5).map(|i| on("C2", &format!("B{i:02}")))).collect();
        let mut r = rules(10);
        r.outages = vec![outage_on("C1", 442.0, 445.0)];
        let inp = input(240, "20:00", 14, r, cells.clone());
        let p = plan(&inp, &flat2(240)).unwrap();
        let days = change_days(&p);
        // C2's five stay on their ideal day; C1's go a day early (cost 1 each, cheaper than 3 late)
        for i in 1..=5 {
            assert_eq!(days[&format!("B{i:02}")], 8, "{days:?}");
            assert_eq!(days[&format!("A{i:02}")], 7, "{days:?}");
        }
        // the day still has anode work (for C2), and says which circuit is down
        assert_eq!(p.days[8].no_anode_work, None);
        assert_eq!(p.days[8].outages.len(), 1);
        assert_eq!((p.days[8].outages[0].circuit.as_str(), p.days[8].outages[0].anode_work), ("C1", OutageWork::Forbidden));
        assert_eq!(p.days[8].crew_capacity, 10);
        // a hand move of a C1 cell onto the outage day is refused; a C2 cell may go there
        let mut m = inp.clone();
        m.moves = vec![("A01".into(), date(2026, 3, 18))];
        let e = plan(&m, &flat2(240)).unwrap_err();
        assert!(e.to_string().contains("circuit C1 is down"), "{e}");
        // Preferred on C1, with the outage a day before the ideal (03-17, index 7): C1's cells go
        // there (the outage day is their ideal), C2's stay on 03-18.
        let mut r = rules(10);
        r.outages = vec![outage_on("C1", 418.0, 421.0)];
        r.outage_work = BTreeMap::from([("C1".to_string(), OutageWork::Preferred)]);
        let p = plan(&input(240, "20:00", 14, r, cells), &flat2(240)).unwrap();
        let days = change_days(&p);
        assert!((1..=5).all(|i| days[&format!("A{i:02}")] == 7 && days[&format!("B{i:02}")] == 8), "{days:?}");
        assert_eq!(p.days[7].outages[0].anode_work, OutageWork::Preferred);
    }

    #[test]
    fn an_outage_on_every_circuit_stops_anode_work() {
        let mut r = rules(10);
        r.outages = vec![outage_on("C1", 442.0, 445.0), outage_on("C2", 443.0, 444.0)];
        let p = plan(&input(240, "20:00", 14, r, vec![on("C1", "A01"), on("C2", "B01")]), &flat2(240)).unwrap();
        assert_eq!(p.days[8].crew_capacity, 0);
        let why = p.days[8].no_anode_work.as_deref().unwrap_or("");
        assert!(why.contains("outage on C1") && why.contains("outage on C2"), "{why}");
    }

    #[test]
    fn kept_moves_apply_while_feasible_and_are_dropped_with_the_reason() {
        let kept = |cell: &str, d: NaiveDate, entry: i64| KeptMove { cell: cell.into(), date: d, by: "JD".into(), entry, applied: false };
        let mut inp = input(240, "20:00", 14, rules(1), vec![cell("A01", 0.0), cell("A02", 0.0), cell("A03", 0.0)]);
        // A01 kept on 03-20 (inside its window 03-16 … 03-20); A02 kept on 03-21 (outside it)
        inp.kept = vec![kept("A01", date(2026, 3, 20), 11), kept("A02", date(2026, 3, 21), 12), kept("A03", date(2026, 4, 30), 13)];
        let p = plan(&inp, &flat(240)).unwrap();
        let a01 = changes(&p).into_iter().find(|(_, c)| c.cell == "A01").unwrap();
        assert_eq!((a01.0, a01.1.moved), (10, true));
        assert_eq!(p.kept_moves.iter().map(|k| (k.cell.as_str(), k.applied)).collect::<Vec<_>>(), vec![("A01", true), ("A03", false)]);
        assert_eq!(p.dropped_moves.len(), 1);
        assert_eq!((p.dropped_moves[0].cell.as_str(), p.dropped_moves[0].entry), ("A02", 12));
        assert!(p.dropped_moves[0].reason.contains("outside the cell's window"), "{}", p.dropped_moves[0].reason);
        // a hand move of the same cell overrides the kept one
        inp.moves = vec![("A01".into(), date(2026, 3, 19))];
        let p = plan(&inp, &flat(240)).unwrap();
        assert!(p.dropped_moves.iter().any(|d| d.cell == "A01" && d.reason.contains("overridden")));
        assert_eq!(change_days(&p)["A01"], 9);
    }

    #[test]
    fn light_last_crops_are_warned() {
        // Without crops_per_anode_cycle the crop pulled with the anodes is 62.48 kg (see
        // crops_at_target_mass_between_changes), below 0.6 × 120 = 72 kg: warned and flagged.
        let inp = input(24, "20:00", 20, rules(8), vec![cell("A01", 0.0)]);
        let p = plan(&inp, &flat(24)).unwrap();
        assert_eq!(p.warnings.len(), 1);
        assert_eq!((p.warnings[0].kind, p.warnings[0].cell.as_str(), p.warnings[0].date), ("light_last_crop", "A01", date(2026, 3, 18)));
        assert!(p.warnings[0].message.contains("crops_per_anode_cycle"));
        assert!(harvests(&p).iter().all(|(_, h)| h.light == h.with_anode_change));
        // at 0.5 (60 kg) it is not light; with three equal crops there is no light last crop
        let mut r = rules(8);
        r.light_crop_fraction = 0.5;
        assert!(plan(&input(24, "20:00", 20, r, vec![cell("A01", 0.0)]), &flat(24)).unwrap().warnings.is_empty());
        let mut c = cell("A01", 0.0);
        c.params.crops_per_anode_cycle = Some(3);
        assert!(plan(&input(24, "20:00", 20, rules(8), vec![c]), &flat(24)).unwrap().warnings.is_empty());
    }

    #[test]
    fn bound_by_names_the_constraint_that_kept_a_job_off_the_day() {
        // The thirty-cell wave: 8 on the ideal day and 8 on each of the two days before, 6 a day
        // late (see a_wave_of_thirty_cells_spreads_early_rather_than_late): the crew binds the
        // ideal day and the two days early; the day after takes what is left, so it binds nothing.
        let cells: Vec<CellInput> = (1..=30)
            .map(|i| {
                let mut c = cell(&format!("A{i:02}"), 0.0);
                c.params.scrap_lower = 0.07;
                c
            })
            .collect();
        let mut r = rules(8);
        r.smooth_harvests = false;
        let inp = input(24, "08:00", 28, r.clone(), cells.clone());
        let p = plan(&inp, &flat(24)).unwrap();
        let ideal = (date(2026, 3, 19) - inp.calendar.from).num_days() as usize;
        assert_eq!(p.days[ideal].bound_by, Some(Bound::Crew));
        assert_eq!(p.days[ideal - 1].bound_by, Some(Bound::Crew));
        assert_eq!(p.days[ideal + 1].bound_by, None);
        // a crane of 20 lifts a shift (2 + 2 a change with its crop): 5 changes a day, the crane binds
        r.crane = Some(Crane { lifts_per_shift: 20, per_anode_change: 2, per_harvest: 2 });
        let p = plan(&input(24, "08:00", 28, r.clone(), cells.clone()), &flat(24)).unwrap();
        assert_eq!(p.days[ideal].bound_by, Some(Bound::Crane));
        assert_eq!(p.days[ideal].crew_capacity, 5);
        assert_eq!(p.days[ideal].crane_lifts, Some(20));
        // 5 anodes a day and none in stock: 95 by the ideal day, one change of 50 by then; the anodes bind
        let mut r = rules(8);
        r.anodes_per_day = Some(5);
        let p = plan(&input(24, "08:00", 28, r, cells), &flat(24)).unwrap();
        assert!(p.days[ideal].crew_load < 8);
        assert_eq!(p.days[ideal].bound_by, Some(Bound::Anodes));
        assert!(p.days.iter().all(|d| d.anodes_delivered.is_some_and(|x| x <= 5)));
    }

    #[test]
    fn the_anode_stock_line_follows_levelled_deliveries() {
        // Two changes of 50 anodes on 03-18 (index 8) with 20 in stock and up to 30 a day: the need
        // beyond stock is 80 by day 8, so 80/9 = 8.9 a day, rounded up cumulatively (by hand).
        let mut r = rules(8);
        r.anode_stock = Some(20);
        r.anodes_per_day = Some(30);
        let p = plan(&input(240, "20:00", 14, r, vec![cell("A01", 0.0), cell("A02", 0.0)]), &flat(240)).unwrap();
        assert_eq!(change_days(&p).values().copied().collect::<Vec<_>>(), vec![8, 8]);
        let delivered: Vec<u64> = p.days.iter().map(|d| d.anodes_delivered.unwrap()).collect();
        assert_eq!(&delivered[..9], &[9, 9, 9, 9, 9, 9, 9, 9, 8]);
        assert!(delivered[9..].iter().all(|x| *x == 0));
        let stock: Vec<u64> = p.days.iter().map(|d| d.anode_stock.unwrap()).collect();
        assert_eq!(&stock[..9], &[29, 38, 47, 56, 65, 74, 83, 92, 0]);
        // unlimited supply: no stock line
        let p = plan(&input(240, "20:00", 14, rules(8), vec![cell("A01", 0.0)]), &flat(240)).unwrap();
        assert!(p.days.iter().all(|d| d.anode_stock.is_none() && d.anodes_delivered.is_none()));
    }

    #[test]
    fn smoothing_spreads_crops_due_together_and_never_worsens_the_spread() {
        // Six cells set together: their first crops are all due 179.25 h after the set (day 03-07
        // with 20:00 day starts, index 6), each free to move a day either way. Capped only, the
        // stripping machine takes 6 × 51 = 306 cathodes that day and none beside it; smoothed, two a
        // day (102, 102, 102), by hand.
        let cells: Vec<CellInput> = (1..=6).map(|i| cell(&format!("A{i:02}"), 0.0)).collect();
        let mut r = rules(8);
        r.smooth_harvests = false;
        let capped = plan(&input(24, "20:00", 14, r, cells.clone()), &flat(24)).unwrap();
        let smooth = plan(&input(24, "20:00", 14, rules(8), cells), &flat(24)).unwrap();
        let load = |p: &Plan| p.days.iter().map(|d| d.harvest_cathodes).collect::<Vec<u64>>();
        assert_eq!(&load(&capped)[5..8], &[0, 306, 0]);
        assert_eq!(&load(&smooth)[5..8], &[102, 102, 102]);
        assert!(smoothing::spread(&load(&smooth)) < smoothing::spread(&load(&capped)));
        assert_eq!(smooth.harvests_smoothed, 4);
        assert!(!smooth.harvests_exact && capped.harvests_exact);
        assert_eq!(harvests(&smooth).len(), harvests(&capped).len());
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(48))]
        #[test]
        fn the_crane_budget_is_never_exceeded(
            sets in proptest::collection::vec(0u32..400, 1..14),
            lifts in 4u32..30,
            per_change in 1u32..4,
            per_harvest in 1u32..4,
            shifts in 1u32..4,
            crew in 1u32..10,
            smooth in proptest::bool::ANY,
        ) {
            let cells: Vec<CellInput> = sets.iter().enumerate().map(|(i, h)| cell(&format!("A{i:02}"), -f64::from(*h))).collect();
            let mut r = rules(crew);
            r.shifts_per_day = shifts;
            r.smooth_harvests = smooth;
            let crane = Crane { lifts_per_shift: lifts, per_anode_change: per_change, per_harvest };
            r.crane = Some(crane);
            // a t0 far enough back for every set: the curve starts 400 h earlier
            let now_h = 400;
            let rs: Vec<RawReading> = (0..=now_h + 400).map(|h| RawReading { t: at(f64::from(h) - 400.0), amps: 30_000.0 }).collect();
            let curves = HashMap::from([("C1".to_string(), MemoryCurve::build(&rs, &[], &[], at(f64::from(now_h))))]);
            let inp = input(now_h, "06:00", 21, r, cells);
            match plan(&inp, &curves) {
                Ok(p) => {
                    let budget = lifts * shifts;
                    for d in &p.days {
                        let crops = d.harvests.iter().filter(|h| h.with_anode_change).count() as u32;
                        let others = d.harvests.len() as u32 - crops;
                        let want = d.anode_changes.len() as u32 * per_change + (crops + others) * per_harvest;
                        proptest::prop_assert_eq!(d.crane_lifts, Some(want), "{}", d.date);
                        proptest::prop_assert!(want <= budget, "{}: {want} lifts > {budget}", d.date);
                        proptest::prop_assert_eq!(d.crane_capacity, Some(budget));
                        if shifts > 1 {
                            proptest::prop_assert_eq!(d.shifts.iter().filter_map(|s| s.crane_lifts).sum::<u32>(), want);
                            proptest::prop_assert_eq!(d.shifts.iter().map(|s| s.harvests).sum::<u32>(), others);
                            for s in &d.shifts {
                                proptest::prop_assert!(s.crane_lifts.unwrap_or(0) <= lifts, "{}: a shift over its lifts {:?}", d.date, d.shifts);
                            }
                        }
                    }
                }
                // too small a budget for one change with its crop is refused, naming the key
                Err(PlanError::Rule { key, .. }) => proptest::prop_assert!(lifts < per_change + per_harvest && key == "crane_lifts_per_shift"),
                Err(e) => proptest::prop_assert!(false, "{e}"),
            }
        }
    }
}
