//! What the weighings teach, as stored: one row per weighed crop or scrap with
//! its measured value and why it is left out, and each cell's learnt values.

use rusqlite::{OptionalExtension, params};
use std::collections::HashMap;

use super::{Db, Result, opt_time, secs, time};
use crate::domain::charge::Time;
use crate::domain::learn::Source;

/// Which weighing a learn row is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum WeighingKind {
    /// A weighed crop: the value is the cathode current efficiency.
    Crop,
    /// Weighing scrap: the value is the anode factor.
    Scrap,
}

impl WeighingKind {
    pub fn name(self) -> &'static str {
        match self {
            WeighingKind::Crop => "crop",
            WeighingKind::Scrap => "scrap",
        }
    }
}

/// A weighing as learning sees it.
#[derive(Debug, Clone, PartialEq)]
pub struct LearnRow {
    pub cell: String,
    pub kind: WeighingKind,
    /// Crop start, or the anode load's set time.
    pub started_at: Time,
    /// The weighing's time (harvest or pull).
    pub ended_at: Time,
    pub charge_ah: f64,
    /// Cell total, kg.
    pub weighed_kg: f64,
    /// Anodes in the load (scrap).
    pub count: Option<u32>,
    /// Mean mass per anode at set, kg (scrap).
    pub set_kg: Option<f64>,
    /// Measured efficiency or anode factor.
    pub value: f64,
    /// Why it is not learnt from (`None`: learnt).
    pub left_out: Option<String>,
    pub z: Option<f64>,
}

/// A weighing's span and figures, as both kinds of [`LearnRow`] carry them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Weighing {
    /// Crop start, or the anode load's set time.
    pub started_at: Time,
    /// The harvest or the pull.
    pub ended_at: Time,
    pub charge_ah: f64,
    /// Cell total, kg.
    pub weighed_kg: f64,
}

impl LearnRow {
    /// A weighed crop's row, learnt from (nothing left out yet).
    pub fn crop(cell: &str, w: Weighing, efficiency: f64) -> LearnRow {
        LearnRow::new(cell, WeighingKind::Crop, w, None, None, efficiency)
    }

    /// A weighed scrap's row: the load's anode `count` and mean kg at set, its anode factor.
    pub fn scrap(cell: &str, w: Weighing, count: u32, set_kg: f64, factor: f64) -> LearnRow {
        LearnRow::new(cell, WeighingKind::Scrap, w, Some(count), Some(set_kg), factor)
    }

    fn new(cell: &str, kind: WeighingKind, w: Weighing, count: Option<u32>, set_kg: Option<f64>, value: f64) -> LearnRow {
        LearnRow {
            cell: cell.to_string(),
            kind,
            started_at: w.started_at,
            ended_at: w.ended_at,
            charge_ah: w.charge_ah,
            weighed_kg: w.weighed_kg,
            count,
            set_kg,
            value,
            left_out: None,
            z: None,
        }
    }
}

/// One learnt value as stored; `value` is `None` when the source is the layout.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StoredEstimate {
    pub value: Option<f64>,
    pub source: Source,
    pub learnt: u32,
    pub se: f64,
    pub sigma: f64,
}

/// A cell's stored learnt values.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StoredLearnt {
    pub cathode: StoredEstimate,
    pub anode: StoredEstimate,
}

const ROW_COLS: &str =
    "w.cell_id, w.kind, w.started_at, w.ended_at, w.charge_ah, w.weighed_kg, w.count, w.set_kg, w.value, w.left_out, w.z";

fn learn_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<LearnRow> {
    let kind: String = r.get(1)?;
    Ok(LearnRow {
        cell: r.get(0)?,
        kind: if kind == "scrap" { WeighingKind::Scrap } else { WeighingKind::Crop },
        started_at: time(r.get(2)?)?,
        ended_at: time(r.get(3)?)?,
        charge_ah: r.get(4)?,
        weighed_kg: r.get(5)?,
        count: r.get(6)?,
        set_kg: r.get(7)?,
        value: r.get(8)?,
        left_out: r.get(9)?,
        z: r.get(10)?,
    })
}

fn stored(r: &rusqlite::Row<'_>, at: usize) -> rusqlite::Result<StoredEstimate> {
    let source: String = r.get(at + 1)?;
    Ok(StoredEstimate {
        value: r.get(at)?,
        source: Source::from_name(&source).unwrap_or(Source::Layout),
        learnt: r.get(at + 2)?,
        se: r.get(at + 3)?,
        sigma: r.get(at + 4)?,
    })
}

impl Db<'_> {
    /// Replaces a cell's learn rows of the given kinds (their `left_out` is set by the section's learning).
    pub fn replace_learn_rows(&self, cell: &str, kinds: &[WeighingKind], rows: &[LearnRow]) -> Result<()> {
        for k in kinds {
            self.c.prepare_cached("DELETE FROM learn_weighing WHERE cell_id = ?1 AND kind = ?2")?.execute([cell, k.name()])?;
        }
        // the rows are the cell's own (built for it by plant/learn.rs)
        for w in rows {
            self.add_learn_row(w)?;
        }
        Ok(())
    }

    /// The cells of `cell`'s section, in layout order.
    pub fn section_cells(&self, cell: &str) -> Result<Vec<String>> {
        let mut st = self
            .c
            .prepare_cached("SELECT id FROM cell WHERE section_id = (SELECT section_id FROM cell WHERE id = ?1) ORDER BY position, id")?;
        let v = st.query_map([cell], |r| r.get(0))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// The learn rows of `cell`'s section weighed at or before `until`, by cell and weighing time.
    pub fn section_learn_rows(&self, cell: &str, until: Time) -> Result<Vec<LearnRow>> {
        let sql = format!(
            "SELECT {ROW_COLS} FROM learn_weighing w JOIN cell c ON c.id = w.cell_id
             WHERE c.section_id = (SELECT section_id FROM cell WHERE id = ?1) AND w.ended_at <= ?2
             ORDER BY w.cell_id, w.kind, w.ended_at, w.started_at"
        );
        let mut st = self.c.prepare_cached(&sql)?;
        let v = st.query_map(params![cell, secs(until)], learn_row)?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// Learn rows weighed in `[from, to]`, optionally of one cell, by weighing time.
    pub fn learn_rows(&self, cell: Option<&str>, from: Time, to: Time) -> Result<Vec<LearnRow>> {
        let sql = format!(
            "SELECT {ROW_COLS} FROM learn_weighing w WHERE (?1 IS NULL OR w.cell_id = ?1) AND w.ended_at >= ?2 AND w.ended_at <= ?3
             ORDER BY w.ended_at, w.cell_id, w.kind"
        );
        let mut st = self.c.prepare_cached(&sql)?;
        let v = st.query_map(params![cell, secs(from), secs(to)], learn_row)?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// [`Db::learn_rows`] one at a time, each handed to `f` as it is read (a
    /// year's weighings are not held whole).
    pub fn each_learn_row<E: From<super::StoreError>>(
        &self,
        cell: Option<&str>,
        from: Time,
        to: Time,
        mut f: impl FnMut(LearnRow) -> std::result::Result<(), E>,
    ) -> std::result::Result<(), E> {
        let sql = format!(
            "SELECT {ROW_COLS} FROM learn_weighing w WHERE (?1 IS NULL OR w.cell_id = ?1) AND w.ended_at >= ?2 AND w.ended_at <= ?3
             ORDER BY w.ended_at, w.cell_id, w.kind"
        );
        let mut st = self.c.prepare_cached(&sql).map_err(super::StoreError::from)?;
        for r in st.query_map(params![cell, secs(from), secs(to)], learn_row).map_err(super::StoreError::from)? {
            f(r.map_err(super::StoreError::from)?)?;
        }
        Ok(())
    }

    /// Weighings left out of learning, weighed in `[from, to]`.
    pub fn left_out_rows(&self, from: Time, to: Time) -> Result<Vec<LearnRow>> {
        let sql = format!(
            "SELECT {ROW_COLS} FROM learn_weighing w WHERE w.left_out IS NOT NULL AND w.ended_at >= ?1 AND w.ended_at <= ?2 ORDER BY w.ended_at"
        );
        let mut st = self.c.prepare_cached(&sql)?;
        let v = st.query_map(params![secs(from), secs(to)], learn_row)?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// Cells on a circuit with a learn row weighed at or after `t` (a back-fill changes their charge).
    pub fn cells_weighed_since(&self, circuit_id: i64, t: Time) -> Result<Vec<String>> {
        let mut st = self.c.prepare_cached(
            "SELECT DISTINCT w.cell_id FROM learn_weighing w JOIN cell c ON c.id = w.cell_id JOIN section s ON s.id = c.section_id
             WHERE s.circuit_id = ?1 AND w.ended_at >= ?2 ORDER BY w.cell_id",
        )?;
        let v = st.query_map(params![circuit_id, secs(t)], |r| r.get(0))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// Sets why a weighing is left out (`None`: learnt from).
    pub fn set_left_out(&self, cell: &str, kind: WeighingKind, started_at: Time, left_out: Option<&str>, z: Option<f64>) -> Result<()> {
        self.c
            .prepare_cached("UPDATE learn_weighing SET left_out = ?4, z = ?5 WHERE cell_id = ?1 AND kind = ?2 AND started_at = ?3")?
            .execute(params![cell, kind.name(), secs(started_at), left_out, z])?;
        Ok(())
    }

    /// The time of the latest weighing learning knows of.
    pub fn latest_weighing_at(&self) -> Result<Option<Time>> {
        let t: Option<i64> = self.c.prepare_cached("SELECT max(ended_at) FROM learn_weighing")?.query_row([], |r| r.get(0))?;
        Ok(opt_time(t)?)
    }

    /// The time of the earliest weighing learning knows of.
    pub fn earliest_weighing_at(&self) -> Result<Option<Time>> {
        let t: Option<i64> = self.c.prepare_cached("SELECT min(ended_at) FROM learn_weighing")?.query_row([], |r| r.get(0))?;
        Ok(opt_time(t)?)
    }

    /// Whether learning has never run on a database that has weighed crops or scrap
    /// (one upgraded from before migration 003).
    pub fn learning_missing(&self) -> Result<bool> {
        Ok(self.c.query_row(
            "SELECT NOT EXISTS (SELECT 1 FROM cell_learnt) AND (EXISTS (SELECT 1 FROM crop WHERE efficiency IS NOT NULL)
             OR EXISTS (SELECT 1 FROM anode_load WHERE scrap_kg IS NOT NULL))",
            [],
            |r| r.get(0),
        )?)
    }

    /// A digest of the learn tables, for comparing with learning afresh.
    pub fn learn_digest(&self) -> Result<u64> {
        use std::hash::{Hash, Hasher};
        // hashed row by row, not kept as text: a year's weighings are tens of
        // megabytes of it (DefaultHasher::new is the same in one process)
        let mut out = std::collections::hash_map::DefaultHasher::new();
        for sql in [
            "SELECT cell_id, kind, started_at, ended_at, printf('%.9e', charge_ah), weighed_kg, count, set_kg, printf('%.9e', value), left_out,
             printf('%.6e', z) FROM learn_weighing ORDER BY cell_id, kind, started_at",
            "SELECT cell_id, printf('%.9e', cathode_value), cathode_source, cathode_n, printf('%.9e', cathode_se), printf('%.9e', cathode_sigma),
             printf('%.9e', anode_value), anode_source, anode_n, printf('%.9e', anode_se), printf('%.9e', anode_sigma) FROM cell_learnt ORDER BY cell_id",
        ] {
            let mut st = self.c.prepare(sql)?;
            let n = st.column_count();
            let mut rows = st.query([])?;
            while let Some(r) = rows.next()? {
                let cols: Vec<String> = (0..n).map(|i| r.get_ref(i).map(|v| format!("{v:?}")).unwrap_or_default()).collect();
                cols.join("|").hash(&mut out);
            }
            "--".hash(&mut out);
        }
        Ok(out.finish())
    }

    /// Every cell's stored learnt values.
    pub fn cell_learnt_all(&self) -> Result<HashMap<String, StoredLearnt>> {
        let mut st = self.c.prepare_cached(
            "SELECT cell_id, cathode_value, cathode_source, cathode_n, cathode_se, cathode_sigma,
             anode_value, anode_source, anode_n, anode_se, anode_sigma FROM cell_learnt",
        )?;
        let v = st.query_map([], |r| Ok((r.get::<_, String>(0)?, StoredLearnt { cathode: stored(r, 1)?, anode: stored(r, 6)? })))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    pub fn cell_learnt(&self, cell: &str) -> Result<Option<StoredLearnt>> {
        let mut st = self.c.prepare_cached(
            "SELECT cell_id, cathode_value, cathode_source, cathode_n, cathode_se, cathode_sigma,
             anode_value, anode_source, anode_n, anode_se, anode_sigma FROM cell_learnt WHERE cell_id = ?1",
        )?;
        Ok(st.query_row([cell], |r| Ok(StoredLearnt { cathode: stored(r, 1)?, anode: stored(r, 6)? })).optional()?)
    }

    pub fn delete_cell_learnt(&self, cell: &str) -> Result<()> {
        self.c.prepare_cached("DELETE FROM cell_learnt WHERE cell_id = ?1")?.execute([cell])?;
        Ok(())
    }

    pub fn set_cell_learnt(&self, cell: &str, l: &StoredLearnt) -> Result<()> {
        let (c, a) = (&l.cathode, &l.anode);
        self.c
            .prepare_cached(
                "INSERT OR REPLACE INTO cell_learnt(cell_id, cathode_value, cathode_source, cathode_n, cathode_se, cathode_sigma,
                 anode_value, anode_source, anode_n, anode_se, anode_sigma) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11)",
            )?
            .execute(params![cell, c.value, c.source.name(), c.learnt, c.se, c.sigma, a.value, a.source.name(), a.learnt, a.se, a.sigma])?;
        Ok(())
    }

    /// A cell's live voltage readings in `[from, to]`, oldest first.
    pub fn voltages_between(&self, cell: &str, from: Time, to: Time) -> Result<Vec<(Time, f64)>> {
        let mut st = self.c.prepare_cached(
            "SELECT at, volts FROM event e WHERE cell_id = ?1 AND kind = 'voltage' AND at >= ?2 AND at <= ?3 AND volts IS NOT NULL
             AND NOT EXISTS (SELECT 1 FROM event v WHERE v.voids = e.id) ORDER BY at, id",
        )?;
        let v = st.query_map(params![cell, secs(from), secs(to)], |r| Ok((time(r.get(0)?)?, r.get(1)?)))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }
}
