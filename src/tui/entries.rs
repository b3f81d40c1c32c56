//! The entries screen: the event log, newest first, with undone and forced
//! entries marked; an entry can be undone from here.

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::{Color, Modifier};
use ratatui::text::Line;
use ratatui::widgets::Paragraph;

use super::app::App;
use super::draw::{bold, fg};
use crate::domain::history::Event;

/// The entries screen's state: the newest entries and the selected one.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct EntriesScreen {
    pub recent: Vec<Event>,
    pub sel: usize,
}

impl EntriesScreen {
    pub fn moved(&mut self, dy: i32) {
        self.sel = (self.sel as i64 + i64::from(dy)).clamp(0, self.recent.len().saturating_sub(1) as i64) as usize;
    }

    pub fn selected(&self) -> Option<&Event> {
        self.recent.get(self.sel)
    }

    pub fn loaded(&mut self, e: Vec<Event>) {
        self.sel = self.sel.min(e.len().saturating_sub(1));
        self.recent = e;
    }
}

pub fn draw(f: &mut Frame, app: &App, area: Rect) {
    let screen = &app.entries;
    let rows = area.height.saturating_sub(1) as usize;
    let mut lines = vec![Line::styled(format!("{:>6} {:<9} {:<8} {:<17} {:<5} what", "entry", "kind", "where", "at", "by"), bold())];
    let first = screen.sel.saturating_sub(rows.saturating_sub(1));
    for (i, e) in screen.recent.iter().enumerate().skip(first).take(rows) {
        let place = e.cell.clone().or(e.circuit.clone()).unwrap_or_default();
        let what = match (e.voids, e.count, e.kg, e.amps, e.volts, e.end) {
            (Some(v), ..) => format!("undoes entry {v}"),
            (_, Some(n), Some(kg), ..) => format!("{n} × {kg} kg"),
            (_, None, Some(kg), ..) => format!("{kg} kg"),
            (_, Some(n), None, ..) => format!("{n}"),
            (_, _, _, Some(a), ..) => format!("{a} A"),
            (_, _, _, _, Some(v), _) => format!("{v} V"),
            (_, _, _, _, _, Some(end)) => format!("until {}", app.days.zone.show(end)),
            _ => String::new(),
        };
        let flags = format!("{}{}", if e.voided { " [undone]" } else { "" }, if e.forced { " [forced]" } else { "" });
        let mut style = if e.voided { fg(app, Color::DarkGray) } else { Default::default() };
        if i == screen.sel {
            style = style.add_modifier(Modifier::REVERSED);
        }
        lines.push(Line::styled(
            format!("{:>6} {:<9} {:<8} {:<17} {:<5} {what}{flags}", e.id, e.kind.name(), place, app.days.zone.show(e.at), e.by),
            style,
        ));
    }
    if screen.recent.is_empty() {
        lines.push(Line::raw("no entries yet"));
    }
    f.render_widget(Paragraph::new(lines), area);
}
