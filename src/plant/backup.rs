//! Backups kept beside the database, and the way back: the daily automatic
//! backup, the list of what `backups/` holds, and restoring one of them.
//!
//! Every copy is written to a `.partial` file, integrity-checked, then renamed,
//! so a copy cut short by a crash never passes for a good one.

use serde::Serialize;
use std::path::{Path, PathBuf};
use std::time::Duration as StdDuration;

use super::{Plant, PlantError, Result};
use crate::domain::charge::Time;
use crate::store::{BUSY_TIMEOUT, Store, StoreError};

/// The folder beside the database that holds its backups.
pub const BACKUP_FOLDER: &str = "backups";

/// What made a backup file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum BackupKind {
    /// The automatic backup of a production day: `STEM-YYYY-MM-DD.db`.
    Daily,
    /// The database as it was before a restore: `STEM-before-restore-YYYYMMDDTHHMMSSZ.db`.
    BeforeRestore,
    /// Any other `.db` file in the folder (a copy someone put there).
    Other,
}

/// One file in the `backups/` folder.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BackupFile {
    pub path: PathBuf,
    pub kind: BackupKind,
    /// When the file was last written.
    pub modified: Time,
    pub bytes: u64,
}

/// What a restore did.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Restored {
    /// The file restored from.
    pub source: PathBuf,
    /// Where the database as it was before the restore is kept.
    pub kept: PathBuf,
    /// The restored file's schema version before it was brought up to this one.
    pub schema_from: i64,
}

/// The backups folder of the database at `db`.
pub fn backup_folder(db: &Path) -> PathBuf {
    db.parent().filter(|d| !d.as_os_str().is_empty()).unwrap_or(Path::new(".")).join(BACKUP_FOLDER)
}

fn stem(db: &Path) -> String {
    db.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_else(|| "plant".into())
}

fn io(what: &str, path: &Path, e: std::io::Error) -> PlantError {
    PlantError::Store(StoreError::Backup(format!("{what} {}: {e}", path.display())))
}

/// Removes a database file left by a copy that was cut short, with its
/// journals: a stale journal beside a new file of the same name would be
/// applied to it.
fn remove_db_files(path: &Path) -> Result<()> {
    for suffix in ["", "-journal", "-wal", "-shm"] {
        let f = PathBuf::from(format!("{}{suffix}", path.display()));
        match std::fs::remove_file(&f) {
            Ok(()) => {}
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
            Err(e) => return Err(io("cannot remove the unfinished copy", &f, e)),
        }
    }
    Ok(())
}

/// Backs up through `store` to `dest`: written beside it as `.partial`,
/// integrity-checked, then renamed into place.
pub(super) fn backup_to(store: &Store, dest: &Path) -> Result<()> {
    let partial = dest.with_extension("db.partial");
    remove_db_files(&partial)?;
    if let Err(e) = store.backup(&partial) {
        let _ = remove_db_files(&partial);
        return Err(e.into());
    }
    std::fs::rename(&partial, dest).map_err(|e| io("cannot put the copy in place at", dest, e))
}

/// Makes the day's automatic backup of the database at `db_path` if it is
/// due: none yet for the plant's production day of `now`. Opens its own
/// connection, so it may run on a background thread. Keeps the newest
/// `[store] keep_backups` daily backups and deletes older ones (copies kept by
/// a restore are never deleted). Returns the new backup's path, or `None` when
/// none was due, the database holds no plant yet, or it is the demo.
pub fn backup_if_due(db_path: &Path, now: Time) -> Result<Option<PathBuf>> {
    let store = Store::open(db_path)?;
    let Some(info) = store.db().plant_info()? else { return Ok(None) };
    // the demo is rewritten at will and needs no history of copies
    if info.name == super::DEMO_NAME {
        return Ok(None);
    }
    let folder = backup_folder(db_path);
    let day = info.days.day_of(now);
    let dest = folder.join(format!("{}-{}.db", stem(db_path), day.format("%Y-%m-%d")));
    if dest.exists() {
        return Ok(None);
    }
    std::fs::create_dir_all(&folder).map_err(|e| PlantError::Store(StoreError::Folder(folder.clone(), e)))?;
    backup_to(&store, &dest)?;
    let keep = info.store.keep_backups.max(1) as usize;
    let mut daily: Vec<BackupFile> = list_backups(db_path)?.into_iter().filter(|b| b.kind == BackupKind::Daily && b.path != dest).collect();
    // names sort by production day; the new one is kept, so keep - 1 others
    daily.sort_by(|a, b| b.path.cmp(&a.path));
    for old in daily.iter().skip(keep - 1) {
        std::fs::remove_file(&old.path).map_err(|e| io("cannot delete the old backup", &old.path, e))?;
    }
    Ok(Some(dest))
}

/// Whether `name` is `STEM-YYYY-MM-DD.db`.
fn is_daily(name: &str, stem: &str) -> bool {
    name.strip_prefix(stem)
        .and_then(|r| r.strip_prefix('-'))
        .and_then(|r| r.strip_suffix(".db"))
        .is_some_and(|d| chrono::NaiveDate::parse_from_str(d, "%Y-%m-%d").is_ok() && d.len() == 10)
}

/// The `.db` files in the backups folder of the database at `db_path`, oldest first.
pub fn list_backups(db_path: &Path) -> Result<Vec<BackupFile>> {
    let folder = backup_folder(db_path);
    let stem = stem(db_path);
    let entries = match std::fs::read_dir(&folder) {
        Ok(e) => e,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(e) => return Err(io("cannot list", &folder, e)),
    };
    let mut out = Vec::new();
    for entry in entries {
        let entry = entry.map_err(|e| io("cannot list", &folder, e))?;
        let path = entry.path();
        let name = entry.file_name().to_string_lossy().into_owned();
        if !name.ends_with(".db") {
            continue;
        }
        let meta = entry.metadata().map_err(|e| io("cannot read", &path, e))?;
        if !meta.is_file() {
            continue;
        }
        let kind = if is_daily(&name, &stem) {
            BackupKind::Daily
        } else if name.starts_with(&format!("{stem}-before-restore-")) {
            BackupKind::BeforeRestore
        } else {
            BackupKind::Other
        };
        let modified = meta.modified().map(Time::from).map_err(|e| io("cannot read the time of", &path, e))?;
        out.push(BackupFile { path, kind, modified, bytes: meta.len() });
    }
    out.sort_by(|a, b| (a.modified, &a.path).cmp(&(b.modified, &b.path)));
    Ok(out)
}

/// Restores the database at `db_path` from the backup `file`, recording who
/// did it. The file is checked first and never changed: a damaged or foreign
/// one, or one that fails `check`, is refused and nothing changes. Otherwise
/// the live database is kept as a dated copy in `backups/`, and the backup is
/// put in place online (see [`Store::replace_with`]).
pub fn restore(db_path: &Path, file: &Path, by: &str, now: Time) -> Result<Restored> {
    restore_with(db_path, file, by, now, BUSY_TIMEOUT)
}

/// [`restore`] with a chosen busy timeout (tests use a short one).
pub(crate) fn restore_with(db_path: &Path, file: &Path, by: &str, now: Time, busy: StdDuration) -> Result<Restored> {
    let by = super::record::initials(by)?;
    let refuse = |why: String| PlantError::NotRestorable { file: file.to_path_buf(), why };
    if let (Ok(a), Ok(b)) = (file.canonicalize(), db_path.canonicalize())
        && a == b
    {
        return Err(refuse("it is the live database itself".into()));
    }
    let schema_from = Store::verify_file(file).map_err(|e| match e {
        StoreError::Foreign(_, why) => refuse(format!("it is not a sound tankbook database ({why})")),
        e => refuse(e.to_string()),
    })?;
    let folder = backup_folder(db_path);
    std::fs::create_dir_all(&folder).map_err(|e| PlantError::Store(StoreError::Folder(folder.clone(), e)))?;
    // A staging copy, brought up to this version and checked the way `check`
    // does, so the file itself is only ever read.
    // not `.db`: a restore cut short leaves nothing that `backup --list` shows
    let staging = folder.join(format!("{}-restoring.partial", stem(db_path)));
    remove_db_files(&staging)?;
    let staged = stage(file, &staging);
    let result = staged.map_err(|e| refuse(e.to_string())).and_then(|()| {
        let kept = folder.join(format!("{}-before-restore-{}.db", stem(db_path), now.format("%Y%m%dT%H%M%SZ")));
        if kept.exists() {
            return Err(refuse(format!("{} already exists: wait a second and try again", kept.display())));
        }
        let mut live = match Plant::open(db_path) {
            Ok(live) => {
                backup_to(&live.store, &kept)?;
                live
            }
            // Too damaged to open: no other tankbook can be using it, so its
            // files are moved aside as they are and a fresh file takes the backup.
            Err(PlantError::Store(StoreError::Corrupt(_))) => {
                move_aside(db_path, &kept)?;
                Plant::open(db_path)?
            }
            Err(e) => return Err(e),
        };
        live.store.set_busy_timeout(busy)?;
        if let Err(e) = live.store.replace_with(&staging) {
            // nothing was replaced: the copy just made says nothing new
            let _ = std::fs::remove_file(&kept);
            return Err(e.into());
        }
        live.store.write(|db| db.record_restore(now, &file.display().to_string(), &kept.display().to_string(), &by))?;
        Ok(Restored { source: file.to_path_buf(), kept, schema_from })
    });
    let _ = remove_db_files(&staging);
    result
}

/// Moves a database that cannot be opened, with its journal files, to `kept`.
fn move_aside(db: &Path, kept: &Path) -> Result<()> {
    for suffix in ["", "-wal", "-shm"] {
        let from = PathBuf::from(format!("{}{suffix}", db.display()));
        if from.exists() {
            let to = PathBuf::from(format!("{}{suffix}", kept.display()));
            std::fs::rename(&from, &to).map_err(|e| io("cannot move the damaged database aside from", &from, e))?;
        }
    }
    Ok(())
}

/// Copies `file` to `staging`, migrates it, and runs `check` on it.
fn stage(file: &Path, staging: &Path) -> Result<()> {
    {
        let src = rusqlite::Connection::open_with_flags(file, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY).map_err(StoreError::from)?;
        let mut dst = rusqlite::Connection::open(staging).map_err(StoreError::from)?;
        let b = rusqlite::backup::Backup::new(&src, &mut dst).map_err(StoreError::from)?;
        b.run_to_completion(crate::store::BACKUP_PAGES_PER_STEP, StdDuration::from_millis(10), None).map_err(StoreError::from)?;
    }
    let mut plant = Plant::open(staging)?;
    let report = plant.check()?;
    if let Some(p) = report.problems.first() {
        let more = report.problems.len() - 1;
        return Err(PlantError::Store(StoreError::Corrupt(format!(
            "its check fails: {p}{}",
            if more > 0 { format!(" (and {more} more)") } else { String::new() }
        ))));
    }
    Ok(())
}
