//! Every cell's state as of a time in a few statements for the whole plant (one
//! range per table over a recent window, not one seek per cell), so the pages read do not grow with the history.
//!
//! The derived records are sequential per cell (`domain::history::replay`: a
//! load ends before the next is set, a crop before the next begins), so "the
//! record running at `as_of`" is the latest one begun by `as_of`, if it has not
//! ended by then: the latest in the window, or, for a cell with none there,
//! one seek back along the cell's index, never a scan of its past. What each query answers is what the per-cell queries of
//! `store/events.rs` answer for the same `as_of` (tests compare the two).

use rusqlite::{OptionalExtension, params};
use std::collections::{HashMap, HashSet};

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

/// How far back each of [`Db::cell_states`]' plant-wide ranges reads; a cell
/// whose latest record of a kind lies further back reads that record on its own.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Windows {
    /// Loads set (anodes last about three weeks).
    pub load: chrono::Duration,
    /// Crops begun (a crop grows about a week); also the shorts since the running crop began.
    pub crop: chrono::Duration,
    /// Voltages (the patrol wants one of the last 24 h).
    pub voltage: chrono::Duration,
}

impl Windows {
    /// The windows the plant reads with: each holds a cell's latest record of
    /// its kind on a plant run as usual (common practice, no source), so the
    /// per-cell reads are for the odd cell out (cut out for weeks, never read).
    pub const PLANT: Windows =
        Windows { load: chrono::Duration::days(35), crop: chrono::Duration::days(21), voltage: chrono::Duration::days(3) };
}

/// A row's first column, the cell id, without copying it.
fn cell_text<'r>(r: &'r rusqlite::Row<'_>) -> rusqlite::Result<Option<&'r str>> {
    r.get_ref(0)?.as_str_or_null().map_err(|e| rusqlite::Error::FromSqlConversionFailure(0, rusqlite::types::Type::Text, Box::new(e)))
}

/// A load as set: (set, ended, count, mean kg).
type SetLoad = (i64, Option<i64>, u32, f64);
/// A voltage entry: (time, entry id, volts if given).
type Volt = (i64, i64, Option<f64>);

/// Keeps a cell's row of a range if it is later (by `key`) than the one kept.
fn keep_latest<V, K: PartialOrd>(kept: &mut HashMap<String, V>, cell: &str, row: V, key: impl Fn(&V) -> K) {
    match kept.get_mut(cell) {
        Some(old) if key(&row) > key(old) => *old = row,
        Some(_) => {}
        None => {
            kept.insert(cell.to_string(), row);
        }
    }
}

impl Db<'_> {
    /// Every active cell's [`CellState`] at `as_of`, by cell id; `inert` tells
    /// the inert-anode cells (their load's charge is not counted: see [`charges_from`]).
    pub fn cell_states(&self, as_of: Time, only: Option<&[&str]>, inert: impl Fn(&str) -> bool) -> Result<HashMap<String, CellState>> {
        self.cell_states_within(as_of, only, inert, Windows::PLANT)
    }

    /// [`Db::cell_states`] reading the recent records of `windows` for the plant
    /// at once: one range per kind over an index by time (migration 010), so the
    /// pages read follow the window, not the length of the history.
    pub fn cell_states_within(
        &self,
        as_of: Time,
        only: Option<&[&str]>,
        inert: impl Fn(&str) -> bool,
        windows: Windows,
    ) -> Result<HashMap<String, CellState>> {
        // the cells asked for, as a JSON array for json_each (all when none)
        let only = only.map(|ids| serde_json::Value::from(ids.to_vec()).to_string());
        let at = secs(as_of);
        let mut out: HashMap<String, CellState> = HashMap::new();
        {
            let mut st = self
                .c
                .prepare_cached("SELECT id FROM cell WHERE active = 1 AND (?1 IS NULL OR id IN (SELECT value FROM json_each(?1)))")?;
            let mut rows = st.query(params![only])?;
            while let Some(r) = rows.next()? {
                out.insert(r.get(0)?, CellState::default());
            }
        }
        // the entries undone (few: one per undo), so the ranges skip them without a look-up per row
        let voided: HashSet<i64> = {
            let mut st = self.c.prepare_cached("SELECT voids FROM event WHERE voids IS NOT NULL")?;
            st.query_map([], |r| r.get(0))?.collect::<rusqlite::Result<_>>()?
        };
        // The derived records are sequential per cell, so the record running at
        // `as_of` is the latest one begun by then (if not ended by then); the
        // latest begun inside the window is the latest begun at all.
        // loads: (set, ended, count, mean kg)
        let mut loads: HashMap<String, SetLoad> = HashMap::new();
        {
            let mut st = self.c.prepare_cached(
                "SELECT cell_id, set_at, ended_at, count, mean_kg FROM anode_load INDEXED BY anode_load_recent WHERE set_at > ?2 AND set_at <= ?1",
            )?;
            let mut rows = st.query(params![at, secs(as_of - windows.load)])?;
            while let Some(r) = rows.next()? {
                let Some(id) = cell_text(r)? else { continue };
                if !out.contains_key(id) {
                    continue;
                }
                let row: SetLoad = (r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?);
                keep_latest(&mut loads, id, row, |l| l.0);
            }
        }
        // crops: the latest begun (start, ended) and the latest measured by `as_of` (start, efficiency)
        #[derive(Default)]
        struct Crops {
            latest: Option<(i64, Option<i64>)>,
            measured: Option<(i64, f64)>,
        }
        let mut crops: HashMap<String, Crops> = HashMap::new();
        {
            let mut st = self.c.prepare_cached(
                "SELECT cell_id, started_at, ended_at, efficiency FROM crop INDEXED BY crop_recent WHERE started_at > ?2 AND started_at <= ?1",
            )?;
            let mut rows = st.query(params![at, secs(as_of - windows.crop)])?;
            while let Some(r) = rows.next()? {
                let Some(id) = cell_text(r)? else { continue };
                if !out.contains_key(id) {
                    continue;
                }
                let (start, end, eff): (i64, Option<i64>, Option<f64>) = (r.get(1)?, r.get(2)?, r.get(3)?);
                let c = crops.entry(id.to_string()).or_default();
                if c.latest.is_none_or(|(s, _)| start > s) {
                    c.latest = Some((start, end));
                }
                if let (Some(e), Some(eff)) = (end, eff)
                    && e <= at
                    && c.measured.is_none_or(|(s, _)| start > s)
                {
                    c.measured = Some((start, eff));
                }
            }
        }
        // voltages: the latest live one, by (time, entry)
        let mut volts: HashMap<String, Volt> = HashMap::new();
        {
            let mut st = self.c.prepare_cached(
                "SELECT cell_id, at, id, volts FROM event INDEXED BY event_recent WHERE kind = 'voltage' AND at > ?2 AND at <= ?1",
            )?;
            let mut rows = st.query(params![at, secs(as_of - windows.voltage)])?;
            while let Some(r) = rows.next()? {
                let id: i64 = r.get(2)?;
                let Some(cell) = cell_text(r)? else { continue };
                if voided.contains(&id) || !out.contains_key(cell) {
                    continue;
                }
                let row: Volt = (r.get(1)?, id, r.get(3)?);
                keep_latest(&mut volts, cell, row, |v| (v.0, v.1));
            }
        }
        for (id, s) in out.iter_mut() {
            let load = match loads.remove(id) {
                Some(l) => Some(l),
                None => self.latest_load(id, at)?,
            };
            if let Some((set_at, end, n, kg)) = load
                && end.is_none_or(|e| e > at)
            {
                s.load = Some((time(set_at)?, n, kg));
            }
            let c = crops.remove(id).unwrap_or_default();
            let latest = match c.latest {
                Some(l) => Some(l),
                None => self.latest_crop(id, at)?,
            };
            if let Some((start, end)) = latest
                && end.is_none_or(|e| e > at)
            {
                s.crop_started = Some(time(start)?);
            }
            s.last_crop_efficiency = match c.measured {
                Some((_, eff)) => Some(eff),
                None => self.latest_measured_efficiency(id, at)?,
            };
            let volt = match volts.remove(id) {
                Some((t, _, v)) => Some((t, v)),
                None => self.latest_voltage(id, at)?,
            };
            s.last_voltage = match volt {
                Some((t, Some(v))) => Some((time(t)?, v)),
                _ => None,
            };
        }
        // shorts since each running crop began: one range from the earliest
        // start inside the crop window; a crop begun before it reads its own
        let crop_from = as_of - windows.crop;
        let starts: HashMap<&str, i64> =
            out.iter().filter_map(|(id, s)| s.crop_started.filter(|t| *t > crop_from).map(|t| (id.as_str(), secs(t)))).collect();
        // per cell: (count so far if any, latest time)
        let mut shorts: HashMap<String, (Option<u32>, i64)> = HashMap::new();
        if let Some(&first) = starts.values().min() {
            let mut st = self.c.prepare_cached(
                "SELECT cell_id, at, id, count FROM event INDEXED BY event_recent WHERE kind = 'shorts' AND at >= ?2 AND at <= ?1",
            )?;
            let mut rows = st.query(params![at, first])?;
            while let Some(r) = rows.next()? {
                let (t, id): (i64, i64) = (r.get(1)?, r.get(2)?);
                let Some(cell) = cell_text(r)? else { continue };
                if voided.contains(&id) || starts.get(cell).is_none_or(|s| t < *s) {
                    continue;
                }
                let n: Option<u32> = r.get(3)?;
                let e = shorts.entry(cell.to_string()).or_insert((None, t));
                e.0 = match (e.0, n) {
                    (Some(a), Some(b)) => Some(a + b),
                    (a, b) => a.or(b),
                };
                e.1 = e.1.max(t);
            }
        }
        for (id, s) in out.iter_mut() {
            let Some(start) = s.crop_started else { continue };
            s.shorts = if start > crop_from {
                match shorts.remove(id) {
                    Some((Some(n), t)) => Some((n, time(t)?)),
                    _ => None,
                }
            } else {
                self.shorts_since(id, start, as_of)?
            };
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

/// A cell's own reads, for a record older than its window: seeks back along
/// the cell's indexes (migration 007).
impl Db<'_> {
    /// The latest load set by `at`: (set, ended, count, mean kg).
    fn latest_load(&self, cell: &str, at: i64) -> Result<Option<SetLoad>> {
        let mut st = self.c.prepare_cached(
            "SELECT set_at, ended_at, count, mean_kg FROM anode_load INDEXED BY anode_load_state WHERE cell_id = ?1 AND set_at <= ?2
             ORDER BY set_at DESC LIMIT 1",
        )?;
        Ok(st.query_row(params![cell, at], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?))).optional()?)
    }

    /// The latest crop begun by `at`: (start, ended).
    fn latest_crop(&self, cell: &str, at: i64) -> Result<Option<(i64, Option<i64>)>> {
        let mut st = self.c.prepare_cached(
            "SELECT started_at, ended_at FROM crop INDEXED BY crop_state WHERE cell_id = ?1 AND started_at <= ?2 ORDER BY started_at DESC LIMIT 1",
        )?;
        Ok(st.query_row(params![cell, at], |r| Ok((r.get(0)?, r.get(1)?))).optional()?)
    }

    /// The efficiency of the latest crop measured by `at`.
    fn latest_measured_efficiency(&self, cell: &str, at: i64) -> Result<Option<f64>> {
        let mut st = self.c.prepare_cached(
            "SELECT efficiency FROM crop INDEXED BY crop_state WHERE cell_id = ?1 AND ended_at <= ?2 AND efficiency IS NOT NULL
             ORDER BY started_at DESC LIMIT 1",
        )?;
        Ok(st.query_row(params![cell, at], |r| r.get(0)).optional()?)
    }

    /// The latest live voltage entry by `at`: (time, volts if given).
    fn latest_voltage(&self, cell: &str, at: i64) -> Result<Option<(i64, Option<f64>)>> {
        let mut st = self.c.prepare_cached(
            "SELECT e.at, e.volts FROM event e INDEXED BY event_cell_kind WHERE e.cell_id = ?1 AND e.kind = 'voltage' AND e.at <= ?2
             AND NOT EXISTS (SELECT 1 FROM event w WHERE w.voids = e.id) ORDER BY e.at DESC, e.id DESC LIMIT 1",
        )?;
        Ok(st.query_row(params![cell, at], |r| Ok((r.get(0)?, r.get(1)?))).optional()?)
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
