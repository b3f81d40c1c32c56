//! The screens' state and how actions change it. No I/O here: an action that
//! needs the database returns an [`Effect`], which the runner performs against
//! the plant and reports back; drawing reads the state only.
//!
//! `App` holds what every screen shares (the plant's forecast, who is logging,
//! the status line) and one state struct per screen, kept in that screen's
//! file; what an overlay (form, review, question) does with a key is in
//! [`super::overlay`].

use chrono::Duration;

use super::accuracy::AccuracyScreen;
use super::balance::BalanceScreen;
use super::cell::CellScreen;
use super::entries::EntriesScreen;
use super::form::{Form, FormContext, FormKind, form_field};
use super::patrol::PatrolScreen;
use super::plan::PlanScreen;
use super::rectifier::RectifierScreen;
use super::tankhouse::{SIDE_PANEL, TILE_W, TankhouseScreen, WIDE};
use crate::domain::charge::Time;
use crate::domain::entry::{Entry, Field};
use crate::domain::forecast::{CellForecast, Forecast, Warning};
use crate::domain::history::{Event, EventKind};
use crate::domain::plan::Plan;
use crate::domain::plant_time::{ProductionDays, Shift};
use crate::plant::{CellDetail, CircuitTrend, Draft, Opts, Recorded};

pub use super::keys::Key;
pub use super::overlay::{Overlay, Review};
pub use super::tankhouse::{GridLine, grid};

/// The screens.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum View {
    Tankhouse,
    Cell,
    Rectifier,
    Entries,
    Plan,
    /// The copper balance of the month so far.
    Balance,
    /// The cells to check for shorts, most suspect first.
    Patrol,
    /// How the learnt forecasts compared with the weighings (the back-test).
    Accuracy,
}

impl View {
    pub fn title(self) -> &'static str {
        match self {
            View::Tankhouse => "Tankhouse",
            View::Cell => "Cell",
            View::Rectifier => "Rectifiers",
            View::Entries => "Entries",
            View::Plan => "Plan",
            View::Balance => "Copper balance",
            View::Patrol => "Patrol",
            View::Accuracy => "Accuracy",
        }
    }
}

/// What a key asks for on a screen.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Action {
    Move(i32, i32),
    Page(i32),
    Section(i32),
    OpenCell,
    NextDue,
    StartJump,
    Legend,
    Back,
    Span(i32),
    UndoSelected,
    PlanJob(i32),
    PlanMove,
    PlanReset,
    /// Sign the plan on screen as approved (asks first).
    PlanApprove,
    /// Write the report of the shift in progress and say where.
    ShiftReport,
    /// The patrol list's selected cell, opened on the cell screen.
    OpenPatrolCell,
    /// The cell screen's right side: charts, or the predictions against the weighings in full.
    CellWeighings,
    EntryMenu,
    UndoLast,
    ShowView(View),
    AskInitials,
    RetryUnsaved,
    Reload,
    Help,
    Quit,
    /// A key while an overlay (form, menu, question) has the keyboard.
    Input(Key),
    Resize(u16, u16),
}

/// What a committed write changed, so the runner refreshes only the cells it touches.
#[derive(Debug, Clone, PartialEq)]
pub enum Changed {
    /// Entries recorded.
    Entries(Vec<Entry>),
    /// An entry undone.
    Undone(Event),
    /// A current reading typed on a circuit.
    Reading(String),
}

/// Work for the runner: each needs the plant.
#[derive(Debug, Clone, PartialEq)]
pub enum Effect {
    /// The whole plant's forecast afresh (at the start, on `g`, and now and then on a screen left open).
    Reload,
    /// The forecast of what a committed write touched, then the screen in view.
    Refresh(Changed),
    LoadDetail(String),
    LoadTrends,
    LoadRecent,
    /// Plan the coming days with the hand moves made so far.
    LoadPlan,
    /// The cell's back-test rows: its predictions against its weighings.
    LoadCellBacktest(String),
    LoadPatrol,
    /// The whole plant's back-test, for the accuracy screen.
    LoadAccuracy,
    /// The review step: run the checks, write nothing.
    Check(Vec<(Entry, Opts)>),
    Commit(Vec<(Entry, Opts)>),
    ImportReading {
        circuit: String,
        at: Time,
        amps: f64,
        by: String,
    },
    /// Find the newest live entry and offer to undo it.
    OfferUndo,
    Undo(i64),
    /// A draft was taken up again or thrown away: remove it from the database.
    DropDraft(i64),
    /// The copper balance of the month so far.
    LoadBalance,
    /// Write the shift report into the reports folder beside the database.
    SaveReport,
    /// Record a confirmed hand move as a kept decision, with the initials of who is logging.
    KeepMove(String, chrono::NaiveDate),
    /// Record the plan on screen as approved by who is logging.
    ApprovePlan,
}

/// What the next production day's first shift must do, shown before the day turns.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ComingShift {
    pub shift: Shift,
    pub harvests: usize,
    pub anode_changes: usize,
    /// The earliest of those due times.
    pub first: Option<Time>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Status {
    pub text: String,
    pub bad: bool,
}

/// The state of the screens.
#[derive(Debug, Clone)]
pub struct App {
    pub plant_name: String,
    pub db_path: String,
    pub days: ProductionDays,
    pub as_of: Time,
    pub who: Option<String>,
    /// The shift the initials were given in: a new shift asks again.
    pub who_shift: Option<(chrono::NaiveDate, u32)>,
    pub shifts_per_day: u32,
    pub view: View,
    /// The screen the cell screen was opened from: Esc goes back to it.
    pub cell_from: View,
    pub overlay: Option<Overlay>,
    /// Every cell's forecast as of `as_of`, in plant order: all screens read it.
    pub cells: Vec<CellForecast>,
    pub plant_warnings: Vec<Warning>,
    pub circuits: Vec<String>,
    pub tankhouse: TankhouseScreen,
    pub cell: CellScreen,
    pub rectifiers: RectifierScreen,
    pub entries: EntriesScreen,
    pub plan: PlanScreen,
    pub balance: BalanceScreen,
    pub patrol: PatrolScreen,
    pub accuracy: AccuracyScreen,
    pub status: Option<Status>,
    /// Entries whose commit failed: kept in memory, never dropped.
    pub unsaved: Option<Vec<(Entry, Opts)>>,
    /// The form those entries were typed in: kept as a draft if the terminal goes away.
    pub unsaved_form: Option<Form>,
    /// The form of the entries being committed, until the result is known.
    pub(super) committing: Option<Form>,
    /// Forms kept when the terminal went away last time, not yet offered back.
    pub drafts: Vec<Draft>,
    pub width: u16,
    pub height: u16,
    pub color: bool,
    pub quit: bool,
    /// A slower panel (plan, patrol, back-test, balance) is being read after the frame was drawn.
    pub updating: bool,
    /// `cells` holds only the first screen's sections, forecast for the first
    /// frame; the whole plant's forecast follows (no plant-wide counts till then).
    pub partial: bool,
}

impl App {
    pub fn new(plant_name: String, db_path: String, days: ProductionDays, as_of: Time, color: bool) -> App {
        App {
            plant_name,
            db_path,
            days,
            as_of,
            who: None,
            who_shift: None,
            shifts_per_day: 1,
            view: View::Tankhouse,
            cell_from: View::Tankhouse,
            overlay: Some(Overlay::Initials(String::new())),
            cells: Vec::new(),
            plant_warnings: Vec::new(),
            circuits: Vec::new(),
            tankhouse: TankhouseScreen::default(),
            cell: CellScreen::default(),
            rectifiers: RectifierScreen::default(),
            entries: EntriesScreen::default(),
            plan: PlanScreen::default(),
            balance: BalanceScreen::default(),
            patrol: PatrolScreen::default(),
            accuracy: AccuracyScreen::default(),
            status: None,
            unsaved: None,
            unsaved_form: None,
            committing: None,
            drafts: Vec::new(),
            width: 80,
            height: 24,
            color,
            quit: false,
            updating: false,
            partial: false,
        }
    }

    /// End of the production day `as_of` falls in.
    pub fn day_end(&self) -> Time {
        let d = self.days.day_of(self.as_of);
        self.days.start_of(d + Duration::days(1))
    }

    /// The shift `as_of` falls in: its production day and number (0 = the first).
    pub fn shift(&self) -> (chrono::NaiveDate, u32) {
        let s = self.shift_now();
        (s.day, s.index)
    }

    pub fn shift_now(&self) -> Shift {
        self.days.shift_at(self.as_of, self.shifts_per_day)
    }

    /// In the production day's last shift (or its last 8 hours, with one shift a
    /// day): the work due in the next production day's first shift, so the night
    /// shift sees what the morning brings before the day turns.
    pub fn coming_shift(&self) -> Option<ComingShift> {
        if self.partial {
            return None;
        }
        let now = self.shift_now();
        let soon = if now.of == 1 { self.day_end() - Duration::hours(8) <= self.as_of } else { now.is_last() };
        if !soon {
            return None;
        }
        let shift = self.days.next_day_first_shift(&now);
        let within = |t: Option<Time>| t.filter(|t| *t >= shift.start && *t < shift.end);
        let harvests: Vec<Time> = self.cells.iter().filter_map(|c| within(c.cathode.as_ref().and_then(|k| k.harvest_due))).collect();
        let changes: Vec<Time> = self
            .cells
            .iter()
            .filter(|c| c.anode_kind == crate::domain::layout::AnodeKind::Soluble)
            .filter_map(|c| within(c.anode.as_ref().and_then(|a| a.pull_due)))
            .collect();
        let first = harvests.iter().chain(&changes).min().copied();
        Some(ComingShift { shift, harvests: harvests.len(), anode_changes: changes.len(), first })
    }

    /// Lines the header takes: one, two while the next day's first shift is shown.
    pub fn header_rows(&self) -> u16 {
        if self.coming_shift().is_some() { 2 } else { 1 }
    }

    /// The cell selected on the tankhouse screen (the cell screen shows it).
    pub fn selected(&self) -> Option<&CellForecast> {
        self.cells.get(self.tankhouse.cursor)
    }

    /// The anode change selected on the plan screen.
    pub fn selected_change(&self) -> Option<&crate::domain::plan::AnodeChange> {
        self.plan.selected_change()
    }

    pub(super) fn say(&mut self, text: impl Into<String>) {
        self.status = Some(Status { text: text.into(), bad: false });
    }

    /// A warning on the status line; one too long for it also opens as a notice,
    /// so nothing the foreman must read is cut off.
    pub(super) fn warn(&mut self, text: impl Into<String>) {
        let text = text.into();
        if text.chars().count() > 40 && self.overlay.is_none() {
            self.overlay = Some(Overlay::Notice(text.clone()));
        }
        self.status = Some(Status { text, bad: true });
    }

    /// Columns the tile grid uses: all of them, less the side panel on a wide terminal.
    pub fn grid_width(&self) -> u16 {
        if self.width >= WIDE { self.width - SIDE_PANEL } else { self.width }
    }

    /// Tiles per line at the current width.
    pub fn per_row(&self) -> usize {
        (self.grid_width().saturating_sub(1) / TILE_W).max(1) as usize
    }

    /// Lines the tankhouse grid may use (the screen less header, status and hint lines).
    pub fn body_rows(&self) -> usize {
        self.height.saturating_sub(2 + self.header_rows()).max(1) as usize
    }

    /// Keeps the selected tile on screen.
    pub(super) fn follow_cursor(&mut self) {
        let (per_row, rows) = (self.per_row(), self.body_rows());
        self.tankhouse.follow(&self.cells, per_row, rows);
    }

    /// Applies an action; returns the database work it needs, if any.
    pub fn update(&mut self, action: Action) -> Option<Effect> {
        if let Action::Resize(w, h) = action {
            self.width = w;
            self.height = h;
            self.follow_cursor();
            return None;
        }
        if let Action::Input(key) = action {
            return self.input(key);
        }
        if self.overlay.is_some() {
            return None;
        }
        match action {
            Action::Quit => {
                if self.unsaved.is_some() {
                    self.overlay = Some(Overlay::ConfirmQuit);
                } else {
                    self.quit = true;
                }
                None
            }
            Action::Help => {
                self.overlay = Some(Overlay::Help(0));
                None
            }
            Action::Legend => {
                self.overlay = Some(Overlay::Legend);
                None
            }
            Action::AskInitials => {
                self.overlay = Some(Overlay::Initials(self.who.clone().unwrap_or_default()));
                None
            }
            Action::Reload => Some(Effect::Reload),
            Action::EntryMenu => {
                if self.who.is_none() {
                    self.overlay = Some(Overlay::Initials(String::new()));
                    self.warn("type your initials first: every entry records who made it");
                } else {
                    self.overlay = Some(Overlay::Menu);
                }
                None
            }
            Action::UndoLast => Some(Effect::OfferUndo),
            Action::RetryUnsaved => match self.unsaved.clone() {
                Some(entries) => Some(Effect::Commit(entries)),
                None => {
                    self.say("nothing is waiting to be saved");
                    None
                }
            },
            Action::ShowView(v) => {
                self.view = v;
                self.cell_from = View::Tankhouse;
                match v {
                    View::Rectifier => Some(Effect::LoadTrends),
                    View::Entries => Some(Effect::LoadRecent),
                    View::Plan => Some(Effect::LoadPlan),
                    View::Balance => Some(Effect::LoadBalance),
                    View::Cell => self.selected().map(|c| Effect::LoadDetail(c.cell.clone())),
                    View::Patrol => Some(Effect::LoadPatrol),
                    View::Accuracy => Some(Effect::LoadAccuracy),
                    View::Tankhouse => None,
                }
            }
            Action::Back if self.view == View::Cell && self.cell_from == View::Patrol => {
                // back to the list the cell was picked from, read again after whatever was logged
                self.view = View::Patrol;
                self.cell_from = View::Tankhouse;
                Some(Effect::LoadPatrol)
            }
            Action::Back => {
                self.view = View::Tankhouse;
                self.follow_cursor();
                None
            }
            Action::OpenCell => {
                self.view = View::Cell;
                self.cell_from = View::Tankhouse;
                self.selected().map(|c| Effect::LoadDetail(c.cell.clone()))
            }
            Action::NextDue => {
                let end = self.day_end();
                let n = self.cells.len();
                let due = |c: &CellForecast| {
                    crate::domain::outlook::states(c, self.as_of, end).iter().any(|s| {
                        use crate::domain::outlook::CellState::*;
                        matches!(s, HarvestOverdue | HarvestDue | AnodesDue | ThinAnode)
                    })
                };
                match (1..=n).map(|k| (self.tankhouse.cursor + k) % n).find(|&i| due(&self.cells[i])) {
                    Some(i) => {
                        self.tankhouse.cursor = i;
                        self.follow_cursor();
                    }
                    None => self.say("no cell is due today"),
                }
                None
            }
            Action::StartJump => {
                self.overlay = Some(Overlay::Jump(String::new()));
                None
            }
            Action::Move(dx, dy) => self.moved(dx, dy),
            Action::Page(d) => {
                let rows = self.body_rows().saturating_sub(2).max(1) as i32;
                let per_row = self.per_row();
                self.tankhouse.move_vertical(&self.cells, per_row, d * rows);
                self.follow_cursor();
                None
            }
            Action::Section(d) => {
                self.tankhouse.move_section(&self.cells, d);
                self.follow_cursor();
                None
            }
            Action::Span(d) => {
                self.rectifiers.span(d);
                Some(Effect::LoadTrends)
            }
            Action::UndoSelected => {
                match self.entries.selected().cloned() {
                    Some(e) if e.kind == EventKind::Void => self.warn("that line is an undo itself"),
                    Some(e) if e.voided => self.warn(format!("entry {} is already undone", e.id)),
                    Some(e) => self.overlay = Some(Overlay::ConfirmUndo(e)),
                    None => {}
                }
                None
            }
            Action::PlanJob(d) => {
                self.plan.next_job(d);
                None
            }
            Action::PlanMove => {
                match self.plan.selected_change() {
                    Some(c) => {
                        let cell = c.cell.clone();
                        self.say(format!("moving {cell}: ↑↓ choose the day, Enter to place it there, Esc to leave it"));
                        self.overlay = Some(Overlay::PlanMove(cell));
                    }
                    None => self.warn("select an anode change first (←→ on the day's list)"),
                }
                None
            }
            Action::PlanReset => {
                self.plan.moves.clear();
                self.say("hand moves dropped: the plan is levelled afresh");
                Some(Effect::LoadPlan)
            }
            Action::PlanApprove => {
                match (&self.plan.plan, &self.who) {
                    (None, _) => self.warn("no plan to approve yet"),
                    (_, None) => {
                        self.overlay = Some(Overlay::Initials(String::new()));
                        self.warn("type your initials first: the approval records who signed");
                    }
                    (Some(_), Some(_)) => self.overlay = Some(Overlay::ConfirmApprove),
                }
                None
            }
            Action::ShiftReport => {
                self.say("writing the shift report…");
                Some(Effect::SaveReport)
            }
            Action::OpenPatrolCell => {
                let cell = self.patrol.selected().map(|p| p.cell.clone())?;
                let i = self.cells.iter().position(|c| c.cell == cell)?;
                self.tankhouse.cursor = i;
                self.view = View::Cell;
                self.cell_from = View::Patrol;
                Some(Effect::LoadDetail(cell))
            }
            Action::CellWeighings => {
                self.cell.weighings = !self.cell.weighings;
                None
            }
            Action::Input(_) | Action::Resize(..) => None,
        }
    }

    /// A move key on the screen in view.
    fn moved(&mut self, dx: i32, dy: i32) -> Option<Effect> {
        match self.view {
            View::Tankhouse => {
                if dx != 0 {
                    self.tankhouse.move_across(&self.cells, dx);
                } else {
                    let per_row = self.per_row();
                    self.tankhouse.move_vertical(&self.cells, per_row, dy);
                }
                self.follow_cursor();
                None
            }
            View::Cell => {
                self.tankhouse.move_across(&self.cells, dx);
                self.selected().map(|c| Effect::LoadDetail(c.cell.clone()))
            }
            View::Rectifier => {
                self.rectifiers.moved(dy);
                None
            }
            View::Entries => {
                self.entries.moved(dy);
                None
            }
            View::Plan => {
                self.plan.moved(dy);
                None
            }
            View::Balance => None,
            View::Patrol => {
                self.patrol.moved(dy);
                None
            }
            View::Accuracy => None,
        }
    }

    pub(super) fn form_context<'a>(&'a self, cut: &'a dyn Fn(&str) -> Option<Time>, ids: &'a [String]) -> FormContext<'a> {
        FormContext { cells: ids, circuits: &self.circuits, zone: self.days.zone, cut_out_since: cut }
    }

    pub(super) fn cell_ids(&self) -> Vec<String> {
        self.cells.iter().map(|c| c.cell.clone()).collect()
    }

    pub(super) fn open_form(&mut self, kind: FormKind) {
        let (cell, circuit, anodes) = match self.selected() {
            Some(c) => (c.cell.clone(), c.circuit.clone(), c.anode.as_ref().map_or(0, |a| a.count)),
            None => (String::new(), self.circuits.first().cloned().unwrap_or_default(), 0),
        };
        let anodes = if anodes == 0 { self.cell.detail.as_ref().map_or(50, |d| d.params.anodes_per_cell) } else { anodes };
        let now = self.days.zone.show(self.as_of);
        let mut form = Form::new(kind, &cell, &circuit, &now, anodes);
        self.validate(&mut form);
        self.overlay = Some(Overlay::Form(form));
    }

    pub(super) fn validate(&self, form: &mut Form) {
        let ids = self.cell_ids();
        let cut = |id: &str| self.cells.iter().find(|c| c.cell == id).and_then(|c| c.cut_out_since);
        form.validate(&self.form_context(&cut, &ids));
    }

    pub(super) fn opts(&self, force: bool) -> Opts {
        Opts { by: self.who.clone().unwrap_or_default(), force, now: self.as_of }
    }

    /// Ctrl-C: whether the screens end now (a form being typed is then kept as a
    /// draft). With an entry that failed to save, only in memory, it asks first.
    pub fn interrupt(&mut self) -> bool {
        if self.unsaved.is_some() {
            self.overlay = Some(Overlay::ConfirmQuit);
            return false;
        }
        true
    }

    /// The form typed but not yet recorded (in a form or its review), if any:
    /// what is kept as a draft when the terminal goes away.
    pub fn unconfirmed_form(&self) -> Option<&Form> {
        match &self.overlay {
            Some(Overlay::Form(f)) => Some(f),
            Some(Overlay::Review(r)) => Some(&r.form),
            // an entry that did not save is only in memory: it is kept the same way
            _ => self.unsaved_form.as_ref(),
        }
    }

    /// Offers the next kept draft, if any (after the initials, so it is logged by who is here now).
    pub(super) fn offer_draft(&mut self) {
        if self.overlay.is_none() && !self.drafts.is_empty() {
            let d = self.drafts.remove(0);
            self.overlay = Some(Overlay::Draft(d));
        }
    }

    /// Takes a draft up again: its form, as typed, checked afresh.
    pub(super) fn reopen_draft(&mut self, d: Draft) -> Option<Effect> {
        match FormKind::from_name(&d.form) {
            Some(kind) => {
                let mut form = Form::from_typed(kind, &d.fields);
                self.validate(&mut form);
                self.overlay = Some(Overlay::Form(form));
                self.say("the draft is open again: nothing is recorded until you confirm");
            }
            None => self.warn(format!("draft {} is of a form this tankbook does not know ('{}'): dropped", d.id, d.form)),
        }
        Some(Effect::DropDraft(d.id))
    }

    // ---- results of effects, reported back by the runner ----

    pub fn loaded_forecast(&mut self, f: Forecast, circuits: Vec<String>) {
        let keep = self.selected().map(|c| c.cell.clone());
        self.as_of = f.as_of;
        self.cells = f.cells;
        self.plant_warnings = f.warnings;
        self.circuits = circuits;
        self.partial = false;
        if let Some(id) = keep
            && let Some(i) = self.cells.iter().position(|c| c.cell == id)
        {
            self.tankhouse.cursor = i;
        }
        self.forecast_taken();
    }

    /// The forecast of the cells a write touched (`f`, from [`crate::plant::Plant::forecast_touched`])
    /// put in place of theirs, and the touched circuits' warnings in place of
    /// theirs, in circuit order: what a whole new forecast would hold.
    pub fn refreshed(&mut self, f: Forecast, touched: &crate::plant::Touched) {
        let at: std::collections::HashMap<String, usize> = self.cells.iter().enumerate().map(|(i, c)| (c.cell.clone(), i)).collect();
        for c in f.cells {
            if let Some(&i) = at.get(&c.cell) {
                self.cells[i] = c;
            }
        }
        let of = |w: &Warning, name: &str| w.circuit.as_deref() == Some(name);
        let mut warnings = Vec::with_capacity(self.plant_warnings.len());
        for name in &self.circuits {
            let from = if touched.circuits.contains(name) { &f.warnings } else { &self.plant_warnings };
            warnings.extend(from.iter().filter(|w| of(w, name)).cloned());
        }
        // a warning on no known circuit (none today) stays where it was
        warnings.extend(self.plant_warnings.iter().filter(|w| !self.circuits.iter().any(|n| of(w, n))).cloned());
        self.plant_warnings = warnings;
        self.as_of = f.as_of;
        self.forecast_taken();
    }

    /// After a forecast came in: the cursor kept on screen, the initials asked again in a new shift.
    fn forecast_taken(&mut self) {
        self.tankhouse.cursor = self.tankhouse.cursor.min(self.cells.len().saturating_sub(1));
        self.follow_cursor();
        if self.who.is_some() && self.who_shift.is_some_and(|s| s != self.shift()) && self.overlay.is_none() {
            self.overlay = Some(Overlay::Initials(String::new()));
            self.say("a new shift has started: who is logging now?");
        }
    }

    pub fn loaded_detail(&mut self, d: CellDetail) {
        self.cell.detail = Some(d);
    }

    pub fn loaded_cell_backtest(&mut self, cell: String, b: crate::domain::backtest::Backtest) {
        self.cell.backtest = Some((cell, b));
    }

    pub fn loaded_patrol(&mut self, p: crate::domain::patrol::Patrol) {
        self.patrol.loaded(p);
    }

    pub fn loaded_accuracy(&mut self, b: AccuracyScreen) {
        self.accuracy.loaded(b);
    }

    pub fn loaded_trends(&mut self, t: Vec<CircuitTrend>) {
        self.rectifiers.loaded(t);
    }

    pub fn loaded_recent(&mut self, e: Vec<Event>) {
        self.entries.loaded(e);
    }

    /// The review step's verdict.
    pub fn checked(&mut self, entries: Vec<(Entry, Opts)>, verdict: Result<(), CheckVerdict>) {
        let Some(Overlay::Form(mut form)) = self.overlay.take() else {
            return;
        };
        let summary: Vec<String> = entries.iter().map(|(e, _)| describe(e, self)).collect();
        match verdict {
            Ok(()) => {
                self.overlay = Some(Overlay::Review(Review { form, entries, reading: None, summary, questions: Vec::new(), forced: false }))
            }
            Err(CheckVerdict::Questioned(questions)) => {
                self.overlay = Some(Overlay::Review(Review { form, entries, reading: None, summary, questions, forced: false }))
            }
            Err(CheckVerdict::Rejected { field, entry, message }) => {
                let rejected = entry.and_then(|i| entries.get(i)).map(|(e, _)| e);
                // in a form for several cells, say which cell's entry it was
                let message = match rejected.and_then(|e| e.cell()) {
                    Some(cell) if entries.iter().filter_map(|(e, _)| e.cell()).any(|c| c != cell) => format!("{cell}: {message}"),
                    _ => message,
                };
                let key = field.and_then(|f| form_field(form.kind, rejected.map(|e| e.kind()), f));
                match key.and_then(|k| form.fields.iter().position(|f| f.key == k)) {
                    Some(i) => {
                        form.fields[i].error = Some(message.clone());
                        form.focus = i;
                    }
                    None => form.message = Some(message.clone()),
                }
                self.warn(message);
                self.overlay = Some(Overlay::Form(form));
            }
        }
    }

    pub fn committed(&mut self, entries: Vec<(Entry, Opts)>, result: Result<Vec<Recorded>, String>) -> Option<Effect> {
        match result {
            Ok(rec) => {
                self.unsaved = None;
                self.unsaved_form = None;
                self.committing = None;
                let ids: Vec<String> = rec.iter().map(|r| r.event.to_string()).collect();
                let what = entries.first().map(|(e, _)| e.kind().name()).unwrap_or("entry");
                let cells: Vec<&str> = entries.iter().filter_map(|(e, _)| e.cell()).collect();
                let place = match cells.as_slice() {
                    [] => String::new(),
                    [one] => format!(" for {one}"),
                    [a, .., b] => format!(" for {a}–{b}"),
                };
                self.say(format!("recorded {what}{place} (entry {})", ids.join(", ")));
                Some(Effect::Refresh(Changed::Entries(entries.into_iter().map(|(e, _)| e).collect())))
            }
            Err(e) => {
                self.unsaved = Some(entries);
                if let Some(form) = self.committing.take() {
                    self.unsaved_form = Some(form);
                }
                self.warn(format!("NOT SAVED: {e}. The entry is kept here: press w to try again"));
                None
            }
        }
    }

    pub fn loaded_plan(&mut self, p: Plan) {
        self.plan.loaded(p);
        // a hand move the replan accepted: ask whether it is a decision to keep
        if let Some((cell, date)) = self.plan.placed.take()
            && self.plan.moves.contains(&(cell.clone(), date))
            && self.overlay.is_none()
        {
            self.overlay = Some(Overlay::ConfirmKeep(cell, date));
        }
    }

    /// A hand move recorded as a kept decision (its entries), or why not.
    pub fn kept(&mut self, cell: &str, date: chrono::NaiveDate, result: Result<Vec<i64>, String>) -> Option<Effect> {
        match result {
            Ok(entries) => {
                // recorded now: later plans apply it from the event log, not from this screen
                self.plan.moves.retain(|(c, _)| c != cell);
                let ids: Vec<String> = entries.iter().map(i64::to_string).collect();
                let by = self.who.clone().unwrap_or_default();
                self.say(format!("kept: {cell} on {date} by {by} (entry {}); later plans keep it, u undoes it", ids.join(", ")));
                Some(Effect::LoadPlan)
            }
            Err(msg) => {
                self.warn(format!("{cell} on {date} not kept: {msg}"));
                None
            }
        }
    }

    /// The plan on screen recorded as approved (its record), or why not.
    pub fn approved(&mut self, result: Result<i64, String>) -> Option<Effect> {
        match result {
            Ok(id) => {
                let by = self.who.clone().unwrap_or_default();
                self.say(format!("plan approved by {by} (approval {id}); changes from now on are shown at the top"));
                Some(Effect::LoadPlan)
            }
            Err(msg) => {
                self.warn(format!("the plan was not approved: {msg}"));
                None
            }
        }
    }

    pub fn loaded_balance(&mut self, b: crate::domain::balance::Balance) {
        self.balance.loaded(b);
    }

    pub fn balance_refused(&mut self, msg: String) {
        self.balance.failed(msg.clone());
        self.warn(format!("no copper balance: {msg}"));
    }

    /// The shift report was written (where), or why not.
    pub fn report_saved(&mut self, result: Result<std::path::PathBuf, String>) {
        match result {
            Ok(path) => {
                let text = format!("shift report written to {}", path.display());
                self.status = Some(Status { text: text.clone(), bad: false });
                if self.overlay.is_none() {
                    self.overlay = Some(Overlay::Info(format!("{text}\nOpen it in a browser to print it (A4 or Letter).")));
                }
            }
            Err(msg) => self.warn(format!("the shift report was not written: {msg}")),
        }
    }

    /// The day's automatic backup finished in the background: where it went,
    /// nothing when none was due, a warning when it failed (the entry is safe either way).
    pub fn backup_done(&mut self, result: Result<Option<std::path::PathBuf>, String>) {
        match result {
            Ok(Some(path)) => {
                let shown = std::path::Path::new(&self.db_path)
                    .parent()
                    .and_then(|d| path.strip_prefix(d).ok())
                    .map_or_else(|| path.display().to_string(), |p| p.display().to_string());
                // after what the write said (recorded …), which the foreman must still see
                let text = match &self.status {
                    Some(Status { text, bad: false }) if !text.contains("today's backup") => {
                        format!("{text} · today's backup made: {shown}")
                    }
                    _ => format!("today's backup made: {shown}"),
                };
                self.say(text);
            }
            Ok(None) => {}
            Err(e) => self.warn(format!("warning: the daily backup was not made ({e}); the entry itself is saved")),
        }
    }

    /// A replan was refused (a hand move outside its window, over capacity…): the last move is taken back.
    pub fn plan_refused(&mut self, msg: String) -> Option<Effect> {
        match self.plan.take_back() {
            Some((cell, day)) => {
                self.warn(format!("{cell} cannot go on {day}: {msg}"));
                Some(Effect::LoadPlan)
            }
            None => {
                self.warn(format!("no plan: {msg}"));
                None
            }
        }
    }

    pub fn offer_undo(&mut self, newest: Option<Event>) {
        match newest {
            Some(e) => self.overlay = Some(Overlay::ConfirmUndo(e)),
            None => self.warn("there is no entry to undo"),
        }
    }

    pub fn undone(&mut self, result: Result<Event, String>) -> Option<Effect> {
        match result {
            Ok(e) => {
                self.say(format!(
                    "undid entry {} ({} {}); the undo is in the event log",
                    e.id,
                    e.kind.name(),
                    e.cell.clone().or(e.circuit.clone()).unwrap_or_default()
                ));
                Some(Effect::Refresh(Changed::Undone(e)))
            }
            Err(msg) => {
                self.warn(msg);
                None
            }
        }
    }

    /// What the screen in view reads again after the forecast changed.
    pub fn view_load(&self) -> Option<Effect> {
        match self.view {
            View::Cell => self.selected().map(|c| Effect::LoadDetail(c.cell.clone())),
            View::Rectifier => Some(Effect::LoadTrends),
            View::Entries => Some(Effect::LoadRecent),
            View::Plan => Some(Effect::LoadPlan),
            View::Balance => Some(Effect::LoadBalance),
            View::Patrol => Some(Effect::LoadPatrol),
            View::Accuracy => Some(Effect::LoadAccuracy),
            View::Tankhouse => None,
        }
    }

    /// Whether a slower panel's load, put off until the frame was drawn, is still
    /// wanted: not once its screen was left (it is read again when it opens).
    pub fn wants(&self, e: &Effect) -> bool {
        match e {
            Effect::LoadPlan => self.view == View::Plan,
            Effect::LoadPatrol => self.view == View::Patrol,
            Effect::LoadAccuracy => self.view == View::Accuracy,
            Effect::LoadBalance => self.view == View::Balance,
            Effect::LoadCellBacktest(cell) => self.view == View::Cell && self.selected().is_some_and(|c| &c.cell == cell),
            _ => true,
        }
    }

    pub fn failed(&mut self, msg: String) {
        self.warn(msg);
    }
}

/// Why the review step did not pass an entry.
#[derive(Debug, Clone, PartialEq)]
pub enum CheckVerdict {
    Questioned(Vec<String>),
    /// The entry field the plant names (none for a refusal of the whole entry)
    /// and the rejected entry's position in the batch.
    Rejected {
        field: Option<Field>,
        entry: Option<usize>,
        message: String,
    },
}

/// One line saying what an entry records.
pub fn describe(e: &Entry, app: &App) -> String {
    let t = |t: &Time| app.days.zone.show(*t);
    match e {
        Entry::Anodes { cell, at, count, mean_kg } => format!("{cell}: {count} anodes × {mean_kg} kg at {}", t(at)),
        Entry::Harvest { cell, at, total_kg } => format!("{cell}: harvest {total_kg} kg at {}", t(at)),
        Entry::Scrap { cell, at, total_kg } => format!("{cell}: scrap {total_kg} kg at {}", t(at)),
        Entry::Cutout { cell, from, to: None } => format!("{cell}: cut out from {}", t(from)),
        Entry::Cutout { cell, from, to: Some(to) } => format!("{cell}: cut out {} – {}", t(from), t(to)),
        Entry::Outage { circuit, from, to } => format!("{circuit}: outage {} – {}", t(from), t(to)),
        Entry::Shorts { cell, at, count } => format!("{cell}: {count} shorts at {}", t(at)),
        Entry::Setpoint { circuit, from, amps } => format!("{circuit}: {amps} A from {}", t(from)),
        Entry::Voltage { cell, at, volts } => format!("{cell}: {volts} V at {}", t(at)),
    }
}
