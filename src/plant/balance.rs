//! The copper balance of a period as the faces ask for it: the period's anode
//! sets, weighings and charge from the store, the copper held in the cells from
//! the forecasts at both ends, summed by [`crate::domain::balance`].

use std::collections::HashMap;

use super::{Plant, PlantError, Result};
use crate::domain::balance::{Balance, CellCopper, HeldCopper, anode_copper_kg, balance, held_copper};
use crate::domain::charge::{Time, cell_charge};
use crate::domain::entry::Field;
use crate::domain::forecast::{CellForecast, Forecast};
use crate::domain::history::EventKind;
use crate::domain::layout::{AnodeKind, CellParams};
use crate::domain::shift::month_start;
use crate::store::StoreCurve;

fn by_cell(f: &Forecast) -> HashMap<&str, &CellForecast> {
    f.cells.iter().map(|c| (c.cell.as_str(), c)).collect()
}

impl Plant {
    /// The default balance period: the accounting month so far (from the start
    /// of the production day of the 1st) up to `now`.
    pub fn month_so_far(&self, now: Time) -> Result<(Time, Time)> {
        Ok((month_start(&self.info()?.days, now), now))
    }

    /// The copper balance of `(from, to]` (empty when `from == to`, as a shift
    /// report made at the first instant of its shift), per circuit and for the plant. The
    /// copper held in the cells comes from the forecast at `from` and at `to`,
    /// both with the efficiencies learnt as of `to`; the Faraday figure uses
    /// the cathode efficiency of the forecast at `to`.
    pub fn balance(&self, from: Time, to: Time) -> Result<Balance> {
        if from > to {
            return Err(PlantError::rejected(
                Field::From,
                format!("the period must not end before it starts ({} is after {})", self.show_time(from), self.show_time(to)),
            ));
        }
        // both ends at the efficiencies learnt by `to`, so the change in the
        // cells is the model's, not a change of what the model believes
        let start = self.forecast_learnt_at(from, None, to)?;
        let end = self.forecast(to, None)?;
        let (start, end) = (by_cell(&start), by_cell(&end));
        let db = self.store.db();
        let params_end = db.params_at_all(to)?;
        let mut cells: Vec<CellCopper> = Vec::new();
        let mut index: HashMap<String, usize> = HashMap::new();
        let rows = db.cells()?;
        let mut curves: HashMap<i64, StoreCurve<'_>> = HashMap::new();
        for c in &rows {
            let Some(p) = params_end.get(&c.id) else { continue };
            if let std::collections::hash_map::Entry::Vacant(v) = curves.entry(c.circuit_id) {
                v.insert(StoreCurve::new(db, c.circuit_id, to)?);
            }
            let Some(curve) = curves.get(&c.circuit_id) else { continue };
            let p0 = db.params_at(&c.id, from)?;
            let held = |f: Option<&&CellForecast>, p: &CellParams| f.map_or(HeldCopper::default(), |f| held_copper(f, p));
            let cuts = db.cutouts(&c.id, to)?;
            let mut anode_ah = 0.0;
            if p.anode_kind == AnodeKind::Soluble {
                for l in db.loads(&c.id)? {
                    let (a, b) = (l.set_at.max(from), l.ended_at.unwrap_or(to).min(to));
                    if b > a {
                        anode_ah += cell_charge(curve, &cuts, a, b)?.total();
                    }
                }
            }
            let mut cathode_ah = 0.0;
            for k in db.crops_between(&c.id, from, to)? {
                let (a, b) = (k.started_at.max(from), k.ended_at.unwrap_or(to).min(to));
                if b > a {
                    cathode_ah += cell_charge(curve, &cuts, a, b)?.total();
                }
            }
            let f_end = end.get(c.id.as_str());
            index.insert(c.id.clone(), cells.len());
            cells.push(CellCopper {
                cell: c.id.clone(),
                circuit: c.circuit.clone(),
                anode_kind: p.anode_kind,
                anode_in_kg: 0.0,
                starter_in_kg: 0.0,
                cathode_out_kg: 0.0,
                scrap_out_kg: 0.0,
                start: held(start.get(c.id.as_str()), &p0),
                end: held(f_end, p),
                anode_ah,
                // the anode factor learnt by `to`, as the held copper uses it
                eta_a: f_end.map_or(p.anode_efficiency, |f| f.anode_factor),
                cathode_ah,
                eta_c: f_end.map_or(p.cathode_efficiency, |f| f.cathode_efficiency),
            });
        }
        for e in db.events_between(from, to)? {
            if e.voided || !(e.at > from && e.at <= to) {
                continue;
            }
            let Some(i) = e.cell.as_ref().and_then(|id| index.get(id)).copied() else { continue };
            let cell = &mut cells[i];
            let p = db.params_at(&cell.cell, e.at)?;
            let soluble = cell.anode_kind == AnodeKind::Soluble;
            match e.kind {
                EventKind::Anodes if soluble => {
                    cell.anode_in_kg += anode_copper_kg(f64::from(e.count.unwrap_or(0)) * e.kg.unwrap_or(0.0), p.anode_copper_fraction);
                }
                EventKind::Scrap if soluble => cell.scrap_out_kg += anode_copper_kg(e.kg.unwrap_or(0.0), p.anode_copper_fraction),
                EventKind::Harvest => cell.cathode_out_kg += e.kg.unwrap_or(0.0),
                _ => {}
            }
        }
        // every crop begun in the period brought fresh starter sheets (if the plant uses them)
        for cell in &mut cells {
            let p = db.params_at(&cell.cell, to)?;
            if p.starter_sheet_kg > 0.0 {
                let begun = db.crops_between(&cell.cell, from, to)?.into_iter().filter(|k| k.started_at > from).count();
                cell.starter_in_kg = begun as f64 * p.starter_sheets_kg();
            }
        }
        let circuits = self.circuit_names()?;
        Ok(balance(from, to, &circuits, &cells))
    }
}
