//! The plan screen: the coming production days as a board with the crew load
//! against capacity, the selected day's anode changes and harvests, and the totals.

use chrono::Datelike;
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Wrap};

use super::app::{App, Overlay};
use super::draw::{bold, fg};
use crate::domain::plan::PlanDay;

/// A load bar: `load` of `cap` in `width` cells (over capacity cannot happen; shown if it did).
fn bar(load: u32, cap: u32, width: usize) -> String {
    if cap == 0 {
        return format!("{:<width$}", "no anode work");
    }
    let full = ((load as usize * width).div_ceil(cap as usize)).min(width);
    format!("{}{}", "█".repeat(full), "░".repeat(width - full))
}

fn day_line(app: &App, d: &PlanDay, selected: bool, moving: bool) -> Line<'static> {
    let overdue = d.anode_changes.iter().any(|c| c.overdue) || d.harvests.iter().any(|h| h.overdue);
    let text = format!(
        "{} {} {} {:>2}/{:<2} A {:>4} H {:>2} Cu {:>5.1} t{}",
        d.date.weekday(),
        d.date.format("%m-%d"),
        bar(d.crew_load, d.crew_capacity, 10),
        d.crew_load,
        d.crew_capacity,
        d.anodes_needed,
        d.harvests.len(),
        d.copper_tonnes,
        if overdue { " !" } else { "" }
    );
    let mut style = if d.crew_capacity == 0 { fg(app, Color::DarkGray) } else { Default::default() };
    if overdue {
        style = style.patch(fg(app, Color::Red));
    }
    if selected {
        style = style.add_modifier(Modifier::REVERSED);
        if moving {
            style = style.add_modifier(Modifier::BOLD);
        }
    }
    Line::styled(text, style)
}

pub fn draw(f: &mut Frame, app: &App, area: Rect) {
    let Some(plan) = &app.plan else {
        f.render_widget(Paragraph::new("planning…"), area);
        return;
    };
    let wide = area.width >= 120;
    let [advisory, totals, rest] = Layout::vertical([Constraint::Length(1), Constraint::Length(1), Constraint::Min(4)]).areas(area);
    f.render_widget(
        Paragraph::new(Line::styled(
            "ADVISORY plan: lifts, lock-out and acid handling follow site procedures; qualified engineers decide.",
            bold().patch(fg(app, Color::Red)),
        )),
        advisory,
    );
    let changes: usize = plan.days.iter().map(|d| d.anode_changes.len()).sum();
    let anodes: u64 = plan.days.iter().map(|d| d.anodes_needed).sum();
    let anode_t: f64 = plan.days.iter().map(|d| d.anode_tonnes).sum();
    let scrap_t: f64 = plan.days.iter().map(|d| d.scrap_tonnes).sum();
    let cu_t: f64 = plan.days.iter().map(|d| d.copper_tonnes).sum();
    let harvests: usize = plan.days.iter().map(|d| d.harvests.len()).sum();
    let moved = if app.plan_moves.is_empty() { String::new() } else { format!(" · {} moved by hand", app.plan_moves.len()) };
    f.render_widget(
        Paragraph::new(Line::from(vec![
            Span::styled(format!("{} d: ", plan.days.len()), bold()),
            Span::raw(format!(
                "{changes} changes, {anodes} anodes ({anode_t:.0} t), scrap {scrap_t:.0} t · {harvests} harvests, Cu {cu_t:.0} t · unplaced {}{moved}",
                plan.unplaced.len()
            )),
        ])),
        totals,
    );
    let [board, detail] = if wide {
        Layout::horizontal([Constraint::Length(58), Constraint::Min(30)]).areas(rest)
    } else {
        Layout::vertical([Constraint::Percentage(50), Constraint::Percentage(50)]).areas(rest)
    };
    let moving = matches!(app.overlay, Some(Overlay::PlanMove(_)));
    let rows = board.height as usize;
    let first = app.plan_day.saturating_sub(rows.saturating_sub(1));
    let lines: Vec<Line> =
        plan.days.iter().enumerate().skip(first).take(rows).map(|(i, d)| day_line(app, d, i == app.plan_day, moving)).collect();
    f.render_widget(Paragraph::new(lines), board);

    let Some(day) = plan.days.get(app.plan_day) else { return };
    let mut l = Vec::new();
    let mut head = format!("{} {}", day.date.weekday(), day.date);
    if let Some(why) = &day.no_anode_work {
        head.push_str(&format!(" · no anode work: {why}"));
    }
    if plan.shifts_per_day > 1 && !day.shifts.is_empty() {
        let s: Vec<String> = day.shifts.iter().map(|s| format!("{}/{}", s.load, s.capacity)).collect();
        head.push_str(&format!(" · by shift {}", s.join(" ")));
    }
    l.push(Line::styled(head, bold()));
    l.push(Line::raw(format!(
        "anodes {} ({:.1} t) · scrap {:.1} t · harvest {} cathodes of {}",
        day.anodes_needed, day.anode_tonnes, day.scrap_tonnes, day.harvest_cathodes, day.harvest_capacity
    )));
    let mut spans = vec![Span::styled("change: ", bold())];
    for (i, c) in day.anode_changes.iter().enumerate() {
        let mut st = if c.overdue { fg(app, Color::Red) } else { Default::default() };
        if i == app.plan_job {
            st = st.add_modifier(Modifier::REVERSED);
        }
        let mark = format!("{}{}", if c.overdue { "!" } else { "" }, if c.moved { "*" } else { "" });
        spans.push(Span::styled(format!("{} {:.0}%{mark}", c.cell, c.scrap_fraction * 100.0), st));
        spans.push(Span::raw("  "));
    }
    if day.anode_changes.is_empty() {
        spans.push(Span::raw("none"));
    }
    l.push(Line::from(spans));
    let n = day.anode_changes.len();
    let mut spans = vec![Span::styled("harvest: ", bold())];
    for (i, h) in day.harvests.iter().enumerate() {
        let mut st = if h.overdue { fg(app, Color::Red) } else { Default::default() };
        if i + n == app.plan_job {
            st = st.add_modifier(Modifier::REVERSED);
        }
        spans.push(Span::styled(format!("{} {:.0}kg{}", h.cell, h.mass_kg, if h.overdue { "!" } else { "" }), st));
        spans.push(Span::raw("  "));
    }
    if day.harvests.is_empty() {
        spans.push(Span::raw("none"));
    }
    l.push(Line::from(spans));
    if let Some(c) = app.selected_change() {
        let late = c.window.latest.map_or("open".to_string(), |d| d.format("%m-%d").to_string());
        l.push(Line::raw(format!(
            "{}: window {} – {late}, ideal {} · {} anodes · scrap {:.0} kg",
            c.cell,
            c.window.earliest.format("%m-%d"),
            c.window.ideal.format("%m-%d"),
            c.anodes,
            c.scrap_kg
        )));
    }
    if !plan.unplaced.is_empty() {
        l.push(Line::styled("Not placed:", bold().patch(fg(app, Color::Red))));
        for u in &plan.unplaced {
            l.push(Line::styled(format!("  {} {}: {}", u.cell, u.kind.replace('_', " "), u.message), fg(app, Color::Red)));
        }
    }
    l.push(Line::styled("! overdue   * moved by hand", fg(app, Color::DarkGray)));
    let block = Block::default().borders(if wide { Borders::LEFT } else { Borders::TOP });
    f.render_widget(Paragraph::new(l).block(block).wrap(Wrap { trim: false }), detail);
}
