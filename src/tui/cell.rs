//! The cell screen: one cell's anode load, crop, efficiencies, shorts and
//! cut-outs, with charts of its charge and of its anodes against the scrap target.

use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::{Axis, Block, Borders, Chart, Dataset, GraphType, Paragraph, Wrap};

use super::app::App;
use super::draw::{bold, fg, state_mark};
use crate::domain::backtest::Backtest;
use crate::domain::charge::Time;
use crate::domain::forecast::CellForecast;
use crate::domain::outlook::states;
use crate::domain::plant_time::{relative, span_text};
use crate::plant::CellDetail;

/// The cell screen's state: the selected cell in depth, once loaded.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CellScreen {
    pub detail: Option<CellDetail>,
    /// The cell's back-test (which cell, its rows): its predictions against its weighings.
    pub backtest: Option<(String, Backtest)>,
    /// The right side shows the predictions against the weighings in full instead of the charts.
    pub weighings: bool,
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
    l.extend(learnt_lines(c, wide));
    let last = c.last_crop_efficiency.map_or("-".into(), |e| format!("{:.1} %", e * 100.0));
    let hist: Vec<String> = detail.map_or(Vec::new(), |d| {
        d.efficiencies.iter().rev().take(if wide { 10 } else { 6 }).rev().map(|(_, e, _)| format!("{:.1}", e * 100.0)).collect()
    });
    if hist.is_empty() {
        l.push(Line::raw(format!("  last crop {last}")));
    } else {
        l.push(Line::raw(format!("  crops: {}", hist.join(" "))));
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

/// The learnt values the forecast uses: cathode efficiency and anode factor,
/// each with its source, the weighings it is learnt from and its standard error.
pub fn learnt_lines(c: &CellForecast, wide: bool) -> Vec<Line<'static>> {
    let (eta, se, src, n) =
        (c.cathode_efficiency * 100.0, c.cathode_efficiency_se * 100.0, c.cathode_efficiency_source.name(), c.crops_learnt);
    let crops = if n == 1 { "crop" } else { "crops" };
    let mut l = vec![Line::raw(if wide {
        format!("Cathode η {eta:.1} % ±{se:.1} · {src} · {n} {crops} learnt")
    } else {
        format!("Cathode η {eta:.1} % ±{se:.1} · {src} · {n} {crops}")
    })];
    if c.anode_kind == crate::domain::layout::AnodeKind::Soluble {
        let (a, se, src, n) = (c.anode_factor, c.anode_factor_se, c.anode_factor_source.name(), c.scrap_learnt);
        l.push(Line::raw(if wide {
            format!("Anode factor {a:.3} ±{se:.3} · {src} · {n} scrap learnt")
        } else {
            format!("Anode ×{a:.3} ±{se:.3} · {src} · {n} scrap")
        }));
    }
    l
}

/// The cell's predictions against its weighings: the back-test summary, the
/// weighings left out of learning and why, then its last crops and scrap.
fn weighings_lines(app: &App, c: &CellForecast, wide: bool, rows: usize, width: usize) -> Vec<Line<'static>> {
    let mut l = Vec::new();
    // lines the wrapped sentences take beyond their first
    let mut extra = 0;
    let left_out: Vec<&str> = c.warnings.iter().filter(|w| w.code == "weighing_not_learnt").map(|w| w.message.as_str()).collect();
    let Some((_, bt)) = app.cell.backtest.as_ref().filter(|(id, _)| *id == c.cell) else {
        l.push(Line::raw("reading the weighings…"));
        return l;
    };
    let s = &bt.summary;
    let pct = |v: Option<f64>| v.map_or("-".to_string(), |v| format!("{v:.2} %"));
    let pts = |v: Option<f64>| v.map_or("-".to_string(), |v| format!("{v:.2}"));
    if s.crops > 0 && !wide {
        l.push(Line::raw(format!("{} crops: error {}, fixed η {}", s.crops, pct(s.mass_mape_pct), pct(s.fixed_mass_mape_pct))));
        let bias = s.mass_bias_pct.map_or("-".into(), |v| format!("{v:+.2} %"));
        let h = s.harvest_time_mae_h.map_or("-".into(), |h| format!("{h:.1} h"));
        l.push(Line::raw(format!("  bias {bias}, harvest time ±{h}")));
    }
    if s.crops > 0 && wide {
        l.push(Line::raw(format!(
            "{} crops: mass error {} learnt, {} fixed · bias {}",
            s.crops,
            pct(s.mass_mape_pct),
            pct(s.fixed_mass_mape_pct),
            s.mass_bias_pct.map_or("-".into(), |v| format!("{v:+.2} %"))
        )));
        if let Some(h) = s.harvest_time_mae_h {
            l.push(Line::raw(format!("  harvest time off by {h:.1} h on average")));
        }
    }
    if s.scrap > 0 && !wide {
        l.push(Line::raw(format!("{} scrap: error {} pts, fixed {}", s.scrap, pts(s.scrap_mae_pp), pts(s.fixed_scrap_mae_pp))));
    }
    if s.scrap > 0 && wide {
        l.push(Line::raw(format!("{} scrap: error {} points learnt, {} fixed", s.scrap, pts(s.scrap_mae_pp), pts(s.fixed_scrap_mae_pp))));
    }
    if s.crops == 0 && s.scrap == 0 {
        l.push(Line::raw("no weighing of this cell yet"));
    }
    for why in &left_out {
        let text = format!("! {why}");
        extra += text.chars().count().saturating_sub(1) / width.max(1);
        l.push(Line::styled(text, fg(app, Color::Red)));
    }
    let room = rows.saturating_sub(l.len() + extra);
    // scrap weighings are fewer: a few lines for them, the rest for the crops
    let scrap_rows = if bt.scrap.is_empty() { 0 } else { bt.scrap.len().min(3).min(room / 3) };
    let crop_rows = room.saturating_sub(if scrap_rows > 0 { scrap_rows + 1 } else { 0 }).saturating_sub(1);
    if !bt.crops.is_empty() && crop_rows > 0 {
        l.push(Line::styled(
            if wide {
                "harvested      weighed predicted  fixed   error  fixed error  η used source".to_string()
            } else {
                "harvested      kg  pred  err%  fix%".to_string()
            },
            bold(),
        ));
        for r in bt.crops.iter().skip(bt.crops.len().saturating_sub(crop_rows)) {
            let when = short(app, r.harvested_at);
            l.push(Line::raw(if wide {
                format!(
                    "{when} {:>7.0} {:>9.0} {:>6.0} {:>+6.2} % {:>+9.2} % {:>5.1} % {}",
                    r.weighed_kg,
                    r.predicted_kg,
                    r.fixed_kg,
                    r.error_pct,
                    r.fixed_error_pct,
                    r.cathode_efficiency * 100.0,
                    r.cathode_efficiency_source.name()
                )
            } else {
                format!("{when} {:>5.0} {:>5.0} {:>+5.1} {:>+5.1}", r.weighed_kg, r.predicted_kg, r.error_pct, r.fixed_error_pct)
            }));
        }
    }
    if scrap_rows > 0 {
        l.push(Line::styled(
            if wide {
                "scrap pulled   weighed predicted  fixed  of the set mass: weighed predicted fixed".to_string()
            } else {
                "scrap pulled   kg  % set pred fixed".to_string()
            },
            bold(),
        ));
        for r in bt.scrap.iter().skip(bt.scrap.len() - scrap_rows) {
            let when = short(app, r.pulled_at);
            let (w, p, x) = (r.weighed_fraction * 100.0, r.predicted_fraction * 100.0, r.fixed_fraction * 100.0);
            l.push(Line::raw(if wide {
                format!(
                    "{when} {:>7.0} {:>9.0} {:>6.0}                 {w:>5.1} % {p:>7.1} % {x:>5.1} %",
                    r.weighed_kg, r.predicted_kg, r.fixed_kg
                )
            } else {
                format!("{when} {:>5.0} {w:>5.1} {p:>4.1} {x:>5.1}", r.weighed_kg)
            }));
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
    // the predictions against the weighings: in full on Tab, else below the charts when there is room
    let right = if app.cell.weighings || wide {
        let [charts, panel] = if app.cell.weighings {
            [Rect { height: 0, ..right }, right]
        } else {
            Layout::vertical([Constraint::Min(10), Constraint::Length(14)]).areas(right)
        };
        let rows = panel.height.saturating_sub(2) as usize;
        let title = if wide { " predictions against weighings (back-test) " } else { " predicted against weighed " };
        let block = Block::default().borders(Borders::ALL).title(title);
        f.render_widget(
            Paragraph::new(weighings_lines(app, c, wide, rows, panel.width.saturating_sub(2) as usize))
                .block(block)
                .wrap(Wrap { trim: false }),
            panel,
        );
        if charts.height == 0 {
            return;
        }
        charts
    } else {
        right
    };
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
