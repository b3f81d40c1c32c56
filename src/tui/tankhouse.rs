//! The tankhouse screen: every cell as a tile, grouped by circuit and section,
//! with its state letter, days to harvest and anode percentage.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Wrap};

use super::app::App;
use super::draw::{bold, fg, state_mark};
use crate::domain::forecast::CellForecast;
use crate::domain::outlook::states;

/// Width of one cell tile on the tankhouse screen, with its gap.
pub const TILE_W: u16 = 15;
/// From this many columns the tankhouse screen shows the selected cell beside the grid.
pub const WIDE: u16 = 130;
pub const SIDE_PANEL: u16 = 50;

/// The tankhouse screen's state: the selected cell (the cell screen and the
/// forms start from it too) and the first grid line shown.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct TankhouseScreen {
    pub cursor: usize,
    pub scroll: usize,
}

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

impl TankhouseScreen {
    /// Keeps the cursor's tile line within `rows` lines on screen.
    pub fn follow(&mut self, cells: &[CellForecast], per_row: usize, rows: usize) {
        let g = grid(cells, per_row);
        let Some(line) = g.iter().position(|l| matches!(l, GridLine::Tiles(t) if t.contains(&self.cursor))) else {
            return;
        };
        if line < self.scroll + 1 {
            // show the section header above the first tile line too
            self.scroll = line.saturating_sub(if line > 0 && matches!(g[line - 1], GridLine::Section(..)) { 2 } else { 0 }).min(line);
        } else if line >= self.scroll + rows {
            self.scroll = line + 1 - rows;
        }
    }

    /// The previous or next cell in plant order.
    pub fn move_across(&mut self, cells: &[CellForecast], dx: i32) {
        self.cursor = (self.cursor as i64 + i64::from(dx)).clamp(0, cells.len().saturating_sub(1) as i64) as usize;
    }

    /// `dy` tile lines up or down, keeping the column where the line allows.
    pub fn move_vertical(&mut self, cells: &[CellForecast], per_row: usize, dy: i32) {
        let g = grid(cells, per_row);
        let rows: Vec<&Vec<usize>> = g.iter().filter_map(|l| if let GridLine::Tiles(t) = l { Some(t) } else { None }).collect();
        let Some(r) = rows.iter().position(|t| t.contains(&self.cursor)) else {
            return;
        };
        let col = rows[r].iter().position(|&c| c == self.cursor).unwrap_or(0);
        let target = (r as i64 + i64::from(dy)).clamp(0, rows.len() as i64 - 1) as usize;
        let row = rows[target];
        self.cursor = row[col.min(row.len() - 1)];
    }

    /// The first cell of the previous or next section.
    pub fn move_section(&mut self, cells: &[CellForecast], d: i32) {
        let same = |a: &CellForecast, b: &CellForecast| a.circuit == b.circuit && a.section == b.section;
        let starts: Vec<usize> = (0..cells.len()).filter(|&i| i == 0 || !same(&cells[i], &cells[i - 1])).collect();
        if starts.is_empty() {
            return;
        }
        let here = starts.iter().rposition(|&s| s <= self.cursor).unwrap_or(0);
        let to = (here as i64 + i64::from(d)).clamp(0, starts.len() as i64 - 1) as usize;
        self.cursor = starts[to];
    }
}

/// A tile's text: id, state letter, time to harvest (`57m`, `5h`, `2.3d`), anode % left (14 columns).
pub fn tile_text(c: &CellForecast, mark: char, app: &App) -> String {
    let days = match c.cathode.as_ref().and_then(|k| k.harvest_due) {
        Some(t) => crate::domain::plant_time::compact(t - app.as_of),
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
    let scroll = app.tankhouse.scroll.min(g.len().saturating_sub(1));
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
                    if i == app.tankhouse.cursor {
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
        lines.extend(super::draw::warning_lines(app, &app.plant_warnings));
    }
    let block = Block::default().borders(Borders::LEFT).title(" selected cell ");
    f.render_widget(Paragraph::new(lines).block(block).wrap(Wrap { trim: false }), area);
}
