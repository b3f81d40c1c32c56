//! Headless commands: parse the command line, call the plant, print the result.
//! Exit codes: 0 done, 2 a command-line usage error, 1 anything rejected or failed.

mod args;
mod learn;
mod plan;
mod print;
mod report;

use anyhow::{Context, Result, anyhow};
use chrono::Utc;
use clap::Parser;
use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::process::ExitCode;

pub use args::{Cli, Command};
use args::{ImportCmd, LayoutCmd, LogCmd, Who};

use crate::domain::charge::Time;
use crate::domain::entry::{Entry, Field};
use crate::plant::{Opts, Plant, PlantError};

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

/// A panic prints one line (where, and what), never a backtrace; inside the
/// screens the terminal is restored before it (ratatui's hook runs first).
fn one_line_panics() {
    std::panic::set_hook(Box::new(|info| {
        let _ = writeln!(std::io::stderr(), "{}", panic_line(info.payload(), info.location()));
    }));
}

/// The one line a panic prints: where and what, never a backtrace.
fn panic_line(payload: &(dyn std::any::Any + Send), at: Option<&std::panic::Location<'_>>) -> String {
    let what = payload
        .downcast_ref::<&str>()
        .map(|s| s.to_string())
        .or_else(|| payload.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "no message".into());
    let place = at.map_or(String::new(), |l| format!(" at {}:{}", l.file(), l.line()));
    format!("tankbook: internal error{place}: {} (nothing was recorded by it; please report it)", what.replace('\n', " "))
}

pub fn main() -> ExitCode {
    one_line_panics();
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
        // said in one line by the panic hook already
        Err(e) if e.is::<crate::tui::Panicked>() => ExitCode::from(1),
        Err(e) => {
            // stderr may be a terminal that is gone: never panic over it
            let _ = writeln!(std::io::stderr(), "tankbook: {}", message(&e));
            ExitCode::from(1)
        }
    }
}

/// The command-line option that sets an entry field.
pub fn option(field: Field) -> &'static str {
    match field {
        Field::Cell => "--cell",
        Field::Circuit => "--circuit",
        Field::At => "--at",
        Field::From => "--from",
        Field::To => "--to",
        Field::TotalKg => "--total-kg",
        Field::Count => "--count",
        Field::MeanKg => "--mean-kg",
        Field::Amps => "--amps",
        Field::Volts => "--volts",
        Field::By => "--by",
        Field::Event => "EVENT",
    }
}

/// An error as the command line says it: each cause in turn, a refused entry
/// naming the option the user typed.
fn message(e: &anyhow::Error) -> String {
    e.chain()
        .map(|cause| match cause.downcast_ref::<PlantError>() {
            Some(PlantError::Rejected { field, entry, message }) => {
                let place = entry.map_or(String::new(), |i| format!("entry {} of the batch, ", i + 1));
                format!("{place}{}: {message}", option(*field))
            }
            _ => cause.to_string(),
        })
        // an error that shows its source in its own text (`{file}: {source}`) is followed by it in
        // the chain: say each text once
        .fold(Vec::<String>::new(), |mut out, m| {
            if !out.last().is_some_and(|l| l.ends_with(&m)) {
                out.push(m);
            }
            out
        })
        .join(": ")
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
    match &cli.command {
        Some(Command::Demo(a)) => return demo(&cli.db, a, now),
        // the live database may be too damaged to open: restore opens it itself
        Some(Command::Restore(a)) => return restore(&cli.db, a, now),
        _ => {}
    }
    let Some(command) = cli.command else {
        let plant = open(&cli.db)?;
        return screens(plant);
    };
    let mut plant = open(&cli.db)?;
    if matches!(command, Command::Forecast(_) | Command::Plan(_) | Command::Events(_)) {
        plant.refuse_damage()?;
    }
    let writes = match &command {
        Command::Layout(_) | Command::Import(_) | Command::Log(_) | Command::Undo(_) => true,
        // a kept move or an approval is an entry too
        Command::Plan(p) => p.keep || p.approve,
        _ => false,
    };
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
            let s = import_with_progress(&mut plant, &file, now)?;
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
                Some(s) => plant.parse_time(Field::At, s)?,
                None => now,
            };
            let f = plant.forecast(as_of, a.cell.as_deref())?;
            if a.json {
                print::json(&f)?;
            } else {
                print::forecast(&plant, &f)?;
            }
        }
        Command::Plan(a) => plan::run(&mut plant, a, now)?,
        Command::Patrol(a) => learn::patrol(&plant, &a, now)?,
        Command::Backtest(a) => learn::backtest(&plant, &a, now)?,
        Command::Check(a) => {
            let r = plant.check()?;
            if a.json {
                print::json(&r)?;
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
        Command::Demo(a) => return demo(&cli.db, &a, now),
        Command::Restore(a) => return restore(&cli.db, &a, now),
        Command::Backup(a) => match &a.dest {
            Some(dest) => {
                plant.backup(dest)?;
                println!("backed up {} to {} (integrity checked)", plant.path().display(), dest.display());
            }
            None => backups(&plant, a.json)?,
        },
        Command::Report(a) => report::report(&plant, a, now)?,
        Command::Balance(a) => report::balance(&plant, a, now)?,
    }
    if writes {
        daily_backup(&plant, now);
    }
    Ok(())
}

/// The day's automatic backup after a write. The entry is already safe, so a
/// failed backup is a warning, not a failed command.
fn daily_backup(plant: &Plant, now: Time) {
    match crate::plant::backup_if_due(plant.path(), now) {
        Ok(Some(p)) => eprintln!("tankbook: today's backup written to {}", p.display()),
        Ok(None) => {}
        Err(e) => eprintln!("tankbook: warning: the daily backup was not made: {e:#}"),
    }
}

/// `tankbook backup --list`: the backups folder's files, oldest first.
fn backups(plant: &Plant, json: bool) -> Result<()> {
    let list = crate::plant::list_backups(plant.path())?;
    let folder = crate::plant::backup_folder(plant.path());
    if json {
        let v = serde_json::json!({ "schema": 1, "folder": folder, "backups": list });
        print::json(&v)?;
        return Ok(());
    }
    if list.is_empty() {
        println!("no backups in {} yet: one is made after the first entry of each production day", folder.display());
        return Ok(());
    }
    println!("backups in {}, oldest first:", folder.display());
    for b in &list {
        let kind = match b.kind {
            crate::plant::BackupKind::Daily => "daily",
            crate::plant::BackupKind::BeforeRestore => "before a restore",
            crate::plant::BackupKind::Other => "other",
        };
        let name = b.path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
        println!("  {}  {:>10}  {:<16}  {name}", plant.show_time(b.modified), human_size(b.bytes), kind);
    }
    println!("to go back to one: tankbook restore {}", folder.join("FILE").display());
    Ok(())
}

fn human_size(bytes: u64) -> String {
    match bytes {
        b if b >= 1 << 20 => format!("{:.1} MiB", b as f64 / (1u64 << 20) as f64),
        b if b >= 1 << 10 => format!("{:.1} KiB", b as f64 / 1024.0),
        b => format!("{b} B"),
    }
}

/// `tankbook restore FILE`: checks FILE, keeps the database as it was, puts FILE in place.
fn restore(db: &Option<PathBuf>, a: &args::RestoreArgs, now: Time) -> Result<()> {
    let path = match db {
        Some(p) => p.clone(),
        None => default_db()?,
    };
    let r = crate::plant::restore(&path, &a.file, &a.by, now)?;
    println!("restored {} from {}; the database as it was is kept at {}", path.display(), r.source.display(), r.kept.display());
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
    let spec = crate::demo::DemoSpec { cells: a.cells as usize, days: a.days, seed: a.seed, reading_minutes: a.reading_minutes };
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
/// Without a terminal (a pipe, cron, a script) it prints the forecast table instead.
fn screens(plant: Plant) -> Result<()> {
    if !plant.has_layout()? {
        return print::empty(&plant);
    }
    plant.refuse_damage()?;
    if !(std::io::stdin().is_terminal() && std::io::stdout().is_terminal()) {
        let f = plant.forecast(clock(), None)?;
        return print::forecast(&plant, &f);
    }
    crate::tui::run(plant, clock)
}

fn entry(plant: &Plant, cmd: LogCmd) -> Result<(Entry, Who)> {
    let t = |field: Field, s: &str| plant.parse_time(field, s);
    Ok(match cmd {
        LogCmd::Anodes { cell, at, count, mean_kg, who } => (Entry::Anodes { cell, at: t(Field::At, &at)?, count, mean_kg }, who),
        LogCmd::Harvest { cell, at, total_kg, who } => (Entry::Harvest { cell, at: t(Field::At, &at)?, total_kg }, who),
        LogCmd::Scrap { cell, at, total_kg, who } => (Entry::Scrap { cell, at: t(Field::At, &at)?, total_kg }, who),
        LogCmd::Cutout { cell, from, to, who } => {
            let to = match to {
                Some(s) => Some(t(Field::To, &s)?),
                None => None,
            };
            (Entry::Cutout { cell, from: t(Field::From, &from)?, to }, who)
        }
        LogCmd::Outage { circuit, from, to, who } => (Entry::Outage { circuit, from: t(Field::From, &from)?, to: t(Field::To, &to)? }, who),
        LogCmd::Shorts { cell, at, count, who } => (Entry::Shorts { cell, at: t(Field::At, &at)?, count }, who),
        LogCmd::Setpoint { circuit, from, amps, who } => (Entry::Setpoint { circuit, from: t(Field::From, &from)?, amps }, who),
        LogCmd::Voltage { cell, at, volts, who } => (Entry::Voltage { cell, at: t(Field::At, &at)?, volts }, who),
    })
}

/// Imports a current file with a progress bar on stderr, shown only when
/// stderr is a terminal and the import has run for over a second; stdout is untouched.
fn import_with_progress(plant: &mut Plant, file: &std::path::Path, now: Time) -> Result<crate::plant::ImportSummary> {
    let started = std::time::Instant::now();
    let terminal = std::io::stderr().is_terminal();
    let bar = indicatif::ProgressBar::hidden();
    let mut shown = false;
    let s = plant.import_current_file_with_progress(file, now, &mut |done, total| {
        if !shown && terminal && started.elapsed() > std::time::Duration::from_secs(1) {
            shown = true;
            bar.set_length(total);
            bar.set_style(
                indicatif::ProgressStyle::with_template("importing {bar:40} {bytes}/{total_bytes} {elapsed}")
                    .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
            );
            bar.set_draw_target(indicatif::ProgressDrawTarget::stderr());
        }
        bar.set_position(done);
    })?;
    bar.finish_and_clear();
    Ok(s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_panic_is_said_in_one_line() {
        let at = std::panic::Location::caller();
        let line = panic_line(&String::from("index out of bounds:\nthe len is 3"), Some(at));
        assert!(line.starts_with("tankbook: internal error at src/cli/mod.rs:"), "{line}");
        assert!(line.contains("index out of bounds: the len is 3") && !line.contains('\n'), "{line}");
        assert!(panic_line(&42u8, None).contains("no message"));
    }

    #[test]
    fn a_rejection_names_the_option_the_user_typed() {
        let e = anyhow::Error::from(PlantError::Rejected { field: Field::TotalKg, entry: Some(1), message: "too heavy".into() });
        assert_eq!(message(&e.context("logging")), "logging: entry 2 of the batch, --total-kg: too heavy");
        for f in [Field::Cell, Field::At, Field::MeanKg, Field::Volts, Field::By] {
            assert!(option(f).starts_with("--"), "{f:?}");
        }
    }
}
