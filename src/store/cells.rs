//! The plant's shape in the database: its header, circuits, sections, cells and
//! the parameters each cell runs with from a given time.

use rusqlite::{OptionalExtension, params};
use std::collections::{BTreeSet, HashMap};

use super::{Db, Result, StoreError, secs};
use crate::domain::charge::Time;
use crate::domain::layout::{CellParams, Layout, PlanKeys, StoreKeys};
use crate::domain::plant_time::{PlantZone, ProductionDays, parse_day_start};

/// The plant header as stored.
#[derive(Debug, Clone, PartialEq)]
pub struct PlantInfo {
    pub name: String,
    pub days: ProductionDays,
    pub plan: PlanKeys,
    pub store: StoreKeys,
}

#[derive(Debug, Clone, PartialEq)]
pub struct CircuitRow {
    pub id: i64,
    pub name: String,
    pub max_amps: f64,
}

#[derive(Debug, Clone, PartialEq)]
pub struct CellRow {
    pub id: String,
    pub circuit_id: i64,
    pub circuit: String,
    pub section: String,
    pub position: i64,
}

/// What loading a layout changed.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct LayoutSummary {
    pub circuits: usize,
    pub sections: usize,
    pub cells: usize,
    pub new_cells: usize,
    pub retired_cells: Vec<String>,
    pub params_changed: usize,
}

const CELL_SELECT: &str = "SELECT cell.id, circuit.id, circuit.name, section.name, cell.position
     FROM cell JOIN section ON section.id = cell.section_id JOIN circuit ON circuit.id = section.circuit_id";

fn cell_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<CellRow> {
    Ok(CellRow { id: r.get(0)?, circuit_id: r.get(1)?, circuit: r.get(2)?, section: r.get(3)?, position: r.get(4)? })
}

fn corrupt(e: impl std::fmt::Display) -> StoreError {
    StoreError::Corrupt(e.to_string())
}

impl Db<'_> {
    fn meta(&self, key: &str) -> Result<Option<String>> {
        Ok(self.c.query_row("SELECT value FROM plant_meta WHERE key = ?1", [key], |r| r.get(0)).optional()?)
    }

    fn set_meta(&self, key: &str, value: &str) -> Result<()> {
        self.c.execute(
            "INSERT INTO plant_meta(key, value) VALUES (?1, ?2) ON CONFLICT(key) DO UPDATE SET value = excluded.value",
            params![key, value],
        )?;
        Ok(())
    }

    /// The plant header, or `None` before a layout has been loaded.
    pub fn plant_info(&self) -> Result<Option<PlantInfo>> {
        let Some(name) = self.meta("name")? else { return Ok(None) };
        let zone = PlantZone::parse(&self.meta("time_zone")?.unwrap_or_else(|| "UTC".into())).map_err(corrupt)?;
        let day_starts_at = parse_day_start(&self.meta("day_starts_at")?.unwrap_or_else(|| "00:00".into())).map_err(corrupt)?;
        let plan = match self.meta("plan")? {
            Some(j) => serde_json::from_str(&j).map_err(corrupt)?,
            None => PlanKeys::default(),
        };
        let store = match self.meta("store")? {
            Some(j) => serde_json::from_str(&j).map_err(corrupt)?,
            None => StoreKeys::default(),
        };
        Ok(Some(PlantInfo { name, days: ProductionDays { zone, day_starts_at }, plan, store }))
    }

    /// Defines or updates the plant from a layout: new circuits, sections and
    /// cells are added, changed parameters apply from `now`, cells no longer
    /// listed are retired (kept with their history, no longer shown).
    pub fn apply_layout(&self, layout: &Layout, text: &str, source: &str, now: Time) -> Result<LayoutSummary> {
        self.set_meta("name", &layout.header.name)?;
        self.set_meta("time_zone", &layout.zone.name())?;
        self.set_meta("day_starts_at", &layout.header.day_starts_at)?;
        self.set_meta("plan", &serde_json::to_string(&layout.plan).map_err(corrupt)?)?;
        self.set_meta("store", &serde_json::to_string(&layout.store).map_err(corrupt)?)?;
        self.c.execute("INSERT INTO layout_version(loaded_at, source, text) VALUES (?1, ?2, ?3)", params![secs(now), source, text])?;
        let layout_id = self.c.last_insert_rowid();
        let mut sum = LayoutSummary::default();
        let current = self.params_at_all(now)?;
        let mut listed = BTreeSet::new();
        for (ci, c) in layout.circuits.iter().enumerate() {
            self.c.execute(
                "INSERT INTO circuit(name, max_amps, position) VALUES (?1, ?2, ?3)
                 ON CONFLICT(name) DO UPDATE SET max_amps = excluded.max_amps, position = excluded.position",
                params![c.name, c.max_amps, ci as i64],
            )?;
            let cid: i64 = self.c.query_row("SELECT id FROM circuit WHERE name = ?1", [&c.name], |r| r.get(0))?;
            sum.circuits += 1;
            for (si, s) in c.sections.iter().enumerate() {
                self.c.execute(
                    "INSERT INTO section(circuit_id, name, position) VALUES (?1, ?2, ?3)
                     ON CONFLICT(circuit_id, name) DO UPDATE SET position = excluded.position",
                    params![cid, s.name, si as i64],
                )?;
                let sid: i64 =
                    self.c.query_row("SELECT id FROM section WHERE circuit_id = ?1 AND name = ?2", params![cid, s.name], |r| r.get(0))?;
                sum.sections += 1;
                let pj = serde_json::to_string(&s.params).map_err(corrupt)?;
                for (pos, id) in s.cells.iter().enumerate() {
                    listed.insert(id.clone());
                    let existed: bool = self.c.query_row("SELECT count(*) FROM cell WHERE id = ?1", [id], |r| r.get::<_, i64>(0))? > 0;
                    self.c.execute(
                        "INSERT INTO cell(id, section_id, position, active) VALUES (?1, ?2, ?3, 1)
                         ON CONFLICT(id) DO UPDATE SET section_id = excluded.section_id, position = excluded.position, active = 1",
                        params![id, sid, pos as i64],
                    )?;
                    sum.cells += 1;
                    if !existed {
                        sum.new_cells += 1;
                    }
                    if current.get(id) != Some(&s.params) {
                        if existed {
                            sum.params_changed += 1;
                        }
                        self.c.execute(
                            "INSERT INTO cell_params(cell_id, valid_from, layout_id, params) VALUES (?1, ?2, ?3, ?4)
                             ON CONFLICT(cell_id, valid_from) DO UPDATE SET params = excluded.params, layout_id = excluded.layout_id",
                            params![id, secs(now), layout_id, pj],
                        )?;
                    }
                }
            }
        }
        for cell in self.cells()? {
            if !listed.contains(&cell.id) {
                self.c.execute("UPDATE cell SET active = 0 WHERE id = ?1", [&cell.id])?;
                sum.retired_cells.push(cell.id);
            }
        }
        Ok(sum)
    }

    pub fn circuits(&self) -> Result<Vec<CircuitRow>> {
        let mut st = self.c.prepare_cached("SELECT id, name, max_amps FROM circuit ORDER BY position, name")?;
        let rows = st.query_map([], |r| Ok(CircuitRow { id: r.get(0)?, name: r.get(1)?, max_amps: r.get(2)? }))?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    pub fn circuit(&self, name: &str) -> Result<Option<CircuitRow>> {
        Ok(self.circuits()?.into_iter().find(|c| c.name == name))
    }

    /// The active cells in plant order (circuit, section, position).
    pub fn cells(&self) -> Result<Vec<CellRow>> {
        let mut st = self
            .c
            .prepare_cached(&format!("{CELL_SELECT} WHERE cell.active = 1 ORDER BY circuit.position, section.position, cell.position"))?;
        let rows = st.query_map([], cell_row)?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// One active cell.
    pub fn cell(&self, id: &str) -> Result<Option<CellRow>> {
        let mut st = self.c.prepare_cached(&format!("{CELL_SELECT} WHERE cell.active = 1 AND cell.id = ?1"))?;
        Ok(st.query_row([id], cell_row).optional()?)
    }

    /// Each cell's parameters in force at `t` (for a time before the first
    /// layout, the first parameters it had).
    pub fn params_at_all(&self, t: Time) -> Result<HashMap<String, CellParams>> {
        let mut st = self.c.prepare_cached(
            "SELECT cell_id, params FROM cell_params p
             WHERE valid_from = coalesce(
                 (SELECT max(valid_from) FROM cell_params q WHERE q.cell_id = p.cell_id AND q.valid_from <= ?1),
                 (SELECT min(valid_from) FROM cell_params q WHERE q.cell_id = p.cell_id))",
        )?;
        let mut out = HashMap::new();
        // the cells of a section share their parameters' text: parse each text once
        let mut parsed: HashMap<String, CellParams> = HashMap::new();
        let mut rows = st.query([secs(t)])?;
        while let Some(r) = rows.next()? {
            let json = r.get_ref(1)?.as_str().map_err(|e| corrupt(e.to_string()))?;
            let p = match parsed.get(json) {
                Some(p) => p.clone(),
                None => {
                    let p: CellParams = serde_json::from_str(json).map_err(corrupt)?;
                    parsed.insert(json.to_string(), p.clone());
                    p
                }
            };
            out.insert(r.get(0)?, p);
        }
        Ok(out)
    }

    pub fn params_at(&self, cell: &str, t: Time) -> Result<CellParams> {
        let json: Option<String> = self
            .c
            .query_row(
                "SELECT params FROM cell_params WHERE cell_id = ?1 ORDER BY (valid_from <= ?2) DESC,
                 CASE WHEN valid_from <= ?2 THEN -valid_from ELSE valid_from END LIMIT 1",
                params![cell, secs(t)],
                |r| r.get(0),
            )
            .optional()?;
        let json = json.ok_or_else(|| corrupt(format!("cell {cell} has no parameters")))?;
        serde_json::from_str(&json).map_err(corrupt)
    }
}
