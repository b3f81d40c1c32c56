//! The back-test on the plant's own history: every weighed crop and scrap in a
//! period beside its ex-ante prediction and the fixed-efficiency one.
//!
//! Ex ante: a crop is predicted from the values learnt from the weighings
//! logged at or before the time the crop began (the weighing that opened it
//! counts as before), a scrap from those at or before its load was set; the
//! crop's own measured charge is used. So a later weighing never changes an
//! earlier row; an undo of an earlier entry, or back-filled current, may. The
//! fixed figure uses each cell's layout values as of the end of the period.

use std::collections::HashMap;

use super::{Plant, PlantError, Result, far_future, learn};
use crate::domain::anode::AnodeLoad;
use crate::domain::backtest::{Backtest, Crop, Scrap, crop_row, scrap_row, summarise};
use crate::domain::charge::{Time, cell_time_reaching};
use crate::domain::electrochem::charge_for_copper_ah;
use crate::domain::entry::Field;
use crate::domain::learn::CellLearnt;
use crate::store::{StoreCurve, WeighingKind};

impl Plant {
    /// Back-tests the weighings in `[from, to]` (weighing times; `from` defaults
    /// to the first weighing), optionally of one cell.
    pub fn backtest(&self, from: Option<Time>, to: Time, only_cell: Option<&str>) -> Result<Backtest> {
        let db = self.store.db();
        db.plant_info()?.ok_or(PlantError::NoLayout)?;
        let from = match from {
            Some(t) => t,
            None => db.earliest_weighing_at()?.unwrap_or(to).min(to),
        };
        if to < from {
            return Err(PlantError::rejected(Field::To, "the period ends before it starts"));
        }
        let cells = db.cells()?;
        if let Some(id) = only_cell
            && !cells.iter().any(|c| c.id == id)
        {
            return Err(PlantError::rejected(Field::Cell, format!("unknown cell {id}: it is not in the layout")));
        }
        let by_id: HashMap<&str, &crate::store::CellRow> = cells.iter().map(|c| (c.id.as_str(), c)).collect();
        let params = db.params_at_all(to)?;
        let mut curves: HashMap<i64, StoreCurve<'_>> = HashMap::new();
        // the section's values learnt up to a time, by (a cell of the section, time)
        let mut known: HashMap<(u32, Time), HashMap<String, CellLearnt>> = HashMap::new();
        let mut crops = Vec::new();
        let mut scrap = Vec::new();
        // two passes over the rows as they are read: first how many rows need
        // each key's values, then the rows, a key's values dropped after their
        // last use, so a year of weighings holds only the few sections' values
        // still pending (and not the rows themselves)
        // a section by a number (its first cell's, numbered as met) and each cell's
        let mut numbers: HashMap<String, u32> = HashMap::new();
        let mut section_number: HashMap<String, u32> = HashMap::new();
        let mut section_of = |cell: &str| -> Result<u32> {
            if let Some(&n) = section_number.get(cell) {
                return Ok(n);
            }
            let first = db.section_cells(cell)?.into_iter().next().unwrap_or_else(|| cell.to_string());
            let next = numbers.len() as u32;
            let n = *numbers.entry(first).or_insert(next);
            section_number.insert(cell.to_string(), n);
            Ok(n)
        };
        let mut uses: HashMap<(u32, Time), u32> = HashMap::new();
        db.each_learn_row(only_cell, from, to, |r| -> Result<()> {
            if by_id.contains_key(r.cell.as_str()) && params.contains_key(&r.cell) {
                *uses.entry((section_of(&r.cell)?, r.started_at)).or_default() += 1;
            }
            Ok(())
        })?;
        db.each_learn_row(only_cell, from, to, |r| -> Result<()> {
            let (Some(cell), Some(p)) = (by_id.get(r.cell.as_str()), params.get(&r.cell)) else { return Ok(()) };
            let key = (section_of(&r.cell)?, r.started_at);
            if let std::collections::hash_map::Entry::Vacant(e) = known.entry(key) {
                e.insert(learn::learnt_until(db, &r.cell, r.started_at, &params)?);
            }
            let l = known.get(&key).and_then(|m| m.get(&r.cell)).copied().unwrap_or_else(|| CellLearnt::layout(p));
            if let Some(n) = uses.get_mut(&key) {
                *n -= 1;
                if *n == 0 {
                    uses.remove(&key);
                    known.remove(&key);
                }
            }
            match r.kind {
                WeighingKind::Crop => {
                    let curve = match curves.entry(cell.circuit_id) {
                        std::collections::hash_map::Entry::Occupied(e) => e.into_mut(),
                        std::collections::hash_map::Entry::Vacant(e) => e.insert(StoreCurve::new(db, cell.circuit_id, far_future())?),
                    };
                    let cuts = db.cutouts(&r.cell, far_future())?;
                    let reach = cell_time_reaching(&*curve, &cuts, r.started_at, charge_for_copper_ah(r.weighed_kg, l.cathode.value))?;
                    let c = Crop {
                        cell: &r.cell,
                        circuit: &cell.circuit,
                        section: &cell.section,
                        started_at: r.started_at,
                        harvested_at: r.ended_at,
                        charge_ah: r.charge_ah,
                        weighed_kg: r.weighed_kg,
                    };
                    crops.push(crop_row(&c, &l.cathode, p.cathode_efficiency, reach));
                }
                WeighingKind::Scrap => {
                    let (Some(count), Some(set_kg)) = (r.count, r.set_kg) else { return Ok(()) };
                    let load = AnodeLoad {
                        initial_kg: set_kg,
                        count,
                        efficiency: 1.0,
                        copper_fraction: p.anode_copper_fraction,
                        lug_kg: p.lug_kg,
                    };
                    let s = Scrap {
                        cell: &r.cell,
                        circuit: &cell.circuit,
                        section: &cell.section,
                        set_at: r.started_at,
                        pulled_at: r.ended_at,
                        charge_ah: r.charge_ah,
                        weighed_kg: r.weighed_kg,
                        load,
                    };
                    scrap.push(scrap_row(&s, &l.anode, p.anode_efficiency));
                }
            }
            Ok(())
        })?;
        let summary = summarise(&crops, &scrap);
        Ok(Backtest { schema: 1, from, to, crops, scrap, summary })
    }
}
