//! The frame around every screen: title line, status line, hint bar, and the
//! screen in view, then the overlay on top (see [`super::overlay`]). Draws from `&App` only.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::Paragraph;

use super::app::{App, View};
use super::keys;
use super::{accuracy, balance, cell, entries, overlay, patrol, plan, rectifier, tankhouse};
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
        Layout::vertical([Constraint::Length(app.header_rows()), Constraint::Min(1), Constraint::Length(1), Constraint::Length(1)])
            .areas(f.area());
    draw_title(f, app, title);
    match app.view {
        View::Tankhouse => tankhouse::draw(f, app, body),
        View::Cell => cell::draw(f, app, body),
        View::Rectifier => rectifier::draw(f, app, body),
        View::Entries => entries::draw(f, app, body),
        View::Plan => plan::draw(f, app, body),
        View::Balance => balance::draw(f, app, body),
        View::Patrol => patrol::draw(f, app, body),
        View::Accuracy => accuracy::draw(f, app, body),
    }
    draw_status(f, app, status);
    draw_hints(f, app, hints);
    if let Some(o) = &app.overlay {
        overlay::draw(f, app, o);
    }
}

fn plural(n: usize, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

/// The header: the production day and shift, what is due before the day turns,
/// and, in the day's last shift, what the next day's first shift must do. The
/// richest form that fits the width is drawn.
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
    let zone = app.days.zone;
    let hm = |t| zone.local(t).format("%H:%M").to_string();
    let shift = app.shift_now();
    let name = shift.name(zone).map_or(String::new(), |n| format!(" · {n}"));
    let day = shift.day.format("%m-%d");
    let day_long = format!("│ day {day} ({}→{}){name} ", hm(app.days.start_of(shift.day)), hm(end));
    let day_short = format!("│ day {day}{name} ");
    let mut due =
        format!("due by {}: {}, {}", hm(end), plural(counts[0], "harvest", "harvests"), plural(counts[1], "anode change", "anode changes"));
    let mut due_short = format!("by {}: {} H, {} A", hm(end), counts[0], counts[1]);
    if app.partial {
        // the first frame holds the first screen's cells only: no plant-wide count yet
        due = "reading the whole plant…".into();
        due_short = "reading…".into();
    }
    let rest = format!(" · {} low η · {} out", counts[2], counts[3]);
    let plant = format!("│ {} ", shorten(&app.plant_name, 24));
    let view = format!("│ {} ", app.view.title());
    let w = area.width as usize;
    // the richest that fits: the plant's name goes first, then η and cut-outs, then the screen's name
    let forms: [&[&str]; 8] = [
        &[&plant, &view, &day_long, "│ ", &due, &rest],
        &[&view, &day_long, "│ ", &due, &rest],
        &[&view, &day_long, "│ ", &due],
        &[&view, &day_short, "│ ", &due],
        &[&day_long, "│ ", &due],
        &[&day_short, "│ ", &due],
        &[&view, &day_short, "│ ", &due_short],
        &[&day_short, "│ ", &due_short],
    ];
    let len = |parts: &[&str]| 10 + parts.iter().map(|p| p.chars().count()).sum::<usize>();
    let parts = forms.iter().find(|p| len(p) <= w).unwrap_or(&forms[7]);
    let mut spans = vec![Span::styled(" tankbook ", bold().patch(fg(app, Color::Yellow)))];
    for p in parts.iter() {
        if p.starts_with("due by") || p.starts_with("by ") || p.starts_with("reading") {
            spans.push(Span::styled(p.to_string(), fg(app, Color::Yellow)));
        } else {
            spans.push(Span::raw(p.to_string()));
        }
    }
    let reversed = Style::default().add_modifier(Modifier::REVERSED);
    let [top, coming] = Layout::vertical([Constraint::Length(1), Constraint::Length(area.height.saturating_sub(1))]).areas(area);
    f.render_widget(Paragraph::new(Line::from(spans)).style(reversed), top);
    if let Some(next) = app.coming_shift() {
        let (a, b) = (hm(next.shift.start), hm(next.shift.end));
        let first = next.first.map_or(String::new(), |t| format!(", first at {}", hm(t)));
        let name = next.shift.name(zone).map_or(String::new(), |n| format!(" ({n})"));
        let work =
            format!("{}, {}", plural(next.harvests, "harvest", "harvests"), plural(next.anode_changes, "anode change", "anode changes"));
        let day = next.shift.day.format("%m-%d");
        let candidates = [
            (format!("day {day}, first shift{name} {a}→{b}: "), format!("{work}{first}")),
            (format!("day {day}, first shift {a}→{b}: "), format!("{work}{first}")),
            (format!("day {day} {a}→{b}: "), format!("{work}{first}")),
            (format!("{day} first shift {a}→{b}: "), work.clone()),
            (format!("{day} {a}→{b}: "), format!("{} H, {} A", next.harvests, next.anode_changes)),
        ];
        let fits = |(l, r): &(String, String)| 6 + l.chars().count() + r.chars().count() <= w;
        let (label, counts) = candidates.iter().find(|c| fits(c)).unwrap_or(&candidates[4]);
        let line = Line::from(vec![
            Span::styled(" next ", bold().patch(fg(app, Color::Yellow))),
            Span::raw(label.clone()),
            Span::styled(counts.clone(), bold()),
        ]);
        f.render_widget(Paragraph::new(line), coming);
    }
}

/// The status line: the latest message on the left; the database file, who is
/// logging and the "as of" time always on the right.
fn draw_status(f: &mut Frame, app: &App, area: Rect) {
    let who = app.who.clone().unwrap_or_else(|| "—".into());
    let file = std::path::Path::new(&app.db_path).file_name().map_or(app.db_path.clone(), |n| n.to_string_lossy().into_owned());
    // the one place the zone is named: every time on screen is on this clock
    let zone = app.days.zone;
    let right = format!(" {} │ by {who} │ as of {} {zone} ", shorten(&file, 20), zone.local(app.as_of).format("%m-%d %H:%M"));
    // a slower panel is still being read: what is on screen is about to change
    let right = if app.updating { format!(" updating… │{right}") } else { right };
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

/// Warning lines for a screen: the recent ones in full, the old resolved ones
/// (ended more than a day ago) folded into one count line.
pub fn warning_lines<'a>(app: &App, warnings: &'a [crate::domain::forecast::Warning]) -> Vec<Line<'a>> {
    let ended = |w: &crate::domain::forecast::Warning| w.to.or(w.from).filter(|_| w.code != "stale_readings");
    let (old, news): (Vec<_>, Vec<_>) =
        warnings.iter().partition(|w| ended(w).is_some_and(|t| crate::domain::plant_time::is_old(t, app.as_of)));
    let mut lines: Vec<Line> = news.iter().map(|w| Line::styled(format!("! {}", w.message), fg(app, Color::Red))).collect();
    if let Some(last) = old.iter().filter_map(|w| ended(w)).max() {
        let when = app.days.zone.local(last).format("%m-%d");
        lines.push(Line::styled(format!("  + {} older, resolved (latest ended {when})", old.len()), fg(app, Color::DarkGray)));
    }
    lines
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
