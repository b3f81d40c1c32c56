//! Every cell's state as of a time in a few statements for the whole plant (one
//! per table, not one per cell), each answered by index seeks that do not grow with the history.
//!
//! The derived records are sequential per cell (`domain::history::replay`: a
//! load ends before the next is set, a crop before the next begins), so "the
//! record running at `as_of`" is the latest one begun by `as_of`, if it has not
//! ended by then: one seek back along the cell's index, never a scan of its
//! past. What each query answers is what the per-cell queries of
//! `store/events.rs` answer for the same `as_of` (tests compare the two).

use rusqlite::params;
use std::collections::HashMap;

use super::{Db, Result, opt_time, secs, time};
use crate::domain::charge::{OpenSpan, Span, Time};
use crate::domain::forecast::charges_from;

/// One cell's state at `as_of`, as the forecast's snapshot needs it.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct CellState {
    /// The running anode load: set time, count, mean kg at set.
    pub load: Option<(Time, u32, f64)>,
    /// When the running crop began.
    pub crop_started: Option<Time>,
    /// The last crop efficiency measured by `as_of`.
    pub last_crop_efficiency: Option<f64>,
    /// The latest live voltage reading by `as_of` (none if its volts are missing).
    pub last_voltage: Option<(Time, f64)>,
    /// Shorts found since the running crop began: total and the last time.
    pub shorts: Option<(u32, Time)>,
    /// The cut-outs known at `as_of` that can still change a charge counted
    /// from [`charges_from`] on (every cut-out ending before it is left out: it
    /// covers no part of any charge the forecast or the plan counts), by
    /// start; one closed after `as_of` counts as open.
    pub cutouts: Vec<OpenSpan>,
}

impl Db<'_> {
    /// Every active cell's [`CellState`] at `as_of`, by cell id; `inert` tells
    /// the inert-anode cells (their load's charge is not counted: see [`charges_from`]).
    pub fn cell_states(&self, as_of: Time, only: Option<&[&str]>, inert: impl Fn(&str) -> bool) -> Result<HashMap<String, CellState>> {
        // the cells asked for, as a JSON array for json_each (all when none)
        let only = only.map(|ids| serde_json::Value::from(ids.to_vec()).to_string());
        let at = secs(as_of);
        let mut out: HashMap<String, CellState> = HashMap::new();
        // per cell: the latest load set and crop begun by `as_of` (running if not
        // ended by then), the last measured efficiency (crops follow one another,
        // so the latest started is the latest ended), the latest live voltage,
        // and the live shorts since the latest crop began
        let mut st = self.c.prepare_cached(
            "WITH s AS MATERIALIZED (SELECT cell.id AS id,
                 (SELECT x.set_at FROM anode_load x INDEXED BY anode_load_state WHERE x.cell_id = cell.id AND x.set_at <= ?1
                  ORDER BY x.set_at DESC LIMIT 1) AS set_at,
                 (SELECT y.started_at FROM crop y INDEXED BY crop_state WHERE y.cell_id = cell.id AND y.started_at <= ?1
                  ORDER BY y.started_at DESC LIMIT 1) AS crop,
                 (SELECT e.at FROM event e INDEXED BY event_cell_kind WHERE e.cell_id = cell.id AND e.kind = 'voltage' AND e.at <= ?1
                  AND NOT EXISTS (SELECT 1 FROM event w WHERE w.voids = e.id) ORDER BY e.at DESC LIMIT 1) AS volt_at
                 FROM cell WHERE cell.active = 1 AND (?2 IS NULL OR cell.id IN (SELECT value FROM json_each(?2))))
             SELECT s.id, s.set_at,
                 (SELECT x.count FROM anode_load x INDEXED BY anode_load_state WHERE x.cell_id = s.id AND x.set_at = s.set_at),
                 (SELECT x.mean_kg FROM anode_load x INDEXED BY anode_load_state WHERE x.cell_id = s.id AND x.set_at = s.set_at),
                 (SELECT x.ended_at FROM anode_load x INDEXED BY anode_load_state WHERE x.cell_id = s.id AND x.set_at = s.set_at),
                 s.crop,
                 (SELECT y.ended_at FROM crop y INDEXED BY crop_state WHERE y.cell_id = s.id AND y.started_at = s.crop),
                 (SELECT k.efficiency FROM crop k INDEXED BY crop_state WHERE k.cell_id = s.id AND k.ended_at <= ?1 AND k.efficiency IS NOT NULL
                  ORDER BY k.started_at DESC LIMIT 1),
                 s.volt_at,
                 (SELECT e.volts FROM event e INDEXED BY event_cell_kind WHERE e.cell_id = s.id AND e.kind = 'voltage' AND e.at = s.volt_at
                  AND NOT EXISTS (SELECT 1 FROM event w WHERE w.voids = e.id) ORDER BY e.id DESC LIMIT 1),
                 (SELECT sum(e.count) FROM event e INDEXED BY event_cell_kind WHERE e.cell_id = s.id AND e.kind = 'shorts'
                  AND e.at >= s.crop AND e.at <= ?1 AND NOT EXISTS (SELECT 1 FROM event w WHERE w.voids = e.id)),
                 (SELECT max(e.at) FROM event e INDEXED BY event_cell_kind WHERE e.cell_id = s.id AND e.kind = 'shorts'
                  AND e.at >= s.crop AND e.at <= ?1 AND NOT EXISTS (SELECT 1 FROM event w WHERE w.voids = e.id))
             FROM s",
        )?;
        let mut rows = st.query(params![at, only])?;
        while let Some(r) = rows.next()? {
            let mut s = CellState::default();
            let (set_at, load_end): (Option<i64>, Option<i64>) = (r.get(1)?, r.get(4)?);
            if let Some(set_at) = set_at
                && load_end.is_none_or(|e| e > at)
            {
                s.load = Some((time(set_at)?, r.get(2)?, r.get(3)?));
            }
            let (start, crop_end): (Option<i64>, Option<i64>) = (r.get(5)?, r.get(6)?);
            if crop_end.is_none_or(|e| e > at) {
                s.crop_started = opt_time(start)?;
            }
            s.last_crop_efficiency = r.get(7)?;
            let (vat, volts): (Option<i64>, Option<f64>) = (r.get(8)?, r.get(9)?);
            s.last_voltage = match (opt_time(vat)?, volts) {
                (Some(t), Some(v)) => Some((t, v)),
                _ => None,
            };
            s.shorts = match (s.crop_started, r.get::<_, Option<u32>>(10)?, opt_time(r.get(11)?)?) {
                (Some(_), Some(n), Some(t)) => Some((n, t)),
                _ => None,
            };
            out.insert(r.get(0)?, s);
        }
        // cut-outs: every one known at `as_of` that ends at or after the first
        // instant a charge is counted from (the running load's set or crop's
        // start), or is still open; read for the whole plant from the earliest
        // such instant (a cell idle for longer than the window reads its own)
        let since = |id: &str, s: &CellState| charges_from(s.load.map(|l| l.0), s.crop_started, inert(id)).unwrap_or(as_of);
        let window = out.iter().map(|(id, s)| since(id, s)).min().unwrap_or(as_of).max(as_of - CUTOUT_WINDOW);
        let mut st = self.c.prepare_cached(
            "SELECT cell_id, from_at, to_at, event FROM cutout INDEXED BY cutout_end WHERE to_at >= ?2 AND from_at <= ?1
             UNION ALL
             SELECT cell_id, from_at, to_at, event FROM cutout INDEXED BY cutout_end WHERE to_at IS NULL AND from_at <= ?1
             ORDER BY 1, 2, 4",
        )?;
        let mut rows = st.query(params![at, secs(window)])?;
        while let Some(r) = rows.next()? {
            let id: String = r.get(0)?;
            let Some(s) = out.get_mut(&id) else { continue };
            let to: Option<i64> = r.get(2)?;
            s.cutouts.push(OpenSpan { from: time(r.get(1)?)?, to: opt_time(to.filter(|&x| x <= at))? });
        }
        for (id, s) in out.iter_mut() {
            let first = since(id, s);
            if first < window {
                s.cutouts = self.cutouts(id, as_of)?;
            }
            s.cutouts.retain(|c| c.to.is_none_or(|to| to >= first));
        }
        Ok(out)
    }
}

impl Db<'_> {
    /// What `reading_gaps` answers (stretches between readings longer than the
    /// gap limit, not covered by an outage, ending after `since` and by
    /// `until`), from the readings flagged with a gap (migration 007's
    /// `reading_flagged`) instead of every reading of the window.
    pub fn flagged_gaps(&self, circuit_id: i64, since: Time, until: Time) -> Result<Vec<Span>> {
        let mut st = self.c.prepare_cached(
            "SELECT r.t, (SELECT p.t FROM reading p WHERE p.circuit_id = ?1 AND p.valid = 1 AND p.t < r.t ORDER BY p.t DESC LIMIT 1)
             FROM reading r INDEXED BY reading_flagged WHERE r.circuit_id = ?1 AND r.gap_before = 1 AND r.valid = 1 AND r.t > ?2 AND r.t <= ?3 ORDER BY r.t",
        )?;
        let mut v = Vec::new();
        let mut rows = st.query(params![circuit_id, secs(since), secs(until)])?;
        while let Some(r) = rows.next()? {
            if let Some(from) = opt_time(r.get(1)?)? {
                v.push(Span { from, to: time(r.get(0)?)? });
            }
        }
        Ok(v)
    }

    /// What `live_readings_in_outages` answers (readings inside an outage that
    /// showed current, in `(since, until]`), from the flagged readings only.
    pub fn flagged_live_in_outages(&self, circuit_id: i64, since: Time, until: Time) -> Result<Vec<(Time, f64)>> {
        let mut st = self.c.prepare_cached(
            "SELECT t, amps FROM reading INDEXED BY reading_flagged WHERE circuit_id = ?1 AND valid = 0 AND amps > 0 AND t > ?2 AND t <= ?3 ORDER BY t",
        )?;
        let v = st.query_map(params![circuit_id, secs(since), secs(until)], |r| Ok((time(r.get(0)?)?, r.get(1)?)))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }
}

/// How far back the plant's cut-outs are read in one query; a cell whose
/// running load was set earlier reads its own.
const CUTOUT_WINDOW: chrono::Duration = chrono::Duration::days(60);
