//! `tankbook report` (the shift handover page) and `tankbook balance` (the
//! copper balance of a period): parse the period, call the plant, print.

use anyhow::{Context, Result};
use std::fmt::Write as _;

use super::args::{BalanceArgs, ReportArgs, ShiftArg};
use super::print::{emit, json};
use crate::domain::balance::Balance;
use crate::domain::charge::Time;
use crate::domain::entry::Field;
use crate::plant::{Plant, ReportPeriod};

pub fn report(plant: &Plant, a: ReportArgs, now: Time) -> Result<()> {
    let which = match (&a.from, &a.to, a.shift) {
        (Some(f), Some(t), _) => {
            let to = plant.parse_time(Field::To, t)?;
            not_ahead(plant, "--to", to, now)?;
            ReportPeriod::Between(plant.parse_time(Field::From, f)?, to)
        }
        (_, _, Some(ShiftArg::Last)) => ReportPeriod::LastShift,
        _ => ReportPeriod::CurrentShift,
    };
    let w = plant.write_report(which, &a.out, now).with_context(|| format!("writing the report to {}", a.out.display()))?;
    emit(&format!(
        "wrote {} ({}, {} to {}, {} bytes): open it in a browser to read or print it\n",
        w.path.display(),
        w.title,
        plant.show_time(w.from),
        plant.show_time(w.to),
        w.bytes
    ))
}

/// A report or a balance covers what has happened: its end may not lie ahead of now.
fn not_ahead(plant: &Plant, field: &str, t: Time, now: Time) -> Result<()> {
    if t > now {
        anyhow::bail!(
            "{field}: {} is after now ({}): a report or a balance covers what has happened",
            plant.show_time(t),
            plant.show_time(now)
        );
    }
    Ok(())
}

pub fn balance(plant: &Plant, a: BalanceArgs, now: Time) -> Result<()> {
    let (month, _) = plant.month_so_far(now)?;
    let from = match &a.from {
        Some(s) => plant.parse_time(Field::From, s)?,
        None => month,
    };
    let to = match &a.to {
        Some(s) => plant.parse_time(Field::To, s)?,
        None => now,
    };
    not_ahead(plant, "--to", to, now)?;
    let b = plant.balance(from, to)?;
    if a.json { json(&b) } else { emit(&balance_table(plant, &b)) }
}

fn balance_table(plant: &Plant, b: &Balance) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "copper balance from {} to {}, tonnes", plant.show_time(b.from), plant.show_time(b.to));
    let head = |s: &mut String, cols: [&str; 10]| {
        let [a, b, c, d, e, f, g, h, i, j] = cols;
        let _ = writeln!(s, "{a:<8} {b:>9} {c:>9} {d:>9} {e:>10} {f:>10} {g:>9} {h:>9} {i:>10} {j:>10}");
    };
    head(&mut s, ["circuit", "in", "cathodes", "scrap", "cells at", "cells at", "residual", "Faraday", "liberators", "electrolyte"]);
    head(&mut s, ["", "", "out", "out", "start", "end", "", "gain", "took", "net"]);
    for c in b.circuits.iter().chain([&b.plant]) {
        let _ = writeln!(
            s,
            "{:<8} {:>9.3} {:>9.3} {:>9.3} {:>10.3} {:>10.3} {:>9.3} {:>9.3} {:>10.3} {:>10.3}",
            c.circuit,
            c.copper_in_t,
            c.cathode_out_t,
            c.scrap_out_t,
            c.in_cells_start_t,
            c.in_cells_end_t,
            c.residual_t,
            c.faraday_electrolyte_t,
            c.liberator_taken_t,
            c.electrolyte_net_t
        );
    }
    s.push_str("residual = in − out − (cells at end − cells at start): copper gone into the electrolyte, lost or mis-weighed;\n");
    s.push_str("Faraday gain = anode copper dissolved − cathode copper deposited, from the charge: a residual far from it points at the weighings.\n");
    s
}
