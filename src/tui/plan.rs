//! The plan screen: the coming production days as a board with the crew load
//! against capacity, the selected day's anode changes and harvests, and the totals.

use chrono::{Datelike, NaiveDate};
use ratatui::Frame;
use ratatui::layout::{Constraint, Layout, Rect};
use ratatui::style::{Color, Modifier};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Block, Borders, Paragraph, Wrap};

use super::app::App;
use super::draw::{bold, fg};
use super::overlay::Overlay;
use crate::domain::plan::{AnodeChange, Bound, JobKind, Plan, PlanDay};
use crate::domain::plan_diff::PlanDiff;

/// The plan screen's state: the plan, the hand moves, the selected day and job.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanScreen {
    pub plan: Option<Plan>,
    /// Anode changes moved by hand (cell, day), re-checked at every replan.
    pub moves: Vec<(String, NaiveDate)>,
    /// The hand move a new one replaced, put back if the new one is refused.
    pub replaced: Option<(String, NaiveDate)>,
    pub day: usize,
    pub job: usize,
    /// Production days planned.
    pub days: u32,
    /// The hand move just placed, until the replan says whether it holds
    /// (then the foreman is asked whether to keep it as a decision).
    pub placed: Option<(String, NaiveDate)>,
}

impl Default for PlanScreen {
    fn default() -> Self {
        PlanScreen { plan: None, moves: Vec::new(), replaced: None, day: 0, job: 0, days: 21, placed: None }
    }
}

impl PlanScreen {
    /// Jobs listed for the selected day: anode changes, then harvests.
    pub fn day_jobs(&self) -> usize {
        self.plan.as_ref().and_then(|p| p.days.get(self.day)).map_or(0, |d| d.anode_changes.len() + d.harvests.len())
    }

    /// The anode change selected, if the selection is one.
    pub fn selected_change(&self) -> Option<&AnodeChange> {
        self.plan.as_ref()?.days.get(self.day)?.anode_changes.get(self.job)
    }

    fn day_count(&self) -> usize {
        self.plan.as_ref().map_or(0, |p| p.days.len())
    }

    /// Another day: the day's first job is selected.
    pub fn moved(&mut self, dy: i32) {
        self.day = (self.day as i64 + i64::from(dy)).clamp(0, self.day_count().saturating_sub(1) as i64) as usize;
        self.job = 0;
    }

    /// Another day while a change is being moved: the job stays.
    pub fn choose_day(&mut self, dy: i32) {
        self.day = (self.day as i64 + i64::from(dy)).clamp(0, self.day_count().saturating_sub(1) as i64) as usize;
    }

    pub fn next_job(&mut self, d: i32) {
        let n = self.day_jobs();
        self.job = (self.job as i64 + i64::from(d)).clamp(0, n.saturating_sub(1) as i64) as usize;
    }

    /// Places `cell` on the selected day; the date, or `None` without a plan.
    pub fn place(&mut self, cell: &str) -> Option<NaiveDate> {
        let date = self.plan.as_ref()?.days.get(self.day)?.date;
        self.replaced = self.moves.iter().position(|(c, _)| c == cell).map(|i| self.moves.remove(i));
        self.moves.push((cell.to_string(), date));
        self.placed = Some((cell.to_string(), date));
        Some(date)
    }

    pub fn loaded(&mut self, p: Plan) {
        self.day = self.day.min(p.days.len().saturating_sub(1));
        self.replaced = None;
        self.plan = Some(p);
        self.job = self.job.min(self.day_jobs().saturating_sub(1));
    }

    /// A refused replan takes the last hand move back (and puts back the one it replaced).
    pub fn take_back(&mut self) -> Option<(String, NaiveDate)> {
        self.placed = None;
        let last = self.moves.pop()?;
        self.moves.extend(self.replaced.take());
        Some(last)
    }
}

/// A load bar: `load` of `cap` in `width` cells (over capacity cannot happen; shown if it did).
fn bar(load: u32, cap: u32, width: usize) -> String {
    if cap == 0 {
        return format!("{:<width$}", "no anode work");
    }
    let full = ((load as usize * width).div_ceil(cap as usize)).min(width);
    format!("{}{}", "█".repeat(full), "░".repeat(width - full))
}

/// The constraint that held a day's work back, in a word (blank: none did).
fn bound_word(b: Option<Bound>) -> &'static str {
    match b {
        Some(Bound::Crew) => "crew",
        Some(Bound::Stripping) => "strip",
        Some(Bound::Anodes) => "anode",
        Some(Bound::Crane) => "crane",
        None => "",
    }
}

/// What changed since the last approved plan, counts first so they survive a narrow screen.
fn diff_line(d: Option<&PlanDiff>, app: &App) -> String {
    let Some(d) = d else { return "no plan approved yet: S signs this one".to_string() };
    let when = app.days.zone.local(d.approved_at).format("%m-%d %H:%M");
    if d.is_empty() {
        return format!("no change since the plan {} approved {when}", d.by);
    }
    let kind = |k: JobKind| if k == JobKind::AnodeChange { "anodes" } else { "harvest" };
    let md = |x: chrono::NaiveDate| x.format("%m-%d").to_string();
    let mut items: Vec<String> = d.moved.iter().map(|m| format!("{} {} {}→{}", m.cell, kind(m.kind), md(m.from), md(m.to))).collect();
    items.extend(d.added.iter().map(|j| format!("+{} {} {}", j.cell, kind(j.kind), md(j.date))));
    items.extend(d.dropped.iter().map(|j| format!("−{} {} {}", j.cell, kind(j.kind), md(j.date))));
    format!(
        "since {}'s approval {when}: {} moved, {} added, {} dropped · {}",
        d.by,
        d.moved.len(),
        d.added.len(),
        d.dropped.len(),
        items.join(", ")
    )
}

fn day_line(app: &App, d: &PlanDay, selected: bool, moving: bool) -> Line<'static> {
    let overdue = d.anode_changes.iter().any(|c| c.overdue) || d.harvests.iter().any(|h| h.overdue);
    let text = format!(
        "{} {} {} {:>2}/{:<2} A {:>4} H {:>2} Cu {:>5.1} t{}{}",
        d.date.weekday(),
        d.date.format("%m-%d"),
        bar(d.crew_load, d.crew_capacity, 10),
        d.crew_load,
        d.crew_capacity,
        d.anodes_needed,
        d.harvests.len(),
        d.copper_tonnes,
        if d.bound_by.is_some() { format!(" {}", bound_word(d.bound_by)) } else { String::new() },
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
    let screen = &app.plan;
    let Some(plan) = &screen.plan else {
        f.render_widget(Paragraph::new("planning…"), area);
        return;
    };
    let wide = area.width >= 120;
    let since = diff_line(plan.since_approved.as_ref(), app);
    // on a wide screen a long list of changes takes a second line; a narrow one keeps the counts
    let since_rows = if wide && since.chars().count() > area.width as usize { 2 } else { 1 };
    let [advisory, changed, totals, rest] =
        Layout::vertical([Constraint::Length(1), Constraint::Length(since_rows), Constraint::Length(1), Constraint::Min(4)]).areas(area);
    f.render_widget(
        Paragraph::new(Line::styled(
            "ADVISORY plan: lifts, lock-out and acid handling follow site procedures; qualified engineers decide.",
            bold().patch(fg(app, Color::Red)),
        )),
        advisory,
    );
    let style = if plan.since_approved.as_ref().is_some_and(|d| !d.is_empty()) { bold().patch(fg(app, Color::Yellow)) } else { bold() };
    f.render_widget(Paragraph::new(Line::styled(since, style)).wrap(Wrap { trim: false }), changed);
    let changes: usize = plan.days.iter().map(|d| d.anode_changes.len()).sum();
    let anodes: u64 = plan.days.iter().map(|d| d.anodes_needed).sum();
    let anode_t: f64 = plan.days.iter().map(|d| d.anode_tonnes).sum();
    let scrap_t: f64 = plan.days.iter().map(|d| d.scrap_tonnes).sum();
    let cu_t: f64 = plan.days.iter().map(|d| d.copper_tonnes).sum();
    let harvests: usize = plan.days.iter().map(|d| d.harvests.len()).sum();
    let moved = if screen.moves.is_empty() { String::new() } else { format!(" · {} moved by hand", screen.moves.len()) };
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
        Layout::horizontal([Constraint::Length(60), Constraint::Min(30)]).areas(rest)
    } else {
        Layout::vertical([Constraint::Percentage(50), Constraint::Percentage(50)]).areas(rest)
    };
    let moving = matches!(app.overlay, Some(Overlay::PlanMove(_)));
    let rows = board.height as usize;
    let first = screen.day.saturating_sub(rows.saturating_sub(1));
    let lines: Vec<Line> =
        plan.days.iter().enumerate().skip(first).take(rows).map(|(i, d)| day_line(app, d, i == screen.day, moving)).collect();
    f.render_widget(Paragraph::new(lines), board);

    let Some(day) = plan.days.get(screen.day) else { return };
    let mut l = Vec::new();
    let mut head = format!("{} {}", day.date.weekday(), day.date);
    // the production day running now ends at its day start, which can be minutes away
    if day.date == app.shift_now().day {
        let end = app.day_end();
        head.push_str(&format!(
            " · today, ends {} ({})",
            app.days.zone.local(end).format("%H:%M"),
            crate::domain::plant_time::relative(end, app.as_of)
        ));
    }
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
        if i == screen.job {
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
        if i + n == screen.job {
            st = st.add_modifier(Modifier::REVERSED);
        }
        spans.push(Span::styled(format!("{} {:.0}kg{}", h.cell, h.mass_kg, if h.overdue { "!" } else { "" }), st));
        spans.push(Span::raw("  "));
    }
    if day.harvests.is_empty() {
        spans.push(Span::raw("none"));
    }
    l.push(Line::from(spans));
    if let Some(c) = screen.selected_change() {
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
            l.push(Line::styled(format!("  {} {}: {}", u.cell, u.kind.name().replace('_', " "), u.message), fg(app, Color::Red)));
        }
    }
    if !plan.kept_moves.is_empty() {
        let kept: Vec<String> = plan
            .kept_moves
            .iter()
            .map(|k| format!("{} {} {}{}", k.cell, k.date.format("%m-%d"), k.by, if k.applied { "" } else { " (after the plan)" }))
            .collect();
        l.push(Line::raw(format!("kept: {}", kept.join(" · "))));
    }
    for d in &plan.dropped_moves {
        l.push(Line::styled(
            format!("kept move dropped: {} {} ({}): {}", d.cell, d.date.format("%m-%d"), d.by, d.reason),
            fg(app, Color::Red),
        ));
    }
    l.push(Line::styled("! overdue  * moved by hand or kept  crew/strip/anode/crane: what held the day", fg(app, Color::DarkGray)));
    let block = Block::default().borders(if wide { Borders::LEFT } else { Borders::TOP });
    f.render_widget(Paragraph::new(l).block(block).wrap(Wrap { trim: false }), detail);
}
