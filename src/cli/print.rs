//! Readable tables for the headless commands (the JSON goes out as serde writes it).

use anyhow::Result;

use crate::domain::charge::Time;
use crate::domain::forecast::Forecast;
use crate::plant::Plant;

fn due(plant: &Plant, t: Option<Time>, as_of: Time) -> String {
    match t {
        None => "-".to_string(),
        Some(t) => {
            let d = (t - as_of).num_minutes() as f64 / 1440.0;
            format!("{} ({d:+.1} d)", plant.show_time(t))
        }
    }
}

pub fn forecast(plant: &Plant, f: &Forecast) {
    println!("forecast as of {} ({})", plant.show_time(f.as_of), f.as_of.to_rfc3339());
    println!(
        "{:<7} {:<5} {:<4} {:>5} {:>6} {:<26} {:>6} {:<26} {:>5} {:>5}  notes",
        "cell", "circ", "sect", "anode", "mm", "pull due", "kg/cth", "harvest due", "η use", "η last"
    );
    for c in &f.cells {
        let (frac, mm, pull) = match &c.anode {
            Some(a) => (format!("{:.0}%", a.remaining_fraction * 100.0), format!("{:.1}", a.thickness_mm), due(plant, a.pull_due, f.as_of)),
            None => ("-".into(), "-".into(), "-".into()),
        };
        let (kg, harvest) = match &c.cathode {
            Some(k) => (format!("{:.1}", k.mass_kg), due(plant, k.harvest_due, f.as_of)),
            None => ("-".into(), "-".into()),
        };
        let mut notes: Vec<&str> = c.warnings.iter().map(|w| w.code).collect();
        if !c.in_circuit {
            notes.insert(0, "cut_out");
        }
        println!(
            "{:<7} {:<5} {:<4} {:>5} {:>6} {:<26} {:>6} {:<26} {:>5.1} {:>5}  {}",
            c.cell,
            c.circuit,
            c.section,
            frac,
            mm,
            pull,
            kg,
            harvest,
            c.cathode_efficiency * 100.0,
            c.last_crop_efficiency.map_or("-".into(), |e| format!("{:.1}", e * 100.0)),
            notes.join(",")
        );
    }
    for w in &f.warnings {
        println!("warning [{}]: {}", w.code, w.message);
    }
}

pub fn events(plant: &Plant, cell: Option<&str>, limit: usize, json: bool) -> Result<()> {
    let ev = plant.recent_events(cell, limit)?;
    if json {
        println!("{}", serde_json::to_string_pretty(&serde_json::json!({ "schema": 1, "events": ev }))?);
        return Ok(());
    }
    println!("{:>6} {:<9} {:<8} {:<17} {:<5} what", "entry", "kind", "where", "at", "by");
    for e in ev {
        let place = e.cell.clone().or(e.circuit.clone()).unwrap_or_default();
        let what = match (e.count, e.kg, e.amps, e.volts, e.end, e.voids) {
            (_, _, _, _, _, Some(v)) => format!("undoes entry {v}"),
            (Some(n), Some(kg), ..) => format!("{n} × {kg} kg"),
            (None, Some(kg), ..) => format!("{kg} kg"),
            (Some(n), None, ..) => format!("{n}"),
            (_, _, Some(a), ..) => format!("{a} A"),
            (_, _, _, Some(v), ..) => format!("{v} V"),
            (_, _, _, _, Some(end), _) => format!("until {}", plant.show_time(end)),
            _ => String::new(),
        };
        let mut flags = String::new();
        if e.voided {
            flags.push_str(" [undone]");
        }
        if e.forced {
            flags.push_str(" [forced]");
        }
        println!("{:>6} {:<9} {:<8} {:<17} {:<5} {what}{flags}", e.id, e.kind.name(), place, plant.show_time(e.at), e.by);
    }
    Ok(())
}

/// What a first start on an empty database says instead of an empty screen.
pub fn empty(plant: &Plant) -> Result<()> {
    println!("{} holds no plant yet.", plant.path().display());
    println!("Load your plant's layout:   tankbook layout load FILE.toml   (format: see README, fixtures/plant_check.toml)");
    println!("or try the invented demo:   tankbook demo");
    Ok(())
}
