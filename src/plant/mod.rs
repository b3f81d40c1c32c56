//! The one API the faces call: open a plant, load its layout, import current,
//! record an entry or undo one, forecast, check, back up. No terminal, no printing.
//!
//! Each write is one store transaction: checks run inside it, so a rejected or
//! questioned entry, or a failed import, leaves the database as it was.

mod backtest;
mod backup;
mod balance;
mod detail;
mod drafts;
mod forecast;
mod import;
mod learn;
mod patrol;
mod plan;
mod record;
mod refresh;
mod report;

use chrono::{DateTime, Utc};
use std::path::{Path, PathBuf};

pub use backtest::BacktestSink;
pub use backup::{BACKUP_FOLDER, BackupFile, BackupKind, Restored, backup_folder, backup_if_due, list_backups, restore};
pub use detail::{CellDetail, CircuitTrend};
pub use drafts::Draft;
pub use import::{CurrentRows, ImportSummary, parse_current_csv};
pub use plan::{MAX_PLAN_DAYS, PlanOptions};
pub use record::Recorded;
pub use refresh::Touched;
pub use report::{ReportPeriod, WrittenReport};

use crate::domain::charge::{OpenSpan, Time, cell_charge};
use crate::domain::electrochem::measured_efficiency;
use crate::domain::entry::Field;
use crate::domain::history::{Contradiction, replay};
use crate::domain::history::{Event, EventKind};
use crate::domain::layout;
use crate::store::{CropFigures, Damage, Db, LayoutSummary, PlantInfo, Store, StoreCurve, StoreError};

/// Why a plant operation did not happen.
#[derive(Debug, thiserror::Error)]
pub enum PlantError {
    #[error(transparent)]
    Store(#[from] StoreError),
    #[error("no plant layout is loaded yet: run `tankbook layout load FILE.toml`, or `tankbook demo` for the demo plant")]
    NoLayout,
    #[error("{file}: {source}")]
    Layout { file: String, source: layout::LayoutError },
    #[error("{file} line {line}, field {field}: {message}")]
    Input { file: String, line: u64, field: String, message: String },
    /// An entry refused: the field it names and, in a batch, the entry's position (0-based).
    #[error("{}{field}: {message}", place(*.entry))]
    Rejected { field: Field, entry: Option<usize>, message: String },
    /// A setting refused that is no entry field: a plan option (`--days`, `--move`)
    /// or a layout key (`plan.crew_cells_per_day`), named as the user wrote it.
    #[error("{name}: {message}")]
    Setting { name: String, message: String },
    #[error("this entry needs a second look: {}. Check it, then repeat with --force to record it anyway", .0.join("; "))]
    Questioned(Vec<String>),
    #[error("cannot read {0}: {1}")]
    Read(PathBuf, std::io::Error),
    #[error("entry {entry} ({what}), its {field}: {message}")]
    Replay { entry: i64, what: String, field: Field, message: String },
    #[error(
        "this database holds entries this tankbook cannot read: {}{}. tankbook shows no figures that would \
         silently leave them out: run `tankbook check` to list every problem, and `tankbook restore FILE` to go back to a backup (`tankbook backup --list` shows them)",
        .0.iter().map(|d| d.to_string()).collect::<Vec<_>>().join("; "),
        if .0.len() >= DAMAGE_SHOWN { "; …" } else { "" }
    )]
    Damaged(Vec<Damage>),
    #[error("this is a bug in tankbook, not a problem with your input; please report it with what you did: {0}")]
    Internal(String),
    #[error("{file} cannot be restored: {why}. Nothing was changed")]
    NotRestorable { file: PathBuf, why: String },
    #[error("cannot write {0}: {1}")]
    Write(PathBuf, std::io::Error),
}

/// How many damaged entries a refusal names (`check` lists all of them).
const DAMAGE_SHOWN: usize = 20;

fn place(entry: Option<usize>) -> String {
    entry.map_or(String::new(), |i| format!("entry {} of the batch, ", i + 1))
}

impl PlantError {
    /// A refused entry (not in a batch) naming its field.
    pub fn rejected(field: Field, message: impl Into<String>) -> Self {
        PlantError::Rejected { field, entry: None, message: message.into() }
    }

    /// A refused setting (a plan option or a layout key).
    pub fn setting(name: impl Into<String>, message: impl Into<String>) -> Self {
        PlantError::Setting { name: name.into(), message: message.into() }
    }

    /// The same error, placed at entry `i` of a batch (only rejections carry it).
    pub fn in_batch(self, i: usize) -> Self {
        match self {
            PlantError::Rejected { field, message, .. } => PlantError::Rejected { field, entry: Some(i), message },
            e => e,
        }
    }
}

pub type Result<T, E = PlantError> = std::result::Result<T, E>;

/// The demo plant's name: a database whose plant is not named so is never
/// overwritten by `tankbook demo`, and one that is gets no daily backups.
pub const DEMO_NAME: &str = "Vega Refinery (demo)";

/// Who records and when: the foreman's initials, whether a questioned entry is
/// accepted anyway, and the clock reading the entry is stamped with.
#[derive(Debug, Clone, PartialEq)]
pub struct Opts {
    pub by: String,
    pub force: bool,
    pub now: Time,
}

/// An open plant database.
pub struct Plant {
    store: Store,
    /// Entries this version cannot read, found on open by index look-ups.
    damage: Vec<Damage>,
}

/// What `check` found.
#[derive(Debug, Clone, PartialEq, Default, serde::Serialize)]
pub struct CheckReport {
    pub problems: Vec<String>,
    pub cells: usize,
    pub events: i64,
    pub readings: i64,
}

pub(crate) fn far_future() -> Time {
    DateTime::<Utc>::MAX_UTC
}

impl Plant {
    /// Opens (creating if need be) a plant database. Entries this version
    /// cannot read do not stop the open (`check`, `backup` and `restore` must
    /// still work), but forecasts and the screens refuse them: see [`Plant::refuse_damage`].
    pub fn open(path: &Path) -> Result<Plant> {
        let mut store = Store::open(path)?;
        let damage = store.db().damaged_entries(DAMAGE_SHOWN)?;
        if damage.is_empty() && store.db().learning_missing()? {
            // a database from before learning: learn once from what it holds
            // (not from a damaged log: that waits for `check` and `restore`)
            store.write(learn::relearn_all)?;
        }
        Ok(Plant { store, damage })
    }

    /// Entries this version cannot read (at most the first few), as found on open.
    pub fn damage(&self) -> &[Damage] {
        &self.damage
    }

    /// [`PlantError::Damaged`] when the log holds entries this version cannot
    /// read: a forecast without them would be wrong without saying so.
    pub fn refuse_damage(&self) -> Result<()> {
        if self.damage.is_empty() { Ok(()) } else { Err(PlantError::Damaged(self.damage.clone())) }
    }

    pub fn path(&self) -> &Path {
        self.store.path()
    }

    /// The plant header, or [`PlantError::NoLayout`].
    pub fn info(&self) -> Result<PlantInfo> {
        self.store.db().plant_info()?.ok_or(PlantError::NoLayout)
    }

    /// Whether a layout has been loaded.
    pub fn has_layout(&self) -> Result<bool> {
        Ok(self.store.db().plant_info()?.is_some())
    }

    /// Parses a time as a foreman types it (RFC 3339 or local `YYYY-MM-DD HH:MM`).
    pub fn parse_time(&self, field: Field, s: &str) -> Result<Time> {
        let zone = self.info()?.days.zone;
        zone.parse_time(s).map_err(|e| PlantError::rejected(field, e.to_string()))
    }

    /// Shows an instant on the plant's wall clock.
    pub fn show_time(&self, t: Time) -> String {
        match self.info() {
            Ok(i) => i.days.zone.show(t),
            Err(_) => t.format("%Y-%m-%d %H:%MZ").to_string(),
        }
    }

    /// The circuits' names in layout order.
    pub fn circuit_names(&self) -> Result<Vec<String>> {
        Ok(self.store.db().circuits()?.into_iter().map(|c| c.name).collect())
    }

    /// Defines or updates the plant from a layout file's text.
    pub fn load_layout(&mut self, text: &str, source: &str, now: Time) -> Result<LayoutSummary> {
        let parsed = layout::parse(text).map_err(|e| PlantError::Layout { file: source.to_string(), source: e })?;
        self.store.write(|db| {
            let summary = db.apply_layout(&parsed, text, source, now)?;
            // cells may have moved section or changed anode kind: learn afresh
            learn::relearn_all(db)?;
            Ok(summary)
        })
    }

    /// Reads a layout file and loads it.
    pub fn load_layout_file(&mut self, path: &Path, now: Time) -> Result<LayoutSummary> {
        let text = std::fs::read_to_string(path).map_err(|e| PlantError::Read(path.to_path_buf(), e))?;
        self.load_layout(&text, &path.display().to_string(), now)
    }

    /// Integrity: SQLite's checks, charge that never decreases, and derived
    /// records that match a fresh replay of the event log.
    pub fn check(&mut self) -> Result<CheckReport> {
        let db = self.store.db();
        let mut r = CheckReport { problems: db.sqlite_problems()?, ..Default::default() };
        r.problems.extend(db.damaged_entries(usize::MAX >> 1)?.iter().map(|d| d.to_string()));
        for (circuit, value) in db.readings_with_bad_times()? {
            r.problems.push(format!("circuit {circuit}: a reading's time holds {value}, which is not a time (years 0000 to 9999)"));
        }
        let falls = db.charge_decreases()?;
        if falls > 0 {
            r.problems.push(format!("{falls} readings where the cumulative charge goes down"));
        }
        r.cells = db.cells()?.len();
        r.events = db.event_count()?;
        r.readings = db.reading_count()?;
        let mismatches = self.store.preview(|db| -> Result<Vec<String>> {
            let mut bad = Vec::new();
            for cell in db.cells_with_events()? {
                let before = db.stored_history_digest(&cell)?;
                match rebuild(db, &cell, false) {
                    Ok(()) if db.stored_history_digest(&cell)? != before => {
                        bad.push(format!("cell {cell}: stored records differ from the event log"))
                    }
                    Ok(()) => {}
                    // listed above, once per entry
                    Err(PlantError::Store(StoreError::Damaged(_))) => {}
                    Err(e) => bad.push(format!("cell {cell}: {e}")),
                }
            }
            Ok(bad)
        })?;
        r.problems.extend(mismatches);
        // the stored learnt values must be what learning from scratch gives
        let learnt = self.store.preview(|db| -> Result<Vec<String>> {
            let before = db.learn_digest()?;
            learn::relearn_all(db)?;
            Ok(if db.learn_digest()? == before {
                Vec::new()
            } else {
                vec!["the stored learnt efficiencies differ from learning afresh from the weighings".to_string()]
            })
        })?;
        r.problems.extend(learnt);
        Ok(r)
    }

    /// Copies the database to `dest` with SQLite's online backup and checks the
    /// copy; it gets its name only once checked, so `dest` never holds half a copy.
    pub fn backup(&self, dest: &Path) -> Result<()> {
        if dest.exists() {
            return Err(StoreError::Backup(format!("{} already exists; choose a new file", dest.display())).into());
        }
        backup::backup_to(&self.store, dest)
    }

    /// The newest entries first (undos included), optionally of one cell,
    /// each handed to `f` as it is read (a long listing is not held whole).
    pub fn each_recent_event<E: From<StoreError>>(
        &self,
        cell: Option<&str>,
        limit: usize,
        f: impl FnMut(crate::domain::history::Event) -> std::result::Result<(), E>,
    ) -> std::result::Result<(), E> {
        self.store.db().each_recent_event(cell, limit, f)
    }

    /// Every row of the database as text (for tests that prove nothing changed).
    pub fn dump(&self) -> Result<String> {
        Ok(self.store.db().dump()?)
    }
}

/// Replays a cell's events into its derived records, with each closed crop's
/// charge and measured efficiency. A crop whose bounds, weight and cut-outs are
/// unchanged keeps its stored figures (readings changes refresh them separately),
/// so logging one entry does not recompute a cell's whole history.
///
/// A contradiction is reported as a rejection of the entry being recorded (its
/// field, as the foreman typed it); `check` reports it against the stored entry.
pub(crate) fn rebuild_cell(db: Db<'_>, cell: &str) -> Result<()> {
    rebuild(db, cell, true).map_err(|e| match e {
        PlantError::Replay { field, message, .. } => PlantError::rejected(field, message),
        e => e,
    })
}

/// The field an entry's time was given in: what a replay contradiction is about.
fn time_field(kind: EventKind) -> Field {
    match kind {
        EventKind::Cutout | EventKind::Outage | EventKind::Setpoint => Field::From,
        _ => Field::At,
    }
}

fn contradiction(events: &[Event], c: Contradiction) -> PlantError {
    match events.iter().find(|e| e.id == c.event) {
        Some(e) => PlantError::Replay {
            entry: e.id,
            what: format!("{} of {}", e.kind.name(), e.cell.as_deref().or(e.circuit.as_deref()).unwrap_or("the plant")),
            field: time_field(e.kind),
            message: c.message,
        },
        None => PlantError::Internal(format!("replay named entry {}, which is not among the cell's entries: {}", c.event, c.message)),
    }
}

/// The rebuild itself; `reuse = false` recomputes every crop (for `check`).
fn rebuild(db: Db<'_>, cell: &str, reuse: bool) -> Result<()> {
    let row = db.cell(cell)?.ok_or_else(|| PlantError::rejected(Field::Cell, format!("unknown cell {cell}")))?;
    let events = db.cell_events(cell)?;
    let zone = db.plant_info()?.ok_or(PlantError::NoLayout)?.days.zone;
    let h = replay(&events, |t| zone.show(t)).map_err(|c| contradiction(&events, c))?;
    let cuts: Vec<OpenSpan> = h.cutouts.iter().map(|c| c.span).collect();
    let old_cuts = db.cutouts(cell, far_future())?;
    let changed: Vec<OpenSpan> =
        cuts.iter().filter(|c| !old_cuts.contains(c)).chain(old_cuts.iter().filter(|c| !cuts.contains(c))).copied().collect();
    let stored = db.crop_figures(cell)?;
    let mut curve = None;
    let mut figures = Vec::with_capacity(h.crops.len());
    for c in &h.crops {
        let (Some(end), Some(kg)) = (c.ended_at, c.harvest_kg) else {
            figures.push(None);
            continue;
        };
        let touched = changed.iter().any(|s| s.from < end && s.to.is_none_or(|to| to > c.started_at));
        let kept = stored.iter().find(|(k, _)| *k == (c.started_at, end, kg)).map(|(_, f)| *f);
        if let (Some(f), false, true) = (kept, touched, reuse) {
            figures.push(Some(f));
            continue;
        }
        if curve.is_none() {
            curve = Some(StoreCurve::new(db, row.circuit_id, far_future())?);
        }
        let Some(curve) = curve.as_ref() else { continue };
        let q = cell_charge(curve, &cuts, c.started_at, end)?;
        // starter sheets are weighed with the crop but were never plated
        let sheets = db.params_at(cell, c.started_at)?.starter_sheets_kg();
        figures.push(Some(CropFigures {
            charge_ah: q.total(),
            estimated_ah: q.estimated,
            efficiency: measured_efficiency(kg - sheets, q.total()),
        }));
    }
    db.write_history(cell, &h, &figures)?;
    Ok(())
}

/// After readings or outages change from `from` on, the crops that ended since
/// then have a different charge: recompute their figures.
pub(crate) fn refresh_crops(db: Db<'_>, circuit_id: i64, from: Time) -> Result<()> {
    refresh_crop_figures(db, circuit_id, from)?;
    // their efficiencies and the scrap factors after `from` changed with the
    // charge: every cell weighed since, including those whose weighing had no
    // charge to learn from before (an outage undone gives it one back)
    let mut cells = db.cells_weighed_since(circuit_id, from)?;
    cells.extend(db.crops_ended_since(circuit_id, from)?.into_iter().map(|c| c.0));
    cells.extend(db.cells_scrapped_since(circuit_id, from)?);
    cells.sort();
    cells.dedup();
    learn::relearn(db, &cells)
}

fn refresh_crop_figures(db: Db<'_>, circuit_id: i64, from: Time) -> Result<()> {
    let curve = StoreCurve::new(db, circuit_id, far_future())?;
    for (cell, start, end, kg) in db.crops_ended_since(circuit_id, from)? {
        let cuts = db.cutouts(&cell, far_future())?;
        let q = cell_charge(&curve, &cuts, start, end)?;
        let sheets = db.params_at(&cell, start)?.starter_sheets_kg();
        db.set_crop_figures(
            &cell,
            start,
            CropFigures { charge_ah: q.total(), estimated_ah: q.estimated, efficiency: measured_efficiency(kg - sheets, q.total()) },
        )?;
    }
    Ok(())
}

#[cfg(test)]
mod tests;
