//! SQLite storage: the only layer that speaks SQL. It opens the database safely
//! (WAL, full sync, foreign keys), migrates it, and turns rows into domain values.
//!
//! A [`Store`] owns the connection; every read and write goes through a [`Db`],
//! a borrowed view that both plain reads and [`Store::write`] transactions hand out,
//! so the same query code serves both.

mod cells;
mod events;
mod learnt;
mod migrations;
mod readings;

use rusqlite::{Connection, OpenFlags, TransactionBehavior};
use std::path::{Path, PathBuf};
use std::time::Duration as StdDuration;

pub use cells::{CellRow, CircuitRow, LayoutSummary, PlantInfo};
pub use events::{CropFigures, LoadRow, NewEvent};
pub use learnt::{LearnRow, StoredEstimate, StoredLearnt, WeighingKind};
pub use migrations::{MIGRATIONS, migrate, schema_version};
pub use readings::StoreCurve;

use crate::domain::charge::Time;

/// A storage failure.
#[derive(Debug, thiserror::Error)]
pub enum StoreError {
    #[error("database: {0}")]
    Sqlite(#[from] rusqlite::Error),
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
}

pub type Result<T, E = StoreError> = std::result::Result<T, E>;

/// The plant database.
pub struct Store {
    conn: Connection,
    path: PathBuf,
}

/// A view of the database for queries and, inside [`Store::write`], changes.
#[derive(Clone, Copy)]
pub struct Db<'c> {
    c: &'c Connection,
}

pub(crate) fn secs(t: Time) -> i64 {
    t.timestamp()
}

pub(crate) fn time(s: i64) -> Time {
    chrono::DateTime::from_timestamp(s, 0).unwrap_or_default()
}

impl Store {
    /// Opens (creating if need be) the database at `path`, sets it up as
    /// DESIGN.md's storage notes require, and runs pending migrations.
    pub fn open(path: &Path) -> Result<Store> {
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir).map_err(|e| StoreError::Folder(dir.to_path_buf(), e))?;
        }
        let conn = Connection::open_with_flags(path, OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_CREATE)?;
        let mut store = Store { conn, path: path.to_path_buf() };
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
        c.busy_timeout(StdDuration::from_secs(10))?;
        // more distinct cached queries than rusqlite's default 16: re-preparing was a hot spot
        c.set_prepared_statement_cache_capacity(128);
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

    /// Copies the live database to `dest` with SQLite's online backup, then
    /// checks the copy's integrity.
    pub fn backup(&self, dest: &Path) -> Result<()> {
        if dest.exists() {
            return Err(StoreError::Backup(format!("{} already exists; choose a new file", dest.display())));
        }
        let mut out = Connection::open(dest)?;
        {
            let b = rusqlite::backup::Backup::new(&self.conn, &mut out)?;
            b.run_to_completion(256, StdDuration::from_millis(20), None)?;
        }
        let ok: String = out.query_row("PRAGMA integrity_check", [], |r| r.get(0))?;
        if ok != "ok" {
            return Err(StoreError::Backup(format!("the copy failed its integrity check: {ok}")));
        }
        Ok(())
    }
}

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
