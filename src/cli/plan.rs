//! `tankbook plan`: the anode-change and harvest plan as a day-by-day table,
//! as JSON (schema 1), and as a CSV of the planned jobs; each says the plan is advisory.

use anyhow::{Context, Result};
use std::path::Path;

use super::args::PlanArgs;
use crate::domain::charge::Time;
use crate::domain::plan::{Bound, JobKind, Plan, PlanDay, Reason, UnplacedJob};
use crate::domain::plan_diff::PlanDiff;
use crate::plant::{Opts, PlanOptions, Plant};

pub fn run(plant: &mut Plant, a: PlanArgs, now: Time) -> Result<()> {
    let opts = PlanOptions {
        from: a.from,
        days: a.days,
        crew_cells_per_day: a.crew_cells_per_day,
        harvest_cathodes_per_day: a.harvest_cathodes_per_day,
        anode_stock: a.anode_stock,
        anodes_per_day: a.anodes_per_day,
        moves: a.moves,
        smooth_harvests: !a.no_smoothing,
    };
    let record = Opts { by: a.by.clone().unwrap_or_default(), force: false, now };
    let p = if a.keep {
        let (entries, p) = plant.keep_moves(&opts, &record)?;
        let list: Vec<String> = entries.iter().map(i64::to_string).collect();
        eprintln!("kept {} move(s) as entries {} (undo takes one back)", entries.len(), list.join(", "));
        p
    } else {
        plant.plan(&opts, now)?
    };
    let mut p = p;
    if a.approve {
        let id = plant.approve_plan(&p, &record)?;
        eprintln!("recorded this plan as approved plan {id} by {}", record.by.trim().to_uppercase());
        p.since_approved = plant.changes_since_approved(&p)?;
    }
    if let Some(path) = &a.csv {
        let rows = write_csv(path, &p).with_context(|| format!("--csv {}", path.display()))?;
        eprintln!("wrote {rows} planned jobs to {}", path.display());
    }
    if a.json {
        super::print::json(&p)?;
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
    let stock = match (d.anode_stock, d.anodes_delivered) {
        (Some(s), Some(x)) => format!(", deliver {x}, stock {s} left"),
        _ => String::new(),
    };
    let crane = match (d.crane_lifts, d.crane_capacity) {
        (Some(l), Some(c)) => format!("; crane {l}/{c} lifts"),
        _ => String::new(),
    };
    let bound = match d.bound_by {
        Some(b) => format!("; held back by {}", bound_name(b)),
        None => String::new(),
    };
    format!(
        "{}  {crew}; anodes {} ({:.1} t){stock}, scrap {:.1} t; harvest {}/{} cathodes, copper {:.1} t{crane}{bound}",
        d.date, d.anodes_needed, d.anode_tonnes, d.scrap_tonnes, d.harvest_cathodes, d.harvest_capacity, d.copper_tonnes
    )
}

fn bound_name(b: Bound) -> &'static str {
    match b {
        Bound::Crew => "the crew",
        Bound::Stripping => "the stripping machine",
        Bound::Anodes => "the anode supply",
        Bound::Crane => "the crane lifts",
    }
}

/// The changes since the last approved plan, for the morning meeting.
fn changes_since(plant: &Plant, x: &PlanDiff) {
    println!("since the plan approved by {} at {} ({} to {}):", x.by, plant.show_time(x.approved_at), x.approved_from, x.approved_to);
    if x.is_empty() {
        println!("  no changes");
    }
    let kind = |k: JobKind| if k == JobKind::Harvest { "harvest" } else { "anode change" };
    for m in &x.moved {
        println!("  moved    {:<13} {:<8} {} -> {}", kind(m.kind), m.cell, m.from, m.to);
    }
    for j in &x.added {
        println!("  added    {:<13} {:<8} {}", kind(j.kind), j.cell, j.date);
    }
    for j in &x.dropped {
        println!("  dropped  {:<13} {:<8} {}", kind(j.kind), j.cell, j.date);
    }
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
    if let Some(x) = &p.since_approved {
        println!();
        changes_since(plant, x);
    }
    for d in &p.days {
        println!();
        println!("{}", day_line(d));
        for o in &d.outages {
            let work = match o.anode_work {
                crate::domain::layout::OutageWork::Forbidden => "no anode work in its cells",
                crate::domain::layout::OutageWork::Preferred => "anode work preferred in its cells",
            };
            println!("  outage on {} from {} to {}: {work}", o.circuit, plant.show_time(o.from), plant.show_time(o.to));
        }
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
            if h.light {
                notes.push("light");
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
            let kind = if u.kind == JobKind::Harvest { "harvest" } else { "anode change" };
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
    for k in &p.kept_moves {
        let state = if k.applied { "applied" } else { "after this plan" };
        println!("kept move {} to {} by {} (entry {}): {state}", k.cell, k.date, k.by, k.entry);
    }
    for k in &p.dropped_moves {
        println!("kept move {} to {} by {} (entry {}) dropped: {}", k.cell, k.date, k.by, k.entry, k.reason);
    }
    for w in &p.warnings {
        println!("warning {} {}: {}", w.cell, w.date, w.message);
    }
    if !p.out_of_circuit.is_empty() {
        println!("cut out with no end, nothing planned: {}", p.out_of_circuit.join(" "));
    }
    println!(
        "levelling: anode changes {}, harvests {}{}",
        if p.exact { "proven optimal" } else { "feasible, not proven optimal" },
        if p.harvests_exact { "proven optimal" } else { "feasible, not proven optimal" },
        if p.harvests_smoothed > 0 {
            format!(" ({} moved inside their windows to even out the stripping machine)", p.harvests_smoothed)
        } else {
            String::new()
        }
    );
    println!("CAUTION: {}", p.advisory);
    Ok(())
}
