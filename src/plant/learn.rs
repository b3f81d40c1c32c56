//! Keeping what the weighings teach current: each cell's learn rows (a weighed
//! crop's efficiency, a weighed scrap's anode factor) and its section's pooled values.
//!
//! Learnt values are stored, not recomputed per forecast: a weighing, an undo or
//! a back-fill refreshes the rows of the cells it touches and relearns their
//! sections ([`relearn`]). A forecast as of now reads the stored values; one as
//! of an earlier time learns from the stored rows weighed up to that time
//! ([`learnt_until`]): a query per section and the pure estimator, never a
//! replay of the history. The back-test, which learns as of every crop's
//! start, reads each section's rows once ([`SectionHistory`]) and learns over
//! the prefix of each cell's rows weighed by then: the same values.

use std::collections::{BTreeSet, HashMap};

use super::{Result, far_future};
use crate::domain::charge::{Time, cell_charge};
use crate::domain::layout::{AnodeKind, CellParams};
use crate::domain::learn::{ANODE, CATHODE, CellLearnt, Estimate, Rule, SectionLearnt, anode_factor, learn_section};
use crate::store::{Db, LearnRow, StoreCurve, StoredEstimate, StoredLearnt, Weighing, WeighingKind};

/// Rebuilds a cell's learn rows from its crops and, with `loads`, its anode loads as stored.
fn refresh_rows(db: Db<'_>, cell: &str, loads: bool) -> Result<()> {
    let mut rows = Vec::new();
    for ((start, end, kg), f) in db.crop_figures(cell)? {
        if let Some(e) = f.efficiency {
            rows.push(LearnRow::crop(cell, Weighing { started_at: start, ended_at: end, charge_ah: f.charge_ah, weighed_kg: kg }, e));
        }
    }
    if !loads {
        db.replace_learn_rows(cell, &[WeighingKind::Crop], &rows)?;
        return Ok(());
    }
    let loads: Vec<_> = db.loads(cell)?.into_iter().filter(|l| l.ended_at.is_some() && l.scrap_kg.is_some()).collect();
    if !loads.is_empty() {
        let params = db.params_at(cell, far_future())?;
        if params.anode_kind == AnodeKind::Soluble
            && let Some(row) = db.cell(cell)?
        {
            let curve = StoreCurve::new(db, row.circuit_id, far_future())?;
            let cuts = db.cutouts(cell, far_future())?;
            for l in loads {
                let (Some(end), Some(scrap)) = (l.ended_at, l.scrap_kg) else { continue };
                let q = cell_charge(&curve, &cuts, l.set_at, end)?.total();
                let Some(value) = anode_factor(l.mean_kg, scrap, l.count, q, params.anode_copper_fraction) else { continue };
                let w = Weighing { started_at: l.set_at, ended_at: end, charge_ah: q, weighed_kg: scrap };
                rows.push(LearnRow::scrap(cell, w, l.count, l.mean_kg, value));
            }
        }
    }
    db.replace_learn_rows(cell, &[WeighingKind::Crop, WeighingKind::Scrap], &rows)?;
    Ok(())
}

/// A section's learn rows, split by kind and cell in `cells`' order.
struct SectionRows<'r> {
    crop: Vec<Vec<&'r LearnRow>>,
    scrap: Vec<Vec<&'r LearnRow>>,
}

fn split<'r>(cells: &[String], rows: &'r [LearnRow]) -> SectionRows<'r> {
    let at: HashMap<&str, usize> = cells.iter().enumerate().map(|(i, c)| (c.as_str(), i)).collect();
    let mut s = SectionRows { crop: vec![Vec::new(); cells.len()], scrap: vec![Vec::new(); cells.len()] };
    for r in rows {
        let Some(&i) = at.get(r.cell.as_str()) else { continue };
        match r.kind {
            WeighingKind::Crop => s.crop[i].push(r),
            WeighingKind::Scrap => s.scrap[i].push(r),
        }
    }
    s
}

fn learn(rows: &[Vec<&LearnRow>], rule: &Rule) -> SectionLearnt {
    let values: Vec<Vec<f64>> = rows.iter().map(|v| v.iter().map(|r| r.value).collect()).collect();
    learn_section(&values, rule)
}

fn to_stored(l: &SectionLearnt, i: usize, rule: &Rule) -> StoredEstimate {
    let e = l.estimate(i, f64::NAN, rule);
    StoredEstimate { value: l.cells[i].map(|e| e.value), source: e.source, learnt: e.learnt, se: e.se, sigma: e.sigma }
}

/// Relearns the section of `cell` from its stored rows and stores what changed.
fn relearn_section(db: Db<'_>, cell: &str) -> Result<()> {
    let cells = db.section_cells(cell)?;
    let rows = db.section_learn_rows(cell, far_future())?;
    if rows.is_empty() {
        // nothing weighed: no stored values, the layout's apply (as for a section never weighed)
        for c in &cells {
            db.delete_cell_learnt(c)?;
        }
        return Ok(());
    }
    let s = split(&cells, &rows);
    for (by_cell, rule) in [(&s.crop, &CATHODE), (&s.scrap, &ANODE)] {
        let l = learn(by_cell, rule);
        for (rs, left) in by_cell.iter().zip(&l.left_out) {
            for (r, lo) in rs.iter().zip(left) {
                let code = lo.map(|x| x.code());
                let z = lo.and_then(|x| match x {
                    crate::domain::learn::LeftOut::OutOfLine { z, .. } => Some(z),
                    crate::domain::learn::LeftOut::Impossible { .. } => None,
                });
                if r.left_out.as_deref() != code || r.z != z {
                    db.set_left_out(&r.cell, r.kind, r.started_at, code, z)?;
                }
            }
        }
    }
    let crop = learn(&s.crop, &CATHODE);
    let scrap = learn(&s.scrap, &ANODE);
    for (i, c) in cells.iter().enumerate() {
        let new = StoredLearnt { cathode: to_stored(&crop, i, &CATHODE), anode: to_stored(&scrap, i, &ANODE) };
        if db.cell_learnt(c)?.as_ref() != Some(&new) {
            db.set_cell_learnt(c, &new)?;
        }
    }
    Ok(())
}

/// After the weighings, crops, loads or charges of `cells` changed: refreshes
/// their learn rows and relearns each of their sections once.
pub(crate) fn relearn(db: Db<'_>, cells: &[String]) -> Result<()> {
    for c in cells {
        refresh_rows(db, c, true)?;
    }
    relearn_sections(db, cells)
}

/// Refreshes one cell's learn rows only (its crops alone when only a crop
/// changed: a harvest leaves the anode loads as they were); its section's
/// stored values wait for [`relearn_sections`] (a batch of entries relearns
/// each section once, at its end; the entries' checks learn from the rows, so
/// they see every earlier entry).
pub(crate) fn refresh_cell(db: Db<'_>, cell: &str, crops_only: bool) -> Result<()> {
    refresh_rows(db, cell, !crops_only)
}

/// Relearns the sections of `cells`, each once, from their stored rows.
pub(crate) fn relearn_sections(db: Db<'_>, cells: &[String]) -> Result<()> {
    let mut done = BTreeSet::new();
    for c in cells {
        let section = db.section_cells(c)?;
        if section.first().is_some_and(|first| done.insert(first.clone())) {
            relearn_section(db, c)?;
        }
    }
    Ok(())
}

/// Learns every cell from scratch (a database upgraded from before learning).
pub(crate) fn relearn_all(db: Db<'_>) -> Result<()> {
    let cells: Vec<String> = db.cells()?.into_iter().map(|c| c.id).collect();
    relearn(db, &cells)
}

fn estimate(s: &StoredEstimate, layout: f64, rule: &Rule) -> Estimate {
    match s.value {
        Some(value) => Estimate { value, source: s.source, learnt: s.learnt, se: s.se, sigma: s.sigma },
        None => Estimate { learnt: s.learnt, ..Estimate::layout(layout, rule) },
    }
}

/// A cell's learnt values from what is stored, with the layout's where nothing is learnt.
pub(crate) fn from_stored(stored: Option<&StoredLearnt>, params: &CellParams) -> CellLearnt {
    let mut l = match stored {
        Some(s) => CellLearnt {
            cathode: estimate(&s.cathode, params.cathode_efficiency, &CATHODE),
            anode: estimate(&s.anode, params.anode_efficiency, &ANODE),
        },
        None => CellLearnt::layout(params),
    };
    if params.anode_kind == AnodeKind::Inert {
        // inert anodes do not dissolve: there is no factor to learn
        l.anode = Estimate::layout(params.anode_efficiency, &ANODE);
    }
    l
}

/// The learnt values of the cells of `cell`'s section from the weighings at or
/// before `until` only (the ex-ante view: a past forecast, a back-test, an entry's check).
pub(crate) fn learnt_until(
    db: Db<'_>,
    cell: &str,
    until: Time,
    params: &HashMap<String, CellParams>,
) -> Result<HashMap<String, CellLearnt>> {
    let cells = db.section_cells(cell)?;
    let rows = db.section_learn_rows(cell, until)?;
    let s = split(&cells, &rows);
    let crop = learn(&s.crop, &CATHODE);
    let scrap = learn(&s.scrap, &ANODE);
    let mut out = HashMap::with_capacity(cells.len());
    for (i, c) in cells.iter().enumerate() {
        let Some(p) = params.get(c) else { continue };
        let mut l =
            CellLearnt { cathode: crop.estimate(i, p.cathode_efficiency, &CATHODE), anode: scrap.estimate(i, p.anode_efficiency, &ANODE) };
        if p.anode_kind == AnodeKind::Inert {
            l.anode = Estimate::layout(p.anode_efficiency, &ANODE);
        }
        out.insert(c.clone(), l);
    }
    Ok(out)
}

/// A section's learn rows read once (those weighed at or before a time), each
/// cell's of each kind as `(weighed at, value)` in the store's order (by the
/// weighing's end, then its start): the values of the weighings at or before
/// any earlier time are a prefix of each list, the same values in the same
/// order as [`learnt_until`] reads, so the same learnt values (the back-test
/// learns as of each crop's start from these, one read per section).
pub(crate) struct SectionHistory {
    crop: Vec<Vec<(Time, f64)>>,
    scrap: Vec<Vec<(Time, f64)>>,
}

impl SectionHistory {
    /// The learn rows of `cell`'s section weighed at or before `until` (each
    /// cell's place in them is its index in [`Db::section_cells`]).
    pub(crate) fn read(db: Db<'_>, cell: &str, until: Time) -> Result<SectionHistory> {
        let cells = db.section_cells(cell)?;
        let rows = db.section_learn_rows(cell, until)?;
        let s = split(&cells, &rows);
        let pairs = |by_cell: &[Vec<&LearnRow>]| -> Vec<Vec<(Time, f64)>> {
            by_cell.iter().map(|rs| rs.iter().map(|r| (r.ended_at, r.value)).collect()).collect()
        };
        Ok(SectionHistory { crop: pairs(&s.crop), scrap: pairs(&s.scrap) })
    }

    /// The section learnt from its weighings of `kind` at or before `until`
    /// (no later than the time it was read up to).
    pub(crate) fn learnt_until(&self, kind: WeighingKind, until: Time) -> SectionLearnt {
        let (rows, rule) = match kind {
            WeighingKind::Crop => (&self.crop, &CATHODE),
            WeighingKind::Scrap => (&self.scrap, &ANODE),
        };
        let values: Vec<Vec<f64>> =
            rows.iter().map(|v| v[..v.partition_point(|(t, _)| *t <= until)].iter().map(|&(_, x)| x).collect()).collect();
        learn_section(&values, rule)
    }
}

/// A cell's learnt cathode efficiency (`Crop`) or anode factor (`Scrap`) from
/// its section's `learnt` values of that kind, `i` the cell's place in the
/// section (`None`: not in it, the layout's), as [`learnt_until`] gives it.
pub(crate) fn cell_estimate(learnt: &SectionLearnt, kind: WeighingKind, i: Option<usize>, params: &CellParams) -> Estimate {
    match (kind, i) {
        (WeighingKind::Crop, Some(i)) => learnt.estimate(i, params.cathode_efficiency, &CATHODE),
        (WeighingKind::Crop, None) => Estimate::layout(params.cathode_efficiency, &CATHODE),
        // inert anodes do not dissolve: there is no factor to learn
        (WeighingKind::Scrap, _) if params.anode_kind == AnodeKind::Inert => Estimate::layout(params.anode_efficiency, &ANODE),
        (WeighingKind::Scrap, Some(i)) => learnt.estimate(i, params.anode_efficiency, &ANODE),
        (WeighingKind::Scrap, None) => Estimate::layout(params.anode_efficiency, &ANODE),
    }
}

/// One cell's learnt values from the weighings at or before `until` (an entry's
/// check): `crop` and `scrap` hold each section cell's weighed values in the
/// store's order (oldest first), `i` the cell's place among them.
pub(crate) fn learnt_one_of(crop: &[Vec<f64>], scrap: &[Vec<f64>], i: Option<usize>, params: &CellParams) -> CellLearnt {
    let Some(i) = i else { return CellLearnt::layout(params) };
    let mut l = CellLearnt {
        cathode: learn_section(crop, &CATHODE).estimate(i, params.cathode_efficiency, &CATHODE),
        anode: learn_section(scrap, &ANODE).estimate(i, params.anode_efficiency, &ANODE),
    };
    if params.anode_kind == AnodeKind::Inert {
        l.anode = Estimate::layout(params.anode_efficiency, &ANODE);
    }
    l
}

/// Every cell's learnt values as of `as_of`: the stored ones when no weighing
/// after `as_of` is known, else learnt from the rows up to `as_of`.
pub(crate) fn learnt_as_of(
    db: Db<'_>,
    cells: &[crate::store::CellRow],
    params: &HashMap<String, CellParams>,
    as_of: Time,
) -> Result<HashMap<String, CellLearnt>> {
    let latest = db.latest_weighing_at()?;
    if latest.is_none_or(|t| t <= as_of) {
        let stored = db.cell_learnt_all()?;
        return Ok(cells.iter().filter_map(|c| params.get(&c.id).map(|p| (c.id.clone(), from_stored(stored.get(&c.id), p)))).collect());
    }
    let mut out = HashMap::with_capacity(cells.len());
    for c in cells {
        if out.contains_key(&c.id) || !params.contains_key(&c.id) {
            continue;
        }
        out.extend(learnt_until(db, &c.id, as_of, params)?);
    }
    let wanted: BTreeSet<&str> = cells.iter().map(|c| c.id.as_str()).collect();
    out.retain(|k, _| wanted.contains(k.as_str()));
    Ok(out)
}
