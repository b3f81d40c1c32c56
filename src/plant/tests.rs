//! Faults through the plant API: a full disk, a database held by another
//! writer, restores while another tankbook has the file open, and damaged
//! rows found by index look-ups rather than replay.

use std::path::Path;
use std::time::Duration as StdDuration;

use super::*;
use crate::domain::entry::Entry;
use crate::store::MIGRATIONS;

const LAYOUT: &str = include_str!("../../fixtures/plant_check.toml");

fn t(s: &str) -> Time {
    chrono::DateTime::parse_from_rfc3339(s).unwrap().to_utc()
}

fn opts(now: &str) -> Opts {
    Opts { by: "JD".into(), force: true, now: t(now) }
}

/// A day of 30 kA on C1 (hourly) and anodes in A01: the plant check of DOMAIN.md.
fn plant_at(path: &Path) -> Plant {
    let mut p = Plant::open(path).unwrap();
    p.load_layout(LAYOUT, "plant_check.toml", t("2026-03-01T00:00:00Z")).unwrap();
    p.import_current(csv(0, 25).as_bytes(), "day.csv", t("2026-03-02T00:00:00Z")).unwrap();
    let anodes = Entry::Anodes { cell: "A01".into(), at: t("2026-03-01T00:00:00Z"), count: 50, mean_kg: 380.0 };
    p.record(&anodes, &opts("2026-03-01T00:05:00Z")).unwrap();
    p
}

/// Hourly 30 kA readings for hours `from..to` after 2026-03-01T00:00Z.
fn csv(from: i64, to: i64) -> String {
    let t0 = t("2026-03-01T00:00:00Z");
    let mut s = String::from("time,circuit,amps\n");
    for h in from..to {
        s.push_str(&format!("{},C1,30000\n", (t0 + chrono::Duration::hours(h)).to_rfc3339()));
    }
    s
}

fn voltage(cell: &str, minute: i64) -> Entry {
    Entry::Voltage { cell: cell.into(), at: t("2026-03-01T12:00:00Z") + chrono::Duration::minutes(minute), volts: 0.3 }
}

#[test]
fn a_full_disk_refuses_an_import_and_entries_and_leaves_nothing_partial() {
    let dir = tempfile::tempdir().unwrap();
    let mut p = plant_at(&dir.path().join("p.db"));
    let before = p.dump().unwrap();
    p.store.limit_pages(0).unwrap();
    // a year of hourly readings cannot fit in no spare pages
    let err = p.import_current(csv(25, 25 + 24 * 365).as_bytes(), "year.csv", t("2027-03-01T00:00:00Z")).unwrap_err();
    assert!(matches!(err, PlantError::Store(StoreError::DiskFull)), "{err:?}");
    assert!(err.to_string().contains("disk is full") && err.to_string().contains("nothing was changed"), "{err}");
    assert_eq!(before, p.dump().unwrap());
    let batch: Vec<(Entry, Opts)> = (0..2000).map(|i| (voltage("A02", i), opts("2026-03-02T00:00:00Z"))).collect();
    let err = p.record_batch(&batch).unwrap_err();
    assert!(matches!(err, PlantError::Store(StoreError::DiskFull)), "{err:?}");
    assert_eq!(before, p.dump().unwrap());
    assert!(p.check().unwrap().problems.is_empty());
}

#[test]
fn a_database_held_by_another_writer_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("p.db");
    let mut p = plant_at(&path);
    let before = p.dump().unwrap();
    let other = rusqlite::Connection::open(&path).unwrap();
    other.execute_batch("BEGIN IMMEDIATE").unwrap();
    p.store.set_busy_timeout(StdDuration::from_millis(150)).unwrap();
    let err = p.record(&voltage("A02", 0), &opts("2026-03-02T00:00:00Z")).unwrap_err();
    assert!(matches!(err, PlantError::Store(StoreError::Busy)), "{err:?}");
    assert!(err.to_string().contains("another tankbook is writing"), "{err}");
    other.execute_batch("ROLLBACK").unwrap();
    assert_eq!(before, p.dump().unwrap());
    p.record(&voltage("A02", 0), &opts("2026-03-02T00:00:00Z")).unwrap();
}

#[test]
fn a_restore_while_another_process_writes_is_refused_and_changes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("p.db");
    let p = plant_at(&path);
    let copy = dir.path().join("copy.db");
    p.backup(&copy).unwrap();
    let before = p.dump().unwrap();
    let other = rusqlite::Connection::open(&path).unwrap();
    other.execute_batch("BEGIN IMMEDIATE").unwrap();
    let err = backup::restore_with(&path, &copy, "MK", t("2026-03-02T01:00:00Z"), StdDuration::from_millis(200)).unwrap_err();
    assert!(err.to_string().contains("another tankbook is writing"), "{err}");
    other.execute_batch("ROLLBACK").unwrap();
    assert_eq!(before, p.dump().unwrap());
    let left: Vec<_> = list_backups(&path).unwrap().into_iter().map(|b| b.path).collect();
    assert!(left.is_empty(), "a refused restore left {left:?}");
}

#[test]
fn a_restore_is_seen_by_another_tankbook_that_has_the_file_open() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("p.db");
    let mut p = plant_at(&path);
    let as_of = t("2026-03-01T20:00:00Z");
    let copy = dir.path().join("copy.db");
    p.backup(&copy).unwrap();
    let backed_up = p.forecast(as_of, None).unwrap();
    p.record(&Entry::Harvest { cell: "A01".into(), at: t("2026-03-01T18:00:00Z"), total_kg: 600.0 }, &opts("2026-03-02T00:00:00Z"))
        .unwrap();
    assert_ne!(backed_up, p.forecast(as_of, None).unwrap());
    // `p` stays open, as the screens would, while the restore runs
    let r = restore(&path, &copy, "mk", t("2026-03-02T01:00:00Z")).unwrap();
    assert_eq!(backed_up, p.forecast(as_of, None).unwrap(), "the open plant reads the restored database");
    assert!(p.check().unwrap().problems.is_empty());
    assert_eq!(r.schema_from, MIGRATIONS.len() as i64);
    let restores = p.store.db().restores().unwrap();
    assert_eq!(restores.len(), 1);
    assert_eq!(restores[0].3, "MK");
    // the kept copy is the database as it was, harvest and all
    let kept = Plant::open(&r.kept).unwrap();
    assert_eq!(kept.recent_events(None, 10).unwrap().len(), 2);
    // and the backup itself was only read
    assert!(Plant::open(&copy).unwrap().store.db().restores().unwrap().is_empty());
}

#[test]
fn damaged_entries_are_found_by_index_look_ups_on_open() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("p.db");
    drop(plant_at(&path));
    {
        let c = rusqlite::Connection::open(&path).unwrap();
        for sql in [
            "EXPLAIN QUERY PLAN SELECT id, kind FROM event INDEXED BY event_kind WHERE kind > 'a' AND kind < 'b'",
            "EXPLAIN QUERY PLAN SELECT id FROM event INDEXED BY event_bad_time
             WHERE at NOT BETWEEN -62167219200 AND 253402300799
                OR recorded_at NOT BETWEEN -62167219200 AND 253402300799
                OR end_at NOT BETWEEN -62167219200 AND 253402300799",
        ] {
            let plan: String = c.query_row(sql, [], |r| r.get(3)).unwrap();
            assert!(plan.contains("USING") && plan.contains("INDEX"), "{plan}");
        }
        c.execute_batch(
            "INSERT INTO event(kind, cell_id, at, logged_by, forced, recorded_at) VALUES ('crane', 'A02', 1772366400, 'X', 0, 1772366400);
             INSERT INTO event(kind, cell_id, at, logged_by, forced, recorded_at) VALUES ('aardvark', 'A02', 1772366400, 'X', 0, 1772366400);
             INSERT INTO event(kind, cell_id, at, logged_by, forced, recorded_at) VALUES ('zz', 'A02', 1772366400, 'X', 0, 1772366400);
             INSERT INTO event(kind, cell_id, at, end_at, logged_by, forced, recorded_at) VALUES ('cutout', 'A03', 1772366400, 253402300800, 'X', 0, 1772366400);",
        )
        .unwrap();
    }
    let mut p = Plant::open(&path).unwrap();
    let found: Vec<String> = p.damage().iter().map(|d| d.to_string()).collect();
    assert_eq!(found.len(), 4, "{found:?}");
    assert!(found[0].starts_with("entry 2 is of the kind 'crane'"), "{found:?}");
    assert!(found[1].contains("'aardvark'") && found[2].contains("'zz'"), "{found:?}");
    assert!(found[3].starts_with("entry 5: its end time holds 253402300800"), "{found:?}");
    let err = p.forecast(t("2026-03-01T12:00:00Z"), None).unwrap_err();
    assert!(err.to_string().contains("tankbook check") && err.to_string().contains("tankbook restore"), "{err}");
    // replaying A02 stops at its unknown entry: never replayed as an undo and dropped
    let cut = Entry::Cutout { cell: "A02".into(), from: t("2026-03-01T13:00:00Z"), to: None };
    let err = p.record(&cut, &opts("2026-03-02T00:00:00Z")).unwrap_err();
    assert!(err.to_string().contains("entry 2 is of the kind 'crane'"), "{err}");
    // a known kind is never reported
    assert!(EventKind::ALL.iter().all(|k| !found.iter().any(|f| f.contains(&format!("'{}'", k.name())))));
}

#[test]
fn an_undecodable_time_is_an_error_never_1970() {
    assert!(crate::store::time(253_402_300_799).is_ok());
    assert!(crate::store::time(-62_167_219_200).is_ok());
    assert!(crate::store::time(253_402_300_800).is_err());
    assert!(crate::store::time(i64::MIN).is_err());
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("p.db");
    let mut p = plant_at(&path);
    rusqlite::Connection::open(&path).unwrap().execute("UPDATE reading SET t = -99999999999999 WHERE t = 1772323200", []).unwrap();
    // the first reading now lies before any date: every forecast reads it
    let err = p.forecast(t("2026-03-01T12:00:00Z"), None).unwrap_err();
    assert!(err.to_string().contains("-99999999999999") && err.to_string().contains("damaged"), "{err}");
    let problems = p.check().unwrap().problems;
    assert!(problems.iter().any(|m| m.contains("circuit C1: a reading's time holds -99999999999999")), "{problems:?}");
    // and none is written: an entry at a time that could not be read back is refused
    let far = Entry::Voltage { cell: "A02".into(), at: chrono::DateTime::<chrono::Utc>::MAX_UTC, volts: 0.3 };
    assert!(matches!(p.record(&far, &opts("2026-03-02T00:00:00Z")), Err(PlantError::Store(StoreError::BadTime(_)))));
}

#[test]
fn internal_errors_say_they_are_bugs() {
    let e = PlantError::Internal("levelling the plan: no feasible day".into());
    assert!(e.to_string().starts_with("this is a bug in tankbook"), "{e}");
    assert!(e.to_string().contains("levelling the plan"));
}

#[test]
fn the_daily_backup_is_made_once_per_production_day_and_old_ones_go() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("p.db");
    let mut p = plant_at(&path);
    let layout = LAYOUT.replace("[defaults]", "[store]\nkeep_backups = 2\n\n[defaults]");
    p.load_layout(&layout, "l.toml", t("2026-03-01T00:00:00Z")).unwrap();
    // what a backup killed half-way leaves: never listed, and cleared before the next copy
    let folder = backup_folder(&path);
    std::fs::create_dir_all(&folder).unwrap();
    for junk in ["p-2026-03-01.db.partial", "p-2026-03-01.db.partial-journal"] {
        std::fs::write(folder.join(junk), b"half a copy").unwrap();
    }
    assert!(list_backups(&path).unwrap().is_empty());
    // day_starts_at 06:00: 05:59 on the 2nd is still the 1st's production day
    let first = backup_if_due(&path, t("2026-03-02T05:59:00Z")).unwrap().unwrap();
    assert!(first.ends_with("backups/p-2026-03-01.db"), "{}", first.display());
    assert_eq!(backup_if_due(&path, t("2026-03-01T23:00:00Z")).unwrap(), None);
    Store::verify_file(&first).unwrap();
    for day in ["2026-03-02", "2026-03-03", "2026-03-04"] {
        assert!(backup_if_due(&path, t(&format!("{day}T07:00:00Z"))).unwrap().is_some());
    }
    let names: Vec<String> =
        list_backups(&path).unwrap().iter().map(|b| b.path.file_name().unwrap().to_string_lossy().into_owned()).collect();
    let mut names = names;
    names.sort();
    assert_eq!(names, ["p-2026-03-03.db", "p-2026-03-04.db"]);
    assert!(list_backups(&path).unwrap().iter().all(|b| b.kind == BackupKind::Daily && b.bytes > 0));
    let left: Vec<_> =
        std::fs::read_dir(&folder).unwrap().map(|e| e.unwrap().file_name()).filter(|n| n.to_string_lossy().contains("partial")).collect();
    assert!(left.is_empty(), "{left:?}");
}
