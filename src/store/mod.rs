//! SQLite storage: the only layer that speaks SQL. It opens the database safely
//! (WAL, full sync, foreign keys), migrates it, and turns rows into domain values.
//!
//! A [`Store`] owns the connection; every read and write goes through a [`Db`],
//! a borrowed view that both plain reads and [`Store::write`] transactions hand out,
//! so the same query code serves both.

mod append;
mod cells;
mod curve_slice;
mod drafts;
mod events;
mod learnt;
mod migrations;
mod plan_record;
mod readings;
mod report;
mod snapshot;

use rusqlite::{Connection, OpenFlags, TransactionBehavior};
use std::path::{Path, PathBuf};
use std::time::Duration as StdDuration;

pub use append::{OpenRecords, params_in_force};
pub use cells::{CellRow, CircuitRow, LayoutSummary, PlantInfo};
pub use drafts::DraftRow;
pub use events::{CropFigures, LoadRow, NewEvent};
pub use learnt::{LearnRow, StoredEstimate, StoredLearnt, Weighing, WeighingKind};

/// The tables a tankbook database has from its first migration on: a file
/// without them is not ours.
const OUR_TABLES: [&str; 4] = ["plant_meta", "circuit", "reading", "event"];
pub use curve_slice::{SLICE_SPAN, SliceCurve};
pub use migrations::{MIGRATIONS, migrate, schema_version};
pub use readings::StoreCurve;
pub use report::CropRow;
pub use snapshot::{CellState, Windows};

use crate::domain::charge::Time;

/// A storage failure.
#[derive(Debug, thiserror::Error)]
pub enum StoreError {
    #[error("database: {0}")]
    Sqlite(rusqlite::Error),
    #[error("another tankbook is writing to this database and did not finish in time: nothing was changed; try again in a moment")]
    Busy,
    #[error("the disk is full (or the database reached its size limit): nothing was changed; free some space and try again")]
    DiskFull,
    #[error("a stored time ({0} s from 1970) is not a date tankbook can read (years 0000 to 9999): the database is damaged")]
    BadTime(i64),
    #[error("{0}")]
    Damaged(Damage),
    #[error("cannot create the folder {0}: {1}")]
    Folder(PathBuf, std::io::Error),
    #[error("the database did not switch to WAL journaling (it answered '{0}'); is it on a network share?")]
    NotWal(String),
    #[error("the database at {0} was written by a newer tankbook (schema {1}, this one knows {2})")]
    TooNew(PathBuf, i64, usize),
    #[error("stored data is damaged: {0}")]
    Corrupt(String),
    #[error("backup: {0}")]
    Backup(String),
    #[error("{0} is not a tankbook database: {1}")]
    Foreign(PathBuf, String),
}

/// Data this version cannot read: what is wrong, and where.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize, thiserror::Error)]
pub enum Damage {
    #[error("entry {entry} is of the kind '{kind}', which this tankbook does not know (written by a newer tankbook, or damaged)")]
    UnknownKind { entry: i64, kind: String },
    #[error("entry {entry}: its {column} holds {value}, which is not a time (years 0000 to 9999)")]
    BadTime { entry: i64, column: &'static str, value: i64 },
}

impl From<rusqlite::Error> for StoreError {
    /// Busy, full and undecodable-time failures get messages a foreman can act
    /// on; anything else stays SQLite's own.
    fn from(e: rusqlite::Error) -> Self {
        use rusqlite::ErrorCode;
        match &e {
            rusqlite::Error::SqliteFailure(f, _) => match f.code {
                ErrorCode::DatabaseBusy | ErrorCode::DatabaseLocked => StoreError::Busy,
                ErrorCode::DiskFull => StoreError::DiskFull,
                ErrorCode::DatabaseCorrupt | ErrorCode::NotADatabase => StoreError::Corrupt(e.to_string()),
                _ => StoreError::Sqlite(e),
            },
            rusqlite::Error::FromSqlConversionFailure(_, _, inner) => match inner.downcast_ref::<BadTimeValue>() {
                Some(BadTimeValue(v)) => StoreError::BadTime(*v),
                None => StoreError::Sqlite(e),
            },
            _ => StoreError::Sqlite(e),
        }
    }
}

/// How long a write waits for another process's write to finish before
/// [`StoreError::Busy`].
pub const BUSY_TIMEOUT: StdDuration = StdDuration::from_secs(10);

pub type Result<T, E = StoreError> = std::result::Result<T, E>;

/// The plant database.
pub struct Store {
    conn: Connection,
    path: PathBuf,
    busy: StdDuration,
}

/// A view of the database for queries and, inside [`Store::write`], changes.
#[derive(Clone, Copy)]
pub struct Db<'c> {
    c: &'c Connection,
}

pub(crate) fn secs(t: Time) -> i64 {
    t.timestamp()
}

/// The first and last second a stored time may hold: RFC 3339's four-digit
/// years, 0000-01-01T00:00:00Z to 9999-12-31T23:59:59Z. Migration 004's
/// `event_bad_time` index names the same bounds.
pub(crate) const FIRST_SECS: i64 = -62_167_219_200;
pub(crate) const LAST_SECS: i64 = 253_402_300_799;

/// A stored time outside [`FIRST_SECS`]..=[`LAST_SECS`].
#[derive(Debug)]
pub(crate) struct BadTimeValue(pub i64);

impl std::fmt::Display for BadTimeValue {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{} is not a time", self.0)
    }
}

impl std::error::Error for BadTimeValue {}

/// Decodes a stored time; one that does not decode is an error, never 1970.
pub(crate) fn time(s: i64) -> rusqlite::Result<Time> {
    let bad = || rusqlite::Error::FromSqlConversionFailure(0, rusqlite::types::Type::Integer, Box::new(BadTimeValue(s)));
    if !(FIRST_SECS..=LAST_SECS).contains(&s) {
        return Err(bad());
    }
    chrono::DateTime::from_timestamp(s, 0).ok_or_else(bad)
}

/// A time as stored, refused if it could not be read back (see [`time`]).
pub(crate) fn storable(t: Time) -> Result<i64> {
    let s = secs(t);
    if (FIRST_SECS..=LAST_SECS).contains(&s) { Ok(s) } else { Err(StoreError::BadTime(s)) }
}

pub(crate) fn opt_time(s: Option<i64>) -> rusqlite::Result<Option<Time>> {
    s.map(time).transpose()
}

impl Store {
    /// Opens (creating if need be) the database at `path`, sets it up as
    /// DESIGN.md's storage notes require, and runs pending migrations.
    pub fn open(path: &Path) -> Result<Store> {
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir).map_err(|e| StoreError::Folder(dir.to_path_buf(), e))?;
        }
        let conn = Connection::open_with_flags(path, OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_CREATE)?;
        let mut store = Store { conn, path: path.to_path_buf(), busy: BUSY_TIMEOUT };
        store.configure()?;
        let known = MIGRATIONS.len();
        let v = schema_version(&store.conn)?;
        if v > known as i64 {
            return Err(StoreError::TooNew(path.to_path_buf(), v, known));
        }
        migrate(&mut store.conn, known)?;
        Ok(store)
    }

    fn configure(&mut self) -> Result<()> {
        let c = &self.conn;
        c.busy_timeout(self.busy)?;
        // more distinct cached queries than rusqlite's default 16: re-preparing was a hot spot
        c.set_prepared_statement_cache_capacity(128);
        // one plan per statement, whatever is bound: SQLite 3.54 otherwise re-prepares a cached
        // statement whenever a bound value crosses its small-integer heuristics (half the time of a batch of entries)
        c.set_db_config(rusqlite::config::DbConfig::SQLITE_DBCONFIG_ENABLE_QPSG, true)?;
        let mode: String = c.pragma_update_and_check(None, "journal_mode", "wal", |r| r.get(0))?;
        if !mode.eq_ignore_ascii_case("wal") {
            return Err(StoreError::NotWal(mode));
        }
        // FULL: a foreman's entry must survive a power cut, not only a crash.
        c.pragma_update(None, "synchronous", "FULL")?;
        c.pragma_update(None, "foreign_keys", "ON")?;
        Ok(())
    }

    pub fn path(&self) -> &Path {
        &self.path
    }

    /// A read view.
    pub fn db(&self) -> Db<'_> {
        Db { c: &self.conn }
    }

    /// Runs `f` in one read transaction (one shared lock for all its queries,
    /// and one consistent view), or inside the transaction already open.
    pub fn read<T, E: From<StoreError>>(&self, f: impl FnOnce(Db<'_>) -> Result<T, E>) -> Result<T, E> {
        if !self.conn.is_autocommit() {
            return f(Db { c: &self.conn });
        }
        let tx = self.conn.unchecked_transaction().map_err(StoreError::from)?;
        let out = f(Db { c: &tx })?;
        // nothing was written: ending it either way releases the lock
        tx.commit().map_err(StoreError::from)?;
        Ok(out)
    }

    /// Runs `f` in one `BEGIN IMMEDIATE` transaction: committed if `f` succeeds,
    /// rolled back (nothing changed) if it fails.
    pub fn write<T, E: From<StoreError>>(&mut self, f: impl FnOnce(Db<'_>) -> Result<T, E>) -> Result<T, E> {
        let tx = self.conn.transaction_with_behavior(TransactionBehavior::Immediate).map_err(StoreError::from)?;
        let out = f(Db { c: &tx })?;
        tx.commit().map_err(StoreError::from)?;
        Ok(out)
    }

    /// Runs `f` in a transaction that is always rolled back: to see what a
    /// change would do without making it.
    pub fn preview<T, E: From<StoreError>>(&mut self, f: impl FnOnce(Db<'_>) -> Result<T, E>) -> Result<T, E> {
        let tx = self.conn.transaction_with_behavior(TransactionBehavior::Immediate).map_err(StoreError::from)?;
        let out = f(Db { c: &tx });
        tx.rollback().map_err(StoreError::from)?;
        out
    }

    /// Sets how long a write waits for another process's write (tests use a short one).
    pub(crate) fn set_busy_timeout(&mut self, d: StdDuration) -> Result<()> {
        self.conn.busy_timeout(d)?;
        self.busy = d;
        Ok(())
    }

    /// Caps the database at its current size plus `spare` pages, the way a full
    /// disk would: for tests of what a full disk does (SQLite's `max_page_count`).
    #[cfg(test)]
    pub(crate) fn limit_pages(&mut self, spare: i64) -> Result<()> {
        let n: i64 = self.conn.query_row("PRAGMA page_count", [], |r| r.get(0))?;
        self.conn.pragma_update(None, "max_page_count", n + spare)?;
        Ok(())
    }

    /// Checks that the file at `path` is a sound tankbook database this version
    /// can read, without changing it: SQLite's integrity and foreign-key checks,
    /// our tables, and a schema no newer than this tankbook. Returns its schema version.
    pub fn verify_file(path: &Path) -> Result<i64> {
        let foreign = |why: String| StoreError::Foreign(path.to_path_buf(), why);
        let meta = std::fs::metadata(path).map_err(|e| foreign(e.to_string()))?;
        if !meta.is_file() {
            return Err(foreign("it is not a file".into()));
        }
        let c = Connection::open_with_flags(path, OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX)
            .map_err(|e| foreign(e.to_string()))?;
        let problems = Db { c: &c }.sqlite_problems().map_err(|e| foreign(e.to_string()))?;
        if let Some(p) = problems.first() {
            return Err(foreign(format!("it fails SQLite's integrity check ({p}{})", if problems.len() > 1 { ", …" } else { "" })));
        }
        for t in OUR_TABLES {
            let n: i64 = c
                .query_row("SELECT count(*) FROM sqlite_master WHERE type = 'table' AND name = ?1", [t], |r| r.get(0))
                .map_err(|e| foreign(e.to_string()))?;
            if n == 0 {
                return Err(foreign(format!("it has no table '{t}'")));
            }
        }
        let v = schema_version(&c)?;
        if v > MIGRATIONS.len() as i64 {
            return Err(StoreError::TooNew(path.to_path_buf(), v, MIGRATIONS.len()));
        }
        Ok(v)
    }

    /// Replaces this database's content with the file at `src`, online: SQLite's
    /// backup copies it into the live connection in one step, so another
    /// tankbook that has the file open sees either the old database or the new
    /// one. Refused with [`StoreError::Busy`] while another process writes for
    /// longer than the busy timeout. Then migrates the content to this version.
    pub fn replace_with(&mut self, src: &Path) -> Result<()> {
        let from = Connection::open_with_flags(src, OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX)?;
        let start = std::time::Instant::now();
        {
            let b = rusqlite::backup::Backup::new(&from, &mut self.conn)?;
            loop {
                match b.step(-1)? {
                    rusqlite::backup::StepResult::Done => break,
                    rusqlite::backup::StepResult::More => {}
                    _ if start.elapsed() >= self.busy => return Err(StoreError::Busy),
                    _ => std::thread::sleep(StdDuration::from_millis(20)),
                }
            }
        }
        self.configure()?;
        migrate(&mut self.conn, MIGRATIONS.len())?;
        Ok(())
    }

    /// Copies the live database to `dest` with SQLite's online backup, then
    /// checks the copy's integrity.
    pub fn backup(&self, dest: &Path) -> Result<()> {
        if dest.exists() {
            return Err(StoreError::Backup(format!("{} already exists; choose a new file", dest.display())));
        }
        let mut out = Connection::open(dest)?;
        {
            let b = rusqlite::backup::Backup::new(&self.conn, &mut out)?;
            b.run_to_completion(BACKUP_PAGES_PER_STEP, StdDuration::from_millis(10), None)?;
        }
        let ok: String = out.query_row("PRAGMA integrity_check", [], |r| r.get(0))?;
        if ok != "ok" {
            return Err(StoreError::Backup(format!("the copy failed its integrity check: {ok}")));
        }
        Ok(())
    }
}

/// Pages a backup copies per step (64 MB of 4 KiB pages). The pause between
/// steps lets other connections in, but a write by another connection
/// restarts the copy, and at 256 pages a step a year-long plant (545 MB) spent
/// 10 s pausing: a few large steps are quicker and less often restarted.
pub const BACKUP_PAGES_PER_STEP: std::ffi::c_int = 16_384;

impl Db<'_> {
    /// SQLite's own integrity and foreign-key checks; empty when both pass.
    pub fn sqlite_problems(&self) -> Result<Vec<String>> {
        let mut v = Vec::new();
        let mut st = self.c.prepare("PRAGMA integrity_check")?;
        for r in st.query_map([], |r| r.get::<_, String>(0))? {
            let r = r?;
            if r != "ok" {
                v.push(r);
            }
        }
        let mut st = self.c.prepare("PRAGMA foreign_key_check")?;
        for r in st.query_map([], |r| Ok(format!("foreign key broken in table {}", r.get::<_, String>(0)?)))? {
            v.push(r?);
        }
        Ok(v)
    }

    /// Every row of every table as text, in a fixed order: for comparing a
    /// database before and after a command that must change nothing.
    pub fn dump(&self) -> Result<String> {
        let mut out = String::new();
        let mut st = self.c.prepare("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")?;
        let tables: Vec<String> = st.query_map([], |r| r.get(0))?.collect::<rusqlite::Result<_>>()?;
        for t in tables {
            out.push_str(&format!("## {t}\n"));
            let mut st = self.c.prepare(&format!("SELECT * FROM \"{t}\" ORDER BY 1, 2"))?;
            let n = st.column_count();
            let mut rows = st.query([])?;
            while let Some(r) = rows.next()? {
                let cols: Vec<String> =
                    (0..n).map(|i| format!("{:?}", r.get_ref(i).map(|v| format!("{v:?}")).unwrap_or_default())).collect();
                out.push_str(&cols.join("|"));
                out.push('\n');
            }
        }
        out.push_str(&format!("user_version {}\n", schema_version(self.c)?));
        Ok(out)
    }
}
