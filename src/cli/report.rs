//! `tankbook report` (the shift handover page) and `tankbook balance` (the
//! copper balance of a period): parse the period, call the plant, print.

use anyhow::{Context, Result};

use super::args::{BalanceArgs, ReportArgs, ShiftArg};
use crate::domain::balance::{Balance, CopperBalance};
use crate::domain::charge::Time;
use crate::plant::{Plant, ReportPeriod};

pub fn report(plant: &Plant, a: ReportArgs, now: Time) -> Result<()> {
    let which = match (&a.from, &a.to, a.shift) {
        (Some(f), Some(t), _) => ReportPeriod::Between(plant.parse_time("--from", f)?, plant.parse_time("--to", t)?),
        (_, _, Some(ShiftArg::Last)) => ReportPeriod::LastShift,
        _ => ReportPeriod::CurrentShift,
    };
    let w = plant.write_report(which, &a.out, now).with_context(|| format!("writing the report to {}", a.out.display()))?;
    println!(
        "wrote {} ({}, {} to {}, {} bytes): open it in a browser to read or print it",
        w.path.display(),
        w.title,
        plant.show_time(w.from),
        plant.show_time(w.to),
        w.bytes
    );
    Ok(())
}

pub fn balance(plant: &Plant, a: BalanceArgs, now: Time) -> Result<()> {
    let (month, _) = plant.month_so_far(now)?;
    let from = match &a.from {
        Some(s) => plant.parse_time("--from", s)?,
        None => month,
    };
    let to = match &a.to {
        Some(s) => plant.parse_time("--to", s)?,
        None => now,
    };
    let b = plant.balance(from, to)?;
    if a.json {
        println!("{}", serde_json::to_string_pretty(&b)?);
    } else {
        print_balance(plant, &b);
    }
    Ok(())
}

fn print_balance(plant: &Plant, b: &Balance) {
    println!("copper balance from {} to {}, tonnes", plant.show_time(b.from), plant.show_time(b.to));
    println!(
        "{:<8} {:>9} {:>9} {:>9} {:>10} {:>10} {:>9} {:>9} {:>10} {:>10}",
        "circuit", "in", "cathodes", "scrap", "cells at", "cells at", "residual", "Faraday", "liberators", "electrolyte"
    );
    println!(
        "{:<8} {:>9} {:>9} {:>9} {:>10} {:>10} {:>9} {:>9} {:>10} {:>10}",
        "", "", "out", "out", "start", "end", "", "gain", "took", "net"
    );
    let row = |c: &CopperBalance| {
        println!(
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
        )
    };
    b.circuits.iter().for_each(row);
    row(&b.plant);
    println!("residual = in − out − (cells at end − cells at start): copper gone into the electrolyte, lost or mis-weighed;");
    println!(
        "Faraday gain = anode copper dissolved − cathode copper deposited, from the charge: a residual far from it points at the weighings."
    );
}
