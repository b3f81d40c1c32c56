//! Readable tables for the headless commands (the JSON goes out as serde writes it).

use anyhow::Result;
use std::io::Write;

use crate::domain::charge::Time;
use crate::domain::forecast::Forecast;
use crate::domain::layout::AnodeKind;
use crate::domain::plant_time::{is_old, relative};
use crate::plant::Plant;

/// A due time on the plant clock and how far away it is: `2026-11-23 15:24 (in 3.4 d)`.
fn due(plant: &Plant, t: Option<Time>, as_of: Time) -> String {
    match t {
        None => "-".to_string(),
        Some(t) => format!("{} ({})", plant.show_time(t), relative(t, as_of)),
    }
}

/// Writes to stdout at once; a reader that stops early (`| head`) is not an error.
pub(super) fn emit(text: &str) -> anyhow::Result<()> {
    match std::io::stdout().lock().write_all(text.as_bytes()) {
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        r => Ok(r?),
    }
}

/// A command's JSON (`--json`), pretty-printed to stdout as it is serialised
/// (the same bytes as `to_string_pretty`, without holding the whole text: a
/// year's back-test is a hundred megabytes of it); a closed pipe is no error.
pub(super) fn json(value: &impl serde::Serialize) -> anyhow::Result<()> {
    use std::io::ErrorKind::BrokenPipe;
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    match serde_json::to_writer_pretty(&mut out, value) {
        Err(e) if e.io_error_kind() == Some(BrokenPipe) => return Ok(()),
        r => r?,
    }
    match out.write_all(b"\n").and_then(|()| out.flush()) {
        Err(e) if e.kind() == BrokenPipe => Ok(()),
        r => Ok(r?),
    }
}

/// The forecast table. Times are on the plant clock, whose zone the first line names.
/// A closed pipe (`| head`) ends the output quietly.
pub fn forecast(plant: &Plant, f: &Forecast) -> Result<()> {
    match write_forecast(&mut std::io::stdout().lock(), plant, f) {
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        r => Ok(r?),
    }
}

fn write_forecast(out: &mut impl Write, plant: &Plant, f: &Forecast) -> std::io::Result<()> {
    let zone = plant.info().map(|i| i.days.zone.to_string()).unwrap_or_else(|_| "UTC".into());
    writeln!(out, "forecast as of {} (plant time, {zone}; every time below is on this clock)", plant.show_time(f.as_of))?;
    writeln!(
        out,
        "{:<7} {:<5} {:<4} {:>5} {:>6} {:<30} {:>6} {:<30} {:>6} {:>6}  notes",
        "cell", "circ", "sect", "anode", "mm", "pull due", "kg/cth", "harvest due", "η used", "η last"
    )?;
    for c in &f.cells {
        let (frac, mm, pull) = match &c.anode {
            // inert anodes are not consumed: no fraction, thickness or pull
            Some(_) if c.anode_kind == AnodeKind::Inert => ("inert".into(), "-".into(), "-".into()),
            Some(a) => (
                format!("{:.0}%", a.remaining_fraction * 100.0),
                a.thickness_mm.map_or("-".into(), |mm| format!("{mm:.1}")),
                due(plant, a.pull_due, f.as_of),
            ),
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
        writeln!(
            out,
            "{:<7} {:<5} {:<4} {:>5} {:>6} {:<30} {:>6} {:<30} {:>6} {:>6}  {}",
            c.cell,
            c.circuit,
            c.section,
            frac,
            mm,
            pull,
            kg,
            harvest,
            format!("{:.1}%", c.cathode_efficiency * 100.0),
            c.last_crop_efficiency.map_or("-".into(), |e| format!("{:.1}%", e * 100.0)),
            notes.join(",")
        )?;
    }
    writeln!(out, "η used: the cathode current efficiency the forecast runs on; η last: measured on the cell's last weighed crop")?;
    let ended = |w: &&crate::domain::forecast::Warning| w.to.or(w.from).filter(|_| w.code != "stale_readings");
    let (old, news): (Vec<_>, Vec<_>) = f.warnings.iter().partition(|w| ended(w).is_some_and(|t| is_old(t, f.as_of)));
    for w in news {
        writeln!(out, "warning [{}]: {}", w.code, w.message)?;
    }
    if let Some(last) = old.iter().filter_map(ended).max() {
        writeln!(
            out,
            "and {} older {}, resolved (the latest ended {}): `tankbook forecast --json` lists them",
            old.len(),
            if old.len() == 1 { "warning" } else { "warnings" },
            plant.show_time(last)
        )?;
    }
    Ok(())
}

pub fn events(plant: &Plant, cell: Option<&str>, limit: usize, json: bool) -> Result<()> {
    if json {
        return events_json(plant, cell, limit);
    }
    println!("{:>6} {:<9} {:<8} {:<17} {:<5} what", "entry", "kind", "where", "at", "by");
    plant.each_recent_event(cell, limit, |e| -> Result<()> {
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
        Ok(())
    })
}

/// `events --json`, written entry by entry as the rows are read: the same bytes
/// as pretty-printing `{"schema": 1, "events": [...]}` whole (keys sorted, as
/// serde_json's map sorts them), without holding every entry.
fn events_json(plant: &Plant, cell: Option<&str>, limit: usize) -> Result<()> {
    use std::io::ErrorKind::BrokenPipe;
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    let mut first = true;
    let r = plant.each_recent_event(cell, limit, |e| -> Result<()> {
        let text = serde_json::to_string_pretty(&serde_json::to_value(&e)?)?;
        out.write_all(if first { b"{\n  \"events\": [\n" } else { b",\n" })?;
        first = false;
        for (i, line) in text.lines().enumerate() {
            if i > 0 {
                out.write_all(b"\n")?;
            }
            out.write_all(b"    ")?;
            out.write_all(line.as_bytes())?;
        }
        Ok(())
    });
    let r = r.and_then(|()| {
        out.write_all(if first { b"{\n  \"events\": [],\n" } else { b"\n  ],\n" })?;
        out.write_all(b"  \"schema\": 1\n}\n")?;
        Ok(out.flush()?)
    });
    match r {
        Err(e) if e.downcast_ref::<std::io::Error>().is_some_and(|e| e.kind() == BrokenPipe) => Ok(()),
        r => r,
    }
}

/// What a first start on an empty database says instead of an empty screen.
pub fn empty(plant: &Plant) -> Result<()> {
    println!("{} holds no plant yet.", plant.path().display());
    println!("Load your plant's layout:   tankbook layout load FILE.toml   (format: see README, fixtures/plant_check.toml)");
    println!("or try the invented demo:   tankbook demo");
    Ok(())
}
