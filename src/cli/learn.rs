//! Printing what the plant learns: the patrol list and the back-test.

use anyhow::Result;
use std::fmt::Write as _;

use super::args::{BacktestArgs, PatrolArgs};
use super::print::{emit, json};
use crate::domain::charge::Time;
use crate::domain::entry::Field;
use crate::plant::Plant;

pub fn patrol(plant: &Plant, a: &PatrolArgs, now: Time) -> Result<()> {
    let p = plant.patrol(now)?;
    if a.json {
        return json(&p);
    }
    let mut out = String::new();
    writeln!(out, "cells to check for shorts as of {}, most suspect first", plant.show_time(p.as_of))?;
    writeln!(
        out,
        "{:<7} {:<5} {:<4} {:>6} {:>7} {:>8} {:>7} {:>6} {:>6}  reasons",
        "cell", "circ", "sect", "score", "volts", "median", "dev mV", "η %", "shorts"
    )?;
    for c in &p.cells {
        writeln!(
            out,
            "{:<7} {:<5} {:<4} {:>6.1} {:>7.3} {:>8.3} {:>7.0} {:>6.1} {:>6}  {}",
            c.cell,
            c.circuit,
            c.section,
            c.score,
            c.voltage,
            c.section_median_v,
            c.deviation_mv,
            c.cathode_efficiency * 100.0,
            c.shorts_this_crop,
            c.reasons.join("; ")
        )?;
    }
    if p.cells.is_empty() {
        writeln!(out, "no in-circuit cell has a voltage reading in the last 24 h")?;
    }
    emit(&out)
}

pub fn backtest(plant: &Plant, a: &BacktestArgs, now: Time) -> Result<()> {
    let from = a.from.as_deref().map(|s| plant.parse_time(Field::From, s)).transpose()?;
    let to = match &a.to {
        Some(s) => plant.parse_time(Field::To, s)?,
        None => now,
    };
    let b = plant.backtest(from, to, a.cell.as_deref())?;
    if a.json {
        return json(&b);
    }
    let mut out = String::new();
    let f = |x: Option<f64>, unit: &str| x.map_or("-".to_string(), |v| format!("{v:.2}{unit}"));
    let s = &b.summary;
    writeln!(
        out,
        "back-test of the weighings from {} to {} (predictions ex ante, on each crop's measured charge)",
        plant.show_time(b.from),
        plant.show_time(b.to)
    )?;
    writeln!(
        out,
        "crops: {}  mass error (MAPE) learnt {}  fixed {}  bias {}  harvest time error {}",
        s.crops,
        f(s.mass_mape_pct, " %"),
        f(s.fixed_mass_mape_pct, " %"),
        f(s.mass_bias_pct, " %"),
        f(s.harvest_time_mae_h, " h")
    )?;
    writeln!(out, "scrap: {}  error learnt {}  fixed {}", s.scrap, f(s.scrap_mae_pp, " points"), f(s.fixed_scrap_mae_pp, " points"))?;
    writeln!(
        out,
        "{:<7} {:<17} {:>9} {:>9} {:>9} {:>7} {:>7} {:<7}",
        "cell", "harvested", "weighed", "learnt", "fixed", "err %", "fix %", "source"
    )?;
    for r in &b.crops {
        writeln!(
            out,
            "{:<7} {:<17} {:>9.0} {:>9.0} {:>9.0} {:>7.2} {:>7.2} {:<7}",
            r.cell,
            plant.show_time(r.harvested_at),
            r.weighed_kg,
            r.predicted_kg,
            r.fixed_kg,
            r.error_pct,
            r.fixed_error_pct,
            r.cathode_efficiency_source.name()
        )?;
    }
    emit(&out)
}
