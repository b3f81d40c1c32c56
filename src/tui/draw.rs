//! The frame around every screen: title line, status line, hint bar, and the
//! overlays (help, legend, menu, forms, questions). Draws from `&App` only.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Clear, Paragraph, Wrap};

use super::app::{App, Overlay, View};
use super::form::MENU;
use super::keys::{self, GLOBAL};
use super::{cell, entries, plan, rectifier, tankhouse};
use crate::domain::outlook::CellState;

/// A style with `fg`, or plain when colour is off (`NO_COLOR`).
pub fn fg(app: &App, c: Color) -> Style {
    if app.color { Style::default().fg(c) } else { Style::default() }
}

pub fn bold() -> Style {
    Style::default().add_modifier(Modifier::BOLD)
}

/// The symbol and colour of a cell state: told apart by the letter alone on a monochrome screen.
pub fn state_mark(s: Option<CellState>) -> (char, Color) {
    match s {
        Some(CellState::CutOut) => ('x', Color::DarkGray),
        Some(CellState::ThinAnode) => ('!', Color::LightRed),
        Some(CellState::HarvestOverdue) => ('H', Color::Red),
        Some(CellState::AnodesDue) => ('A', Color::Magenta),
        Some(CellState::HarvestDue) => ('h', Color::Yellow),
        Some(CellState::SuspectedShort) => ('s', Color::LightMagenta),
        Some(CellState::LowEfficiency) => ('e', Color::Cyan),
        Some(CellState::DataWarning) => ('?', Color::Blue),
        None => ('·', Color::Green),
    }
}

pub fn draw(f: &mut Frame, app: &App) {
    let [title, body, status, hints] =
        Layout::vertical([Constraint::Length(1), Constraint::Min(1), Constraint::Length(1), Constraint::Length(1)]).areas(f.area());
    draw_title(f, app, title);
    match app.view {
        View::Tankhouse => tankhouse::draw(f, app, body),
        View::Cell => cell::draw(f, app, body),
        View::Rectifier => rectifier::draw(f, app, body),
        View::Entries => entries::draw(f, app, body),
        View::Plan => plan::draw(f, app, body),
    }
    draw_status(f, app, status);
    draw_hints(f, app, hints);
    if let Some(o) = &app.overlay {
        draw_overlay(f, app, o);
    }
}

fn draw_title(f: &mut Frame, app: &App, area: Rect) {
    let end = app.day_end();
    let mut counts = [0usize; 4];
    for c in &app.cells {
        let s = crate::domain::outlook::states(c, app.as_of, end);
        counts[0] += usize::from(s.contains(&CellState::HarvestOverdue) || s.contains(&CellState::HarvestDue));
        counts[1] += usize::from(s.contains(&CellState::AnodesDue));
        counts[2] += usize::from(s.contains(&CellState::LowEfficiency));
        counts[3] += usize::from(s.contains(&CellState::CutOut));
    }
    let line = Line::from(vec![
        Span::styled(" tankbook ", bold().patch(fg(app, Color::Yellow))),
        Span::raw(format!("│ {} │ {} │ ", shorten(&app.plant_name, 24), app.view.title())),
        Span::styled(format!("today: {} harvest, {} anodes", counts[0], counts[1]), fg(app, Color::Yellow)),
        Span::raw(format!(" · {} low η · {} out", counts[2], counts[3])),
    ]);
    f.render_widget(Paragraph::new(line).style(Style::default().add_modifier(Modifier::REVERSED)), area);
}

/// The status line: the latest message on the left; the database file, who is
/// logging and the "as of" time always on the right.
fn draw_status(f: &mut Frame, app: &App, area: Rect) {
    let who = app.who.clone().unwrap_or_else(|| "—".into());
    let file = std::path::Path::new(&app.db_path).file_name().map_or(app.db_path.clone(), |n| n.to_string_lossy().into_owned());
    let right = format!(" {} │ by {who} │ as of {} ", shorten(&file, 20), app.days.zone.show(app.as_of));
    let room = (area.width as usize).saturating_sub(right.chars().count());
    let mut left = Vec::new();
    let mut used = 0;
    if app.unsaved.is_some() {
        let t = "UNSAVED ENTRY (w) ";
        used += t.chars().count();
        left.push(Span::styled(t, bold().patch(fg(app, Color::Red))));
    }
    if let Some(s) = &app.status {
        let style = if s.bad { bold().patch(fg(app, Color::Red)) } else { fg(app, Color::Green) };
        let text: String = s.text.chars().take(room.saturating_sub(used + 1)).collect();
        used += text.chars().count();
        left.push(Span::styled(text, style));
    }
    left.push(Span::raw(" ".repeat(room.saturating_sub(used))));
    left.push(Span::styled(right, Style::default().add_modifier(Modifier::REVERSED)));
    f.render_widget(Paragraph::new(Line::from(left)), area);
}

/// Keeps the end of a long path, which names the file.
pub fn shorten(s: &str, max: usize) -> String {
    let n = s.chars().count();
    if n <= max { s.to_string() } else { format!("…{}", s.chars().skip(n + 1 - max).collect::<String>()) }
}

fn draw_hints(f: &mut Frame, app: &App, area: Rect) {
    let mut spans = Vec::new();
    for (k, help) in keys::hints(app.view) {
        spans.push(Span::styled(format!(" {k}"), bold().patch(fg(app, Color::Cyan))));
        spans.push(Span::raw(format!(" {help} ")));
    }
    f.render_widget(Paragraph::new(Line::from(spans)), area);
}

/// A centred box `w` × `h` (clipped to the screen).
pub fn centered(area: Rect, w: u16, h: u16) -> Rect {
    let w = w.min(area.width);
    let h = h.min(area.height);
    Rect { x: area.x + (area.width - w) / 2, y: area.y + (area.height - h) / 2, width: w, height: h }
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

fn draw_overlay(f: &mut Frame, app: &App, o: &Overlay) {
    let full = f.area();
    match o {
        Overlay::Help => {
            let mut lines = vec![Line::styled(format!("{} screen", app.view.title()), bold())];
            for b in keys::table(app.view).iter().chain(GLOBAL) {
                lines.push(Line::from(vec![
                    Span::styled(format!("{:>12}  ", keys::keys_label(b)), bold().patch(fg(app, Color::Cyan))),
                    Span::raw(b.help),
                ]));
            }
            let h = lines.len() as u16 + 2;
            popup(f, centered(full, 74, h), "Help · any key closes", lines);
        }
        Overlay::Legend => {
            let mut lines = vec![
                Line::raw("Each tile: cell id, state, days to harvest, anode % left"),
                Line::raw("('-' where there is none or the anodes are inert)."),
            ];
            for s in CellState::ALL {
                let (c, col) = state_mark(Some(s));
                lines.push(Line::from(vec![Span::styled(format!("  {c}  "), bold().patch(fg(app, col))), Span::raw(s.meaning())]));
            }
            let (c, col) = state_mark(None);
            lines.push(Line::from(vec![Span::styled(format!("  {c}  "), fg(app, col)), Span::raw("nothing due today")]));
            lines.push(Line::raw("The first state that applies is shown; the cell screen lists them all."));
            lines.push(Line::raw("Any key closes the legend."));
            let h = lines.len() as u16 + 2;
            popup(f, centered(full, 72, h), "Legend", lines);
        }
        Overlay::Menu => {
            let mut lines = vec![Line::raw("Record what happened. Press a letter:")];
            for (k, _, label) in MENU {
                lines.push(Line::from(vec![Span::styled(format!("  {k}  "), bold().patch(fg(app, Color::Cyan))), Span::raw(*label)]));
            }
            lines.push(Line::raw("  Esc  cancel"));
            let h = lines.len() as u16 + 2;
            popup(f, centered(full, 50, h), "New entry", lines);
        }
        Overlay::Jump(s) => {
            popup(f, centered(full, 40, 4), "Go to cell", vec![Line::raw(format!("Cell id: {s}▏")), Line::raw("Enter go · Esc cancel")])
        }
        Overlay::Initials(s) => popup(
            f,
            centered(full, 56, 6),
            "Who is logging this shift?",
            vec![
                Line::raw("Your initials are recorded with every entry."),
                Line::styled(format!("Initials: {s}▏"), bold()),
                Line::raw(""),
                Line::raw("Enter to start"),
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
            lines.push(Line::raw("Tab/↑↓ field · Enter check and review · Esc drop"));
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
                lines.push(Line::styled("y record · n back to the form", bold()));
            } else {
                lines.push(Line::styled("The program questions this entry:", bold().patch(fg(app, Color::Red))));
                for q in &r.questions {
                    lines.push(Line::styled(format!("  ? {q}"), fg(app, Color::Red)));
                }
                if r.forced {
                    lines.push(Line::styled("y record it anyway (marked forced) · n back", bold()));
                } else {
                    lines.push(Line::styled("F record anyway (asks again) · n back to the form", bold()));
                }
            }
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
                    Line::styled("y undo · any other key keeps it", bold()),
                ],
            );
        }
        // the board stays in view while a day is chosen; the status line says what to do
        Overlay::PlanMove(_) => {}
        Overlay::Notice(text) => {
            popup(f, centered(full, 70, 5), "Note · any key closes", vec![Line::styled(text.clone(), bold().patch(fg(app, Color::Red)))])
        }
        Overlay::ConfirmQuit => popup(
            f,
            centered(full, 60, 5),
            "Quit?",
            vec![
                Line::styled("An entry did not save and is only kept on screen.", fg(app, Color::Red)),
                Line::raw("y quit and lose it · any other key stays (w retries)"),
            ],
        ),
    }
}
