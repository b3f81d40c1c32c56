//! kill -9 at random moments during imports, entries and restores, and two processes
//! writing at once: after every round the database passes SQLite's integrity
//! check and `check`, an import or entry is either all there or not at all,
//! and every backup in `backups/` is sound (a kill can land in the daily backup).
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;
use common::*;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};
use tankbook::plant::Plant;

const ROUNDS: usize = 24;

/// A small xorshift generator: no crate needed, and the seed is printed so a
/// failing round can be run again (`CRASH_SEED=…`).
struct Rng(u64);

impl Rng {
    fn new() -> Rng {
        let seed = std::env::var("CRASH_SEED").ok().and_then(|s| s.parse().ok()).unwrap_or_else(|| {
            std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_nanos() as u64).unwrap_or(1) | 1
        });
        eprintln!("CRASH_SEED={seed}");
        Rng(seed)
    }
    fn below(&mut self, n: u64) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0 % n.max(1)
    }
}

fn spawn(tk: &Tk, args: &[&str]) -> Child {
    let mut c = Command::new(env!("CARGO_BIN_EXE_tankbook"));
    c.args(args).env("TANKBOOK_DB", &tk.db).env("TANKBOOK_NOW", &tk.now).env("TANKBOOK_BY", "JD");
    c.stdout(Stdio::null()).stderr(Stdio::null()).spawn().expect("spawn tankbook")
}

/// Waits for `child` at most `limit`, then kills it: no round can hang the suite.
fn wait_bounded(child: &mut Child, limit: Duration) {
    let start = Instant::now();
    while child.try_wait().unwrap().is_none() {
        assert!(start.elapsed() < limit, "tankbook did not finish within {limit:?}");
        std::thread::sleep(Duration::from_millis(2));
    }
}

/// Runs `args`, kills it with SIGKILL after `delay` if still running; true if it was killed.
fn run_and_kill(tk: &Tk, args: &[&str], delay: Duration) -> bool {
    let mut child = spawn(tk, args);
    std::thread::sleep(delay);
    let killed = child.try_wait().unwrap().is_none();
    if killed {
        child.kill().unwrap(); // SIGKILL on Unix
    }
    wait_bounded(&mut child, Duration::from_secs(30));
    killed
}

fn timed(tk: &Tk, args: &[&str]) -> Duration {
    let start = Instant::now();
    let mut child = spawn(tk, args);
    wait_bounded(&mut child, Duration::from_secs(60));
    start.elapsed()
}

/// SQLite's checks and tankbook's own: derived records match the log.
fn sound(tk: &Tk, round: usize) {
    let mut p = Plant::open(&tk.db).unwrap();
    let r = p.check().unwrap();
    assert!(r.problems.is_empty(), "round {round}: {:?}", r.problems);
    // a daily backup cut short must never pass for a good one
    for b in tankbook::plant::list_backups(&tk.db).unwrap() {
        tankbook::store::Store::verify_file(&b.path).unwrap_or_else(|e| panic!("round {round}: {}: {e}", b.path.display()));
    }
}

fn readings(tk: &Tk) -> i64 {
    Plant::open(&tk.db).unwrap().check().unwrap().readings
}

fn entries(tk: &Tk) -> i64 {
    Plant::open(&tk.db).unwrap().check().unwrap().events
}

/// Minute readings for one day, `day` days after 2026-03-01.
fn day_csv(day: i64) -> String {
    let t0 = chrono::DateTime::parse_from_rfc3339("2026-03-01T00:00:00Z").unwrap() + chrono::Duration::days(day);
    let mut s = String::from("time,circuit,amps\n");
    for m in 0..1440 {
        s.push_str(&format!("{},C1,{}\n", (t0 + chrono::Duration::minutes(m)).to_utc().format("%Y-%m-%dT%H:%M:%SZ"), 30_000 + m % 7));
    }
    s
}

#[test]
fn kill_9_during_imports_leaves_each_import_all_or_nothing() {
    let tk = plant_check_day("2026-03-01T00:00:00Z");
    let mut rng = Rng::new();
    // how long a whole import takes here, to spread the kills over it
    let f = tk.file("day1.csv", &day_csv(1));
    let full = timed(&tk, &["import", "current", &f]);
    let per_file = 1440;
    let (mut killed, mut done) = (0, 0);
    for round in 0..ROUNDS {
        let f = tk.file(&format!("day{}.csv", round + 2), &day_csv(round as i64 + 2));
        let before = readings(&tk);
        let delay = Duration::from_micros(rng.below(full.as_micros() as u64 * 6 / 5));
        // each round on a new production day, so each also makes a daily backup a kill can cut short
        let day = Tk { dir: tempfile::tempdir().unwrap(), db: tk.db.clone(), now: format!("2026-04-{:02}T07:00:00Z", round + 1) };
        if run_and_kill(&day, &["import", "current", &f], delay) {
            killed += 1;
        }
        let after = readings(&tk);
        assert!(after == before || after == before + per_file, "round {round}: {before} readings became {after}");
        if after > before {
            done += 1;
        }
        sound(&tk, round);
    }
    eprintln!("{ROUNDS} import rounds: {killed} killed while running, {done} imports complete; a full import took {full:?}");
}

#[test]
fn kill_9_during_entries_leaves_each_entry_all_or_nothing() {
    let tk = plant_check_day("2026-03-01T00:00:00Z");
    let mut rng = Rng::new();
    let full = timed(&tk, &["log", "voltage", "--cell", "A02", "--at", "2026-03-01T01:00:00Z", "--volts", "0.3"]);
    let (mut killed, mut done) = (0, 0);
    for round in 0..ROUNDS {
        let before = entries(&tk);
        // harvests close crops and rebuild the cell: the entry writes several tables
        let at = format!("2026-03-01T{:02}:{:02}:00Z", 2 + round / 2, (round % 2) * 30);
        let delay = Duration::from_micros(rng.below(full.as_micros() as u64 * 6 / 5));
        let args = ["log", "harvest", "--cell", "A01", "--at", &at, "--total-kg", "40", "--force"];
        if run_and_kill(&tk, &args, delay) {
            killed += 1;
        }
        let after = entries(&tk);
        assert!(after == before || after == before + 1, "round {round}: {before} entries became {after}");
        if after > before {
            done += 1;
        }
        sound(&tk, round);
    }
    eprintln!("{ROUNDS} entry rounds: {killed} killed while running, {done} entries recorded; a whole entry took {full:?}");
}

#[test]
fn kill_9_during_restores_leaves_the_old_database_or_the_backup() {
    let tk = plant_check_day("2026-03-01T00:00:00Z");
    let mut rng = Rng::new();
    let small = tk.dir.path().join("small.db");
    tk.ok(&["backup", small.to_str().unwrap()]);
    for h in 1..6 {
        tk.ok(&["log", "voltage", "--cell", "A02", "--at", &format!("2026-03-01T{h:02}:00:00Z"), "--volts", "0.3"]);
    }
    let large = tk.dir.path().join("large.db");
    tk.ok(&["backup", large.to_str().unwrap()]);
    let (n_small, n_large) = (1, 6);
    let full = timed(&tk, &["restore", small.to_str().unwrap()]);
    let (mut killed, mut done) = (0, 0);
    for round in 0..12 {
        // a new second each round: each restore keeps its own dated copy
        let now = Tk { dir: tempfile::tempdir().unwrap(), db: tk.db.clone(), now: format!("2026-03-02T00:00:{:02}Z", round + 1) };
        let before = entries(&tk);
        let (file, n) = if before == n_small { (&large, n_large) } else { (&small, n_small) };
        let delay = Duration::from_micros(rng.below(full.as_micros() as u64 * 6 / 5));
        if run_and_kill(&now, &["restore", file.to_str().unwrap()], delay) {
            killed += 1;
        }
        let after = entries(&tk);
        assert!(after == before || after == n, "round {round}: {before} entries became {after}, not the backup's {n}");
        if after != before {
            done += 1;
        }
        sound(&tk, round);
    }
    eprintln!("12 restore rounds: {killed} killed while running, {done} restores complete; a whole restore took {full:?}");
}

#[test]
fn two_processes_writing_at_once_lose_nothing() {
    let tk = plant_check_day("2026-03-01T00:00:00Z");
    let before = entries(&tk);
    let per_writer = 30;
    let writers: Vec<_> = ["A02", "A03"]
        .into_iter()
        .map(|cell| {
            let (db, now) = (tk.db.clone(), tk.now.clone());
            std::thread::spawn(move || {
                for i in 0..per_writer {
                    let at = format!("2026-03-01T{:02}:{:02}:00Z", 1 + i / 60, i % 60);
                    let out = Command::new(env!("CARGO_BIN_EXE_tankbook"))
                        .args(["log", "voltage", "--cell", cell, "--at", &at, "--volts", "0.3"])
                        .env("TANKBOOK_DB", &db)
                        .env("TANKBOOK_NOW", &now)
                        .env("TANKBOOK_BY", "JD")
                        .output()
                        .unwrap();
                    assert!(out.status.success(), "{cell} entry {i}: {}", String::from_utf8_lossy(&out.stderr));
                }
            })
        })
        .collect();
    for w in writers {
        w.join().unwrap();
    }
    assert_eq!(entries(&tk), before + 2 * per_writer);
    for cell in ["A02", "A03"] {
        let n = tk.json(&["events", "--cell", cell, "--limit", "1000", "--json"])["events"].as_array().unwrap().len();
        assert_eq!(n, per_writer as usize, "{cell}");
    }
    sound(&tk, 0);
}
