//! The copper balance screen: the month so far per circuit and for the plant —
//! copper in, out, the change held in the cells, and the residual beside Faraday's figure.

use ratatui::Frame;
use ratatui::layout::Rect;
use ratatui::style::{Color, Style};
use ratatui::text::{Line, Span};
use ratatui::widgets::{Paragraph, Wrap};

use super::app::App;
use super::draw::{bold, fg};
use crate::domain::balance::{Balance, CopperBalance};

/// The balance screen's state: the balance of the month so far, once loaded.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct BalanceScreen {
    pub balance: Option<Balance>,
    /// Why it could not be made (shown in its place).
    pub refused: Option<String>,
}

impl BalanceScreen {
    pub fn loaded(&mut self, b: Balance) {
        self.balance = Some(b);
        self.refused = None;
    }

    pub fn failed(&mut self, why: String) {
        self.balance = None;
        self.refused = Some(why);
    }
}

/// Width of the row labels and of each figure column.
const LABEL: usize = 27;
const COL: usize = 10;

/// One row of the table: its label, the figure of a balance, and whether it leads a block.
struct Row {
    label: &'static str,
    value: fn(&CopperBalance) -> f64,
    strong: bool,
    /// Only shown when the screen has room for every row.
    tall_only: bool,
}

const fn row(label: &'static str, value: fn(&CopperBalance) -> f64, strong: bool, tall_only: bool) -> Row {
    Row { label, value, strong, tall_only }
}

const REFINING: &[Row] = &[
    row("in   anodes set (Cu)", |b| b.anode_in_t, false, false),
    row("     starter sheets", |b| b.starter_in_t, false, false),
    row("     copper in", |b| b.copper_in_t, true, true),
    row("out  cathodes weighed", |b| b.cathode_out_t, false, false),
    row("     scrap weighed (Cu)", |b| b.scrap_out_t, false, false),
    row("     copper out", |b| b.copper_out_t, true, true),
    row("in cells at start", |b| b.in_cells_start_t, false, false),
    row("         at end", |b| b.in_cells_end_t, false, false),
    row("change in cells", |b| b.in_cells_end_t - b.in_cells_start_t, false, false),
    row("RESIDUAL in−out−change", |b| b.residual_t, true, false),
    row("Faraday: electrolyte gain", |b| b.faraday_electrolyte_t, false, false),
    row("residual − Faraday", |b| b.residual_t - b.faraday_electrolyte_t, false, false),
    row("copper plated (Faraday)", |b| b.plated_t, false, true),
];

const LIBERATOR: &[Row] = &[
    row("cathodes weighed", |b| b.liberator_out_t, false, false),
    row("change in cells", |b| b.liberator_in_cells_end_t - b.liberator_in_cells_start_t, false, true),
    row("taken from electrolyte", |b| b.liberator_taken_t, false, false),
    row("  by Faraday", |b| b.liberator_faraday_t, false, false),
];

/// How to read the residual: what the foreman is to make of the figures.
const READING: &str = "Residual = copper gone into the electrolyte, lost or mis-weighed. Near the Faraday \
    gain: the weighings agree with the charge; far from it: check the scales, the scrap weights and \
    missing entries.";

fn figure(v: f64) -> String {
    // a tonne to three places is a kilogram: what a scale reads
    let v = if v.abs() < 0.0005 { 0.0 } else { v };
    format!("{v:>COL$.3}")
}

pub fn draw(f: &mut Frame, app: &App, area: Rect) {
    let screen = &app.balance;
    let Some(b) = &screen.balance else {
        let text = screen.refused.as_ref().map_or("working out the copper balance…".to_string(), |w| format!("no balance: {w}"));
        f.render_widget(Paragraph::new(text).wrap(Wrap { trim: false }), area);
        return;
    };
    let zone = app.days.zone;
    let when = |t| zone.local(t).format("%m-%d %H:%M").to_string();
    let w = area.width as usize;
    // as many circuits as fit beside the plant's column
    let fit = w.saturating_sub(LABEL + COL) / COL;
    let shown: Vec<&CopperBalance> = b.circuits.iter().take(fit).collect();
    let cols: Vec<&CopperBalance> = shown.iter().copied().chain(std::iter::once(&b.plant)).collect();
    let rows_needed = REFINING.len() + LIBERATOR.len() + 8;
    let tall = area.height as usize >= rows_needed;

    let mut l = Vec::new();
    l.push(Line::from(vec![
        Span::styled("Copper balance, month so far ", bold()),
        Span::raw(format!("{} → {} · tonnes of copper", when(b.from), when(b.to))),
    ]));
    let mut head = format!("{:<LABEL$}", "refining cells");
    for c in &cols {
        head.push_str(&format!("{:>COL$}", c.circuit));
    }
    l.push(Line::styled(head, bold()));
    let line = |r: &Row, l: &mut Vec<Line>| {
        let mut s = format!("{:<LABEL$}", r.label);
        for c in &cols {
            s.push_str(&figure((r.value)(c)));
        }
        let style = if r.strong { bold() } else { Style::default() };
        l.push(Line::styled(s, style));
    };
    for r in REFINING.iter().filter(|r| tall || !r.tall_only) {
        line(r, &mut l);
    }
    l.push(Line::styled("liberator cells, apart: they take copper out of the electrolyte", bold()));
    for r in LIBERATOR.iter().filter(|r| tall || !r.tall_only) {
        line(r, &mut l);
    }
    line(&row("electrolyte kept (net)", |b| b.electrolyte_net_t, true, false), &mut l);
    if tall {
        let mut s = format!("{:<LABEL$}", "cells counted");
        for c in &cols {
            s.push_str(&format!("{:>COL$}", c.cells));
        }
        l.push(Line::raw(s));
    }
    if shown.len() < b.circuits.len() {
        l.push(Line::styled(
            format!("+{} circuits not shown: a wider terminal, or `tankbook balance`", b.circuits.len() - shown.len()),
            fg(app, Color::Yellow),
        ));
    }
    l.push(Line::styled(READING, fg(app, Color::DarkGray)));
    f.render_widget(Paragraph::new(l).wrap(Wrap { trim: false }), area);
}
