//! What a committed entry changes in the forecast, and the forecast of only
//! those cells: the screens refresh what an entry touches, not the whole plant.
//!
//! The touched part is always whole sections: a section's cells learn their
//! efficiencies together (a weighing relearns its section) and are ranked
//! together for suspected shorts (the patrol score compares a cell's voltage
//! with its section's), so a section forecast alone is what the whole plant's
//! forecast holds for it. A section lies inside one circuit; an entry on a
//! circuit (a current reading, an outage, a setpoint) changes the charge of
//! every cell on it, so it touches all of the circuit's sections.

use std::collections::BTreeSet;

use super::{Plant, Result};
use crate::domain::charge::Time;
use crate::domain::entry::{Entry, Field};
use crate::domain::forecast::Forecast;
use crate::domain::history::Event;

/// The cells an entry touches (whole sections) and their circuits, whose data
/// warnings are computed again with them.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Touched {
    pub cells: BTreeSet<String>,
    pub circuits: BTreeSet<String>,
}

impl Touched {
    pub fn is_empty(&self) -> bool {
        self.cells.is_empty()
    }
}

impl Plant {
    /// What a batch of entries touches: each cell entry its cell's section, each
    /// circuit entry (outage, setpoint) every cell of its circuit.
    pub fn touched_by_entries(&self, entries: &[Entry]) -> Result<Touched> {
        let mut t = Touched::default();
        for e in entries {
            match e {
                Entry::Outage { circuit, .. } | Entry::Setpoint { circuit, .. } => self.touch_circuit(&mut t, circuit)?,
                _ => {
                    if let Some(cell) = e.cell() {
                        self.touch_cell(&mut t, cell)?;
                    }
                }
            }
        }
        Ok(t)
    }

    /// What undoing `e` touches: the same as recording it did. `None` for an
    /// entry on neither a cell nor a circuit (refresh the whole plant).
    pub fn touched_by_event(&self, e: &Event) -> Result<Option<Touched>> {
        let mut t = Touched::default();
        match (&e.cell, &e.circuit) {
            (Some(cell), _) => self.touch_cell(&mut t, cell)?,
            (None, Some(circuit)) => self.touch_circuit(&mut t, circuit)?,
            (None, None) => return Ok(None),
        }
        Ok(Some(t))
    }

    /// What a current reading on `circuit` touches: every cell of the circuit.
    pub fn touched_by_circuit(&self, circuit: &str) -> Result<Touched> {
        let mut t = Touched::default();
        self.touch_circuit(&mut t, circuit)?;
        Ok(t)
    }

    /// The forecast of the touched cells as of `as_of`, in plant order, with
    /// their circuits' data warnings: exactly what [`Plant::forecast`] of the
    /// whole plant holds for them (the test `an_incremental_refresh_equals_a_full_forecast`).
    pub fn forecast_touched(&self, as_of: Time, t: &Touched) -> Result<Forecast> {
        if t.is_empty() {
            return Ok(Forecast { schema: 1, as_of, cells: Vec::new(), warnings: Vec::new() });
        }
        let ids: Vec<&str> = t.cells.iter().map(String::as_str).collect();
        self.forecast_cells(as_of, Some(&ids), as_of)
    }

    /// The first whole sections in plant order holding at least `n` cells,
    /// and whether they are the whole plant: what the screens' first frame can show.
    pub fn first_cells(&self, n: usize) -> Result<(Touched, bool)> {
        let mut t = Touched::default();
        let mut last: Option<(String, String)> = None;
        for c in self.store.db().cells()? {
            let group = (c.circuit.clone(), c.section.clone());
            if last.as_ref() != Some(&group) {
                if t.cells.len() >= n {
                    return Ok((t, false));
                }
                last = Some(group);
            }
            t.circuits.insert(c.circuit);
            t.cells.insert(c.id);
        }
        Ok((t, true))
    }

    fn touch_cell(&self, t: &mut Touched, cell: &str) -> Result<()> {
        let db = self.store.db();
        let row = db.cell(cell)?.ok_or_else(|| super::PlantError::rejected(Field::Cell, format!("unknown cell {cell}")))?;
        t.circuits.insert(row.circuit);
        t.cells.extend(db.section_cells(cell)?);
        Ok(())
    }

    fn touch_circuit(&self, t: &mut Touched, circuit: &str) -> Result<()> {
        let cells: Vec<String> = self.store.db().cells()?.into_iter().filter(|c| c.circuit == circuit).map(|c| c.id).collect();
        if !cells.is_empty() {
            t.circuits.insert(circuit.to_string());
        }
        t.cells.extend(cells);
        Ok(())
    }
}
