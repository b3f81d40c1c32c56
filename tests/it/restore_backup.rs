//! The way back: daily automatic backups, `backup --list`, `restore` (round
//! trip, and every refusal changing nothing), and damaged or foreign data
//! reported by `check` and refused by `forecast` and `plan`.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;
use common::*;
use std::path::{Path, PathBuf};

fn plant() -> Tk {
    plant_check_day("2026-03-01T00:00:00Z")
}

/// The files in the test plant's backups folder, by name.
fn backups(tk: &Tk) -> Vec<String> {
    let dir = tk.dir.path().join("backups");
    let mut v: Vec<String> = match std::fs::read_dir(&dir) {
        Ok(d) => d.map(|e| e.unwrap().file_name().to_string_lossy().into_owned()).collect(),
        Err(_) => Vec::new(),
    };
    v.sort();
    v
}

/// The same database, with the clock at `now`.
fn at(tk: &Tk, now: &str) -> Tk {
    Tk { dir: tempfile::tempdir().unwrap(), db: tk.db.clone(), now: now.into() }
}

fn harvest(tk: &Tk, at: &str, kg: &str) {
    tk.ok(&["log", "harvest", "--cell", "A01", "--at", at, "--total-kg", kg, "--force"]);
}

#[test]
fn the_first_write_of_a_production_day_makes_its_backup() {
    let tk = plant();
    // plant_check.toml: the production day starts at 06:00 UTC, so 2026-03-02T00:00Z is still the 1st's
    assert_eq!(backups(&tk), ["plant-2026-03-01.db"]);
    let out = tk.cmd().args(["log", "voltage", "--cell", "A02", "--at", "2026-03-01T03:00:00Z", "--volts", "0.3"]).output().unwrap();
    assert!(out.status.success());
    assert!(!String::from_utf8_lossy(&out.stderr).contains("backup"), "no second backup the same day");
    let next = at(&tk, "2026-03-02T07:00:00Z");
    let out = next.cmd().args(["log", "voltage", "--cell", "A02", "--at", "2026-03-02T06:30:00Z", "--volts", "0.3"]).output().unwrap();
    assert!(String::from_utf8_lossy(&out.stderr).contains("today's backup written to"), "{out:?}");
    assert_eq!(backups(&tk), ["plant-2026-03-01.db", "plant-2026-03-02.db"]);
    // reading commands never back up
    at(&tk, "2026-03-03T07:00:00Z").ok(&["forecast"]);
    at(&tk, "2026-03-03T07:00:00Z").ok(&["check"]);
    assert_eq!(backups(&tk).len(), 2);
}

#[test]
fn backup_list_shows_time_size_and_kind() {
    let tk = plant();
    let out = tk.ok(&["backup", "--list"]);
    assert!(out.contains("plant-2026-03-01.db") && out.contains("daily") && out.contains("KiB"), "{out}");
    let j = tk.json(&["backup", "--list", "--json"]);
    assert_eq!(j["schema"], 1);
    let b = &j["backups"][0];
    assert_eq!(b["kind"], "daily");
    assert!(b["bytes"].as_u64().unwrap() > 4096, "{b}");
    assert!(b["modified"].as_str().unwrap().contains('T'), "{b}");
    let empty = Tk::new("2026-03-01T00:00:00Z");
    assert!(empty.ok(&["backup", "--list"]).contains("no backups"));
}

#[test]
fn the_demo_database_is_not_backed_up() {
    let tk = Tk::new("2026-11-20T05:30:00Z");
    tk.ok(&["demo", "--no-tui", "--cells", "8", "--days", "21"]);
    tk.ok(&["log", "voltage", "--cell", "A01", "--at", "2026-11-20T05:00:00Z", "--volts", "0.3", "--force"]);
    assert!(backups(&tk).is_empty(), "{:?}", backups(&tk));
}

#[test]
fn restore_round_trip_gives_the_backups_forecast_and_keeps_the_database_as_it_was() {
    let tk = plant();
    let as_of = ["forecast", "--at", "2026-03-01T23:00:00Z", "--json"];
    let backed_up = tk.json(&as_of);
    let copy = tk.dir.path().join("copy.db");
    tk.ok(&["backup", copy.to_str().unwrap()]);
    harvest(&tk, "2026-03-01T12:00:00Z", "300");
    let changed = tk.json(&as_of);
    assert_ne!(backed_up, changed);
    let out = tk.ok(&["restore", copy.to_str().unwrap(), "--by", "MK"]);
    assert_eq!(tk.json(&as_of), backed_up, "forecast after restore equals the backup's");
    assert!(tk.ok(&["check"]).contains("ok:"));
    // the message names the kept copy, which holds the harvest
    let kept = out.split("kept at ").nth(1).map(|s| PathBuf::from(s.trim())).unwrap_or_default();
    assert!(kept.starts_with(tk.dir.path().join("backups")) && kept.exists(), "{out}");
    let kept_tk = Tk { dir: tempfile::tempdir().unwrap(), db: kept, now: tk.now.clone() };
    assert_eq!(kept_tk.json(&as_of), changed);
    // who restored, from what, is recorded in the restored database
    let c = rusqlite::Connection::open(&tk.db).unwrap();
    let (by, source): (String, String) =
        c.query_row("SELECT restored_by, source FROM restore_log", [], |r| Ok((r.get(0)?, r.get(1)?))).unwrap();
    assert_eq!(by, "MK");
    assert!(source.ends_with("copy.db"), "{source}");
    assert!(tk.ok(&["backup", "--list"]).contains("before a restore"));
}

#[test]
fn a_damaged_or_foreign_file_is_refused_and_nothing_changes() {
    let tk = plant();
    let copy = tk.dir.path().join("copy.db");
    tk.ok(&["backup", copy.to_str().unwrap()]);
    let bytes = std::fs::read(&copy).unwrap();
    let truncated = tk.dir.path().join("truncated.db");
    std::fs::write(&truncated, &bytes[..bytes.len() / 2]).unwrap();
    let scribbled = tk.dir.path().join("scribbled.db");
    // every b-tree page header after the first written over, as a failing disk would
    let mut b = bytes.clone();
    for page in b.chunks_mut(4096).skip(1) {
        page[..12].fill(0x5a);
    }
    std::fs::write(&scribbled, &b).unwrap();
    let foreign = tk.dir.path().join("foreign.db");
    rusqlite::Connection::open(&foreign)
        .unwrap()
        .execute_batch("CREATE TABLE recipe(name TEXT); INSERT INTO recipe VALUES ('soup');")
        .unwrap();
    let newer = tk.dir.path().join("newer.db");
    std::fs::copy(&copy, &newer).unwrap();
    rusqlite::Connection::open(&newer).unwrap().pragma_update(None, "user_version", 99).unwrap();
    let unknown_kind = tk.dir.path().join("unknown_kind.db");
    std::fs::copy(&copy, &unknown_kind).unwrap();
    rusqlite::Connection::open(&unknown_kind)
        .unwrap()
        .execute(
            "INSERT INTO event(kind, cell_id, at, logged_by, forced, recorded_at) VALUES ('crane', 'A02', 1772323200, 'X', 0, 1772323200)",
            [],
        )
        .unwrap();
    let text = tk.file("notes.db", "time,circuit,amps\n");
    let cases: Vec<(PathBuf, &str)> = vec![
        (PathBuf::from(&text), "not a sound tankbook database"),
        (truncated, "not a sound tankbook database"),
        (scribbled, "not a sound tankbook database"),
        (foreign, "no table 'plant_meta'"),
        (newer, "newer tankbook"),
        (unknown_kind, "'crane'"),
        (tk.dir.path().join("missing.db"), "not a sound tankbook database"),
        (tk.db.clone(), "the live database itself"),
    ];
    let before = tk.dump();
    let listed = backups(&tk);
    for (file, why) in cases {
        let err = tk.fails(1, &["restore", file.to_str().unwrap(), "--by", "MK"]);
        assert!(err.contains("cannot be restored") && err.contains(why) && err.contains("Nothing was changed"), "{file:?}: {err}");
        assert_eq!(before, tk.dump(), "{file:?} changed the database");
        assert_eq!(listed, backups(&tk), "{file:?} left files in backups/");
    }
    let err = tk.fails(1, &["restore", copy.to_str().unwrap(), "--by", "two words"]);
    assert!(err.contains("--by"), "{err}");
    assert_eq!(before, tk.dump());
}

#[test]
fn an_older_backup_is_brought_up_to_this_version_on_restore() {
    let tk = plant();
    let copy = tk.dir.path().join("copy.db");
    tk.ok(&["backup", copy.to_str().unwrap()]);
    // what a tankbook before migration 004 wrote
    downgrade_to_before(&copy, "004");
    let before = tk.json(&["forecast", "--json"]);
    tk.ok(&["restore", copy.to_str().unwrap(), "--by", "MK"]);
    assert_eq!(tk.json(&["forecast", "--json"]), before);
    assert!(tk.ok(&["check"]).contains("ok:"));
}

#[test]
fn a_live_database_too_damaged_to_open_can_still_be_restored() {
    let tk = plant();
    let copy = tk.dir.path().join("copy.db");
    tk.ok(&["backup", copy.to_str().unwrap()]);
    let before = tk.json(&["forecast", "--json"]);
    for suffix in ["-wal", "-shm"] {
        let _ = std::fs::remove_file(format!("{}{suffix}", tk.db.display()));
    }
    std::fs::write(&tk.db, b"this is not a database any more, a disk fault wrote over it").unwrap();
    tk.fails(1, &["forecast"]);
    let out = tk.ok(&["restore", copy.to_str().unwrap(), "--by", "MK"]);
    assert!(out.contains("kept at"), "{out}");
    assert_eq!(tk.json(&["forecast", "--json"]), before);
    let kept: Vec<String> = backups(&tk).into_iter().filter(|n| n.contains("before-restore")).collect();
    assert_eq!(kept.len(), 1, "{:?}", backups(&tk));
    let bytes = std::fs::read(tk.dir.path().join("backups").join(&kept[0])).unwrap();
    assert!(bytes.starts_with(b"this is not a database"), "the damaged file is kept as it was");
}

fn tamper(db: &Path, sql: &str) {
    rusqlite::Connection::open(db).unwrap().execute_batch(sql).unwrap();
}

#[test]
fn unknown_kinds_and_bad_times_are_reported_by_check_and_refused_by_forecast() {
    let tk = plant();
    harvest(&tk, "2026-03-01T12:00:00Z", "300");
    tamper(
        &tk.db,
        "INSERT INTO event(kind, cell_id, at, logged_by, forced, recorded_at) VALUES ('crane_lift', 'A02', 1772323200, 'X', 0, 1772323200);
         UPDATE event SET at = 99999999999999 WHERE id = 2;",
    );
    let out = tk.cmd().arg("check").output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(stdout.contains("problem: entry 3 is of the kind 'crane_lift'"), "{stdout}");
    assert!(stdout.contains("problem: entry 2: its time holds 99999999999999"), "{stdout}");
    let j: serde_json::Value = serde_json::from_slice(&tk.cmd().args(["check", "--json"]).output().unwrap().stdout).unwrap();
    assert!(j["problems"].as_array().unwrap().len() >= 2, "{j}");
    for args in [&["forecast"][..], &["forecast", "--cell", "A01", "--json"], &["plan"], &["events"]] {
        let err = tk.fails(1, args);
        assert!(err.contains("entry 3") && err.contains("entry 2"), "{args:?}: {err}");
        assert!(err.contains("tankbook check") && err.contains("tankbook restore"), "{args:?}: {err}");
    }
}

#[test]
fn a_replay_contradiction_in_check_names_the_entry_and_its_field() {
    let tk = plant();
    // a second load of anodes with no scrap between, as a damaged or hand-edited log would hold
    tamper(
        &tk.db,
        "INSERT INTO event(kind, cell_id, at, count, kg, logged_by, forced, recorded_at) VALUES ('anodes', 'A01', 1772355600, 50, 380, 'X', 0, 1772355600);",
    );
    let out = tk.cmd().arg("check").output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(stdout.contains("cell A01: entry 2 (anodes of A01), its time: anodes were already set"), "{stdout}");
}
