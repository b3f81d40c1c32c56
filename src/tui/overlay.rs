//! The overlays that take the keyboard from a screen (help, menu, forms, the
//! review, questions, the plan move): one key table each, which both the key
//! handling here and the hints they show are read from, then what each does.

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Clear, Paragraph, Wrap};

use super::app::{App, Effect, View};
use super::draw::{bold, centered, fg, state_mark};
use super::form::{Form, MENU, Submission};
use super::keys::{self, GLOBAL, Key};
use crate::domain::charge::Time;
use crate::domain::entry::Entry;
use crate::domain::history::Event;
use crate::domain::outlook::CellState;
use crate::plant::{Draft, Opts};

/// An overlay that has the keyboard.
#[derive(Debug, Clone, PartialEq)]
pub enum Overlay {
    /// Every key of the screen; the number is the first help line shown.
    Help(usize),
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
    /// A form kept when the terminal went away, offered back.
    Draft(Draft),
    /// A hand move the replan accepted: keep it as a decision later plans apply?
    ConfirmKeep(String, chrono::NaiveDate),
    /// Sign the plan on screen as approved?
    ConfirmApprove,
    /// Something done that the foreman should read in full (a file written and where); any key closes it.
    Info(String),
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

/// What a key does in an overlay.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Do {
    Close,
    Confirm,
    Cancel,
    Force,
    NextField,
    PrevField,
    Erase,
    /// The key's character goes into the text being typed.
    Type,
    /// The key's letter picks a line of the entry menu.
    Pick,
    Up,
    Down,
    PageUp,
    PageDown,
    Top,
    Bottom,
    Discard,
}

/// Which keys a row of an overlay's table answers to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Keys {
    These(&'static [Key]),
    /// Any printable character not bound above.
    Typed,
    /// Any key not bound above.
    Other,
}

/// One row of an overlay's key table.
pub struct OverlayBinding {
    pub keys: Keys,
    pub does: Do,
    pub help: &'static str,
    /// Shown in the overlay's own hint line and the hint bar.
    pub hint: Option<&'static str>,
}

const fn o(keys: Keys, does: Do, help: &'static str, hint: Option<&'static str>) -> OverlayBinding {
    OverlayBinding { keys, does, help, hint }
}

use Key::*;
use Keys::{Other, These, Typed};

pub const HELP: &[OverlayBinding] = &[
    o(These(&[Up, Char('k')]), Do::Up, "scroll up", None),
    o(These(&[Down, Char('j')]), Do::Down, "scroll down", Some("scroll")),
    o(These(&[PageUp]), Do::PageUp, "page up", None),
    o(These(&[PageDown, Char(' ')]), Do::PageDown, "page down", Some("page")),
    o(These(&[Home]), Do::Top, "first line", None),
    o(These(&[End]), Do::Bottom, "last line", Some("end")),
    o(Other, Do::Close, "close the help", Some("close")),
];

pub const CLOSE: &[OverlayBinding] = &[o(Other, Do::Close, "close", Some("closes"))];

pub const MENU_KEYS: &[OverlayBinding] = &[
    o(These(&[Esc]), Do::Cancel, "cancel", Some("cancel")),
    o(Typed, Do::Pick, "the letter of an entry opens its form", Some("a letter above")),
    o(Other, Do::Cancel, "cancel", None),
];

pub const JUMP: &[OverlayBinding] = &[
    o(These(&[Enter]), Do::Confirm, "go to the cell", Some("go")),
    o(These(&[Esc]), Do::Cancel, "cancel", Some("cancel")),
    o(These(&[Backspace]), Do::Erase, "erase a character", None),
    o(Typed, Do::Type, "the cell id (letters, digits, -)", None),
];

pub const INITIALS: &[OverlayBinding] = &[
    o(These(&[Enter]), Do::Confirm, "start logging as these initials", Some("start")),
    o(These(&[Esc]), Do::Cancel, "keep whoever is logging (once someone is)", None),
    o(These(&[Backspace]), Do::Erase, "erase a letter", None),
    o(Typed, Do::Type, "your initials: letters, up to 8", None),
];

pub const FORM: &[OverlayBinding] = &[
    o(These(&[Tab, Down]), Do::NextField, "next field", Some("next field")),
    o(These(&[BackTab, Up]), Do::PrevField, "previous field", None),
    o(These(&[Enter]), Do::Confirm, "check and review (nothing is recorded yet)", Some("check and review")),
    o(These(&[Esc]), Do::Cancel, "drop the entry: nothing is recorded", Some("drop")),
    o(These(&[Backspace]), Do::Erase, "erase a character", None),
    o(Typed, Do::Type, "into the field", None),
];

pub const REVIEW: &[OverlayBinding] = &[
    o(These(&[Char('y'), Enter]), Do::Confirm, "record the entry", Some("record")),
    o(These(&[Char('n'), Esc]), Do::Cancel, "back to the form", Some("back to the form")),
];

pub const REVIEW_QUESTIONED: &[OverlayBinding] = &[
    o(These(&[Char('F')]), Do::Force, "record it anyway: asks once more", Some("record anyway")),
    o(These(&[Char('y'), Enter]), Do::Confirm, "record: needs F first, the entry is questioned", None),
    o(These(&[Char('n'), Esc]), Do::Cancel, "back to the form", Some("back to the form")),
];

pub const REVIEW_FORCED: &[OverlayBinding] = &[
    o(These(&[Char('y'), Enter]), Do::Confirm, "record it anyway (marked forced)", Some("record anyway")),
    o(These(&[Char('n'), Esc]), Do::Cancel, "back to the form", Some("back")),
];

pub const CONFIRM_UNDO: &[OverlayBinding] =
    &[o(These(&[Char('y')]), Do::Confirm, "undo the entry", Some("undo")), o(Other, Do::Cancel, "keep it", Some("keeps it"))];

pub const CONFIRM_QUIT: &[OverlayBinding] = &[
    o(These(&[Char('y')]), Do::Confirm, "quit and lose the unsaved entry", Some("quit and lose it")),
    o(Other, Do::Cancel, "stay (w retries saving)", Some("stays")),
];

pub const PLAN_MOVE: &[OverlayBinding] = &[
    o(These(&[Up, Char('k')]), Do::Up, "an earlier day", None),
    o(These(&[Down, Char('j')]), Do::Down, "a later day", Some("day")),
    o(These(&[Enter]), Do::Confirm, "place the change on this day (re-checked)", Some("place")),
    o(These(&[Esc]), Do::Cancel, "leave it where it is", Some("leave")),
];

pub const CONFIRM_KEEP: &[OverlayBinding] = &[
    o(These(&[Char('y')]), Do::Confirm, "keep the move: recorded with your initials, later plans keep it", Some("keep it")),
    o(Other, Do::Cancel, "only for this screen: tomorrow's plan levels it afresh", Some("only for now")),
];

pub const CONFIRM_APPROVE: &[OverlayBinding] = &[
    o(These(&[Char('y')]), Do::Confirm, "approve the plan as shown, with your initials", Some("approve")),
    o(Other, Do::Cancel, "do not approve", Some("cancels")),
];

pub const DRAFT: &[OverlayBinding] = &[
    o(These(&[Enter, Char('y')]), Do::Confirm, "open it again to finish it", Some("open it")),
    o(These(&[Char('x')]), Do::Discard, "throw it away", Some("throw away")),
    o(These(&[Esc]), Do::Cancel, "keep it for later (offered at the next start)", Some("later")),
];

impl Overlay {
    /// The overlay's key table.
    pub fn table(&self) -> &'static [OverlayBinding] {
        match self {
            Overlay::Help(_) => HELP,
            Overlay::Legend | Overlay::Notice(_) | Overlay::Info(_) => CLOSE,
            Overlay::Menu => MENU_KEYS,
            Overlay::Jump(_) => JUMP,
            Overlay::Initials(_) => INITIALS,
            Overlay::Form(_) => FORM,
            Overlay::Review(r) if r.questions.is_empty() => REVIEW,
            Overlay::Review(r) if r.forced => REVIEW_FORCED,
            Overlay::Review(_) => REVIEW_QUESTIONED,
            Overlay::ConfirmUndo(_) => CONFIRM_UNDO,
            Overlay::ConfirmQuit => CONFIRM_QUIT,
            Overlay::PlanMove(_) => PLAN_MOVE,
            Overlay::Draft(_) => DRAFT,
            Overlay::ConfirmKeep(..) => CONFIRM_KEEP,
            Overlay::ConfirmApprove => CONFIRM_APPROVE,
        }
    }
}

/// What `key` does in a table: a key bound by name first, then typing, then any other key.
pub fn resolve(table: &[OverlayBinding], key: Key) -> Option<Do> {
    let typed = matches!(key, Key::Char(c) if !c.is_control());
    table
        .iter()
        .find(|b| matches!(b.keys, These(k) if k.contains(&key)))
        .or_else(|| table.iter().find(|b| typed && b.keys == Typed))
        .or_else(|| table.iter().find(|b| b.keys == Other))
        .map(|b| b.does)
}

/// The label of a row's keys, e.g. "Tab/↓" or "any other key".
pub fn keys_label(b: &OverlayBinding) -> String {
    match b.keys {
        These(k) => k.iter().map(|k| k.label()).collect::<Vec<_>>().join("/"),
        Typed => "typing".into(),
        Other => "other keys".into(),
    }
}

/// The hint items of a table: (keys, what).
pub fn hints(table: &[OverlayBinding]) -> Vec<(String, &'static str)> {
    let only_other = table.iter().all(|b| b.keys == Other);
    table.iter().filter_map(|b| b.hint.map(|h| (if only_other { "any key".into() } else { keys_label(b) }, h))).collect()
}

/// The hints as one line of text: "Tab/↓ next field · Enter check and review · …".
fn hint_text(table: &[OverlayBinding]) -> String {
    hints(table).iter().map(|(k, h)| format!("{k} {h}")).collect::<Vec<_>>().join(" · ")
}

/// The help's lines for a screen: its own keys, then the shared ones.
fn help_lines<'a>(app: &App, view: View) -> Vec<Line<'a>> {
    let mut lines = vec![Line::styled(format!("{} screen", view.title()), bold())];
    for b in keys::table(view).iter().chain(GLOBAL) {
        lines.push(Line::from(vec![
            Span::styled(format!("{:>12}  ", keys::keys_label(b)), bold().patch(fg(app, Color::Cyan))),
            Span::raw(b.help),
        ]));
    }
    lines
}

/// Help lines that fit in the box at a terminal height (the box's border takes two).
fn help_rows(height: u16) -> usize {
    height.saturating_sub(2).saturating_sub(2).max(1) as usize
}

impl App {
    /// A key while an overlay has the keyboard.
    pub(super) fn input(&mut self, key: Key) -> Option<Effect> {
        let overlay = self.overlay.take()?;
        let does = resolve(overlay.table(), key);
        match overlay {
            Overlay::Help(top) => {
                let n = keys::table(self.view).len() + GLOBAL.len() + 1;
                let rows = help_rows(self.height);
                let last = n.saturating_sub(rows);
                let top = match does {
                    Some(Do::Up) => top.saturating_sub(1),
                    Some(Do::Down) => top + 1,
                    Some(Do::PageUp) => top.saturating_sub(rows),
                    Some(Do::PageDown) => top + rows,
                    Some(Do::Top) => 0,
                    Some(Do::Bottom) => last,
                    _ => return None,
                };
                self.overlay = Some(Overlay::Help(top.min(last)));
                None
            }
            Overlay::Legend | Overlay::Notice(_) | Overlay::Info(_) => None,
            Overlay::ConfirmKeep(cell, date) => match does {
                Some(Do::Confirm) => Some(Effect::KeepMove(cell, date)),
                _ => {
                    self.say(format!("{cell} on {date} for this screen only: not kept"));
                    None
                }
            },
            Overlay::ConfirmApprove => match does {
                Some(Do::Confirm) => Some(Effect::ApprovePlan),
                _ => {
                    self.say("the plan is not approved");
                    None
                }
            },
            Overlay::ConfirmQuit => {
                if does == Some(Do::Confirm) {
                    self.quit = true;
                }
                None
            }
            Overlay::Menu => {
                if does == Some(Do::Pick)
                    && let Key::Char(c) = key
                    && let Some((_, kind, _)) = MENU.iter().find(|(k, _, _)| *k == c)
                {
                    self.open_form(*kind);
                }
                None
            }
            Overlay::Jump(mut s) => {
                match does {
                    Some(Do::Confirm) => {
                        let hit =
                            self.cells.iter().position(|c| c.cell.eq_ignore_ascii_case(&s)).or_else(|| {
                                self.cells.iter().position(|c| c.cell.to_ascii_uppercase().starts_with(&s.to_ascii_uppercase()))
                            });
                        match hit {
                            Some(i) if !s.is_empty() => {
                                self.tankhouse.cursor = i;
                                self.follow_cursor();
                                if self.view == View::Cell {
                                    return Some(Effect::LoadDetail(self.cells[i].cell.clone()));
                                }
                            }
                            _ => self.warn(format!("no cell '{s}'")),
                        }
                        return None;
                    }
                    Some(Do::Cancel) => return None,
                    Some(Do::Erase) => {
                        s.pop();
                    }
                    Some(Do::Type) => {
                        if let Key::Char(c) = key
                            && (c.is_ascii_alphanumeric() || c == '-')
                        {
                            s.push(c.to_ascii_uppercase());
                        }
                    }
                    _ => {}
                }
                self.overlay = Some(Overlay::Jump(s));
                None
            }
            Overlay::Initials(mut s) => {
                match does {
                    Some(Do::Confirm) if !s.trim().is_empty() => {
                        let who = s.trim().to_uppercase();
                        self.who = Some(who.clone());
                        self.who_shift = Some(self.shift());
                        self.say(format!("logging as {who}"));
                        self.offer_draft();
                        return None;
                    }
                    Some(Do::Cancel) if self.who.is_some() => {
                        self.who_shift = Some(self.shift());
                        self.offer_draft();
                        return None;
                    }
                    Some(Do::Erase) => {
                        s.pop();
                    }
                    Some(Do::Type) => {
                        if let Key::Char(c) = key
                            && c.is_ascii_alphabetic()
                            && s.len() < 8
                        {
                            s.push(c.to_ascii_uppercase());
                        }
                    }
                    _ => {}
                }
                self.overlay = Some(Overlay::Initials(s));
                None
            }
            Overlay::Form(form) => self.form_key(form, does, key),
            Overlay::Review(r) => self.review_key(r, does),
            Overlay::PlanMove(cell) => {
                match does {
                    Some(Do::Up) => self.plan.choose_day(-1),
                    Some(Do::Down) => self.plan.choose_day(1),
                    Some(Do::Confirm) => {
                        let date = self.plan.place(&cell)?;
                        self.say(format!("{cell} placed on {date}: re-checked against its window and the crew"));
                        return Some(Effect::LoadPlan);
                    }
                    Some(Do::Cancel) => {
                        self.say("not moved");
                        return None;
                    }
                    _ => {}
                }
                self.overlay = Some(Overlay::PlanMove(cell));
                None
            }
            Overlay::Draft(d) => match does {
                Some(Do::Confirm) => self.reopen_draft(d),
                Some(Do::Discard) => {
                    self.say(format!("draft of the {} form thrown away", d.form.replace('_', " ")));
                    self.offer_draft();
                    Some(Effect::DropDraft(d.id))
                }
                Some(Do::Cancel) => {
                    self.say("the draft is kept: it is offered again at the next start");
                    self.offer_draft();
                    None
                }
                _ => {
                    self.overlay = Some(Overlay::Draft(d));
                    None
                }
            },
            Overlay::ConfirmUndo(e) => match does {
                Some(Do::Confirm) => Some(Effect::Undo(e.id)),
                _ => {
                    self.say("nothing undone");
                    None
                }
            },
        }
    }

    fn form_key(&mut self, mut form: Form, does: Option<Do>, key: Key) -> Option<Effect> {
        let n = form.fields.len();
        match does {
            Some(Do::Cancel) => {
                self.say("entry dropped: nothing was recorded");
                return None;
            }
            Some(Do::NextField) => form.focus = (form.focus + 1) % n,
            Some(Do::PrevField) => form.focus = (form.focus + n - 1) % n,
            Some(Do::Erase) => {
                form.fields[form.focus].value.pop();
            }
            Some(Do::Type) => {
                if let Key::Char(c) = key {
                    form.fields[form.focus].value.push(c);
                }
            }
            Some(Do::Confirm) => return self.submit(form),
            _ => {}
        }
        self.validate(&mut form);
        self.overlay = Some(Overlay::Form(form));
        None
    }

    /// Enter on a form: a form with an error stays, a reading goes to review,
    /// entries go to the plant's checks first.
    fn submit(&mut self, mut form: Form) -> Option<Effect> {
        self.validate(&mut form);
        if !form.is_valid() {
            form.focus = form.fields.iter().position(|f| f.error.is_some()).unwrap_or(form.focus);
            self.overlay = Some(Overlay::Form(form));
            return None;
        }
        let ids = self.cell_ids();
        let cut = |id: &str| self.cells.iter().find(|c| c.cell == id).and_then(|c| c.cut_out_since);
        let sub = form.submission(&self.form_context(&cut, &ids));
        match sub {
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
        }
    }

    fn review_key(&mut self, mut r: Review, does: Option<Do>) -> Option<Effect> {
        match does {
            Some(Do::Confirm) if r.questions.is_empty() || r.forced => {
                if let Some((circuit, at, amps)) = r.reading.clone() {
                    return Some(Effect::ImportReading { circuit, at, amps, by: self.who.clone().unwrap_or_default() });
                }
                let forced = r.forced;
                self.committing = Some(r.form);
                Some(Effect::Commit(r.entries.into_iter().map(|(e, o)| (e, Opts { force: forced, ..o })).collect()))
            }
            Some(Do::Confirm) => {
                self.overlay = Some(Overlay::Review(r));
                self.warn("this entry is questioned: press F to record it anyway, or n to go back and fix it");
                None
            }
            Some(Do::Force) => {
                r.forced = true;
                self.overlay = Some(Overlay::Review(r));
                self.warn("recording a questioned entry: press y to confirm, n to go back");
                None
            }
            Some(Do::Cancel) => {
                self.overlay = Some(Overlay::Form(r.form));
                None
            }
            _ => {
                self.overlay = Some(Overlay::Review(r));
                None
            }
        }
    }
}

/// Draws a bordered box; `area`'s height grows to fit wrapped lines where the screen allows.
fn popup(f: &mut Frame, area: Rect, title: &str, lines: Vec<Line<'_>>) {
    let inner_w = area.width.saturating_sub(2).max(1) as usize;
    let need: usize = lines.iter().map(|l| l.width().div_ceil(inner_w).max(1)).sum::<usize>() + 2;
    let screen = f.area();
    let area = centered(screen, area.width, (need as u16).max(area.height));
    f.render_widget(Clear, area);
    let block = Block::default().borders(Borders::ALL).title(format!(" {title} "));
    f.render_widget(Paragraph::new(lines).block(block).wrap(Wrap { trim: false }), area);
}

pub fn draw(f: &mut Frame, app: &App, o: &Overlay) {
    let full = f.area();
    let keys_line = |table: &[OverlayBinding]| Line::styled(hint_text(table), bold());
    match o {
        Overlay::Help(top) => {
            let lines = help_lines(app, app.view);
            let n = lines.len();
            let rows = help_rows(full.height).min(n);
            let top = (*top).min(n - rows);
            let area = centered(full, 78, rows as u16 + 2);
            let more = if n > rows { format!(" · lines {}–{} of {n}", top + 1, top + rows) } else { String::new() };
            f.render_widget(Clear, area);
            let block =
                Block::default().borders(Borders::ALL).title(format!(" Help{more} ")).title_bottom(format!(" {} ", hint_text(HELP)));
            let shown: Vec<Line> = lines.into_iter().skip(top).take(rows).collect();
            f.render_widget(Paragraph::new(shown).block(block), area);
        }
        Overlay::Legend => {
            let mut lines = vec![
                Line::raw("Each tile: cell id, state, time to harvest, anode % left"),
                Line::raw("(57m, 5h, 2.3d: minutes, hours, days; -5h is 5 h overdue;"),
                Line::raw("'-' where there is none or the anodes are inert)."),
            ];
            for s in CellState::ALL {
                let (c, col) = state_mark(Some(s));
                lines.push(Line::from(vec![Span::styled(format!("  {c}  "), bold().patch(fg(app, col))), Span::raw(s.meaning())]));
            }
            let (c, col) = state_mark(None);
            lines.push(Line::from(vec![Span::styled(format!("  {c}  "), fg(app, col)), Span::raw("nothing due today")]));
            lines.push(Line::raw("The first state that applies is shown; the cell screen lists them all."));
            lines.push(keys_line(CLOSE));
            let h = lines.len() as u16 + 2;
            popup(f, centered(full, 72, h), "Legend", lines);
        }
        Overlay::Menu => {
            let mut lines = vec![Line::raw("Record what happened. Press a letter:")];
            for (k, _, label) in MENU {
                lines.push(Line::from(vec![Span::styled(format!("  {k}  "), bold().patch(fg(app, Color::Cyan))), Span::raw(*label)]));
            }
            lines.push(keys_line(MENU_KEYS));
            let h = lines.len() as u16 + 2;
            popup(f, centered(full, 50, h), "New entry", lines);
        }
        Overlay::Jump(s) => popup(f, centered(full, 40, 4), "Go to cell", vec![Line::raw(format!("Cell id: {s}▏")), keys_line(JUMP)]),
        Overlay::Initials(s) => popup(
            f,
            centered(full, 56, 6),
            "Who is logging this shift?",
            vec![
                Line::raw("Your initials are recorded with every entry."),
                Line::styled(format!("Initials: {s}▏"), bold()),
                Line::raw(""),
                keys_line(INITIALS),
            ],
        ),
        Overlay::Form(form) => {
            let mut lines = Vec::new();
            for (i, fl) in form.fields.iter().enumerate() {
                let focus = i == form.focus;
                let marker = if focus { "▶" } else { " " };
                let style = if focus { bold() } else { Style::default() };
                lines.push(Line::from(vec![
                    Span::styled(format!("{marker}{:>20}: ", fl.label), style),
                    Span::styled(format!("{}{}", fl.value, if focus { "▏" } else { "" }), style.add_modifier(Modifier::UNDERLINED)),
                ]));
                match &fl.error {
                    Some(e) => lines.push(Line::styled(format!("{:>23}✗ {e}", ""), fg(app, Color::Red))),
                    None => lines.push(Line::styled(format!("{:>23}{}", "", fl.hint), fg(app, Color::DarkGray))),
                }
            }
            if let Some(m) = &form.message {
                lines.push(Line::styled(format!("✗ {m}"), bold().patch(fg(app, Color::Red))));
            }
            lines.push(Line::raw(hint_text(FORM)));
            lines.push(Line::raw("Nothing is recorded until you confirm."));
            let h = lines.len() as u16 + 2;
            popup(f, centered(full, 78, h), form.kind.title(), lines);
        }
        Overlay::Review(r) => {
            let mut lines = vec![Line::styled("To be recorded:", bold())];
            let shown = r.summary.len().min(8);
            for s in &r.summary[..shown] {
                lines.push(Line::raw(format!("  {s}")));
            }
            if r.summary.len() > shown {
                lines.push(Line::raw(format!("  … and {} more", r.summary.len() - shown)));
            }
            if r.questions.is_empty() {
                lines.push(Line::raw(""));
            } else {
                lines.push(Line::styled("The program questions this entry:", bold().patch(fg(app, Color::Red))));
                for q in &r.questions {
                    lines.push(Line::styled(format!("  ? {q}"), fg(app, Color::Red)));
                }
            }
            lines.push(keys_line(o.table()));
            let h = lines.len() as u16 + 2;
            popup(f, centered(full, 78, h), "Review", lines);
        }
        Overlay::ConfirmUndo(e) => {
            let place = e.cell.clone().or(e.circuit.clone()).unwrap_or_default();
            popup(
                f,
                centered(full, 64, 6),
                "Undo",
                vec![
                    Line::raw(format!("Undo entry {} — {} {place} at {}, by {}?", e.id, e.kind.name(), app.days.zone.show(e.at), e.by)),
                    Line::raw("The entry stays in the log, marked undone."),
                    Line::raw(""),
                    keys_line(CONFIRM_UNDO),
                ],
            );
        }
        // the board stays in view while a day is chosen; the hint bar says what to do
        Overlay::PlanMove(_) => {}
        Overlay::Notice(text) => {
            let lines = vec![Line::styled(text.clone(), bold().patch(fg(app, Color::Red))), keys_line(CLOSE)];
            popup(f, centered(full, 70, 5), "Note", lines)
        }
        Overlay::Info(text) => {
            let mut lines: Vec<Line> = text.lines().map(|t| Line::raw(t.to_string())).collect();
            lines.push(keys_line(CLOSE));
            popup(f, centered(full, 70, 5), "Done", lines)
        }
        Overlay::ConfirmKeep(cell, date) => {
            let by = app.who.clone().unwrap_or_default();
            popup(
                f,
                centered(full, 66, 6),
                "Keep this move?",
                vec![
                    Line::raw(format!("Keep {cell}'s anode change on {date} as a decision, by {by}?")),
                    Line::raw("Recorded in the event log: later plans keep it while it stays"),
                    Line::raw("feasible (or say why they drop it); undo takes it back."),
                    keys_line(CONFIRM_KEEP),
                ],
            );
        }
        Overlay::ConfirmApprove => {
            let by = app.who.clone().unwrap_or_default();
            let (from, to) = app
                .plan
                .plan
                .as_ref()
                .map_or((String::new(), String::new()), |p| (p.from.to_string(), p.days.last().map_or(p.from, |d| d.date).to_string()));
            popup(
                f,
                centered(full, 66, 6),
                "Approve the plan?",
                vec![
                    Line::raw(format!("Approve the plan {from} – {to} as shown, signed {by}?")),
                    Line::raw("Later plans show what changed since (moved, added, dropped)."),
                    Line::raw("The plan stays advisory: site procedures and engineers decide."),
                    keys_line(CONFIRM_APPROVE),
                ],
            );
        }
        Overlay::Draft(d) => {
            let title = super::form::FormKind::from_name(&d.form).map_or(d.form.clone(), |k| k.title().to_string());
            let by = d.by.as_deref().map_or(String::new(), |b| format!(", by {b}"));
            let mut lines = vec![
                Line::styled(format!("{title}: typed but not recorded{by}"), bold()),
                Line::raw(format!("kept {} ({})", app.days.zone.show(d.saved_at), d.reason)),
            ];
            for (k, v) in d.fields.iter().filter(|(_, v)| !v.trim().is_empty()) {
                lines.push(Line::raw(format!("  {}: {v}", k.replace('_', " "))));
            }
            lines.push(keys_line(DRAFT));
            let h = lines.len() as u16 + 2;
            popup(f, centered(full, 70, h), "An entry was left unfinished", lines);
        }
        Overlay::ConfirmQuit => popup(
            f,
            centered(full, 60, 5),
            "Quit?",
            vec![Line::styled("An entry did not save and is only kept on screen.", fg(app, Color::Red)), keys_line(CONFIRM_QUIT)],
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_overlay_table_answers_each_key_once() {
        let tables = [
            HELP,
            CLOSE,
            MENU_KEYS,
            JUMP,
            INITIALS,
            FORM,
            REVIEW,
            REVIEW_QUESTIONED,
            REVIEW_FORCED,
            CONFIRM_UNDO,
            CONFIRM_QUIT,
            PLAN_MOVE,
            CONFIRM_KEEP,
            CONFIRM_APPROVE,
        ];
        for t in tables {
            let named: Vec<Key> = t.iter().filter_map(|b| if let These(k) = b.keys { Some(k) } else { None }).flatten().copied().collect();
            for (i, k) in named.iter().enumerate() {
                assert!(!named[i + 1..].contains(k), "{k:?} bound twice");
            }
            assert!(t.iter().any(|b| b.hint.is_some()), "every overlay shows at least one hint");
        }
    }

    #[test]
    fn named_keys_win_over_typing() {
        assert_eq!(resolve(FORM, Key::Char('y')), Some(Do::Type));
        assert_eq!(resolve(FORM, Key::Tab), Some(Do::NextField));
        assert_eq!(resolve(REVIEW, Key::Char('y')), Some(Do::Confirm));
        assert_eq!(resolve(REVIEW, Key::Char('x')), None);
        assert_eq!(resolve(CONFIRM_UNDO, Key::Char('x')), Some(Do::Cancel));
        assert_eq!(resolve(HELP, Key::End), Some(Do::Bottom));
        assert_eq!(resolve(HELP, Key::Char('q')), Some(Do::Close));
    }
}
