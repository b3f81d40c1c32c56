//! Recording shift-log entries and undoing them: checks, the event, and the
//! cell's replayed history, all inside one transaction.

use serde::Serialize;

use super::{Opts, Plant, PlantError, Result, far_future, rebuild_cell, refresh_crops};
use crate::domain::anode::AnodeLoad;
use crate::domain::charge::{Time, cell_charge};
use crate::domain::entry::{CellContext, Entry, check_cell_entry, check_circuit_entry};
use crate::domain::history::{Event, EventKind};
use crate::store::{Db, NewEvent, StoreCurve};

/// What was recorded: the event's id, and the questions accepted with `--force`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Recorded {
    pub event: i64,
    pub forced_past: Vec<String>,
}

pub(super) fn initials(by: &str) -> Result<String> {
    let by = by.trim();
    if by.is_empty() || by.chars().count() > 8 || by.chars().any(char::is_whitespace) {
        return Err(PlantError::rejected("--by", format!("'{by}' is not a foreman's initials: 1 to 8 characters, no spaces")));
    }
    Ok(by.to_uppercase())
}

impl Plant {
    /// Records one entry. A rejected entry and, without `force`, a questioned
    /// one change nothing.
    pub fn record(&mut self, entry: &Entry, opts: &Opts) -> Result<Recorded> {
        let by = initials(&opts.by)?;
        self.store.write(|db| record_in(db, entry, &by, opts))
    }

    /// Records many entries in one transaction, in order: all go in, or none
    /// (the first refused entry is reported with its position).
    pub fn record_batch(&mut self, entries: &[(Entry, Opts)]) -> Result<Vec<Recorded>> {
        self.store.write(|db| {
            let mut out = Vec::with_capacity(entries.len());
            for (i, (entry, opts)) in entries.iter().enumerate() {
                let by = initials(&opts.by)?;
                let place = format!("entry {} of the batch ({} {})", i + 1, entry.kind().name(), entry.cell().unwrap_or("circuit"));
                out.push(record_in(db, entry, &by, opts).map_err(|e| match e {
                    PlantError::Rejected { field, message } => PlantError::Rejected { field, message: format!("{place}: {message}") },
                    PlantError::Questioned(mut q) => {
                        q.insert(0, place);
                        PlantError::Questioned(q)
                    }
                    e => e,
                })?);
            }
            Ok(out)
        })
    }

    /// Runs the checks of a batch and rolls it back: what `record_batch` would
    /// say, without writing anything (the screens' review step).
    pub fn check_batch(&mut self, entries: &[(Entry, Opts)]) -> Result<Vec<Recorded>> {
        self.store.preview(|db| {
            let mut out = Vec::with_capacity(entries.len());
            for (entry, opts) in entries {
                let by = initials(&opts.by)?;
                out.push(record_in(db, entry, &by, opts)?);
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
                Some(id) => db.event(id)?.ok_or_else(|| PlantError::rejected("EVENT", format!("there is no entry {id}")))?,
                None => db
                    .recent_events(None, 200)?
                    .into_iter()
                    .find(|e| e.kind != EventKind::Void && !e.voided)
                    .ok_or_else(|| PlantError::rejected("EVENT", "there is no entry to undo"))?,
            };
            if target.kind == EventKind::Void {
                return Err(PlantError::rejected(
                    "EVENT",
                    format!("entry {} is itself an undo; record the entry again instead", target.id),
                ));
            }
            if db.is_voided(target.id)? {
                return Err(PlantError::rejected("EVENT", format!("entry {} is already undone", target.id)));
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
                        "EVENT",
                        format!("undoing entry {} would leave the history of {cell} inconsistent: {message}", target.id),
                    ),
                    e => e,
                })?;
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

fn record_in(db: Db<'_>, entry: &Entry, by: &str, opts: &Opts) -> Result<Recorded> {
    let questions = match entry.cell() {
        Some(cell) => check_for_cell(db, entry, cell)?,
        None => check_for_circuit(db, entry)?,
    };
    if !questions.is_empty() && !opts.force {
        return Err(PlantError::Questioned(questions));
    }
    let event = db.append_event(&new_event(db, entry, by, !questions.is_empty(), opts.now)?)?;
    apply(db, entry)?;
    Ok(Recorded { event, forced_past: questions })
}

fn check_for_cell(db: Db<'_>, entry: &Entry, cell: &str) -> Result<Vec<String>> {
    let row = db.cell(cell)?.ok_or_else(|| PlantError::rejected("--cell", format!("unknown cell {cell}: it is not in the layout")))?;
    let at = entry.at();
    let params = db.params_at(cell, at)?;
    let curve = StoreCurve::new(db, row.circuit_id, far_future())?;
    let cuts = db.cutouts(cell, far_future())?;
    let mut cx = CellContext { params: &params, crop_charge_ah: None, load: None, predicted_fraction: None };
    match entry {
        Entry::Harvest { .. } => {
            let start = db.crop_at(cell, at)?.ok_or_else(|| {
                PlantError::rejected(
                    "--at",
                    format!("no crop is growing in {cell} at {}: a harvest before the crop began", db_show(db, at)),
                )
            })?;
            cx.crop_charge_ah = Some(cell_charge(&curve, &cuts, start, at)?.total());
        }
        Entry::Scrap { .. } => {
            if let Some((_, set_at, count, mean)) = db.load_at(cell, at)? {
                cx.load = Some((count, mean));
                let q = cell_charge(&curve, &cuts, set_at, at)?.total();
                let load = AnodeLoad {
                    initial_kg: mean,
                    count,
                    efficiency: params.anode_efficiency,
                    copper_fraction: params.anode_copper_fraction,
                    lug_kg: params.lug_kg,
                };
                cx.predicted_fraction = Some(load.remaining_fraction(q));
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
    let c =
        db.circuit(name)?.ok_or_else(|| PlantError::rejected("--circuit", format!("unknown circuit {name}: it is not in the layout")))?;
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

/// What an entry changes beyond the event itself.
fn apply(db: Db<'_>, entry: &Entry) -> Result<()> {
    if let Entry::Voltage { .. } | Entry::Shorts { .. } = entry {
        // replay derives nothing from them: nothing to rebuild
        return Ok(());
    }
    if let Some(cell) = entry.cell() {
        return rebuild_cell(db, cell);
    }
    if let Entry::Outage { circuit, from, .. } = entry
        && let Some(c) = db.circuit(circuit)?
    {
        db.recompute_charge(c.id, *from)?;
        refresh_crops(db, c.id, *from)?;
    }
    Ok(())
}
