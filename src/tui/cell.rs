//! The cell screen: one cell's anode load, crop, efficiencies, shorts and
//! cut-outs, with charts of its charge and of its anodes against the scrap target.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Block, Borders, Chart, Dataset, GraphType, Paragraph};

use super::app::App;
use super::draw::{bold, fg, state_mark};
use crate::domain::charge::Time;
use crate::domain::forecast::CellForecast;
use crate::domain::outlook::states;
use crate::domain::plant_time::{relative, span_text};
use crate::plant::CellDetail;

/// The cell screen's state: the selected cell in depth, once loaded.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CellScreen {
    pub detail: Option<CellDetail>,
}

/// Chart points (hours since the start, value).
type Series = Vec<(f64, f64)>;

fn when(app: &App, t: Time) -> String {
    format!("{} ({})", short(app, t), relative(t, app.as_of))
}

/// Month, day and time on the plant clock: enough inside one anode cycle.
fn short(app: &App, t: Time) -> String {
    app.days.zone.local(t).format("%m-%d %H:%M").to_string()
}

/// The cell's figures as lines of text: the cell screen's left side, and the
/// tankhouse screen's side panel on a wide terminal (without `detail`).
pub fn summary<'a>(app: &App, c: &'a CellForecast, detail: Option<&'a CellDetail>, wide: bool, rows: usize) -> Vec<Line<'a>> {
    let mut l: Vec<Line> = Vec::new();
    let st = states(c, app.as_of, app.day_end());
    let mut head = vec![Span::styled(format!("{} ", c.cell), bold()), Span::raw(format!("circuit {} · section {} ", c.circuit, c.section))];
    for s in &st {
        let (m, col) = state_mark(Some(*s));
        head.push(Span::styled(format!("{m} "), bold().patch(fg(app, col))));
    }
    l.push(Line::from(head));
    for s in &st {
        l.push(Line::styled(format!("  {}", s.meaning()), fg(app, state_mark(Some(*s)).1)));
    }
    if let Some(since) = c.cut_out_since {
        l.push(Line::styled(format!("Cut out since {}", short(app, since)), fg(app, Color::DarkGray)));
    }
    match &c.anode {
        Some(a) => {
            l.push(Line::styled(format!("Anodes set {}", when(app, a.set_at)), bold()));
            l.push(Line::raw(format!("  {} × {:.0} kg at set", a.count, a.initial_kg)));
            if c.anode_kind == crate::domain::layout::AnodeKind::Soluble {
                let mm = a.thickness_mm.map_or(String::new(), |mm| format!(", ~{mm:.1} mm"));
                l.push(Line::raw(format!("  left {:.1} kg each ({:.1} %){mm}", a.remaining_kg, a.remaining_fraction * 100.0)));
                l.push(Line::raw(format!("  pull due {}", a.pull_due.map_or("not in sight".into(), |t| when(app, t)))));
            } else {
                l.push(Line::raw("  inert anodes: not consumed"));
            }
        }
        None => l.push(Line::raw("No anodes in the cell")),
    }
    match &c.cathode {
        Some(k) => {
            l.push(Line::styled(format!("Crop since {} ({})", short(app, k.started_at), span_text(app.as_of - k.started_at)), bold()));
            l.push(Line::raw(format!("  {:.1} kg/cathode, inner {:.1} kg", k.mass_kg, k.inner_mass_kg)));
            l.push(Line::raw(format!("  harvest due {}", k.harvest_due.map_or("not in sight".into(), |t| when(app, t)))));
        }
        None => l.push(Line::raw("No crop growing")),
    }
    let last = c.last_crop_efficiency.map_or("-".into(), |e| format!("{:.1} %", e * 100.0));
    l.push(Line::raw(format!("Efficiency used {:.1} %, last crop {last}", c.cathode_efficiency * 100.0)));
    if let Some(d) = detail {
        let hist: Vec<String> =
            d.efficiencies.iter().rev().take(if wide { 10 } else { 6 }).rev().map(|(_, e, _)| format!("{:.1}", e * 100.0)).collect();
        if !hist.is_empty() {
            l.push(Line::raw(format!("  crops: {}", hist.join(" "))));
        }
    }
    let est = if c.estimated_ah > 0.0 { format!(" ({:.0} kA·h estimated)", c.estimated_ah / 1000.0) } else { String::new() };
    l.push(Line::raw(format!("Charge {:.0} kA·h{est}", c.charge_ah / 1000.0)));
    let volts = detail.and_then(|d| d.events.iter().find(|e| e.volts.is_some() && !e.voided).map(|e| (e.at, e.volts.unwrap_or(0.0))));
    match (volts, c.energy_kwh_per_t) {
        (Some((t, v)), Some(e)) => l.push(Line::raw(format!("Voltage {v} V ({}), {e:.0} kWh/t", short(app, t)))),
        // a reading outside the cell's plausible range gives no energy figure
        (Some((t, v)), None) => {
            l.push(Line::styled(format!("Voltage {v} V ({}): implausible, no kWh/t from it", short(app, t)), fg(app, Color::Red)))
        }
        (None, Some(e)) => l.push(Line::raw(format!("Energy {e:.0} kWh/t at the last voltage"))),
        (None, None) => {}
    }
    l.push(Line::raw(format!("Shorts this crop: {}", c.shorts.unwrap_or(0))));
    for w in &c.warnings {
        l.push(Line::styled(format!("! {}", w.message), fg(app, Color::Red)));
    }
    if let Some(d) = detail {
        l.push(Line::styled("Entries", bold()));
        // voltages are many and summed up above; the work entries matter here
        for e in d.events.iter().filter(|e| e.kind != crate::domain::history::EventKind::Voltage).take(rows) {
            let what = match (e.kind.name(), e.kg, e.count, e.volts) {
                ("void", ..) => format!("undoes {}", e.voids.unwrap_or(0)),
                (_, Some(kg), _, _) => format!("{kg} kg"),
                (_, _, Some(n), _) => format!("{n}"),
                (_, _, _, Some(v)) => format!("{v} V"),
                _ => String::new(),
            };
            let mark = if e.voided { " (undone)" } else { "" };
            l.push(Line::raw(format!("  {} {} {what} {}{mark}", short(app, e.at), e.kind.name(), e.by)));
        }
    }
    l
}

pub fn draw(f: &mut Frame, app: &App, area: Rect) {
    let Some(c) = app.selected() else { return };
    let detail = app.cell.detail.as_ref().filter(|d| d.forecast.cell == c.cell);
    let wide = area.width >= 100;
    let [left, right] = Layout::horizontal([Constraint::Length(if wide { 56 } else { 40 }), Constraint::Min(20)]).areas(area);
    let l = summary(app, c, detail, wide, left.height as usize);
    f.render_widget(Paragraph::new(l), left);
    if let Some(tr) = detail.and_then(|d| d.trajectory.as_ref()) {
        let d = detail.map(|d| &d.params);
        let h = |t: Time| (t - tr.from).num_minutes() as f64 / 60.0;
        let x_max = h(tr.until).max(1.0);
        let last_read = detail.and_then(|d| d.last_reading);
        let split = |pts: &[(Time, f64)], scale: f64| -> (Series, Series) {
            let cut = last_read.unwrap_or(app.as_of);
            let a = pts.iter().filter(|(t, _)| *t <= cut).map(|(t, v)| (h(*t), v * scale)).collect();
            let b = pts.iter().filter(|(t, _)| *t >= cut).map(|(t, v)| (h(*t), v * scale)).collect();
            (a, b)
        };
        let charts = if tr.anode_kg.is_empty() {
            vec![right]
        } else {
            Layout::vertical([Constraint::Percentage(50), Constraint::Percentage(50)]).split(right).to_vec()
        };
        let now_x = h(app.as_of);
        let (q_meas, q_proj) = split(&tr.charge, 1e-3);
        let q_max = tr.charge.last().map_or(1.0, |p| p.1 * 1e-3).max(1.0);
        let now_line = vec![(now_x, 0.0), (now_x, q_max)];
        let ds = vec![
            Dataset::default()
                .name("measured")
                .marker(Marker::Braille)
                .graph_type(GraphType::Line)
                .style(fg(app, Color::Green))
                .data(&q_meas),
            Dataset::default()
                .name("estimated")
                .marker(Marker::Dot)
                .graph_type(GraphType::Line)
                .style(fg(app, Color::DarkGray))
                .data(&q_proj),
            Dataset::default().name("now").marker(Marker::Braille).graph_type(GraphType::Line).style(fg(app, Color::Gray)).data(&now_line),
        ];
        let axes = |max: f64, title: &str| {
            Axis::default().title(title.to_string()).bounds([0.0, max]).labels(vec![Line::raw("0"), Line::raw(format!("{max:.0}"))])
        };
        let xaxis =
            Axis::default().title("h").bounds([0.0, x_max]).labels(vec![Line::raw("0"), Line::raw(format!("{:.0} d", x_max / 24.0))]);
        f.render_widget(
            Chart::new(ds)
                .legend_position(None)
                .block(Block::default().borders(Borders::ALL).title(" charge, kA·h "))
                .x_axis(xaxis.clone())
                .y_axis(axes(q_max, "")),
            charts[0],
        );
        if let (Some(area), Some(p)) = (charts.get(1), d) {
            let (m_meas, m_proj) = split(&tr.anode_kg, 1.0);
            let top = tr.anode_kg.first().map_or(400.0, |p| p.1);
            let initial = c.anode.as_ref().map_or(top, |a| a.initial_kg);
            let target = p.scrap_target * initial;
            let target_line = vec![(0.0, target), (x_max, target)];
            let due_line: Vec<(f64, f64)> =
                c.anode.as_ref().and_then(|a| a.pull_due).map(|t| vec![(h(t), 0.0), (h(t), top)]).unwrap_or_default();
            let ds = vec![
                Dataset::default()
                    .name("anode kg")
                    .marker(Marker::Braille)
                    .graph_type(GraphType::Line)
                    .style(fg(app, Color::Yellow))
                    .data(&m_meas),
                Dataset::default()
                    .name("projected")
                    .marker(Marker::Dot)
                    .graph_type(GraphType::Line)
                    .style(fg(app, Color::DarkGray))
                    .data(&m_proj),
                Dataset::default()
                    .name("scrap target")
                    .marker(Marker::Braille)
                    .graph_type(GraphType::Line)
                    .style(fg(app, Color::Red))
                    .data(&target_line),
                Dataset::default()
                    .name("pull due")
                    .marker(Marker::Braille)
                    .graph_type(GraphType::Line)
                    .style(fg(app, Color::Magenta))
                    .data(&due_line),
            ];
            let title = match c.anode.as_ref().and_then(|a| a.pull_due) {
                Some(t) => format!(" anode kg · pull {} ", app.days.zone.show(t)),
                None => " anode kg ".to_string(),
            };
            f.render_widget(
                Chart::new(ds)
                    .legend_position(None)
                    .block(Block::default().borders(Borders::ALL).title(title))
                    .x_axis(xaxis)
                    .y_axis(axes(top, "")),
                *area,
            );
        }
    } else {
        f.render_widget(
            Paragraph::new("no anode load or crop to chart").style(Style::default()).block(Block::default().borders(Borders::ALL)),
            right,
        );
    }
}
