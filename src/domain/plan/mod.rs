//! The anode-change and harvest plan: each cell's change windows and crop dues
//! from its charge curve, levelled over production days against crew, stripping machine and anodes.
//!
//! Its parts: `calendar` (days and rules), `outlook` (each cell's cycles and
//! crops), `changes` (anode changes levelled cycle by cycle, moves), `harvests`
//! (harvests levelled and smoothed), `report` (the plan's days and jobs, predicted).
//!
//! How a plan is made, in three steps:
//!
//! 1. **Outlook** ([`outlook()`]): for each cell, from its running anode load, the
//!    times its remaining anode fraction reaches `scrap_upper` (the window
//!    opens), `scrap_target` (the ideal change) and `scrap_lower` (the window
//!    closes), found with [`cell_time_reaching`](crate::domain::charge::cell_time_reaching) on the circuit's curve (the
//!    projection after the last reading is the estimate). Between changes come
//!    the cathode crops, each due when [`crop_target`](crate::domain::forecast::crop_target) says, the rule the
//!    forecast's `harvest_due` uses too (one timeline): at its target mass
//!    (`cathode_target_kg` mean per cathode), or, where `crops_per_anode_cycle`
//!    = k is set, at k equal parts of the anode life's charge (set → ideal
//!    change); a crop due at or after the change goes with the anodes. Each
//!    crop is assumed pulled at its due time (one due before the plan starts,
//!    at the start of the plan) and the next starts then. Inert-anode cells
//!    have no anode changes, only crops at their target mass. A crop is
//!    overdue when its due time has passed; work due before the plan starts is
//!    planned from the first day.
//! 2. **Levelling** ([`plan()`]), cycle by cycle: the running loads' changes go
//!    through [`levelling::level`](crate::domain::levelling::level) (crew per day, days without anode work, each
//!    circuit's own outage days, anode supply, crane lifts, whole sections as
//!    groups), then the kept moves (recorded decisions) and the hand moves are
//!    applied to the levelled plan one by one and each is re-checked. Each next
//!    load is then assumed set on the day its change before it is planned on
//!    (at the instant of that day nearest the change's ideal time), with
//!    `anodes_per_cell` new anodes of `new_anode_kg` each; its window and crops
//!    follow from that, and it is levelled in the capacity left. Harvests
//!    are levelled next against the stripping machine and the crane lifts
//!    left, with the last crop of each cycle fixed to its anode-change day,
//!    then smoothed inside their windows ([`smoothing::smooth`](crate::domain::smoothing::smooth)). Anode
//!    deliveries are levelled under the daily preparation limit
//!    ([`smoothing::deliveries`](crate::domain::smoothing::deliveries)), giving each day's stock line.
//! 3. **Prediction**: every planned job is given the instant of its day nearest
//!    its due time (never before now), and the anode fraction, scrap and

use chrono::NaiveDate;
use serde::Serialize;
use std::collections::HashMap;

use super::charge::{Curve, Time};
use super::forecast::CellInput;
use super::levelling::LevelError;

mod calendar;
mod changes;
mod harvests;
mod outlook;
mod report;
#[cfg(test)]
mod tests;

use outlook::first_cycle;

pub use calendar::{Calendar, Crane, LOOKAHEAD_DAYS, Rules};
pub use harvests::{HARVEST_SLACK_DAYS, HARVEST_WEIGHTS};
pub use outlook::{ChangeDue, Cycle, HarvestDue, Outlook, outlook};
pub use report::{
    AnodeChange, Bound, DayOutage, Harvest, JobKind, Plan, PlanDay, PlanWarning, Reason, ShiftLoad, UnplacedJob, WarningKind, Window,
};

/// The caution every plan carries (DOMAIN.md, "Cautions the tool must carry").
pub const ADVISORY: &str = "This plan is advisory: it is predicted from the logged current and the layout's rules and does not \
replace the foreman's judgement. Anode lifts, lock-out and acid handling follow site procedures, local codes and qualified engineers.";

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
/// moved). They are exact whenever [`levelling::level`](crate::domain::levelling::level) reports `exact` for
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

    let changes = changes::level_changes(input, curves, &mut outlooks)?;
    let harvests = harvests::level_harvests(input, &outlooks, &changes)?;
    report::assemble(input, curves, &outlooks, changes, harvests)
}
