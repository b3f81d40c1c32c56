//! What recording an entry at the end of a cell's history needs: whether it is
//! at the end, the cell's open load, crop and cut-out, and their replacement.
//!
//! Most entries sort after every other entry of their cell (a shift logs what
//! just happened); replaying the one new event over the open records gives the
//! same derived records as replaying the whole history (`plant::record`), with
//! a few rows read and written instead of all of them.

use rusqlite::params;

use super::{Db, LearnRow, Result, StoreError, secs, time};
use crate::domain::charge::{OpenSpan, Time};
use crate::domain::history::{CellHistory, CropRec, CutoutRec, EventKind, LoadRec};
use crate::domain::layout::CellParams;
use crate::store::CropFigures;

/// A cell's open records: the load not yet scrapped, the crop not yet
/// harvested, the cut-out not yet closed.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct OpenRecords {
    pub load: Option<LoadRec>,
    pub crop: Option<CropRec>,
    pub cutout: Option<CutoutRec>,
}

impl Db<'_> {
    /// Whether a live event of the cell that the replay uses sorts after an
    /// event of `kind` at `at` (time, then scrap < harvest < anodes < cut-out).
    pub fn replayed_event_after(&self, cell: &str, at: Time, kind: EventKind) -> Result<bool> {
        let sql = format!(
            "SELECT EXISTS (SELECT 1 FROM event e WHERE cell_id = ?1 AND at >= ?2 AND kind IN ('{s}', '{h}', '{a}', '{c}')
             AND (at > ?2 OR CASE kind WHEN '{s}' THEN {rs} WHEN '{h}' THEN {rh} WHEN '{a}' THEN {ra} ELSE {rc} END > ?3)
             AND NOT EXISTS (SELECT 1 FROM event v WHERE v.voids = e.id))",
            s = EventKind::Scrap.name(),
            h = EventKind::Harvest.name(),
            a = EventKind::Anodes.name(),
            c = EventKind::Cutout.name(),
            rs = EventKind::Scrap.rank(),
            rh = EventKind::Harvest.rank(),
            ra = EventKind::Anodes.rank(),
            rc = EventKind::Cutout.rank(),
        );
        Ok(self.c.prepare_cached(&sql)?.query_row(params![cell, secs(at), kind.rank()], |r| r.get(0))?)
    }

    /// The cell's open records as stored; `None` when more than one of a kind is open (then only a full replay knows).
    pub fn open_records(&self, cell: &str) -> Result<Option<OpenRecords>> {
        let mut st = self.c.prepare_cached(
            "SELECT set_event, set_at, count, mean_kg FROM anode_load INDEXED BY anode_load_open WHERE cell_id = ?1 AND ended_at IS NULL",
        )?;
        let loads: Vec<LoadRec> = st
            .query_map([cell], |r| {
                Ok(LoadRec {
                    set_event: r.get(0)?,
                    set_at: time(r.get(1)?)?,
                    count: r.get(2)?,
                    mean_kg: r.get(3)?,
                    ended_at: None,
                    scrap_event: None,
                    scrap_kg: None,
                })
            })?
            .collect::<rusqlite::Result<_>>()?;
        let mut st = self.c.prepare_cached("SELECT started_at FROM crop INDEXED BY crop_open WHERE cell_id = ?1 AND ended_at IS NULL")?;
        // the crop's first event is not stored (nor needed to write it again)
        let crops: Vec<CropRec> = st
            .query_map([cell], |r| {
                Ok(CropRec { start_event: 0, started_at: time(r.get(0)?)?, ended_at: None, harvest_event: None, harvest_kg: None })
            })?
            .collect::<rusqlite::Result<_>>()?;
        let mut st =
            self.c.prepare_cached("SELECT event, from_at FROM cutout INDEXED BY cutout_open WHERE cell_id = ?1 AND to_at IS NULL")?;
        let cuts: Vec<CutoutRec> = st
            .query_map([cell], |r| Ok(CutoutRec { event: r.get(0)?, span: OpenSpan { from: time(r.get(1)?)?, to: None } }))?
            .collect::<rusqlite::Result<_>>()?;
        if loads.len() > 1 || crops.len() > 1 || cuts.len() > 1 {
            return Ok(None);
        }
        Ok(Some(OpenRecords { load: loads.into_iter().next(), crop: crops.into_iter().next(), cutout: cuts.into_iter().next() }))
    }

    /// Replaces the cell's open records `old` by `new` (what replaying one
    /// event over them gave), with the figures of `new`'s crops.
    pub fn replace_open_records(&self, cell: &str, old: &OpenRecords, new: &CellHistory, crops: &[Option<CropFigures>]) -> Result<()> {
        if let Some(l) = &old.load {
            self.c.prepare_cached("DELETE FROM anode_load WHERE set_event = ?1")?.execute([l.set_event])?;
        }
        if let Some(c) = &old.crop {
            self.c.prepare_cached("DELETE FROM crop WHERE cell_id = ?1 AND started_at = ?2")?.execute(params![cell, secs(c.started_at)])?;
        }
        if let Some(c) = &old.cutout {
            self.c.prepare_cached("DELETE FROM cutout WHERE event = ?1")?.execute([c.event])?;
        }
        self.insert_history(cell, new, crops)
    }

    /// Inserts derived records (as `write_history` does, without deleting the cell's others).
    pub(super) fn insert_history(&self, cell: &str, h: &CellHistory, crops: &[Option<CropFigures>]) -> Result<()> {
        let mut st = self.c.prepare_cached(
            "INSERT INTO anode_load(set_event, cell_id, set_at, count, mean_kg, ended_at, scrap_kg) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
        )?;
        for l in &h.loads {
            st.execute(params![l.set_event, cell, secs(l.set_at), l.count, l.mean_kg, l.ended_at.map(secs), l.scrap_kg])?;
        }
        let mut st = self.c.prepare_cached(
            "INSERT INTO crop(cell_id, started_at, ended_at, harvest_event, harvest_kg, charge_ah, efficiency, estimated_ah) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
        )?;
        for (i, c) in h.crops.iter().enumerate() {
            let f = crops.get(i).copied().flatten();
            st.execute(params![
                cell,
                secs(c.started_at),
                c.ended_at.map(secs),
                c.harvest_event,
                c.harvest_kg,
                f.map(|f| f.charge_ah),
                f.and_then(|f| f.efficiency),
                f.map(|f| f.estimated_ah)
            ])?;
        }
        let mut st = self.c.prepare_cached("INSERT INTO cutout(event, cell_id, from_at, to_at) VALUES (?1, ?2, ?3, ?4)")?;
        for c in &h.cutouts {
            st.execute(params![c.event, cell, secs(c.span.from), c.span.to.map(secs)])?;
        }
        Ok(())
    }

    /// Every parameter set of a cell, by the time it applies from.
    pub fn cell_params_all(&self, cell: &str) -> Result<Vec<(Time, CellParams)>> {
        let mut st = self.c.prepare_cached("SELECT valid_from, params FROM cell_params WHERE cell_id = ?1 ORDER BY valid_from")?;
        let rows: Vec<(i64, String)> = st.query_map([cell], |r| Ok((r.get(0)?, r.get(1)?)))?.collect::<rusqlite::Result<_>>()?;
        rows.into_iter()
            .map(|(t, json)| Ok((time(t)?, serde_json::from_str(&json).map_err(|e| StoreError::Corrupt(e.to_string()))?)))
            .collect()
    }

    /// Adds one learn row (a weighing just recorded at the end of its cell's history).
    pub fn add_learn_row(&self, w: &LearnRow) -> Result<()> {
        self.c
            .prepare_cached(
                "INSERT INTO learn_weighing(cell_id, kind, started_at, ended_at, charge_ah, weighed_kg, count, set_kg, value, left_out, z)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11)",
            )?
            .execute(params![
                w.cell,
                w.kind.name(),
                secs(w.started_at),
                secs(w.ended_at),
                w.charge_ah,
                w.weighed_kg,
                w.count,
                w.set_kg,
                w.value,
                w.left_out,
                w.z
            ])?;
        Ok(())
    }
}

/// The parameters in force at `t` among a cell's sets (for a time before the
/// first, the first): what `Db::params_at` answers, from memory.
pub fn params_in_force(sets: &[(Time, CellParams)], t: Time) -> Option<&CellParams> {
    sets.iter().rev().find(|(from, _)| *from <= t).or(sets.first()).map(|(_, p)| p)
}
