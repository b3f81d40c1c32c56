//! The rectifier screen: each circuit's current over the last days, with
//! outages and reading gaps marked, and the ampere-hours of the production day.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Block, Borders, Chart, Dataset, GraphType, Paragraph};

use super::app::App;
use super::draw::{bold, fg};
use crate::plant::CircuitTrend;

/// The time spans the charts offer, days.
pub const SPANS: [i64; 4] = [1, 3, 7, 14];

/// The rectifier screen's state: the circuits' trends, the selected circuit, the span shown.
#[derive(Debug, Clone, PartialEq)]
pub struct RectifierScreen {
    pub trends: Vec<CircuitTrend>,
    pub sel: usize,
    pub span_days: i64,
}

impl Default for RectifierScreen {
    fn default() -> Self {
        RectifierScreen { trends: Vec::new(), sel: 0, span_days: 3 }
    }
}

impl RectifierScreen {
    pub fn moved(&mut self, dy: i32) {
        self.sel = (self.sel as i64 + i64::from(dy)).clamp(0, self.trends.len().saturating_sub(1) as i64) as usize;
    }

    /// A shorter or longer span, within [`SPANS`].
    pub fn span(&mut self, d: i32) {
        let i = SPANS.iter().position(|&s| s == self.span_days).unwrap_or(1) as i64 + i64::from(d);
        self.span_days = SPANS[i.clamp(0, SPANS.len() as i64 - 1) as usize];
    }

    pub fn loaded(&mut self, t: Vec<CircuitTrend>) {
        self.sel = self.sel.min(t.len().saturating_sub(1));
        self.trends = t;
    }
}

pub fn draw(f: &mut Frame, app: &App, area: Rect) {
    let screen = &app.rectifiers;
    if screen.trends.is_empty() {
        f.render_widget(Paragraph::new("loading…"), area);
        return;
    }
    let warn_lines = super::draw::warning_lines(app, &app.plant_warnings);
    let list_h = (screen.trends.len() as u16 + 2 + warn_lines.len() as u16).min(area.height / 2);
    let [list, chart] = Layout::vertical([Constraint::Length(list_h), Constraint::Min(5)]).areas(area);
    let mut lines =
        vec![Line::styled(format!("{:<6} {:>10} {:>16} {:>14}  notes", "circuit", "now, A", "last reading", "today, kA·h"), bold())];
    let first = screen.sel.saturating_sub(list_h.saturating_sub(2) as usize - 1);
    for (i, t) in screen.trends.iter().enumerate().skip(first).take((list_h as usize).saturating_sub(1)) {
        let last = t.last_reading.map_or("none".into(), |p| app.days.zone.show(p.t));
        let now = t.last_reading.map_or("-".into(), |p| format!("{:.0}", p.amps));
        let est = if t.today_ah.1 > 0.0 { format!(" (+{:.1} est.)", t.today_ah.1 / 1000.0) } else { String::new() };
        let mut notes = Vec::new();
        let planned = t.outages.iter().filter(|o| o.from > app.as_of).count();
        if t.outages.len() > planned {
            notes.push(format!("{} outage(s)", t.outages.len() - planned));
        }
        if planned > 0 {
            notes.push(format!("{planned} planned"));
        }
        if !t.gaps.is_empty() {
            notes.push(format!("{} gap(s)", t.gaps.len()));
        }
        let text =
            format!("{:<6} {:>10} {:>16} {:>14}  {}{est}", t.name, now, last, format!("{:.1}", t.today_ah.0 / 1000.0), notes.join(", "));
        let style = if i == screen.sel { bold().add_modifier(Modifier::REVERSED) } else { Default::default() };
        lines.push(Line::styled(text, style));
    }
    lines.extend(warn_lines);
    f.render_widget(Paragraph::new(lines), list);
    let Some(t) = screen.trends.get(screen.sel) else { return };
    let from = app.as_of - chrono::Duration::days(screen.span_days);
    let h = |x: crate::domain::charge::Time| (x - from).num_minutes() as f64 / 60.0;
    let span_h = (screen.span_days * 24) as f64;
    let pts: Vec<(f64, f64)> = t.points.iter().filter(|(x, _)| *x >= from).map(|(x, a)| (h(*x), a / 1000.0)).collect();
    let top = (t.max_amps / 1000.0).max(1.0);
    let outage: Vec<(f64, f64)> = t
        .outages
        .iter()
        .flat_map(|s| {
            let (a, b) = (h(s.from).max(0.0), h(s.to).min(span_h + 48.0));
            (0..=20).map(move |k| (a + (b - a) * k as f64 / 20.0, 0.5))
        })
        .collect();
    let gaps: Vec<(f64, f64)> = t.gaps.iter().flat_map(|s| [(h(s.from).max(0.0), top * 0.98), (h(s.to).max(0.0), top * 0.98)]).collect();
    let day = vec![(h(t.day_start), 0.0), (h(t.day_start), top)];
    let ds = vec![
        Dataset::default().name("kA").marker(Marker::Braille).graph_type(GraphType::Line).style(fg(app, Color::Green)).data(&pts),
        Dataset::default().name("outage").marker(Marker::Block).graph_type(GraphType::Scatter).style(fg(app, Color::Red)).data(&outage),
        Dataset::default().name("gap").marker(Marker::Dot).graph_type(GraphType::Scatter).style(fg(app, Color::Blue)).data(&gaps),
        Dataset::default().name("day start").marker(Marker::Braille).graph_type(GraphType::Line).style(fg(app, Color::DarkGray)).data(&day),
    ];
    let title = Line::from(vec![
        Span::raw(format!(" {} · last {} d · ", t.name, screen.span_days)),
        Span::styled("outage ▮ ", fg(app, Color::Red)),
        Span::styled("gap • ", fg(app, Color::Blue)),
        Span::raw(format!("estimate after last reading {:.0} A ", t.projected_amps)),
    ]);
    let x = Axis::default().bounds([0.0, span_h]).labels(vec![Line::raw(format!("-{} d", screen.span_days)), Line::raw("now")]);
    let y = Axis::default().bounds([0.0, top]).labels(vec![Line::raw("0"), Line::raw(format!("{top:.0} kA"))]);
    f.render_widget(
        Chart::new(ds).legend_position(None).block(Block::default().borders(Borders::ALL).title(title)).x_axis(x).y_axis(y),
        chart,
    );
}
