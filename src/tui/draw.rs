//! The frame around every screen: title line, status line, hint bar, and the
//! screen in view, then the overlay on top (see [`super::overlay`]). Draws from `&App` only.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::Paragraph;

use super::app::{App, View};
use super::keys;
use super::{cell, entries, overlay, plan, rectifier, tankhouse};
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
        overlay::draw(f, app, o);
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

/// The hint bar: the keys of the overlay that has the keyboard, else of the
/// screen. On a narrow terminal the screen's hints are dropped from the end,
/// never help and quit (the last two), so `?` always leads to every key.
fn draw_hints(f: &mut Frame, app: &App, area: Rect) {
    let mut items = match &app.overlay {
        Some(o) => overlay::hints(o.table()),
        None => keys::hints(app.view),
    };
    let width = |items: &[(String, &str)]| items.iter().map(|(k, h)| k.chars().count() + h.chars().count() + 3).sum::<usize>();
    while app.overlay.is_none() && items.len() > 2 && width(&items) > area.width as usize {
        items.remove(items.len() - 3);
    }
    let mut spans = Vec::new();
    for (k, help) in items {
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
