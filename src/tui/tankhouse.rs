//! The tankhouse screen: every cell as a tile, grouped by circuit and section,
//! with its state letter, days to harvest and anode percentage.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Wrap};

use super::app::{App, GridLine, SIDE_PANEL, WIDE, grid};
use super::draw::{bold, fg, state_mark};
use crate::domain::forecast::CellForecast;
use crate::domain::outlook::states;

/// A tile's text: id, state letter, days to harvest, anode % left (14 columns).
pub fn tile_text(c: &CellForecast, mark: char, app: &App) -> String {
    let days = match c.cathode.as_ref().and_then(|k| k.harvest_due) {
        Some(t) => {
            let d = (t - app.as_of).num_minutes() as f64 / 1440.0;
            if d.abs() < 10.0 { format!("{d:.1}") } else { format!("{d:.0}") }
        }
        None => "-".into(),
    };
    let pct = match &c.anode {
        Some(a) if c.anode_kind == crate::domain::layout::AnodeKind::Soluble && a.remaining_fraction >= 0.995 => "new".into(),
        Some(a) if c.anode_kind == crate::domain::layout::AnodeKind::Soluble => format!("{:.0}%", a.remaining_fraction * 100.0),
        _ => "-".into(),
    };
    format!("{:<4.4}{mark}{days:>5}{pct:>4}", c.cell)
}

pub fn draw(f: &mut Frame, app: &App, area: Rect) {
    if app.cells.is_empty() {
        f.render_widget(Paragraph::new("No cells: load a layout with `tankbook layout load FILE.toml`, or run `tankbook demo`."), area);
        return;
    }
    let area = if area.width >= WIDE {
        let [grid_area, side] = Layout::horizontal([Constraint::Min(20), Constraint::Length(SIDE_PANEL)]).areas(area);
        draw_side(f, app, side);
        grid_area
    } else {
        area
    };
    let g = grid(&app.cells, app.per_row());
    let end = app.day_end();
    let rows = area.height as usize;
    let scroll = app.scroll.min(g.len().saturating_sub(1));
    let mut lines = Vec::with_capacity(rows);
    for l in g.iter().skip(scroll).take(rows) {
        lines.push(match l {
            GridLine::Circuit(name) => Line::styled(format!("━━ circuit {name} ━━"), bold().patch(fg(app, Color::Yellow))),
            GridLine::Section(_, s, n) => Line::styled(format!(" section {s} · {n} cells"), fg(app, Color::Gray)),
            GridLine::Tiles(idx) => {
                let mut spans = Vec::new();
                for &i in idx {
                    let c = &app.cells[i];
                    let st = states(c, app.as_of, end);
                    let (mark, col) = state_mark(st.first().copied());
                    let mut style = fg(app, col);
                    if st.is_empty() {
                        style = Style::default();
                    }
                    if i == app.cursor {
                        style = style.add_modifier(Modifier::REVERSED | Modifier::BOLD);
                    }
                    spans.push(Span::styled(tile_text(c, mark, app), style));
                    spans.push(Span::raw(" "));
                }
                Line::from(spans)
            }
        });
    }
    f.render_widget(Paragraph::new(lines), area);
    if g.len() > rows {
        let pos = format!(" {}/{} ", (scroll + rows).min(g.len()), g.len());
        let w = pos.len() as u16;
        if area.width > w {
            f.render_widget(
                Paragraph::new(pos).style(fg(app, Color::DarkGray)),
                Rect { x: area.x + area.width - w, y: area.y, width: w, height: 1 },
            );
        }
    }
}

/// The selected cell and the plant's data warnings, beside the grid on a wide terminal.
fn draw_side(f: &mut Frame, app: &App, area: Rect) {
    let Some(c) = app.selected() else { return };
    let mut lines = super::cell::summary(app, c, None, false, 0);
    if !app.plant_warnings.is_empty() {
        lines.push(Line::raw(""));
        lines.push(Line::styled("Data warnings", bold()));
        for w in &app.plant_warnings {
            lines.push(Line::styled(format!("! {}", w.message), fg(app, Color::Red)));
        }
    }
    let block = Block::default().borders(Borders::LEFT).title(" selected cell ");
    f.render_widget(Paragraph::new(lines).block(block).wrap(Wrap { trim: false }), area);
}
