//! The patrol list as the faces ask for it: every in-circuit cell with a
//! voltage in the last 24 h, ranked by how suspect of a short it is.

use super::forecast::snapshots;
use super::{Plant, Result};
use crate::domain::charge::Time;
use crate::domain::forecast::CellInput;
use crate::domain::patrol::{Patrol, PatrolInput, RECENT, rank};
use crate::store::Db;

/// The patrol's view of a snapshot, if the cell is in circuit with a recent
/// voltage; `trend` also reads the crop's voltages (the forecast's tiles skip it).
pub(crate) fn patrol_input(db: Option<Db<'_>>, c: &CellInput, as_of: Time) -> Result<Option<PatrolInput>> {
    let in_circuit = !c.cutouts.iter().any(|s| s.from <= as_of && s.to.is_none_or(|to| to > as_of));
    let Some(voltage) = c.last_voltage.filter(|(t, _)| *t > as_of - RECENT && in_circuit) else { return Ok(None) };
    let crop_voltages = match (db, c.crop_started) {
        (Some(db), Some(from)) => db.voltages_between(&c.cell, from, as_of)?,
        _ => Vec::new(),
    };
    Ok(Some(PatrolInput {
        cell: c.cell.clone(),
        circuit: c.circuit.clone(),
        section: c.section.clone(),
        anode_kind: c.params.anode_kind,
        voltage,
        crop_voltages,
        cathode_efficiency: c.learnt.cathode.value,
        efficiency_source: c.learnt.cathode.source,
        shorts_this_crop: c.shorts.map_or(0, |s| s.0),
    }))
}

impl Plant {
    /// The cells to check for shorts as of `now`, most suspect first (see
    /// [`crate::domain::patrol`] for how the score is made).
    pub fn patrol(&self, now: Time) -> Result<Patrol> {
        let db = self.store.db();
        let mut inputs = Vec::new();
        for (_, c) in snapshots(db, now, None)? {
            if let Some(p) = patrol_input(Some(db), &c, now)? {
                inputs.push(p);
            }
        }
        Ok(Patrol { schema: 1, as_of: now, cells: rank(&inputs) })
    }
}
