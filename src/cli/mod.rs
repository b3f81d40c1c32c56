//! Headless commands: parse the command line, call the plant, print the result.
//! Exit codes: 0 done, 2 a command-line usage error, 1 anything rejected or failed.

mod args;
mod plan;
mod print;

use anyhow::{Context, Result, anyhow};
use chrono::Utc;
use clap::Parser;
use std::path::PathBuf;
use std::process::ExitCode;

pub use args::{Cli, Command};
use args::{ImportCmd, LayoutCmd, LogCmd, Who};

use crate::domain::charge::Time;
use crate::domain::entry::Entry;
use crate::plant::{Opts, Plant};

/// The clock: `TANKBOOK_NOW` (RFC 3339) when set, for demos and tests; else the system clock.
pub fn now() -> Result<Time> {
    match std::env::var("TANKBOOK_NOW") {
        Ok(s) if !s.trim().is_empty() => Ok(chrono::DateTime::parse_from_rfc3339(s.trim())
            .with_context(|| format!("TANKBOOK_NOW='{s}' is not an RFC 3339 time"))?
            .to_utc()),
        _ => Ok(Utc::now()),
    }
}

/// The plant database when `--db` is not given.
pub fn default_db() -> Result<PathBuf> {
    let dirs = directories::ProjectDirs::from("", "", "tankbook")
        .ok_or_else(|| anyhow!("no home folder to keep the database in: give --db PATH"))?;
    Ok(dirs.data_dir().join("plant.db"))
}

pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    match run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("tankbook: {e:#}");
            ExitCode::from(1)
        }
    }
}

fn open(db: &Option<PathBuf>) -> Result<Plant> {
    let path = match db {
        Some(p) => p.clone(),
        None => default_db()?,
    };
    Plant::open(&path).with_context(|| format!("opening {}", path.display()))
}

pub fn run(cli: Cli) -> Result<()> {
    let now = now()?;
    if let Some(Command::Demo(a)) = &cli.command {
        return demo(&cli.db, a, now);
    }
    let Some(command) = cli.command else {
        let plant = open(&cli.db)?;
        return screens(plant);
    };
    let mut plant = open(&cli.db)?;
    match command {
        Command::Layout(LayoutCmd::Load { file }) => {
            let s = plant.load_layout_file(&file, now)?;
            println!(
                "loaded {}: {} circuits, {} sections, {} cells ({} new, {} with changed parameters{})",
                file.display(),
                s.circuits,
                s.sections,
                s.cells,
                s.new_cells,
                s.params_changed,
                if s.retired_cells.is_empty() { String::new() } else { format!(", retired: {}", s.retired_cells.join(" ")) }
            );
        }
        Command::Import(ImportCmd::Current { file }) => {
            let s = plant.import_current_file(&file, now)?;
            let span = match (s.first, s.last) {
                (Some(a), Some(b)) => format!(" from {} to {}", plant.show_time(a), plant.show_time(b)),
                _ => String::new(),
            };
            println!("imported {}: {} readings added{span}, {} identical rows skipped", file.display(), s.added, s.skipped);
        }
        Command::Log(cmd) => {
            let (entry, who) = entry(&plant, cmd)?;
            let opts = Opts { by: who.by, force: who.force, now };
            let r = plant.record(&entry, &opts)?;
            let what = entry.kind().name();
            let whom = entry.cell().map(|c| format!(" for {c}")).unwrap_or_default();
            println!("recorded {what}{whom} at {} as entry {}", plant.show_time(entry.at()), r.event);
            for q in r.forced_past {
                println!("  accepted with --force: {q}");
            }
        }
        Command::Undo(a) => {
            let e = plant.undo(a.event, &Opts { by: a.by, force: false, now })?;
            let whom = e.cell.clone().or(e.circuit.clone()).unwrap_or_default();
            println!("undid entry {} ({} {whom} at {}); the undo is recorded in the event log", e.id, e.kind.name(), plant.show_time(e.at));
        }
        Command::Events(a) => print::events(&plant, a.cell.as_deref(), a.limit, a.json)?,
        Command::Forecast(a) => {
            let as_of = match &a.at {
                Some(s) => plant.parse_time("--at", s)?,
                None => now,
            };
            let f = plant.forecast(as_of, a.cell.as_deref())?;
            if a.json {
                println!("{}", serde_json::to_string_pretty(&f)?);
            } else {
                print::forecast(&plant, &f);
            }
        }
        Command::Plan(a) => plan::run(&mut plant, a, now)?,
        Command::Check(a) => {
            let r = plant.check()?;
            if a.json {
                println!("{}", serde_json::to_string_pretty(&r)?);
            } else {
                println!("{} cells, {} entries, {} readings", r.cells, r.events, r.readings);
                for p in &r.problems {
                    println!("problem: {p}");
                }
            }
            if !r.problems.is_empty() {
                return Err(anyhow!("{} problems found in {}", r.problems.len(), plant.path().display()));
            }
            if !a.json {
                println!("ok: {}", plant.path().display());
            }
        }
        Command::Demo(_) => unreachable!("handled above"),
        Command::Backup(a) => {
            plant.backup(&a.dest)?;
            println!("backed up {} to {} (integrity checked)", plant.path().display(), a.dest.display());
        }
    }
    Ok(())
}

/// `tankbook demo`: (re)writes the demo database, then shows it.
fn demo(db: &Option<PathBuf>, a: &args::DemoArgs, now: Time) -> Result<()> {
    let path = match db {
        Some(p) => p.clone(),
        None => default_db()?.with_file_name("demo.db"),
    };
    if path.exists() {
        let existing = Plant::open(&path).with_context(|| format!("opening {}", path.display()))?;
        crate::demo::check_target(&existing)?;
        drop(existing);
        eprintln!("replacing the demo database at {}", path.display());
        for suffix in ["", "-wal", "-shm"] {
            let f = PathBuf::from(format!("{}{suffix}", path.display()));
            if f.exists() {
                std::fs::remove_file(&f).with_context(|| format!("removing {}", f.display()))?;
            }
        }
    }
    let mut plant = Plant::open(&path).with_context(|| format!("creating {}", path.display()))?;
    let spec = crate::demo::DemoSpec { cells: a.cells as usize, days: a.days, seed: a.seed };
    let s = crate::demo::build(&mut plant, &spec, now)?;
    eprintln!(
        "wrote the demo plant to {}: {} circuits, {} cells, {} readings and {} entries from {} to {}",
        path.display(),
        s.circuits,
        s.cells,
        s.readings,
        s.entries,
        plant.show_time(s.from),
        plant.show_time(s.to)
    );
    if a.no_tui {
        return Ok(());
    }
    screens(plant)
}

/// The clock the screens read at each reload (TANKBOOK_NOW when set).
fn clock() -> Time {
    now().unwrap_or_else(|_| Utc::now())
}

/// Opens the screens, or says how to start when the database holds no plant.
fn screens(plant: Plant) -> Result<()> {
    if !plant.has_layout()? {
        return print::empty(&plant);
    }
    crate::tui::run(plant, clock)
}

fn entry(plant: &Plant, cmd: LogCmd) -> Result<(Entry, Who)> {
    let t = |field: &str, s: &str| plant.parse_time(field, s);
    Ok(match cmd {
        LogCmd::Anodes { cell, at, count, mean_kg, who } => (Entry::Anodes { cell, at: t("--at", &at)?, count, mean_kg }, who),
        LogCmd::Harvest { cell, at, total_kg, who } => (Entry::Harvest { cell, at: t("--at", &at)?, total_kg }, who),
        LogCmd::Scrap { cell, at, total_kg, who } => (Entry::Scrap { cell, at: t("--at", &at)?, total_kg }, who),
        LogCmd::Cutout { cell, from, to, who } => {
            let to = match to {
                Some(s) => Some(t("--to", &s)?),
                None => None,
            };
            (Entry::Cutout { cell, from: t("--from", &from)?, to }, who)
        }
        LogCmd::Outage { circuit, from, to, who } => (Entry::Outage { circuit, from: t("--from", &from)?, to: t("--to", &to)? }, who),
        LogCmd::Shorts { cell, at, count, who } => (Entry::Shorts { cell, at: t("--at", &at)?, count }, who),
        LogCmd::Setpoint { circuit, from, amps, who } => (Entry::Setpoint { circuit, from: t("--from", &from)?, amps }, who),
        LogCmd::Voltage { cell, at, volts, who } => (Entry::Voltage { cell, at: t("--at", &at)?, volts }, who),
    })
}
