//! The patrol screen: the cells to check for shorts now, most suspect first,
//! with the voltage against the section's median and the reasons; Enter opens the cell.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier};
use ratatui::text::Line;
use ratatui::widgets::{Block, Borders, Paragraph, Wrap};

use super::app::App;
use super::draw::{bold, fg};
use crate::domain::patrol::{Patrol, PatrolCell, SUSPECT_SCORE};

/// The patrol screen's state: the ranked list and the selected cell.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PatrolScreen {
    pub patrol: Option<Patrol>,
    pub sel: usize,
}

impl PatrolScreen {
    fn len(&self) -> usize {
        self.patrol.as_ref().map_or(0, |p| p.cells.len())
    }

    pub fn moved(&mut self, dy: i32) {
        self.sel = (self.sel as i64 + i64::from(dy)).clamp(0, self.len().saturating_sub(1) as i64) as usize;
    }

    pub fn selected(&self) -> Option<&PatrolCell> {
        self.patrol.as_ref()?.cells.get(self.sel)
    }

    /// A fresh list keeps the selected cell selected (its rank may have changed).
    pub fn loaded(&mut self, p: Patrol) {
        let keep = self.selected().map(|c| c.cell.clone());
        self.sel = keep.and_then(|id| p.cells.iter().position(|c| c.cell == id)).unwrap_or(0);
        self.patrol = Some(p);
    }
}

fn row(c: &PatrolCell, wide: bool) -> String {
    let base = format!(
        "{:<6} {:<4} {:>6.1} {:>6.3} {:>6.3} {:>+7.0} {:>5.1} {:>6}",
        c.cell,
        c.section,
        c.score,
        c.voltage,
        c.section_median_v,
        c.deviation_mv,
        c.cathode_efficiency * 100.0,
        c.shorts_this_crop
    );
    if wide { format!("{base}  {}", c.reasons.join("; ")) } else { base }
}

pub fn draw(f: &mut Frame, app: &App, area: Rect) {
    let screen = &app.patrol;
    let Some(patrol) = &screen.patrol else {
        f.render_widget(Paragraph::new("reading the voltages…"), area);
        return;
    };
    let wide = area.width >= 120;
    let [about, list, detail] =
        Layout::vertical([Constraint::Length(2), Constraint::Min(3), Constraint::Length(if wide { 4 } else { 5 })]).areas(area);
    f.render_widget(
        Paragraph::new(format!(
            "Most suspect of a short first: voltage below its section's median, its trend, learnt η, shorts found. \
             Score {SUSPECT_SCORE:.0} or more: suspected short (s on the tiles)."
        ))
        .wrap(Wrap { trim: true }),
        about,
    );
    let head = format!(
        "{:<6} {:<4} {:>6} {:>6} {:>6} {:>7} {:>5} {:>6}{}",
        "cell",
        "sect",
        "score",
        "volts",
        "median",
        "dev mV",
        "η %",
        "shorts",
        if wide { "  reasons" } else { "" }
    );
    let rows = list.height.saturating_sub(1) as usize;
    let mut lines = vec![Line::styled(head, bold())];
    if patrol.cells.is_empty() {
        lines.push(Line::raw("no cell in circuit has a voltage reading in the last 24 h"));
    }
    let first = screen.sel.saturating_sub(rows.saturating_sub(1));
    for (i, c) in patrol.cells.iter().enumerate().skip(first).take(rows) {
        let mut style = if c.score >= SUSPECT_SCORE { fg(app, Color::LightMagenta) } else { Default::default() };
        if i == screen.sel {
            style = style.add_modifier(Modifier::REVERSED);
        }
        lines.push(Line::styled(row(c, wide), style));
    }
    f.render_widget(Paragraph::new(lines), list);
    let Some(c) = screen.selected() else { return };
    let when = app.days.zone.local(c.voltage_at).format("%m-%d %H:%M");
    let reasons = if c.reasons.is_empty() { "nothing stands out".to_string() } else { c.reasons.join("; ") };
    let text = vec![
        Line::styled(format!("{} · circuit {} · section {} · voltage read {when}", c.cell, c.circuit, c.section), bold()),
        Line::raw(reasons),
    ];
    f.render_widget(Paragraph::new(text).block(Block::default().borders(Borders::TOP)).wrap(Wrap { trim: true }), detail);
}
