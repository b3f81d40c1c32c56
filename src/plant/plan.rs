//! The anode-change and harvest plan as the faces ask for it: every cell's load,
//! crop and cut-outs, the circuits' curves and outages, the `[plan]` keys with their overrides.

use chrono::NaiveDate;
use std::collections::HashMap;

use super::forecast::snapshots;
use super::{Plant, PlantError, Result};
use crate::domain::charge::Time;
use crate::domain::forecast::CellInput;
use crate::domain::levelling::Weights;
use crate::domain::plan::{Calendar, Plan, PlanError, PlanInput, Rules, plan};
use crate::store::StoreCurve;

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
        let mut curves: HashMap<String, StoreCurve<'_>> = HashMap::new();
        let mut outages = Vec::new();
        for c in db.circuits()? {
            outages.extend(db.outages(c.id)?.into_iter().map(|s| (c.name.clone(), s)));
            if cells.iter().any(|x| x.circuit == c.name) {
                curves.insert(c.name.clone(), StoreCurve::new(db, c.id, now)?);
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
                whole_sections: keys.whole_sections,
            },
            cells,
            moves: opts.moves.clone(),
        };
        plan(&input, &curves).map_err(|e| match e {
            PlanError::Curve(e) => PlantError::Store(e),
            e @ PlanError::Move { .. } => rejected("--move", e.to_string()),
            PlanError::Rule { key, message } => rejected(format!("plan.{key}"), message),
            PlanError::Level(e) => PlantError::Internal(format!("levelling the plan: {e}")),
        })
    }
}
