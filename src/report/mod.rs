//! The printable shift handover: one self-contained HTML page (inline CSS, charts
//! as inline SVG, no network resources) rendered from [`ReportData`].
//!
//! This module only renders: the plant gathers the figures (`Plant::report`) and
//! hands them over, so the page shows what the screens show. The template engine
//! (maud) escapes every value it prints, so a plant or cell name never reaches the
//! page as live HTML; charts come from plotters' SVG backend, which escapes its text.

mod charts;
mod page;

use chrono::NaiveDate;
use serde::Serialize;

use crate::domain::balance::Balance;
use crate::domain::charge::{Point, Span, Time};
use crate::domain::forecast::Warning;
use crate::domain::patrol::PatrolCell;
use crate::domain::plant_time::PlantZone;

pub use page::render;

/// A harvest of the period, against what the forecast expected of it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HarvestLine {
    pub event: i64,
    pub cell: String,
    pub section: String,
    pub at: Time,
    pub by: String,
    pub kg: f64,
    /// Weighed / (ECE · crop charge).
    pub efficiency: Option<f64>,
    /// The crop's copper the forecast expected just before the harvest.
    pub forecast_kg: Option<f64>,
    pub forced: bool,
    pub voided: bool,
}

/// Anodes pulled in the period: the scrap weighed against the forecast.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PullLine {
    pub event: i64,
    pub cell: String,
    pub at: Time,
    pub by: String,
    pub scrap_kg: f64,
    /// Scrap over the load's mass at set.
    pub scrap_fraction: Option<f64>,
    /// The remaining fraction the forecast expected just before the pull.
    pub forecast_fraction: Option<f64>,
    /// The layout's scrap target and acceptable range (lower, target, upper).
    pub target: (f64, f64, f64),
    /// New anodes set in the same cell at the same time: count × mean kg.
    pub new_anodes: Option<(u32, f64)>,
    pub forced: bool,
    pub voided: bool,
}

/// Any other entry of the period, in words.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EntryLine {
    pub event: i64,
    pub kind: &'static str,
    /// Cell or circuit.
    pub place: String,
    pub at: Time,
    pub by: String,
    pub what: String,
    pub forced: bool,
    pub voided: bool,
}

/// Cell voltages read in the period, summed up (a shift reads many).
#[derive(Debug, Clone, PartialEq, Default, Serialize)]
pub struct VoltageSummary {
    pub readings: usize,
    /// Lowest and highest reading of the refining cells, V.
    pub refining_range: Option<(f64, f64)>,
    /// Readings outside the cell's plausible range: (cell, time, volts).
    pub outside: Vec<(String, Time, f64)>,
}

/// A circuit's current over the period.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CircuitPeriod {
    pub name: String,
    pub max_amps: f64,
    pub points: Vec<Point>,
    pub outages: Vec<Span>,
    pub gaps: Vec<Span>,
    /// Charge in the period: measured and estimated after the last reading, A·h.
    pub charge_ah: (f64, f64),
}

/// Copper weighed per section in the period.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SectionCopper {
    pub circuit: String,
    pub section: String,
    pub harvested_kg: f64,
}

/// A cell's last measured crop efficiency.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CellEfficiency {
    pub cell: String,
    pub section: String,
    pub efficiency: f64,
    pub low_below: f64,
}

/// One production day of the crew plan.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CrewDay {
    pub date: NaiveDate,
    pub load: u32,
    pub capacity: u32,
    pub harvests: usize,
}

/// Work coming due.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DueLine {
    pub cell: String,
    /// `harvest` or `anode_change`.
    pub kind: &'static str,
    pub at: Time,
    pub overdue: bool,
}

/// A window of the outlook: what falls due in it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DueWindow {
    pub title: String,
    pub from: Time,
    pub to: Time,
    pub due: Vec<DueLine>,
}

/// Everything the handover page shows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReportData {
    pub plant: String,
    #[serde(skip)]
    pub zone: PlantZone,
    /// What the period is, in words ("Shift 2 of 2, production day 2026-03-02").
    pub title: String,
    pub from: Time,
    pub to: Time,
    /// When the report was made.
    pub as_of: Time,
    pub logged_by: Vec<String>,
    pub harvests: Vec<HarvestLine>,
    pub pulls: Vec<PullLine>,
    /// Anodes set other than with a pull (into an empty cell).
    pub others: Vec<EntryLine>,
    pub voltages: VoltageSummary,
    pub circuits: Vec<CircuitPeriod>,
    pub harvested_by_section: Vec<SectionCopper>,
    pub efficiencies: Vec<CellEfficiency>,
    /// The crew plan's coming days, or why there is none.
    pub crew: Result<Vec<CrewDay>, String>,
    pub crew_shifts_per_day: u32,
    pub outlook: Vec<DueWindow>,
    /// Cells whose anodes are thinner than their limit: (cell, mm).
    pub thin_anodes: Vec<(String, f64)>,
    /// The cells to check for shorts at the end of the period, most suspect
    /// first (the patrol list's cells at or above its suspect score).
    pub patrol: Vec<PatrolCell>,
    /// Copper plated in the refining cells in the period (Faraday), t.
    pub plated_t: f64,
    /// Cathodes weighed in the period (refining and liberator), t.
    pub harvested_t: f64,
    /// Energy per tonne of copper plated, from the cells' last voltages, kWh/t.
    pub energy_kwh_per_t: Option<f64>,
    pub warnings: Vec<Warning>,
    pub balance: Balance,
    /// The caution printed in the header.
    pub advisory: &'static str,
}

/// The caution the report carries in its header (DOMAIN.md, "Cautions the tool must carry").
pub const ADVISORY: &str = "Advisory: forecasts, due times and the crew plan are predicted from the logged current and the \
layout's rules; they do not replace the foreman's judgement. Site procedures (lock-out, crane lifts, acid handling), local codes \
and qualified engineers decide what is done and how.";
