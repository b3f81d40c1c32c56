//! Queries the shift report and the copper balance need: the entries of a
//! period, and a cell's crops with their stored figures.

use rusqlite::params;

use super::{Db, Result, opt_time, secs, time};
use crate::domain::charge::Time;
use crate::domain::history::Event;

/// A cathode crop as stored, with the figures of a closed one.
#[derive(Debug, Clone, PartialEq)]
pub struct CropRow {
    pub started_at: Time,
    pub ended_at: Option<Time>,
    pub harvest_event: Option<i64>,
    pub harvest_kg: Option<f64>,
    pub charge_ah: Option<f64>,
    pub efficiency: Option<f64>,
}

impl Db<'_> {
    /// Every entry (undos included) that happened in `(from, to]` or was recorded
    /// then, in time order: what a shift did and wrote.
    pub fn events_between(&self, from: Time, to: Time) -> Result<Vec<Event>> {
        let sql = format!(
            "SELECT {} FROM event e LEFT JOIN circuit c ON c.id = e.circuit_id
             WHERE (e.at > ?1 AND e.at <= ?2) OR (e.recorded_at > ?1 AND e.recorded_at <= ?2) ORDER BY e.at, e.id",
            super::events::EVENT_COLS
        );
        let mut st = self.c.prepare_cached(&sql)?;
        super::events::decoded(st.query_map(params![secs(from), secs(to)], super::events::event)?)
    }

    /// A cell's crops that were growing at some time in `(from, to]`, oldest first.
    pub fn crops_between(&self, cell: &str, from: Time, to: Time) -> Result<Vec<CropRow>> {
        let mut st = self.c.prepare_cached(
            "SELECT started_at, ended_at, harvest_event, harvest_kg, charge_ah, efficiency FROM crop
             WHERE cell_id = ?1 AND started_at <= ?3 AND (ended_at IS NULL OR ended_at > ?2) ORDER BY started_at",
        )?;
        let v = st.query_map(params![cell, secs(from), secs(to)], |r| {
            Ok(CropRow {
                started_at: time(r.get(0)?)?,
                ended_at: opt_time(r.get(1)?)?,
                harvest_event: r.get(2)?,
                harvest_kg: r.get(3)?,
                charge_ah: r.get(4)?,
                efficiency: r.get(5)?,
            })
        })?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }
}
