//! The report's charts, drawn by plotters into SVG strings: circuit current,
//! copper per section, crop efficiency by cell, scrap at pull, crew load.
//!
//! Each chart is drawn on an x axis of plain numbers (hours from the period's
//! start, or a category's index) and labelled through a formatter, so the labels
//! show the plant's wall clock and the cells' own names.

use plotters::coord::Shift;
use plotters::prelude::*;

use super::{CellEfficiency, CircuitPeriod, CrewDay, PullLine, SectionCopper};
use crate::domain::charge::{Time, hours};
use crate::domain::plant_time::PlantZone;

/// Full-width and half-width charts, px (scaled to the page's width when printed).
const W: u32 = 700;
const HALF: u32 = 460;
const INK: RGBColor = RGBColor(30, 30, 30);
const LINE: RGBColor = RGBColor(25, 90, 170);
const WARN: RGBColor = RGBColor(200, 40, 30);
const MUTED: RGBColor = RGBColor(150, 150, 150);
const FONT: &str = "sans-serif";

type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;

/// Draws into an SVG string; a drawing failure becomes a sentence, never a panic.
fn svg(size: (u32, u32), draw: impl FnOnce(&Area<'_>) -> Result<(), String>) -> Result<String, String> {
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, size).into_drawing_area();
        root.fill(&WHITE).map_err(|e| e.to_string())?;
        draw(&root)?;
        root.present().map_err(|e| e.to_string())?;
    }
    // inline SVG in HTML needs no namespace, and the page must name no outside address
    Ok(out.replace(" xmlns=\"http://www.w3.org/2000/svg\"", ""))
}

fn err(e: impl std::fmt::Display) -> String {
    e.to_string()
}

fn label(i: f64, names: &[String]) -> String {
    let k = i.round();
    if (i - k).abs() > 1e-6 || k < 0.0 {
        return String::new();
    }
    names.get(k as usize).cloned().unwrap_or_default()
}

/// A circuit's current over `[from, to]`, kA, with outages (red) and reading gaps (grey) shaded.
pub fn current(c: &CircuitPeriod, zone: &PlantZone, from: Time, to: Time) -> Result<String, String> {
    svg((W, 135), |root| {
        let span = hours(from, to).max(0.25);
        let top = (c.points.iter().map(|p| p.amps).fold(0.0, f64::max).max(c.max_amps * 0.8) / 1000.0 * 1.1).max(1.0);
        let mut chart = ChartBuilder::on(root)
            .caption(format!("{}: current, kA", c.name), (FONT, 14))
            .margin(6)
            .margin_right(22)
            .x_label_area_size(22)
            .y_label_area_size(40)
            .build_cartesian_2d(0.0..span, 0.0..top)
            .map_err(err)?;
        // a shift needs only the time of day; a longer period the date too
        let cut = if span > 24.0 { 5 } else { 11 };
        let clock = |h: &f64| zone.show(from + chrono::Duration::seconds((h * 3600.0) as i64)).get(cut..).unwrap_or_default().to_string();
        chart.configure_mesh().x_labels(8).x_label_formatter(&clock).y_labels(5).light_line_style(WHITE).draw().map_err(err)?;
        let shade = |s: &crate::domain::charge::Span, color: RGBColor| {
            let (a, b) = (hours(from, s.from).max(0.0), hours(from, s.to).min(span));
            (b > a).then(|| Rectangle::new([(a, 0.0), (b, top)], color.mix(0.25).filled()))
        };
        chart.draw_series(c.outages.iter().filter_map(|s| shade(s, WARN))).map_err(err)?;
        chart.draw_series(c.gaps.iter().filter_map(|s| shade(s, MUTED))).map_err(err)?;
        chart
            .draw_series(LineSeries::new(c.points.iter().map(|p| (hours(from, p.t), p.amps / 1000.0)), LINE.stroke_width(2)))
            .map_err(err)?;
        Ok(())
    })
}

/// Vertical bars, one per category, with an optional reference line.
fn bars(
    title: &str,
    names: &[String],
    values: &[(f64, bool)],
    y_max: f64,
    reference: Option<f64>,
    fmt: &dyn Fn(&f64) -> String,
) -> Result<String, String> {
    svg((HALF, 215), |root| {
        let n = names.len().max(1) as f64;
        let mut chart = ChartBuilder::on(root)
            .caption(title, (FONT, 16))
            .margin(6)
            .x_label_area_size(24)
            .y_label_area_size(44)
            .build_cartesian_2d(-0.5..n - 0.5, 0.0..y_max)
            .map_err(err)?;
        let lab = |x: &f64| label(*x, names);
        chart
            .configure_mesh()
            .label_style((FONT, 13))
            .x_labels(names.len().clamp(1, 20))
            .x_label_formatter(&lab)
            .y_labels(5)
            .y_label_formatter(fmt)
            .light_line_style(WHITE)
            .disable_x_mesh()
            .draw()
            .map_err(err)?;
        chart
            .draw_series(values.iter().enumerate().map(|(i, (v, marked))| {
                let x = i as f64;
                Rectangle::new([(x - 0.35, 0.0), (x + 0.35, *v)], if *marked { WARN.filled() } else { LINE.filled() })
            }))
            .map_err(err)?;
        if let Some(r) = reference {
            chart.draw_series(LineSeries::new([(-0.5, r), (n - 0.5, r)], INK.stroke_width(1))).map_err(err)?;
        }
        Ok(())
    })
}

/// Cathode copper weighed per section in the period, t.
pub fn harvested(sections: &[SectionCopper]) -> Result<String, String> {
    let names: Vec<String> = sections.iter().map(|s| s.section.clone()).collect();
    let values: Vec<(f64, bool)> = sections.iter().map(|s| (s.harvested_kg / 1000.0, false)).collect();
    let top = values.iter().map(|v| v.0).fold(0.0, f64::max).max(0.1) * 1.15;
    bars("Cathodes harvested per section, t", &names, &values, top, None, &|y| format!("{y:.1}"))
}

/// Scrap fraction at pull per cell, %, against the scrap target (line); outside the range marked.
pub fn scrap(pulls: &[PullLine]) -> Result<String, String> {
    let live: Vec<&PullLine> = pulls.iter().filter(|p| !p.voided && p.scrap_fraction.is_some()).collect();
    let names: Vec<String> = live.iter().map(|p| p.cell.clone()).collect();
    let values: Vec<(f64, bool)> = live
        .iter()
        .map(|p| {
            let f = p.scrap_fraction.unwrap_or(0.0);
            (f * 100.0, f < p.target.0 || f > p.target.2)
        })
        .collect();
    let target = live.first().map(|p| p.target.1 * 100.0);
    let top = values.iter().map(|v| v.0).fold(target.unwrap_or(15.0), f64::max) * 1.25;
    bars("Scrap at pull, % of set mass (line: target)", &names, &values, top, target, &|y| format!("{y:.0}"))
}

/// Coming production days' anode changes against the crew's capacity (line).
pub fn crew(days: &[CrewDay]) -> Result<String, String> {
    let names: Vec<String> = days.iter().map(|d| d.date.format("%d").to_string()).collect();
    let values: Vec<(f64, bool)> = days.iter().map(|d| (f64::from(d.load), d.load > d.capacity)).collect();
    let cap = days.iter().map(|d| d.capacity).max().unwrap_or(0);
    let top = values.iter().map(|v| v.0).fold(f64::from(cap), f64::max).max(1.0) * 1.2;
    bars("Crew plan: anode changes by day of month (line: capacity)", &names, &values, top, Some(f64::from(cap)), &|y| format!("{y:.0}"))
}

/// Every refining cell's last crop efficiency, %; those under their limit in red.
pub fn efficiency(cells: &[CellEfficiency]) -> Result<String, String> {
    svg((W, 175), |root| {
        let n = cells.len().max(1) as f64;
        let lo = cells.iter().map(|c| c.efficiency.min(c.low_below)).fold(1.0, f64::min) * 100.0;
        let hi = cells.iter().map(|c| c.efficiency).fold(0.0, f64::max).max(0.9) * 100.0;
        let names: Vec<String> = cells.iter().map(|c| c.cell.clone()).collect();
        let mut chart = ChartBuilder::on(root)
            .caption("Last crop current efficiency by refining cell, % (red: under the cell's limit, the line)", (FONT, 14))
            .margin(6)
            .x_label_area_size(24)
            .y_label_area_size(44)
            .build_cartesian_2d(-0.5..n - 0.5, (lo - 2.0).floor()..(hi + 1.0).ceil().min(105.0))
            .map_err(err)?;
        let lab = |x: &f64| label(*x, &names);
        chart.configure_mesh().x_labels(12).x_label_formatter(&lab).y_labels(6).light_line_style(WHITE).draw().map_err(err)?;
        chart
            .draw_series(LineSeries::new(cells.iter().enumerate().map(|(i, c)| (i as f64, c.low_below * 100.0)), INK.stroke_width(1)))
            .map_err(err)?;
        chart
            .draw_series(cells.iter().enumerate().map(|(i, c)| {
                let low = c.efficiency < c.low_below;
                Circle::new((i as f64, c.efficiency * 100.0), if low { 4 } else { 2 }, if low { WARN.filled() } else { LINE.filled() })
            }))
            .map_err(err)?;
        Ok(())
    })
}
