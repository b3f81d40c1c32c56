//! The screens' state and how actions change it. No I/O here: an action that
//! needs the database returns an [`Effect`], which the runner performs against
//! the plant and reports back; drawing reads the state only.

use chrono::{Duration, NaiveDate};

use super::form::{Form, FormContext, FormKind, MENU, Submission, form_field};
use super::keys::Key;
use crate::domain::charge::Time;
use crate::domain::entry::{Entry, Field};
use crate::domain::forecast::{CellForecast, Forecast, Warning};
use crate::domain::history::{Event, EventKind};
use crate::domain::plan::Plan;
use crate::domain::plant_time::ProductionDays;
use crate::plant::{CellDetail, CircuitTrend, Opts, Recorded};

/// The screens.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum View {
    Tankhouse,
    Cell,
    Rectifier,
    Entries,
    Plan,
}

impl View {
    pub fn title(self) -> &'static str {
        match self {
            View::Tankhouse => "Tankhouse",
            View::Cell => "Cell",
            View::Rectifier => "Rectifiers",
            View::Entries => "Entries",
            View::Plan => "Plan",
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

/// Work for the runner: each needs the plant.
#[derive(Debug, Clone, PartialEq)]
pub enum Effect {
    Reload,
    LoadDetail(String),
    LoadTrends,
    LoadRecent,
    /// Plan the coming days with the hand moves made so far.
    LoadPlan,
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
}

/// An overlay that has the keyboard.
#[derive(Debug, Clone, PartialEq)]
pub enum Overlay {
    Help,
    Legend,
    Menu,
    Jump(String),
    Initials(String),
    Form(Form),
    Review(Review),
    ConfirmUndo(Event),
    ConfirmQuit,
    /// Choosing the day for a cell's anode change: ↑↓ pick, Enter place, Esc cancel.
    PlanMove(String),
    /// A message too long for the status line; any key closes it.
    Notice(String),
}

/// A checked entry waiting for the foreman's yes.
#[derive(Debug, Clone, PartialEq)]
pub struct Review {
    pub form: Form,
    pub entries: Vec<(Entry, Opts)>,
    pub reading: Option<(String, Time, f64)>,
    pub summary: Vec<String>,
    /// What the program questions; recording needs a second, explicit yes.
    pub questions: Vec<String>,
    pub forced: bool,
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
    pub overlay: Option<Overlay>,
    pub cells: Vec<CellForecast>,
    pub plant_warnings: Vec<Warning>,
    pub circuits: Vec<String>,
    pub cursor: usize,
    pub scroll: usize,
    pub detail: Option<CellDetail>,
    pub trends: Vec<CircuitTrend>,
    pub trend_sel: usize,
    pub span_days: i64,
    pub recent: Vec<Event>,
    pub entry_sel: usize,
    pub plan: Option<Plan>,
    /// Anode changes moved by hand (cell, day), re-checked at every replan.
    pub plan_moves: Vec<(String, NaiveDate)>,
    /// The hand move a new one replaced, put back if the new one is refused.
    pub plan_replaced: Option<(String, NaiveDate)>,
    pub plan_day: usize,
    pub plan_job: usize,
    pub plan_days: u32,
    pub status: Option<Status>,
    /// Entries whose commit failed: kept in memory, never dropped.
    pub unsaved: Option<Vec<(Entry, Opts)>>,
    pub width: u16,
    pub height: u16,
    pub color: bool,
    pub quit: bool,
}

/// Width of one cell tile on the tankhouse screen, with its gap.
pub const TILE_W: u16 = 15;
pub const SPANS: [i64; 4] = [1, 3, 7, 14];
/// From this many columns the tankhouse screen shows the selected cell beside the grid.
pub const WIDE: u16 = 130;
pub const SIDE_PANEL: u16 = 50;

/// One line of the tankhouse grid.
#[derive(Debug, Clone, PartialEq)]
pub enum GridLine {
    Circuit(String),
    Section(String, String, usize),
    Tiles(Vec<usize>),
}

/// The tankhouse grid for `per_row` tiles per line: circuits, sections, tile rows.
pub fn grid(cells: &[CellForecast], per_row: usize) -> Vec<GridLine> {
    let per_row = per_row.max(1);
    let mut out = Vec::new();
    let mut i = 0;
    while i < cells.len() {
        let circuit = &cells[i].circuit;
        out.push(GridLine::Circuit(circuit.clone()));
        while i < cells.len() && &cells[i].circuit == circuit {
            let section = &cells[i].section;
            let start = i;
            while i < cells.len() && &cells[i].circuit == circuit && &cells[i].section == section {
                i += 1;
            }
            out.push(GridLine::Section(circuit.clone(), section.clone(), i - start));
            for chunk in (start..i).collect::<Vec<_>>().chunks(per_row) {
                out.push(GridLine::Tiles(chunk.to_vec()));
            }
        }
    }
    out
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
            overlay: Some(Overlay::Initials(String::new())),
            cells: Vec::new(),
            plant_warnings: Vec::new(),
            circuits: Vec::new(),
            cursor: 0,
            scroll: 0,
            detail: None,
            trends: Vec::new(),
            trend_sel: 0,
            span_days: 3,
            recent: Vec::new(),
            entry_sel: 0,
            plan: None,
            plan_moves: Vec::new(),
            plan_replaced: None,
            plan_day: 0,
            plan_job: 0,
            plan_days: 21,
            status: None,
            unsaved: None,
            width: 80,
            height: 24,
            color,
            quit: false,
        }
    }

    /// End of the production day `as_of` falls in.
    pub fn day_end(&self) -> Time {
        let d = self.days.day_of(self.as_of);
        self.days.start_of(d + Duration::days(1))
    }

    /// The shift `as_of` falls in: its production day and number (0 = the first).
    pub fn shift(&self) -> (chrono::NaiveDate, u32) {
        let day = self.days.day_of(self.as_of);
        let into = (self.as_of - self.days.start_of(day)).num_minutes().max(0);
        let len = (24 * 60 / i64::from(self.shifts_per_day.max(1))).max(1);
        (day, (into / len) as u32)
    }

    pub fn selected(&self) -> Option<&CellForecast> {
        self.cells.get(self.cursor)
    }

    fn say(&mut self, text: impl Into<String>) {
        self.status = Some(Status { text: text.into(), bad: false });
    }

    /// A warning on the status line; one too long for it also opens as a notice,
    /// so nothing the foreman must read is cut off.
    fn warn(&mut self, text: impl Into<String>) {
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

    /// Lines the tankhouse grid may use (the screen less title, status and hint lines).
    pub fn body_rows(&self) -> usize {
        self.height.saturating_sub(4).max(1) as usize
    }

    /// Keeps the cursor's tile line on screen.
    fn follow_cursor(&mut self) {
        let g = grid(&self.cells, self.per_row());
        let Some(line) = g.iter().position(|l| matches!(l, GridLine::Tiles(t) if t.contains(&self.cursor))) else {
            return;
        };
        let rows = self.body_rows();
        if line < self.scroll + 1 {
            // show the section header above the first tile line too
            self.scroll = line.saturating_sub(if line > 0 && matches!(g[line - 1], GridLine::Section(..)) { 2 } else { 0 }).min(line);
        } else if line >= self.scroll + rows {
            self.scroll = line + 1 - rows;
        }
    }

    fn move_vertical(&mut self, dy: i32) {
        let g = grid(&self.cells, self.per_row());
        let rows: Vec<&Vec<usize>> = g.iter().filter_map(|l| if let GridLine::Tiles(t) = l { Some(t) } else { None }).collect();
        let Some(r) = rows.iter().position(|t| t.contains(&self.cursor)) else {
            return;
        };
        let col = rows[r].iter().position(|&c| c == self.cursor).unwrap_or(0);
        let target = (r as i64 + i64::from(dy)).clamp(0, rows.len() as i64 - 1) as usize;
        let row = rows[target];
        self.cursor = row[col.min(row.len() - 1)];
    }

    fn move_section(&mut self, d: i32) {
        let same = |a: &CellForecast, b: &CellForecast| a.circuit == b.circuit && a.section == b.section;
        let starts: Vec<usize> = (0..self.cells.len()).filter(|&i| i == 0 || !same(&self.cells[i], &self.cells[i - 1])).collect();
        if starts.is_empty() {
            return;
        }
        let here = starts.iter().rposition(|&s| s <= self.cursor).unwrap_or(0);
        let to = (here as i64 + i64::from(d)).clamp(0, starts.len() as i64 - 1) as usize;
        self.cursor = starts[to];
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
                self.overlay = Some(Overlay::Help);
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
                match v {
                    View::Rectifier => Some(Effect::LoadTrends),
                    View::Entries => Some(Effect::LoadRecent),
                    View::Plan => Some(Effect::LoadPlan),
                    View::Cell => self.selected().map(|c| Effect::LoadDetail(c.cell.clone())),
                    View::Tankhouse => None,
                }
            }
            Action::Back => {
                self.view = View::Tankhouse;
                self.follow_cursor();
                None
            }
            Action::OpenCell => {
                self.view = View::Cell;
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
                match (1..=n).map(|k| (self.cursor + k) % n).find(|&i| due(&self.cells[i])) {
                    Some(i) => {
                        self.cursor = i;
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
                self.move_vertical(d * rows);
                self.follow_cursor();
                None
            }
            Action::Section(d) => {
                self.move_section(d);
                self.follow_cursor();
                None
            }
            Action::Span(d) => {
                let i = SPANS.iter().position(|&s| s == self.span_days).unwrap_or(1) as i64 + i64::from(d);
                self.span_days = SPANS[i.clamp(0, SPANS.len() as i64 - 1) as usize];
                Some(Effect::LoadTrends)
            }
            Action::UndoSelected => {
                match self.recent.get(self.entry_sel) {
                    Some(e) if e.kind == EventKind::Void => self.warn("that line is an undo itself"),
                    Some(e) if e.voided => self.warn(format!("entry {} is already undone", e.id)),
                    Some(e) => self.overlay = Some(Overlay::ConfirmUndo(e.clone())),
                    None => {}
                }
                None
            }
            Action::PlanJob(d) => {
                let n = self.plan_day_jobs();
                self.plan_job = (self.plan_job as i64 + i64::from(d)).clamp(0, n.saturating_sub(1) as i64) as usize;
                None
            }
            Action::PlanMove => {
                match self.selected_change() {
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
                self.plan_moves.clear();
                self.say("hand moves dropped: the plan is levelled afresh");
                Some(Effect::LoadPlan)
            }
            Action::Input(_) | Action::Resize(..) => None,
        }
    }

    /// Jobs listed for the selected plan day: anode changes, then harvests.
    pub fn plan_day_jobs(&self) -> usize {
        self.plan.as_ref().and_then(|p| p.days.get(self.plan_day)).map_or(0, |d| d.anode_changes.len() + d.harvests.len())
    }

    /// The anode change selected on the plan screen, if the selection is one.
    pub fn selected_change(&self) -> Option<&crate::domain::plan::AnodeChange> {
        self.plan.as_ref()?.days.get(self.plan_day)?.anode_changes.get(self.plan_job)
    }

    fn moved(&mut self, dx: i32, dy: i32) -> Option<Effect> {
        match self.view {
            View::Tankhouse => {
                if dx != 0 {
                    self.cursor = (self.cursor as i64 + i64::from(dx)).clamp(0, self.cells.len().saturating_sub(1) as i64) as usize;
                } else {
                    self.move_vertical(dy);
                }
                self.follow_cursor();
                None
            }
            View::Cell => {
                self.cursor = (self.cursor as i64 + i64::from(dx)).clamp(0, self.cells.len().saturating_sub(1) as i64) as usize;
                self.selected().map(|c| Effect::LoadDetail(c.cell.clone()))
            }
            View::Rectifier => {
                self.trend_sel = (self.trend_sel as i64 + i64::from(dy)).clamp(0, self.trends.len().saturating_sub(1) as i64) as usize;
                None
            }
            View::Entries => {
                self.entry_sel = (self.entry_sel as i64 + i64::from(dy)).clamp(0, self.recent.len().saturating_sub(1) as i64) as usize;
                None
            }
            View::Plan => {
                let n = self.plan.as_ref().map_or(0, |p| p.days.len());
                self.plan_day = (self.plan_day as i64 + i64::from(dy)).clamp(0, n.saturating_sub(1) as i64) as usize;
                self.plan_job = 0;
                None
            }
        }
    }

    fn form_context<'a>(&'a self, cut: &'a dyn Fn(&str) -> Option<Time>, ids: &'a [String]) -> FormContext<'a> {
        FormContext { cells: ids, circuits: &self.circuits, zone: self.days.zone, cut_out_since: cut }
    }

    fn cell_ids(&self) -> Vec<String> {
        self.cells.iter().map(|c| c.cell.clone()).collect()
    }

    fn open_form(&mut self, kind: FormKind) {
        let (cell, circuit, anodes) = match self.selected() {
            Some(c) => (c.cell.clone(), c.circuit.clone(), c.anode.as_ref().map_or(0, |a| a.count)),
            None => (String::new(), self.circuits.first().cloned().unwrap_or_default(), 0),
        };
        let anodes = if anodes == 0 { self.detail.as_ref().map_or(50, |d| d.params.anodes_per_cell) } else { anodes };
        let now = self.days.zone.show(self.as_of);
        let mut form = Form::new(kind, &cell, &circuit, &now, anodes);
        self.validate(&mut form);
        self.overlay = Some(Overlay::Form(form));
    }

    fn validate(&self, form: &mut Form) {
        let ids = self.cell_ids();
        let cut = |id: &str| self.cells.iter().find(|c| c.cell == id).and_then(|c| c.cut_out_since);
        form.validate(&self.form_context(&cut, &ids));
    }

    fn opts(&self, force: bool) -> Opts {
        Opts { by: self.who.clone().unwrap_or_default(), force, now: self.as_of }
    }

    /// A key while an overlay has the keyboard.
    fn input(&mut self, key: Key) -> Option<Effect> {
        let overlay = self.overlay.take()?;
        match overlay {
            Overlay::Help | Overlay::Legend | Overlay::Notice(_) => None,
            Overlay::ConfirmQuit => {
                if key == Key::Char('y') {
                    self.quit = true;
                }
                None
            }
            Overlay::Menu => {
                if let Key::Char(c) = key
                    && let Some((_, kind, _)) = MENU.iter().find(|(k, _, _)| *k == c)
                {
                    self.open_form(*kind);
                }
                None
            }
            Overlay::Jump(mut s) => {
                match key {
                    Key::Enter => {
                        let hit =
                            self.cells.iter().position(|c| c.cell.eq_ignore_ascii_case(&s)).or_else(|| {
                                self.cells.iter().position(|c| c.cell.to_ascii_uppercase().starts_with(&s.to_ascii_uppercase()))
                            });
                        match hit {
                            Some(i) if !s.is_empty() => {
                                self.cursor = i;
                                self.follow_cursor();
                                if self.view == View::Cell {
                                    return Some(Effect::LoadDetail(self.cells[i].cell.clone()));
                                }
                            }
                            _ => self.warn(format!("no cell '{s}'")),
                        }
                    }
                    Key::Esc => {}
                    Key::Backspace => {
                        s.pop();
                        self.overlay = Some(Overlay::Jump(s));
                    }
                    Key::Char(c) if c.is_ascii_alphanumeric() || c == '-' => {
                        s.push(c.to_ascii_uppercase());
                        self.overlay = Some(Overlay::Jump(s));
                    }
                    _ => self.overlay = Some(Overlay::Jump(s)),
                }
                None
            }
            Overlay::Initials(mut s) => {
                match key {
                    Key::Enter if !s.trim().is_empty() => {
                        self.who = Some(s.trim().to_uppercase());
                        self.who_shift = Some(self.shift());
                        self.say(format!("logging as {}", s.trim().to_uppercase()));
                    }
                    Key::Esc if self.who.is_some() => self.who_shift = Some(self.shift()),
                    Key::Backspace => {
                        s.pop();
                        self.overlay = Some(Overlay::Initials(s));
                    }
                    Key::Char(c) if c.is_ascii_alphabetic() && s.len() < 8 => {
                        s.push(c.to_ascii_uppercase());
                        self.overlay = Some(Overlay::Initials(s));
                    }
                    _ => self.overlay = Some(Overlay::Initials(s)),
                }
                None
            }
            Overlay::Form(form) => self.form_key(form, key),
            Overlay::Review(r) => self.review_key(r, key),
            Overlay::PlanMove(cell) => {
                let n = self.plan.as_ref().map_or(0, |p| p.days.len());
                match key {
                    Key::Up | Key::Char('k') => self.plan_day = self.plan_day.saturating_sub(1),
                    Key::Down | Key::Char('j') => self.plan_day = (self.plan_day + 1).min(n.saturating_sub(1)),
                    Key::Enter => {
                        let date = self.plan.as_ref().and_then(|p| p.days.get(self.plan_day)).map(|d| d.date)?;
                        self.plan_replaced = self.plan_moves.iter().position(|(c, _)| c == &cell).map(|i| self.plan_moves.remove(i));
                        self.plan_moves.push((cell.clone(), date));
                        self.say(format!("{cell} placed on {date}: re-checked against its window and the crew"));
                        return Some(Effect::LoadPlan);
                    }
                    Key::Esc => {
                        self.say("not moved");
                        return None;
                    }
                    _ => {}
                }
                self.overlay = Some(Overlay::PlanMove(cell));
                None
            }
            Overlay::ConfirmUndo(e) => match key {
                Key::Char('y') => Some(Effect::Undo(e.id)),
                _ => {
                    self.say("nothing undone");
                    None
                }
            },
        }
    }

    fn form_key(&mut self, mut form: Form, key: Key) -> Option<Effect> {
        let n = form.fields.len();
        match key {
            Key::Esc => {
                self.say("entry dropped: nothing was recorded");
                return None;
            }
            Key::Tab | Key::Down => form.focus = (form.focus + 1) % n,
            Key::BackTab | Key::Up => form.focus = (form.focus + n - 1) % n,
            Key::Backspace => {
                form.fields[form.focus].value.pop();
            }
            Key::Char(c) if !c.is_control() => form.fields[form.focus].value.push(c),
            Key::Enter => {
                self.validate(&mut form);
                if !form.is_valid() {
                    form.focus = form.fields.iter().position(|f| f.error.is_some()).unwrap_or(form.focus);
                    self.overlay = Some(Overlay::Form(form));
                    return None;
                }
                let ids = self.cell_ids();
                let cut = |id: &str| self.cells.iter().find(|c| c.cell == id).and_then(|c| c.cut_out_since);
                let sub = form.submission(&self.form_context(&cut, &ids));
                return match sub {
                    Err(e) => {
                        form.message = Some(e);
                        self.overlay = Some(Overlay::Form(form));
                        None
                    }
                    Ok(Submission::Reading { circuit, at, amps }) => {
                        let summary = vec![format!("{circuit}: {amps} A at {}", self.days.zone.show(at))];
                        self.overlay = Some(Overlay::Review(Review {
                            form,
                            entries: Vec::new(),
                            reading: Some((circuit, at, amps)),
                            summary,
                            questions: Vec::new(),
                            forced: false,
                        }));
                        None
                    }
                    Ok(Submission::Entries(entries)) => {
                        let batch: Vec<(Entry, Opts)> = entries.into_iter().map(|e| (e, self.opts(false))).collect();
                        self.overlay = Some(Overlay::Form(form));
                        Some(Effect::Check(batch))
                    }
                };
            }
            _ => {}
        }
        self.validate(&mut form);
        self.overlay = Some(Overlay::Form(form));
        None
    }

    fn review_key(&mut self, mut r: Review, key: Key) -> Option<Effect> {
        match key {
            Key::Char('y') | Key::Enter if r.questions.is_empty() || r.forced => {
                if let Some((circuit, at, amps)) = r.reading.clone() {
                    return Some(Effect::ImportReading { circuit, at, amps, by: self.who.clone().unwrap_or_default() });
                }
                let forced = r.forced;
                Some(Effect::Commit(r.entries.into_iter().map(|(e, o)| (e, Opts { force: forced, ..o })).collect()))
            }
            Key::Char('y') | Key::Enter => {
                self.overlay = Some(Overlay::Review(r));
                self.warn("this entry is questioned: press F to record it anyway, or n to go back and fix it");
                None
            }
            Key::Char('F') if !r.questions.is_empty() => {
                r.forced = true;
                self.overlay = Some(Overlay::Review(r));
                self.warn("recording a questioned entry: press y to confirm, n to go back");
                None
            }
            Key::Char('n') | Key::Esc => {
                self.overlay = Some(Overlay::Form(r.form));
                None
            }
            _ => {
                self.overlay = Some(Overlay::Review(r));
                None
            }
        }
    }

    // ---- results of effects, reported back by the runner ----

    pub fn loaded_forecast(&mut self, f: Forecast, circuits: Vec<String>) {
        let keep = self.selected().map(|c| c.cell.clone());
        self.as_of = f.as_of;
        self.cells = f.cells;
        self.plant_warnings = f.warnings;
        self.circuits = circuits;
        if let Some(id) = keep
            && let Some(i) = self.cells.iter().position(|c| c.cell == id)
        {
            self.cursor = i;
        }
        self.cursor = self.cursor.min(self.cells.len().saturating_sub(1));
        self.follow_cursor();
        if self.who.is_some() && self.who_shift.is_some_and(|s| s != self.shift()) && self.overlay.is_none() {
            self.overlay = Some(Overlay::Initials(String::new()));
            self.say("a new shift has started: who is logging now?");
        }
    }

    pub fn loaded_detail(&mut self, d: CellDetail) {
        self.detail = Some(d);
    }

    pub fn loaded_trends(&mut self, t: Vec<CircuitTrend>) {
        self.trend_sel = self.trend_sel.min(t.len().saturating_sub(1));
        self.trends = t;
    }

    pub fn loaded_recent(&mut self, e: Vec<Event>) {
        self.entry_sel = self.entry_sel.min(e.len().saturating_sub(1));
        self.recent = e;
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
                let ids: Vec<String> = rec.iter().map(|r| r.event.to_string()).collect();
                let what = entries.first().map(|(e, _)| e.kind().name()).unwrap_or("entry");
                let cells: Vec<&str> = entries.iter().filter_map(|(e, _)| e.cell()).collect();
                let place = match cells.as_slice() {
                    [] => String::new(),
                    [one] => format!(" for {one}"),
                    [a, .., b] => format!(" for {a}–{b}"),
                };
                self.say(format!("recorded {what}{place} (entry {})", ids.join(", ")));
                Some(Effect::Reload)
            }
            Err(e) => {
                self.unsaved = Some(entries);
                self.warn(format!("NOT SAVED: {e}. The entry is kept here: press w to try again"));
                None
            }
        }
    }

    pub fn loaded_plan(&mut self, p: Plan) {
        self.plan_day = self.plan_day.min(p.days.len().saturating_sub(1));
        self.plan_replaced = None;
        self.plan = Some(p);
        self.plan_job = self.plan_job.min(self.plan_day_jobs().saturating_sub(1));
    }

    /// A replan was refused (a hand move outside its window, over capacity…): the last move is taken back.
    pub fn plan_refused(&mut self, msg: String) -> Option<Effect> {
        match self.plan_moves.pop() {
            Some((cell, day)) => {
                self.plan_moves.extend(self.plan_replaced.take());
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
                Some(Effect::Reload)
            }
            Err(msg) => {
                self.warn(msg);
                None
            }
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
