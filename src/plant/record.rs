//! Recording shift-log entries and undoing them: checks, the event, and the
//! cell's replayed history, all inside one transaction.

use serde::Serialize;
use std::collections::HashMap;

use super::{Opts, Plant, PlantError, Result, far_future, learn, rebuild_cell, refresh_crops};
use crate::domain::anode::AnodeLoad;
use crate::domain::charge::{Time, cell_charge};
use crate::domain::electrochem::measured_efficiency;
use crate::domain::entry::{CellContext, Entry, Field, check_cell_entry, check_circuit_entry};
use crate::domain::history::{Event, EventKind, Replay};
use crate::domain::layout::{AnodeKind, CellParams};
use crate::domain::learn::{Source, anode_factor};
use crate::domain::plant_time::PlantZone;
use crate::store::{CellRow, CropFigures, Db, LearnRow, NewEvent, StoreCurve, Weighing, WeighingKind, params_in_force};

/// What was recorded: the event's id, and the questions accepted with `--force`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Recorded {
    pub event: i64,
    pub forced_past: Vec<String>,
}

pub(super) fn initials(by: &str) -> Result<String> {
    let by = by.trim();
    if by.is_empty() || by.chars().count() > 8 || by.chars().any(char::is_whitespace) {
        return Err(PlantError::rejected(Field::By, format!("'{by}' is not a foreman's initials: 1 to 8 characters, no spaces")));
    }
    Ok(by.to_uppercase())
}

impl Plant {
    /// Records one entry. A rejected entry and, without `force`, a questioned
    /// one change nothing.
    pub fn record(&mut self, entry: &Entry, opts: &Opts) -> Result<Recorded> {
        let by = initials(&opts.by)?;
        let whole = !self.damage.is_empty();
        self.store.write(|db| {
            let (r, touched) = record_in(db, &mut Batch::new(db, whole), entry, &by, opts)?;
            learn::relearn_sections(db, &touched.into_iter().collect::<Vec<_>>())?;
            Ok(r)
        })
    }

    /// Records many entries in one transaction, in order: all go in, or none
    /// (the first refused entry is reported with its position).
    pub fn record_batch(&mut self, entries: &[(Entry, Opts)]) -> Result<Vec<Recorded>> {
        let whole = !self.damage.is_empty();
        self.store.write(|db| {
            let mut out = Vec::with_capacity(entries.len());
            let mut touched = Vec::new();
            let mut batch = Batch::new(db, whole);
            for (i, (entry, opts)) in entries.iter().enumerate() {
                let by = initials(&opts.by).map_err(|e| e.in_batch(i))?;
                let (r, cell) = record_in(db, &mut batch, entry, &by, opts).map_err(|e| match e {
                    e @ PlantError::Rejected { .. } => e.in_batch(i),
                    PlantError::Questioned(mut q) => {
                        let place = format!("entry {} of the batch ({} {})", i + 1, entry.kind().name(), entry.cell().unwrap_or("circuit"));
                        q.insert(0, place);
                        PlantError::Questioned(q)
                    }
                    e => e,
                })?;
                out.push(r);
                touched.extend(cell);
            }
            touched.sort();
            touched.dedup();
            learn::relearn_sections(db, &touched)?;
            Ok(out)
        })
    }

    /// Runs the checks of a batch and rolls it back: what `record_batch` would
    /// say, without writing anything (the screens' review step).
    pub fn check_batch(&mut self, entries: &[(Entry, Opts)]) -> Result<Vec<Recorded>> {
        let whole = !self.damage.is_empty();
        self.store.preview(|db| {
            let mut out = Vec::with_capacity(entries.len());
            let mut batch = Batch::new(db, whole);
            for (i, (entry, opts)) in entries.iter().enumerate() {
                let by = initials(&opts.by).map_err(|e| e.in_batch(i))?;
                out.push(record_in(db, &mut batch, entry, &by, opts).map_err(|e| e.in_batch(i))?.0);
            }
            Ok(out)
        })
    }

    /// Undoes an entry (the newest live one if `event` is `None`) by appending a
    /// void; refused if the history would no longer hold together without it.
    pub fn undo(&mut self, event: Option<i64>, opts: &Opts) -> Result<Event> {
        let by = initials(&opts.by)?;
        self.store.write(|db| {
            let target = match event {
                Some(id) => db.event(id)?.ok_or_else(|| PlantError::rejected(Field::Event, format!("there is no entry {id}")))?,
                None => db
                    .recent_events(None, 200)?
                    .into_iter()
                    .find(|e| e.kind != EventKind::Void && !e.voided)
                    .ok_or_else(|| PlantError::rejected(Field::Event, "there is no entry to undo"))?,
            };
            if target.kind == EventKind::Void {
                return Err(PlantError::rejected(
                    Field::Event,
                    format!("entry {} is itself an undo; record the entry again instead", target.id),
                ));
            }
            if db.is_voided(target.id)? {
                return Err(PlantError::rejected(Field::Event, format!("entry {} is already undone", target.id)));
            }
            let circuit_id = match &target.circuit {
                Some(name) => db.circuit(name)?.map(|c| c.id),
                None => None,
            };
            db.append_event(&NewEvent {
                kind: EventKind::Void,
                cell: target.cell.clone(),
                circuit_id,
                at: target.at,
                end: None,
                count: None,
                kg: None,
                amps: None,
                volts: None,
                by,
                forced: false,
                recorded_at: opts.now,
                voids: Some(target.id),
            })?;
            if let Some(cell) = &target.cell {
                rebuild_cell(db, cell).map_err(|e| match e {
                    PlantError::Rejected { message, .. } => PlantError::rejected(
                        Field::Event,
                        format!("undoing entry {} would leave the history of {cell} inconsistent: {message}", target.id),
                    ),
                    e => e,
                })?;
                if changes_learning(target.kind) {
                    learn::relearn(db, std::slice::from_ref(cell))?;
                }
            }
            if let (EventKind::Outage, Some(cid)) = (target.kind, circuit_id) {
                db.recompute_charge(cid, target.at)?;
                refresh_crops(db, cid, target.at)?;
            }
            Ok(target)
        })
    }

    /// The newest entries first (undos included), optionally of one cell.
    pub fn recent_events(&self, cell: Option<&str>, limit: usize) -> Result<Vec<Event>> {
        Ok(self.store.db().recent_events(cell, limit)?)
    }
}

/// What the entries of one write read again and again, read once: the cells,
/// their parameters, the plant's time zone and each circuit's charge curve. None
/// of these changes while entries are recorded, except a circuit's curve after
/// an outage or a setpoint of it (dropped then, and built again when needed).
pub(super) struct Batch<'c> {
    db: Db<'c>,
    cells: HashMap<String, Option<CellRow>>,
    params: HashMap<String, Vec<(Time, CellParams)>>,
    curves: HashMap<i64, StoreCurve<'c>>,
    zone: Option<PlantZone>,
    /// Replay every cell's whole history: the log holds entries this version
    /// cannot read, and only a whole replay meets (and refuses) them.
    whole: bool,
    /// Each cell's section (an index into `sections`).
    section_of: HashMap<String, usize>,
    /// A section's cells and, once read, its learn rows in the store's order
    /// (by cell, kind, weighing time), kept up to date with the rows added.
    sections: Vec<(Vec<String>, Option<Vec<Weighed>>)>,
}

impl<'c> Batch<'c> {
    pub(super) fn new(db: Db<'c>, whole: bool) -> Self {
        Batch {
            db,
            whole,
            cells: HashMap::new(),
            params: HashMap::new(),
            curves: HashMap::new(),
            zone: None,
            section_of: HashMap::new(),
            sections: Vec::new(),
        }
    }

    fn section(&mut self, cell: &str) -> Result<usize> {
        if let Some(&i) = self.section_of.get(cell) {
            return Ok(i);
        }
        let cells = self.db.section_cells(cell)?;
        let i = self.sections.len();
        for c in &cells {
            self.section_of.insert(c.clone(), i);
        }
        // a cell in no section (not in the layout) gets a section of its own, with no rows
        self.section_of.insert(cell.to_string(), i);
        self.sections.push((cells, None));
        Ok(i)
    }

    /// The cell's learnt values from the weighings at or before `until` (what
    /// the section's stored rows teach), its section's rows read once per batch.
    fn learnt_one(&mut self, cell: &str, until: Time, params: &CellParams) -> Result<crate::domain::learn::CellLearnt> {
        let i = self.section(cell)?;
        if self.sections[i].1.is_none() {
            let cells = &self.sections[i].0;
            let place: HashMap<&str, usize> = cells.iter().enumerate().map(|(k, c)| (c.as_str(), k)).collect();
            let rows = self.db.section_learn_rows(cell, far_future())?;
            let w = rows.iter().filter_map(|r| place.get(r.cell.as_str()).map(|&k| Weighed::of(k, r))).collect();
            self.sections[i].1 = Some(w);
        }
        let (cells, rows) = &self.sections[i];
        let mut crop = vec![Vec::new(); cells.len()];
        let mut scrap = vec![Vec::new(); cells.len()];
        for w in rows.iter().flatten().filter(|w| w.ended_at <= until.timestamp()) {
            let by_cell = if w.scrap { &mut scrap } else { &mut crop };
            by_cell[w.cell].push(w.value);
        }
        Ok(learn::learnt_one_of(&crop, &scrap, cells.iter().position(|c| c == cell), params))
    }

    /// A learn row was added to the store.
    fn row_added(&mut self, row: &LearnRow) {
        let Some(&i) = self.section_of.get(&row.cell) else { return };
        let (cells, rows) = &mut self.sections[i];
        let (Some(rows), Some(k)) = (rows.as_mut(), cells.iter().position(|c| *c == row.cell)) else { return };
        // the store's order: cell (by name), kind, weighing time, start
        let w = Weighed::of(k, row);
        let key = |x: &Weighed| (&cells[x.cell], x.scrap, x.ended_at, x.started_at);
        let at = rows.partition_point(|r| key(r) < key(&w));
        rows.insert(at, w);
    }

    /// The cell's learn rows were rewritten: its section's are read again when needed.
    fn rows_replaced(&mut self, cell: &str) {
        if let Some(&i) = self.section_of.get(cell) {
            self.sections[i].1 = None;
        }
    }

    fn cell(&mut self, cell: &str) -> Result<CellRow> {
        if !self.cells.contains_key(cell) {
            self.cells.insert(cell.to_string(), self.db.cell(cell)?);
        }
        self.cells
            .get(cell)
            .cloned()
            .flatten()
            .ok_or_else(|| PlantError::rejected(Field::Cell, format!("unknown cell {cell}: it is not in the layout")))
    }

    /// The cell's parameters in force at `t` (as `Db::params_at`).
    fn params_at(&mut self, cell: &str, t: Time) -> Result<CellParams> {
        if !self.params.contains_key(cell) {
            self.params.insert(cell.to_string(), self.db.cell_params_all(cell)?);
        }
        match self.params.get(cell).and_then(|sets| params_in_force(sets, t)) {
            Some(p) => Ok(p.clone()),
            // what the store says of a cell without parameters
            None => Ok(self.db.params_at(cell, t)?),
        }
    }

    fn curve(&mut self, circuit_id: i64) -> Result<&StoreCurve<'c>> {
        if !self.curves.contains_key(&circuit_id) {
            self.curves.insert(circuit_id, StoreCurve::new(self.db, circuit_id, far_future())?);
        }
        self.curves.get(&circuit_id).ok_or_else(|| PlantError::Internal("a circuit's curve went missing from the batch".into()))
    }

    fn zone(&mut self) -> Result<PlantZone> {
        if let Some(z) = self.zone {
            return Ok(z);
        }
        let z = self.db.plant_info()?.ok_or(PlantError::NoLayout)?.days.zone;
        self.zone = Some(z);
        Ok(z)
    }
}

/// A learn row as a batch's checks need it (a section holds thousands).
struct Weighed {
    /// The cell's place in its section.
    cell: usize,
    scrap: bool,
    ended_at: i64,
    started_at: i64,
    value: f64,
}

impl Weighed {
    fn of(cell: usize, r: &LearnRow) -> Weighed {
        Weighed {
            cell,
            scrap: r.kind == WeighingKind::Scrap,
            ended_at: r.ended_at.timestamp(),
            started_at: r.started_at.timestamp(),
            value: r.value,
        }
    }
}

/// Records one entry; returns it and the cell whose learn rows it refreshed
/// (its section is relearnt by the caller, once per write).
fn record_in(db: Db<'_>, batch: &mut Batch<'_>, entry: &Entry, by: &str, opts: &Opts) -> Result<(Recorded, Option<String>)> {
    let questions = match entry.cell() {
        Some(cell) => check_for_cell(db, batch, entry, cell)?,
        None => check_for_circuit(db, entry)?,
    };
    if !questions.is_empty() && !opts.force {
        return Err(PlantError::Questioned(questions));
    }
    let new = new_event(db, entry, by, !questions.is_empty(), opts.now)?;
    let event = db.append_event(&new)?;
    let touched = apply(db, batch, entry, &new, event)?;
    Ok((Recorded { event, forced_past: questions }, touched))
}

fn check_for_cell(db: Db<'_>, batch: &mut Batch<'_>, entry: &Entry, cell: &str) -> Result<Vec<String>> {
    let row = batch.cell(cell)?;
    let at = entry.at();
    let params = batch.params_at(cell, at)?;
    let mut cx = CellContext { params: &params, crop_charge_ah: None, load: None, predicted_fraction: None, predicted_spread: None };
    match entry {
        Entry::Harvest { .. } => {
            let start = db.crop_at(cell, at)?.ok_or_else(|| {
                PlantError::rejected(
                    Field::At,
                    format!("no crop is growing in {cell} at {}: a harvest before the crop began", db_show(db, at)),
                )
            })?;
            let cuts = db.cutouts(cell, far_future())?;
            cx.crop_charge_ah = Some(cell_charge(batch.curve(row.circuit_id)?, &cuts, start, at)?.total());
        }
        Entry::Scrap { .. } => {
            if let Some((_, set_at, count, mean)) = db.load_at(cell, at)? {
                cx.load = Some((count, mean));
                let cuts = db.cutouts(cell, far_future())?;
                let q = cell_charge(batch.curve(row.circuit_id)?, &cuts, set_at, at)?.total();
                // what the weighings logged before this one teach of the cell
                let learnt = batch.learnt_one(cell, at, &params)?.anode;
                let load = AnodeLoad {
                    initial_kg: mean,
                    count,
                    efficiency: learnt.value,
                    copper_fraction: params.anode_copper_fraction,
                    lug_kg: params.lug_kg,
                };
                cx.predicted_fraction = Some(load.remaining_fraction(q));
                // the fraction moves by (Faraday loss at η_a = 1) / set mass per unit of factor
                let per_factor = AnodeLoad { efficiency: 1.0, ..load }.loss_kg(q) / mean;
                // nothing learnt yet: the fixed tolerance, as before learning
                cx.predicted_spread = (learnt.source != Source::Layout).then(|| per_factor * learnt.predictive_sd());
            }
        }
        _ => {}
    }
    check_cell_entry(entry, &cx).map_err(|r| PlantError::rejected(r.field, r.message))
}

fn db_show(db: Db<'_>, t: Time) -> String {
    match db.plant_info() {
        Ok(Some(i)) => i.days.zone.show(t),
        _ => t.to_rfc3339(),
    }
}

fn check_for_circuit(db: Db<'_>, entry: &Entry) -> Result<Vec<String>> {
    let name = match entry {
        Entry::Outage { circuit, .. } | Entry::Setpoint { circuit, .. } => circuit,
        _ => return Ok(Vec::new()),
    };
    let c = db
        .circuit(name)?
        .ok_or_else(|| PlantError::rejected(Field::Circuit, format!("unknown circuit {name}: it is not in the layout")))?;
    check_circuit_entry(entry, c.max_amps).map_err(|r| PlantError::rejected(r.field, r.message))
}

fn new_event(db: Db<'_>, entry: &Entry, by: &str, forced: bool, now: Time) -> Result<NewEvent> {
    let mut e = NewEvent {
        kind: entry.kind(),
        cell: entry.cell().map(str::to_string),
        circuit_id: None,
        at: entry.at(),
        end: None,
        count: None,
        kg: None,
        amps: None,
        volts: None,
        by: by.to_string(),
        forced,
        recorded_at: now,
        voids: None,
    };
    match entry {
        Entry::Anodes { count, mean_kg, .. } => {
            e.count = Some(*count);
            e.kg = Some(*mean_kg);
        }
        Entry::Harvest { total_kg, .. } | Entry::Scrap { total_kg, .. } => e.kg = Some(*total_kg),
        Entry::Cutout { to, .. } => e.end = *to,
        Entry::Shorts { count, .. } => e.count = Some(*count),
        Entry::Voltage { volts, .. } => e.volts = Some(*volts),
        Entry::Outage { circuit, to, .. } => {
            e.circuit_id = db.circuit(circuit)?.map(|c| c.id);
            e.end = Some(*to);
        }
        Entry::Setpoint { circuit, amps, .. } => {
            e.circuit_id = db.circuit(circuit)?.map(|c| c.id);
            e.amps = Some(*amps);
        }
    }
    Ok(e)
}

/// Whether an entry of this kind changes what the weighings teach: a weighing,
/// a new load (it closes nothing, but an undo of one may), or a cut-out (the charge of a crop).
fn changes_learning(kind: EventKind) -> bool {
    matches!(kind, EventKind::Harvest | EventKind::Scrap | EventKind::Anodes | EventKind::Cutout)
}

/// What an entry changes beyond the event itself; returns the cell whose learn
/// rows changed (its section still to relearn).
fn apply(db: Db<'_>, batch: &mut Batch<'_>, entry: &Entry, new: &NewEvent, id: i64) -> Result<Option<String>> {
    if let Entry::Voltage { .. } | Entry::Shorts { .. } = entry {
        // replay derives nothing from them: nothing to rebuild
        return Ok(None);
    }
    if let Some(cell) = entry.cell() {
        if !append_to_history(db, batch, cell, new, id)? {
            rebuild_cell(db, cell)?;
            if changes_learning(entry.kind()) {
                learn::refresh_cell(db, cell, entry.kind() == EventKind::Harvest)?;
                batch.rows_replaced(cell);
            }
        }
        return Ok(changes_learning(entry.kind()).then(|| cell.to_string()));
    }
    // an outage or a setpoint changes the circuit's curve (and an outage the crops' charges and learn rows)
    batch.curves.clear();
    for s in &mut batch.sections {
        s.1 = None;
    }
    if let Entry::Outage { circuit, from, .. } = entry
        && let Some(c) = db.circuit(circuit)?
    {
        db.recompute_charge(c.id, *from)?;
        refresh_crops(db, c.id, *from)?;
    }
    Ok(None)
}

/// Records the derived records of an event that sorts after every other
/// event of its cell by replaying it over the cell's open records alone, and
/// adds the learn row of a weighing it closes; false (nothing done) when the
/// event is not at the end, and the whole history must be replayed.
///
/// The same as [`rebuild_cell`] then: the closed records stay as they are (an
/// event at the end closes only open ones, and a cut-out from its time on
/// overlaps no closed crop or load), so their figures and learn rows too.
fn append_to_history(db: Db<'_>, batch: &mut Batch<'_>, cell: &str, new: &NewEvent, id: i64) -> Result<bool> {
    if batch.whole || db.replayed_event_after(cell, new.at, new.kind)? {
        return Ok(false);
    }
    let Some(open) = db.open_records(cell)? else { return Ok(false) };
    let event = Event {
        id,
        kind: new.kind,
        cell: Some(cell.to_string()),
        circuit: None,
        at: new.at,
        end: new.end,
        count: new.count,
        kg: new.kg,
        amps: new.amps,
        volts: new.volts,
        by: new.by.clone(),
        forced: new.forced,
        recorded_at: new.recorded_at,
        voids: None,
        voided: false,
    };
    let zone = batch.zone()?;
    let mut replay = Replay::resume(open.load.clone(), open.crop.clone(), open.cutout.clone());
    // what rebuild_cell says of a contradiction: the entry's time field
    let field = if new.kind == EventKind::Cutout { Field::From } else { Field::At };
    replay.step(&event, |t| zone.show(t)).map_err(|c| PlantError::rejected(field, c.message))?;
    let tail = replay.finish();
    let row = batch.cell(cell)?;
    let closes_weighing = tail.crops.iter().any(|c| c.ended_at.is_some()) || tail.loads.iter().any(|l| l.ended_at.is_some());
    let cuts = if closes_weighing { db.cutouts(cell, far_future())? } else { Vec::new() };
    let mut figures = Vec::with_capacity(tail.crops.len());
    let mut rows = Vec::new();
    for c in &tail.crops {
        let (Some(end), Some(kg)) = (c.ended_at, c.harvest_kg) else {
            figures.push(None);
            continue;
        };
        let q = cell_charge(batch.curve(row.circuit_id)?, &cuts, c.started_at, end)?;
        // starter sheets are weighed with the crop but were never plated
        let sheets = batch.params_at(cell, c.started_at)?.starter_sheets_kg();
        let f = CropFigures { charge_ah: q.total(), estimated_ah: q.estimated, efficiency: measured_efficiency(kg - sheets, q.total()) };
        if let Some(value) = f.efficiency {
            rows.push(LearnRow::crop(
                cell,
                Weighing { started_at: c.started_at, ended_at: end, charge_ah: f.charge_ah, weighed_kg: kg },
                value,
            ));
        }
        figures.push(Some(f));
    }
    for l in &tail.loads {
        let (Some(end), Some(scrap)) = (l.ended_at, l.scrap_kg) else { continue };
        let params = batch.params_at(cell, far_future())?;
        if params.anode_kind != AnodeKind::Soluble {
            continue;
        }
        let q = cell_charge(batch.curve(row.circuit_id)?, &cuts, l.set_at, end)?.total();
        let Some(value) = anode_factor(l.mean_kg, scrap, l.count, q, params.anode_copper_fraction) else { continue };
        rows.push(LearnRow::scrap(
            cell,
            Weighing { started_at: l.set_at, ended_at: end, charge_ah: q, weighed_kg: scrap },
            l.count,
            l.mean_kg,
            value,
        ));
    }
    db.replace_open_records(cell, &open, &tail, &figures)?;
    for r in &rows {
        db.add_learn_row(r)?;
        batch.row_added(r);
    }
    Ok(true)
}
