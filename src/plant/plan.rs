//! The anode-change and harvest plan as the faces ask for it: every cell's load,
//! crop and cut-outs, the circuits' curves and outages, the `[plan]` keys with their overrides.

use chrono::NaiveDate;
use std::collections::HashMap;

use super::forecast::snapshots;
use super::record::initials;
use super::{Opts, Plant, PlantError, Result, far_future};
use crate::domain::charge::Time;
use crate::domain::forecast::CellInput;
use crate::domain::history::EventKind;
use crate::domain::levelling::Weights;
use crate::domain::plan::{Calendar, Crane, KeptMove, Plan, PlanError, PlanInput, Rules, plan};
use crate::domain::plan_diff::{PlanDiff, diff, planned_jobs};
use crate::domain::plant_time::ProductionDays;
use crate::store::{Db, NewEvent, SliceCurve};

/// The longest plan, in production days: a year is far beyond what the
/// forecasts can say and keeps the levelling's work bounded.
pub const MAX_PLAN_DAYS: u32 = 366;

/// What to plan, and the command-line overrides of the layout's `[plan]` keys.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanOptions {
    /// First production day (default: the production day `now` falls in).
    pub from: Option<NaiveDate>,
    /// Production days to plan.
    pub days: u32,
    pub crew_cells_per_day: Option<u32>,
    pub harvest_cathodes_per_day: Option<u32>,
    pub anode_stock: Option<u64>,
    pub anodes_per_day: Option<u64>,
    /// Hand moves of a cell's anode change to another day, applied in order.
    pub moves: Vec<(String, NaiveDate)>,
    /// Level the harvests' daily cathodes after capping them (`false`: the cap-only plan, to compare).
    pub smooth_harvests: bool,
}

impl Default for PlanOptions {
    fn default() -> Self {
        PlanOptions {
            from: None,
            // two weeks: most of an anode life, what a foreman plans ahead (common practice, no source)
            days: 14,
            crew_cells_per_day: None,
            harvest_cathodes_per_day: None,
            anode_stock: None,
            anodes_per_day: None,
            moves: Vec::new(),
            smooth_harvests: true,
        }
    }
}

fn rejected(name: impl Into<String>, message: impl Into<String>) -> PlantError {
    PlantError::setting(name, message)
}

impl Plant {
    /// Plans anode changes and harvests over `opts.days` production days from
    /// `opts.from`, on every circuit's curve as of `now` (see
    /// [`crate::domain::plan::plan`] for what is guaranteed).
    pub fn plan(&self, opts: &PlanOptions, now: Time) -> Result<Plan> {
        self.plan_with(opts, now, &[])
    }

    /// [`Plant::plan`] with `extra` kept moves after the recorded ones (each
    /// replacing a recorded one of the same cell).
    fn plan_with(&self, opts: &PlanOptions, now: Time, extra: &[KeptMove]) -> Result<Plan> {
        let db = self.store.db();
        let info = db.plant_info()?.ok_or(PlantError::NoLayout)?;
        if opts.days == 0 || opts.days > MAX_PLAN_DAYS {
            return Err(rejected("--days", format!("{} days: a plan covers 1 to {MAX_PLAN_DAYS} production days", opts.days)));
        }
        let today = info.days.day_of(now);
        let from = opts.from.unwrap_or(today);
        if from < today {
            return Err(rejected("--from", format!("{from} is before today's production day {today}: a plan starts today or later")));
        }
        let keys = &info.plan;
        let (crew, crew_field) = match opts.crew_cells_per_day {
            Some(k) => (k, "--crew-cells-per-day"),
            None => (keys.crew_cells_per_day, "plan.crew_cells_per_day"),
        };
        if crew == 0 {
            return Err(rejected(crew_field, "0 cells a day leaves no crew for anode changes: give at least 1"));
        }
        let (strip, strip_field) = match opts.harvest_cathodes_per_day {
            Some(c) => (c, "--harvest-cathodes-per-day"),
            None => (keys.harvest_cathodes_per_day, "plan.harvest_cathodes_per_day"),
        };
        let no_anode_work = keys
            .no_anode_work
            .iter()
            .map(|d| {
                NaiveDate::parse_from_str(d, "%Y-%m-%d")
                    .map_err(|_| rejected("plan.no_anode_work", format!("'{d}' is not a date (YYYY-MM-DD)")))
            })
            .collect::<Result<Vec<_>>>()?;

        let cells: Vec<CellInput> = snapshots(db, now, None)?.into_iter().map(|(_, c)| c).collect();
        if let Some(c) = cells.iter().find(|c| c.params.cathodes_per_cell > strip) {
            return Err(rejected(
                strip_field,
                format!(
                    "{strip} cathodes a day is less than the {} cathodes of cell {}: its crops could never be stripped",
                    c.params.cathodes_per_cell, c.cell
                ),
            ));
        }
        let mut curves: HashMap<String, SliceCurve<'_>> = HashMap::new();
        let mut outages = Vec::new();
        for c in db.circuits()? {
            outages.extend(db.outages(c.id)?.into_iter().map(|s| (c.name.clone(), s)));
            // the plan looks the curve up from its cells' running loads and crops on:
            // those readings are held in memory (an earlier look-up asks the store)
            let mine = cells.iter().filter(|x| x.circuit == c.name);
            let from = mine.flat_map(|x| [x.load.map(|l| l.0), x.crop_started]).flatten().min();
            if let Some(from) = from.or(cells.iter().any(|x| x.circuit == c.name).then_some(now)) {
                curves.insert(c.name.clone(), SliceCurve::whole(db, c.id, now, from)?);
            }
        }
        let input = PlanInput {
            now,
            calendar: Calendar::new(info.days, from, opts.days as usize),
            rules: Rules {
                crew_cells_per_day: crew,
                shifts_per_day: keys.shifts_per_day,
                harvest_cathodes_per_day: strip,
                weights: Weights { early: keys.early_weight, late: keys.late_weight },
                anode_stock: opts.anode_stock.or(keys.anode_stock),
                anodes_per_day: opts.anodes_per_day.or(keys.anodes_per_day),
                no_anode_work,
                outages,
                outage_work: keys.outage_anode_work.clone(),
                whole_sections: keys.whole_sections,
                crane: keys.crane_lifts_per_shift.map(|l| Crane {
                    lifts_per_shift: l,
                    per_anode_change: keys.lifts_per_anode_change,
                    per_harvest: keys.lifts_per_harvest,
                }),
                smooth_harvests: opts.smooth_harvests,
                light_crop_fraction: keys.light_crop_fraction,
            },
            kept: kept_moves(db, &info.days, from)?
                .into_iter()
                .filter(|k| !extra.iter().any(|x| x.cell == k.cell))
                .chain(extra.iter().cloned())
                .collect(),
            cells,
            moves: opts.moves.clone(),
        };
        let mut p = plan(&input, &curves).map_err(|e| match e {
            PlanError::Curve(e) => PlantError::Store(e),
            e @ PlanError::Move { .. } => rejected("--move", e.to_string()),
            PlanError::Rule { key, message } => rejected(format!("plan.{key}"), message),
            PlanError::Level(e) => PlantError::Internal(format!("levelling the plan: {e}")),
        })?;
        p.since_approved = self.changes_since_approved(&p)?;
        Ok(p)
    }

    /// What `plan` changes against the last approved plan (`None`: none approved yet).
    pub fn changes_since_approved(&self, plan: &Plan) -> Result<Option<PlanDiff>> {
        let to = plan.days.last().map_or(plan.from, |d| d.date);
        Ok(self.store.db().last_approved_plan()?.map(|a| diff(&a, &planned_jobs(plan), plan.from, to)))
    }

    /// Records the hand moves of `opts` in the event log as kept decisions
    /// (one entry per move, in one transaction), each for the cell's first
    /// change in the plan, so later plans apply them while they stay feasible;
    /// returns the entries and the plan made with them. The moves are first
    /// tried as kept moves on the plan: if one cannot be applied (outside the
    /// first change's window, a full day, no anodes, its circuit down),
    /// nothing is recorded and the reason is given.
    pub fn keep_moves(&mut self, opts: &PlanOptions, record: &Opts) -> Result<(Vec<i64>, Plan)> {
        if opts.moves.is_empty() {
            return Err(rejected("--keep", "there is no --move to keep"));
        }
        let by = initials(&record.by)?;
        let trial: Vec<KeptMove> = opts
            .moves
            .iter()
            .enumerate()
            .map(|(i, (cell, date))| KeptMove { cell: cell.clone(), date: *date, by: by.clone(), entry: -(i as i64) - 1, applied: false })
            .collect();
        let later = PlanOptions { moves: Vec::new(), ..opts.clone() };
        let tried = self.plan_with(&later, record.now, &trial)?;
        for t in &trial {
            if let Some(d) = tried.dropped_moves.iter().find(|d| d.entry == t.entry) {
                return Err(rejected("--move", format!("{}={}: {}", t.cell, t.date, d.reason)));
            }
            if tried.kept_moves.iter().any(|k| k.entry == t.entry && !k.applied) {
                return Err(rejected("--move", format!("{}={}: the date is after the plan's last day", t.cell, t.date)));
            }
        }
        let info = self.store.db().plant_info()?.ok_or(PlantError::NoLayout)?;
        let entries = self.store.write(|db| {
            let mut out = Vec::new();
            for (cell, date) in &opts.moves {
                out.push(db.append_event(&NewEvent {
                    kind: EventKind::KeptMove,
                    cell: Some(cell.clone()),
                    circuit_id: None,
                    at: info.days.start_of(*date),
                    end: None,
                    count: None,
                    kg: None,
                    amps: None,
                    volts: None,
                    by: by.clone(),
                    forced: false,
                    recorded_at: record.now,
                    voids: None,
                })?);
            }
            Ok::<_, PlantError>(out)
        })?;
        Ok((entries, self.plan(&later, record.now)?))
    }

    /// Records `plan` as approved by `by` (what it plans for each day); later
    /// plans show what changed since (`Plan::since_approved`). Returns its record's id.
    pub fn approve_plan(&mut self, plan: &Plan, record: &Opts) -> Result<i64> {
        let by = initials(&record.by)?;
        let to = plan.days.last().map_or(plan.from, |d| d.date);
        let jobs = planned_jobs(plan);
        self.store.write(|db| Ok::<_, PlantError>(db.record_approved_plan(record.now, &by, plan.from, to, &jobs)?))
    }
}

/// The live kept moves a plan from `from` applies: the newest per cell, dated
/// on or after `from`, and not yet done (no anode set in the cell since it was kept).
fn kept_moves(db: Db<'_>, days: &ProductionDays, from: NaiveDate) -> Result<Vec<KeptMove>> {
    let mut newest: HashMap<String, KeptMove> = HashMap::new();
    for e in db.kept_moves()? {
        let Some(cell) = e.cell.clone() else { continue };
        let date = days.day_of(e.at);
        if date < from {
            continue;
        }
        // anodes logged after the decision: the change it was about is done
        let done = db.load_at(&cell, far_future())?.is_some_and(|(set_event, _, _, _)| set_event > e.id);
        if done {
            continue;
        }
        newest.insert(cell.clone(), KeptMove { cell, date, by: e.by, entry: e.id, applied: false });
    }
    let mut out: Vec<KeptMove> = newest.into_values().collect();
    out.sort_by_key(|k| k.entry);
    Ok(out)
}
