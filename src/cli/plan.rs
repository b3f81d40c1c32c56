//! `tankbook plan`: the anode-change and harvest plan as a day-by-day table,
//! as JSON (schema 1), and as a CSV of the planned jobs; each says the plan is advisory.

use anyhow::{Context, Result};
use std::path::Path;

use super::args::PlanArgs;
use crate::domain::charge::Time;
use crate::domain::plan::{Plan, PlanDay, Reason, UnplacedJob};
use crate::plant::{PlanOptions, Plant};

pub fn run(plant: &Plant, a: PlanArgs, now: Time) -> Result<()> {
    let opts = PlanOptions {
        from: a.from,
        days: a.days,
        crew_cells_per_day: a.crew_cells_per_day,
        harvest_cathodes_per_day: a.harvest_cathodes_per_day,
        anode_stock: a.anode_stock,
        anodes_per_day: a.anodes_per_day,
        moves: a.moves,
    };
    let p = plant.plan(&opts, now)?;
    if let Some(path) = &a.csv {
        let rows = write_csv(path, &p).with_context(|| format!("--csv {}", path.display()))?;
        eprintln!("wrote {rows} planned jobs to {}", path.display());
    }
    if a.json {
        println!("{}", serde_json::to_string_pretty(&p)?);
    } else {
        table(plant, &p)?;
    }
    Ok(())
}

/// One row per planned job: date, kind, cell, circuit, section, the scrap
/// fraction (anode change) or mean kg per cathode (harvest), overdue.
fn write_csv(path: &Path, p: &Plan) -> Result<usize> {
    let mut w = csv::Writer::from_path(path)?;
    w.write_record(["date", "kind", "cell", "circuit", "section", "fraction_or_kg", "overdue"])?;
    let mut rows = 0;
    for d in &p.days {
        let date = d.date.to_string();
        for c in &d.anode_changes {
            let f = c.scrap_fraction.to_string();
            w.write_record([date.as_str(), "anode_change", &c.cell, &c.circuit, &c.section, &f, bool_str(c.overdue)])?;
            rows += 1;
        }
        for h in &d.harvests {
            let kg = h.mass_kg.to_string();
            w.write_record([date.as_str(), "harvest", &h.cell, &h.circuit, &h.section, &kg, bool_str(h.overdue)])?;
            rows += 1;
        }
    }
    w.flush()?;
    Ok(rows)
}

fn bool_str(b: bool) -> &'static str {
    if b { "true" } else { "false" }
}

fn day_line(d: &PlanDay) -> String {
    let crew = match &d.no_anode_work {
        Some(why) => format!("no anode work: {why}"),
        None => {
            let shifts: Vec<String> =
                d.shifts.iter().enumerate().map(|(i, s)| format!("shift {} {}/{}", i + 1, s.load, s.capacity)).collect();
            let by_shift = if shifts.is_empty() { String::new() } else { format!(" ({})", shifts.join(", ")) };
            format!("crew {}/{} cells{by_shift}", d.crew_load, d.crew_capacity)
        }
    };
    format!(
        "{}  {crew}; anodes {} ({:.1} t), scrap {:.1} t; harvest {}/{} cathodes, copper {:.1} t",
        d.date, d.anodes_needed, d.anode_tonnes, d.scrap_tonnes, d.harvest_cathodes, d.harvest_capacity, d.copper_tonnes
    )
}

fn table(plant: &Plant, p: &Plan) -> Result<()> {
    let info = plant.info()?;
    let last = p.days.last().map_or(p.from, |d| d.date);
    println!(
        "plan for {}: {} production days, {} to {} (days start {} {}), as of {}",
        info.name,
        p.days.len(),
        p.from,
        last,
        info.days.day_starts_at.format("%H:%M"),
        info.days.zone,
        plant.show_time(p.as_of)
    );
    println!("CAUTION: {}", p.advisory);
    for d in &p.days {
        println!();
        println!("{}", day_line(d));
        for c in &d.anode_changes {
            let mut notes = Vec::new();
            if c.overdue {
                notes.push("overdue".to_string());
            }
            if c.moved {
                notes.push("moved by hand".to_string());
            }
            if c.cycle > 0 {
                notes.push("next load, assuming the change before on its ideal day".to_string());
            }
            println!(
                "  anode change  {:<8} {:<5} {:<4} scrap {:>5.1} %  {} anodes  ideal {}{}",
                c.cell,
                c.circuit,
                c.section,
                c.scrap_fraction * 100.0,
                c.anodes,
                c.window.ideal,
                if notes.is_empty() { String::new() } else { format!("  ({})", notes.join(", ")) }
            );
        }
        for h in &d.harvests {
            let mut notes = Vec::new();
            if h.overdue {
                notes.push("overdue");
            }
            if h.with_anode_change {
                notes.push("with the anode change");
            }
            println!(
                "  harvest       {:<8} {:<5} {:<4} {:>6.1} kg/cathode  {} cathodes{}",
                h.cell,
                h.circuit,
                h.section,
                h.mass_kg,
                h.cathodes,
                if notes.is_empty() { String::new() } else { format!("  ({})", notes.join(", ")) }
            );
        }
    }
    println!();
    let (later, unplaced): (Vec<&UnplacedJob>, Vec<&UnplacedJob>) = p.unplaced.iter().partition(|u| u.reason == Reason::AfterHorizon);
    if unplaced.is_empty() {
        println!("every job due in the plan is placed");
    } else {
        println!("not placed ({}):", unplaced.len());
        for u in unplaced {
            let kind = if u.kind == "harvest" { "harvest" } else { "anode change" };
            let overdue = if u.overdue { " (overdue)" } else { "" };
            println!("  {kind:<13} {:<8} {}{overdue}", u.cell, u.message);
        }
    }
    if !later.is_empty() {
        println!("anode changes levelled to days after the plan ({}):", later.len());
        for u in later {
            println!("  {:<8} {}", u.cell, u.message);
        }
    }
    if !p.out_of_circuit.is_empty() {
        println!("cut out with no end, nothing planned: {}", p.out_of_circuit.join(" "));
    }
    println!(
        "levelling: anode changes {}, harvests {}",
        if p.exact { "proven optimal" } else { "feasible, not proven optimal" },
        if p.harvests_exact { "proven optimal" } else { "feasible, not proven optimal" }
    );
    println!("CAUTION: {}", p.advisory);
    Ok(())
}
