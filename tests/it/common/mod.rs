//! Helpers that make each CLI test a few lines: a fresh plant database in a
//! temporary folder, a fixed clock, and a dump to prove a command changed nothing.
#![allow(dead_code)]

use assert_cmd::Command;
use std::path::{Path, PathBuf};

pub struct Tk {
    pub dir: tempfile::TempDir,
    pub db: PathBuf,
    pub now: String,
}

pub fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures").join(name)
}

impl Tk {
    pub fn new(now: &str) -> Tk {
        let dir = tempfile::tempdir().expect("temp dir");
        let db = dir.path().join("plant.db");
        Tk { dir, db, now: now.to_string() }
    }

    /// A plant with the plant-check layout loaded.
    pub fn with_layout(now: &str, layout: &str) -> Tk {
        let tk = Tk::new(now);
        tk.ok(&["layout", "load", fixture(layout).to_str().unwrap()]);
        tk
    }

    pub fn cmd(&self) -> Command {
        let mut c = Command::cargo_bin("tankbook").expect("binary");
        c.env("TANKBOOK_DB", &self.db).env("TANKBOOK_NOW", &self.now).env("TANKBOOK_BY", "JD").env_remove("NO_COLOR");
        c
    }

    /// Runs and expects success; returns stdout.
    pub fn ok(&self, args: &[&str]) -> String {
        let out = self.cmd().args(args).output().expect("run");
        assert!(out.status.success(), "{args:?} failed: {}", String::from_utf8_lossy(&out.stderr));
        String::from_utf8_lossy(&out.stdout).into_owned()
    }

    /// Runs and expects exit code `code`; returns stderr.
    pub fn fails(&self, code: i32, args: &[&str]) -> String {
        let out = self.cmd().args(args).output().expect("run");
        assert_eq!(
            out.status.code(),
            Some(code),
            "{args:?}: stdout {} stderr {}",
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8_lossy(&out.stderr).into_owned()
    }

    pub fn json(&self, args: &[&str]) -> serde_json::Value {
        serde_json::from_str(&self.ok(args)).expect("json")
    }

    pub fn dump(&self) -> String {
        tankbook::plant::Plant::open(&self.db).expect("open").dump().expect("dump")
    }

    /// Writes a file in the test folder and returns its path as a string.
    pub fn file(&self, name: &str, text: &str) -> String {
        let p = self.dir.path().join(name);
        std::fs::write(&p, text).expect("write");
        p.to_string_lossy().into_owned()
    }
}

/// The plant check: layout, 24 h at 30 kA from 2026-03-01T00:00Z on C1, and
/// 50 × 380 kg anodes set in A01 at `set_at`; the clock at the end of the day.
pub fn plant_check_day(set_at: &str) -> Tk {
    let tk = Tk::with_layout("2026-03-02T00:00:00Z", "plant_check.toml");
    let pts: Vec<(f64, f64)> = (0..=24).map(|h| (h as f64, 30_000.0)).collect();
    let csv = tk.file("c.csv", &current_csv(&pts));
    tk.ok(&["import", "current", &csv]);
    tk.ok(&["log", "anodes", "--cell", "A01", "--at", set_at, "--count", "50", "--mean-kg", "380"]);
    tk
}

/// A current CSV for circuit C1: `(hours after start, amps)` pairs from 2026-03-01T00:00Z.
pub fn current_csv(points: &[(f64, f64)]) -> String {
    let t0 = chrono::DateTime::parse_from_rfc3339("2026-03-01T00:00:00Z").unwrap();
    let mut s = String::from("time,circuit,amps\n");
    for (h, a) in points {
        let t = t0 + chrono::Duration::seconds((h * 3600.0).round() as i64);
        s.push_str(&format!("{},C1,{a}\n", t.to_utc().format("%Y-%m-%dT%H:%M:%SZ")));
    }
    s
}

/// Hours between two RFC 3339 strings.
pub fn hours_between(a: &str, b: &str) -> f64 {
    let a = chrono::DateTime::parse_from_rfc3339(a).unwrap();
    let b = chrono::DateTime::parse_from_rfc3339(b).unwrap();
    (b - a).num_milliseconds() as f64 / 3.6e6
}

/// Turns the database at `db` into what a tankbook from before the migration
/// named `NNN_…` (by its number) wrote: every table and index that migration
/// and the later ones add is dropped (found by comparing with a fresh database
/// migrated only that far) and `user_version` is set back, so upgrade tests
/// keep holding as migrations are added.
pub fn downgrade_to_before(db: &Path, number: &str) {
    let before = tankbook::store::MIGRATIONS.iter().position(|(name, _)| name.starts_with(number)).expect("a known migration");
    let mut fresh = rusqlite::Connection::open_in_memory().unwrap();
    tankbook::store::migrate(&mut fresh, before).unwrap();
    let names = |c: &rusqlite::Connection, kind: &str| -> Vec<String> {
        let mut st = c.prepare("SELECT name FROM sqlite_master WHERE type = ?1 AND name NOT LIKE 'sqlite_%'").unwrap();
        st.query_map([kind], |r| r.get(0)).unwrap().map(Result::unwrap).collect()
    };
    let c = rusqlite::Connection::open(db).unwrap();
    for kind in ["index", "table"] {
        let keep = names(&fresh, kind);
        for name in names(&c, kind).into_iter().filter(|n| !keep.contains(n)) {
            c.execute_batch(&format!("DROP {} \"{name}\";", kind.to_uppercase())).unwrap();
        }
    }
    c.pragma_update(None, "user_version", before as i64).unwrap();
}
