//! The command line, as clap parses it: the scripting contract of DESIGN.md.

use chrono::NaiveDate;
use clap::{Args, Parser, Subcommand};
use std::path::PathBuf;

#[derive(Debug, Parser)]
#[command(
    name = "tankbook",
    version,
    about = "The shift book of a copper electrorefinery tankhouse: cells, anodes, crops, current, forecasts."
)]
pub struct Cli {
    /// Plant database file (default: the platform data folder's tankbook/plant.db)
    #[arg(long, global = true, env = "TANKBOOK_DB")]
    pub db: Option<PathBuf>,
    #[command(subcommand)]
    pub command: Option<Command>,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Define or update circuits, sections, cells and parameters
    #[command(subcommand)]
    Layout(LayoutCmd),
    /// Import rectifier current readings
    #[command(subcommand)]
    Import(ImportCmd),
    /// Record a shift-log entry
    #[command(subcommand)]
    Log(LogCmd),
    /// Undo an entry (the newest if no id is given); the undo is itself recorded
    Undo(UndoArgs),
    /// List recent entries, newest first
    Events(EventsArgs),
    /// Every cell's anodes, crop and due times as of a time
    Forecast(ForecastArgs),
    /// Plan anode changes and harvests over the coming production days (advisory)
    Plan(PlanArgs),
    /// The cells to check for shorts now, most suspect first
    Patrol(PatrolArgs),
    /// Each weighed crop and scrap beside what would have been predicted for it beforehand
    Backtest(BacktestArgs),
    /// Check the database's integrity
    Check(CheckArgs),
    /// Copy the database safely while it is in use, or list the backups kept beside it
    Backup(BackupArgs),
    /// Put a backup back in place of the database (the database as it was is kept in backups/)
    Restore(RestoreArgs),
    /// The copper balance of a period (default: the month so far), per circuit and for the plant
    Balance(BalanceArgs),
    /// Write the shift handover report: one self-contained HTML file to print or mail
    Report(ReportArgs),
    /// Write the invented demo plant (to its own database unless --db is given) and show it
    Demo(DemoArgs),
}

#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Only write the demo database; do not open the screens
    #[arg(long)]
    pub no_tui: bool,
    /// Cells in the plant (refining and liberator)
    #[arg(long, default_value_t = 102, value_parser = clap::value_parser!(u32).range(8..=20_000))]
    pub cells: u32,
    /// Days of history, ending now (or at TANKBOOK_NOW)
    #[arg(long, default_value_t = 60, value_parser = clap::value_parser!(u32).range(21..=1_100))]
    pub days: u32,
    /// Seed of the generator: the same seed and clock give the same plant
    #[arg(long, default_value_t = 7)]
    pub seed: u64,
    /// Minutes between the demo's rectifier readings (1 for a plant-scale benchmark)
    #[arg(long, default_value_t = 15, value_parser = clap::value_parser!(u32).range(1..=240))]
    pub reading_minutes: u32,
}

#[derive(Debug, Subcommand)]
pub enum LayoutCmd {
    /// Load a layout file (TOML); changed parameters apply from now on
    Load { file: PathBuf },
}

#[derive(Debug, Subcommand)]
pub enum ImportCmd {
    /// Import a CSV with header time,circuit,amps (amps: net mean current of the interval)
    Current { file: PathBuf },
}

/// Options every log entry takes.
#[derive(Debug, Args)]
pub struct Who {
    /// Initials of the foreman logging the entry
    #[arg(long, env = "TANKBOOK_BY")]
    pub by: String,
    /// Record an entry the program questions
    #[arg(long)]
    pub force: bool,
}

#[derive(Debug, Subcommand)]
pub enum LogCmd {
    /// A new anode load (mean mass per anode)
    Anodes {
        #[arg(long)]
        cell: String,
        #[arg(long)]
        at: String,
        #[arg(long)]
        count: u32,
        #[arg(long = "mean-kg", allow_negative_numbers = true)]
        mean_kg: f64,
        #[command(flatten)]
        who: Who,
    },
    /// The crop pulled and weighed (total for the cell); the next crop starts at once
    Harvest {
        #[arg(long)]
        cell: String,
        #[arg(long)]
        at: String,
        #[arg(long = "total-kg", allow_negative_numbers = true)]
        total_kg: f64,
        #[command(flatten)]
        who: Who,
    },
    /// Anodes pulled and scrap weighed (total for the cell); ends the anode load
    Scrap {
        #[arg(long)]
        cell: String,
        #[arg(long)]
        at: String,
        #[arg(long = "total-kg", allow_negative_numbers = true)]
        total_kg: f64,
        #[command(flatten)]
        who: Who,
    },
    /// Cell out of circuit; without --to it stays out until closed by a later entry with the same --from and a --to
    Cutout {
        #[arg(long)]
        cell: String,
        #[arg(long)]
        from: String,
        #[arg(long)]
        to: Option<String>,
        #[command(flatten)]
        who: Who,
    },
    /// Circuit down (past, or planned ahead)
    Outage {
        #[arg(long)]
        circuit: String,
        #[arg(long)]
        from: String,
        #[arg(long)]
        to: String,
        #[command(flatten)]
        who: Who,
    },
    /// Shorts found (and cleared) in a cell
    Shorts {
        #[arg(long)]
        cell: String,
        #[arg(long)]
        at: String,
        #[arg(long)]
        count: u32,
        #[command(flatten)]
        who: Who,
    },
    /// Planned circuit current from a time on
    Setpoint {
        #[arg(long)]
        circuit: String,
        #[arg(long)]
        from: String,
        #[arg(long, allow_negative_numbers = true)]
        amps: f64,
        #[command(flatten)]
        who: Who,
    },
    /// A cell voltage reading
    Voltage {
        #[arg(long)]
        cell: String,
        #[arg(long)]
        at: String,
        #[arg(long, allow_negative_numbers = true)]
        volts: f64,
        #[command(flatten)]
        who: Who,
    },
}

#[derive(Debug, Args)]
pub struct UndoArgs {
    /// Entry id (see `tankbook events`); default: the newest entry not yet undone
    pub event: Option<i64>,
    /// Initials of the foreman undoing it
    #[arg(long, env = "TANKBOOK_BY")]
    pub by: String,
}

#[derive(Debug, Args)]
pub struct EventsArgs {
    #[arg(long)]
    pub cell: Option<String>,
    #[arg(long, default_value_t = 20)]
    pub limit: usize,
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct PatrolArgs {
    /// JSON output (schema 1)
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct BacktestArgs {
    /// Weighings at or after this time (default: the first)
    #[arg(long)]
    pub from: Option<String>,
    /// Weighings at or before this time (default: now)
    #[arg(long)]
    pub to: Option<String>,
    /// Only this cell
    #[arg(long)]
    pub cell: Option<String>,
    /// JSON output (schema 1)
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct ForecastArgs {
    /// As of this time (default: now)
    #[arg(long)]
    pub at: Option<String>,
    /// Only this cell
    #[arg(long)]
    pub cell: Option<String>,
    /// JSON output (schema 1)
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct PlanArgs {
    /// First production day, YYYY-MM-DD (default: today's production day)
    #[arg(long, value_name = "DATE", value_parser = parse_date)]
    pub from: Option<NaiveDate>,
    /// Production days to plan
    #[arg(long, default_value_t = 14)]
    pub days: u32,
    /// Cells the crew can change a day (default: the layout's crew_cells_per_day)
    #[arg(long, value_name = "K")]
    pub crew_cells_per_day: Option<u32>,
    /// Cathodes the stripping machine handles a day (default: the layout's harvest_cathodes_per_day)
    #[arg(long, value_name = "C")]
    pub harvest_cathodes_per_day: Option<u32>,
    /// New anodes on hand at the start of the first day (default: the layout's anode_stock)
    #[arg(long, value_name = "N")]
    pub anode_stock: Option<u64>,
    /// New anodes prepared each day (default: the layout's anodes_per_day)
    #[arg(long, value_name = "N")]
    pub anodes_per_day: Option<u64>,
    /// Move a cell's anode change to another day inside its window; repeat for more cells
    #[arg(long = "move", value_name = "CELL=DATE", value_parser = parse_move)]
    pub moves: Vec<(String, NaiveDate)>,
    /// Record the --move decisions in the event log, so later plans keep them while feasible (needs --by; undo takes one back)
    #[arg(long, requires = "moves", requires = "by")]
    pub keep: bool,
    /// Record this plan as approved, so later plans show what changed since (needs --by)
    #[arg(long, requires = "by")]
    pub approve: bool,
    /// Initials of who keeps the moves or approves the plan
    #[arg(long, value_name = "INITIALS", env = "TANKBOOK_BY")]
    pub by: Option<String>,
    /// Cap the harvests only, without levelling the stripping machine's daily cathodes (to compare)
    #[arg(long)]
    pub no_smoothing: bool,
    /// JSON output (schema 1)
    #[arg(long)]
    pub json: bool,
    /// Also write one row per planned job to this CSV file
    #[arg(long, value_name = "FILE")]
    pub csv: Option<PathBuf>,
}

fn parse_date(s: &str) -> Result<NaiveDate, String> {
    NaiveDate::parse_from_str(s.trim(), "%Y-%m-%d").map_err(|_| format!("'{s}' is not a date: use YYYY-MM-DD"))
}

fn parse_move(s: &str) -> Result<(String, NaiveDate), String> {
    let (cell, date) = s.split_once('=').ok_or_else(|| format!("'{s}' is not CELL=YYYY-MM-DD"))?;
    if cell.trim().is_empty() {
        return Err(format!("'{s}' names no cell: use CELL=YYYY-MM-DD"));
    }
    Ok((cell.trim().to_string(), parse_date(date)?))
}

#[derive(Debug, Args)]
pub struct CheckArgs {
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct BackupArgs {
    /// Destination file (must not exist yet)
    #[arg(required_unless_present = "list", conflicts_with = "list")]
    pub dest: Option<PathBuf>,
    /// List the backups in the backups/ folder beside the database, with their time and size
    #[arg(long)]
    pub list: bool,
    /// With --list: print JSON
    #[arg(long, requires = "list")]
    pub json: bool,
}

#[derive(Debug, Args)]
pub struct RestoreArgs {
    /// The backup file to restore (checked first; a damaged or foreign file is refused)
    pub file: PathBuf,
    /// Initials of who restores
    #[arg(long, env = "TANKBOOK_BY")]
    pub by: String,
}

#[derive(Debug, Args)]
pub struct BalanceArgs {
    /// Start of the period (default: the start of the month's first production day)
    #[arg(long)]
    pub from: Option<String>,
    /// End of the period (default: now)
    #[arg(long)]
    pub to: Option<String>,
    /// JSON output (schema 1)
    #[arg(long)]
    pub json: bool,
}

/// Which shift a report covers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum ShiftArg {
    /// The shift in progress, from its start up to now
    Current,
    /// The last whole shift before the one in progress
    Last,
}

#[derive(Debug, Args)]
pub struct ReportArgs {
    /// The shift to report (shifts from the layout's day_starts_at and [plan] shifts_per_day)
    #[arg(long, value_enum, conflicts_with_all = ["from", "to"])]
    pub shift: Option<ShiftArg>,
    /// Start of a period of your own (with --to)
    #[arg(long, requires = "to")]
    pub from: Option<String>,
    /// End of a period of your own (with --from)
    #[arg(long, requires = "from")]
    pub to: Option<String>,
    /// The HTML file to write
    #[arg(long, value_name = "FILE.html")]
    pub out: PathBuf,
}
