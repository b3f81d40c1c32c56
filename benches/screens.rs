//! How fast the screens answer, measured in a real pseudo-terminal at 80×24 on
//! the release binary: the time from start to the first frame showing the
//! tankhouse tiles, and from the key confirming an entry (a cell voltage typed
//! through the form) to the frame showing it recorded. Each on the 102-cell demo
//! (the baseline) and on a plant-scale demo in the same run; medians of `RUNS`.
//!
//!     cargo bench --bench screens
//!
//! Environment: `RUNS` (default 5); `BIG_DB` / `BASE_DB`: an existing plant to
//! copy for each run instead of writing the demo once (`BIG`, default
//! `--cells 3000 --days 30`, are the big demo's arguments); `TANKBOOK_NOW`
//! (default 2026-11-20T05:30:00Z, the demos' clock). The databases given are
//! copied, never written; `TANKBOOK_BIN` measures another build. Prints a table on stdout.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // a measurement stops loudly, like the tests

use portable_pty::{Child, CommandBuilder, MasterPty, PtySize, native_pty_system};
use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

const COLS: u16 = 80;
const ROWS: u16 = 24;

/// The binary measured: cargo's release build, or `TANKBOOK_BIN` (to set another build beside it).
fn bin() -> String {
    std::env::var("TANKBOOK_BIN").unwrap_or_else(|_| env!("CARGO_BIN_EXE_tankbook").to_string())
}

fn now() -> String {
    std::env::var("TANKBOOK_NOW").unwrap_or_else(|_| "2026-11-20T05:30:00Z".into())
}

/// tankbook in a pseudo-terminal, and the screen it drew.
struct Term {
    _master: Box<dyn MasterPty + Send>,
    writer: Box<dyn Write + Send>,
    child: Box<dyn Child + Send + Sync>,
    screen: Arc<Mutex<vt100::Parser>>,
}

impl Term {
    fn open(db: &Path) -> Term {
        let pair = native_pty_system().openpty(PtySize { rows: ROWS, cols: COLS, pixel_width: 0, pixel_height: 0 }).unwrap();
        let mut cmd = CommandBuilder::new(bin());
        cmd.args(["--db", db.to_str().unwrap()]);
        cmd.env("TANKBOOK_NOW", now());
        cmd.env("TERM", "xterm-256color");
        let child = pair.slave.spawn_command(cmd).unwrap();
        drop(pair.slave);
        let rows = std::num::NonZeroU16::new(ROWS).unwrap();
        let cols = std::num::NonZeroU16::new(COLS).unwrap();
        let screen = Arc::new(Mutex::new(vt100::Parser::new(rows, cols, 0)));
        let mut reader = pair.master.try_clone_reader().unwrap();
        let feed = Arc::clone(&screen);
        std::thread::spawn(move || {
            let mut buf = [0u8; 16384];
            while let Ok(n) = reader.read(&mut buf) {
                if n == 0 {
                    break;
                }
                feed.lock().unwrap().process(&buf[..n]);
            }
        });
        let writer = pair.master.take_writer().unwrap();
        Term { _master: pair.master, writer, child, screen }
    }

    fn text(&self) -> String {
        self.screen.lock().unwrap().screen().contents()
    }

    /// Waits until the screen shows `what` (polled every millisecond, 60 s at most): when it did.
    fn wait_for(&self, what: &str) -> Instant {
        self.wait_until(what, |s| s.contains(what))
    }

    /// Waits until the screen's text passes `ok`: when it did (`what` names it if it never does).
    fn wait_until(&self, what: &str, ok: impl Fn(&str) -> bool) -> Instant {
        let end = Instant::now() + Duration::from_secs(60);
        while Instant::now() < end {
            if ok(&self.text()) {
                return Instant::now();
            }
            std::thread::sleep(Duration::from_millis(1));
        }
        panic!("the screen never showed {what}:\n{}", self.text());
    }

    fn send(&mut self, keys: &str) {
        self.writer.write_all(keys.as_bytes()).unwrap();
        self.writer.flush().unwrap();
    }

    fn quit(mut self) {
        self.send("q");
        let end = Instant::now() + Duration::from_secs(30);
        while Instant::now() < end {
            if self.child.try_wait().unwrap().is_some() {
                return;
            }
            std::thread::sleep(Duration::from_millis(10));
        }
        let _ = self.child.kill();
        panic!("tankbook did not quit:\n{}", self.text());
    }
}

/// One run on a fresh copy of `db`: start → first frame with tiles, start →
/// the whole plant's counts in the header, confirm → frame with the entry recorded.
fn run_once(db: &Path, dir: &Path) -> [Duration; 3] {
    let copy = dir.join("plant.db");
    for ext in ["", "-wal", "-shm"] {
        let _ = std::fs::remove_file(format!("{}{ext}", copy.display()));
    }
    std::fs::copy(db, &copy).unwrap();
    let wal = PathBuf::from(format!("{}-wal", db.display()));
    if wal.exists() {
        std::fs::copy(&wal, format!("{}-wal", copy.display())).unwrap();
    }
    let t0 = Instant::now();
    let mut t = Term::open(&copy);
    // the tiles under the initials box
    let first = t.wait_for("━━ circuit").duration_since(t0);
    // the header's counts due by the day's end ("due by 06:00: …" or "by 06:00: … H") need every cell's
    // forecast: the first frame of a big plant says "reading the whole plant…" there instead
    let header = |s: &str| s.lines().next().is_some_and(|top| top.contains("by ") && !top.contains("reading"));
    let whole = t.wait_until("the header's counts", header).duration_since(t0);
    t.wait_for("Who is logging");
    t.send("bn\r");
    t.wait_for("logging as BN");
    t.send("n");
    t.wait_for("cell voltage");
    t.send("v");
    t.wait_for("Cell voltage");
    t.send("0.30\r");
    t.wait_for("Review");
    let text = t.text();
    assert!(!text.contains("record anyway"), "the bench's voltage entry was questioned:\n{text}");
    let t1 = Instant::now();
    t.send("y");
    let shown = t.wait_for("recorded voltage").duration_since(t1);
    t.quit();
    [first, whole, shown]
}

fn median(mut v: Vec<Duration>) -> Duration {
    v.sort();
    let n = v.len();
    if n % 2 == 1 { v[n / 2] } else { (v[n / 2 - 1] + v[n / 2]) / 2 }
}

/// The plant to copy: the one named in `var`, else the demo written once with `args`.
fn plant(var: &str, args: &[&str], dir: &Path, name: &str) -> PathBuf {
    if let Ok(p) = std::env::var(var) {
        return PathBuf::from(p);
    }
    let db = dir.join(name);
    eprintln!("writing the demo {name} ({})…", args.join(" "));
    let out = std::process::Command::new(bin())
        .args(["--db", db.to_str().unwrap(), "demo", "--no-tui"])
        .args(args)
        .env("TANKBOOK_NOW", now())
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    db
}

fn ms(d: Duration) -> String {
    format!("{:.0} ms", d.as_secs_f64() * 1000.0)
}

fn ratio(base: Duration, big: Duration) -> String {
    format!("{:.2}", big.as_secs_f64() / base.as_secs_f64().max(1e-9))
}

fn main() {
    // `cargo bench` passes `--bench`; a filter or other flags mean nothing here
    let runs: usize = std::env::var("RUNS").ok().and_then(|r| r.parse().ok()).unwrap_or(5).max(1);
    let dir = tempfile::tempdir().unwrap();
    let big_args = std::env::var("BIG").unwrap_or_else(|_| "--cells 3000 --days 30".into());
    let big_args: Vec<&str> = big_args.split_whitespace().collect();
    let base = plant("BASE_DB", &[], dir.path(), "base.db");
    let big = plant("BIG_DB", &big_args, dir.path(), "big.db");
    let mut rows = Vec::new();
    for (name, db) in [("102-cell demo", &base), ("big plant", &big)] {
        let work = tempfile::tempdir().unwrap();
        let mut got: [Vec<Duration>; 3] = Default::default();
        for _ in 0..runs {
            for (all, d) in got.iter_mut().zip(run_once(db, work.path())) {
                all.push(d);
            }
        }
        let shown = |v: &[Duration]| v.iter().map(|d| ms(*d)).collect::<Vec<_>>().join(" ");
        eprintln!("{name}: first frame {}; whole plant {}; confirm → frame {}", shown(&got[0]), shown(&got[1]), shown(&got[2]));
        rows.push(got.map(median));
    }
    let (b, g) = (&rows[0], &rows[1]);
    println!("screens at {COLS}×{ROWS}, medians of {runs} (big plant: {})", std::env::var("BIG_DB").unwrap_or_else(|_| big_args.join(" ")));
    println!("| what | 102 cells | big plant | ratio | goal |");
    println!("|---|---|---|---|---|");
    println!("| first frame with the tiles | {} | {} | {} | ≤ 250 ms |", ms(b[0]), ms(g[0]), ratio(b[0], g[0]));
    println!("| whole plant on screen (header counts) | {} | {} | {} | |", ms(b[1]), ms(g[1]), ratio(b[1], g[1]));
    println!("| confirm of a voltage entry → frame | {} | {} | {} | ≤ 50 ms |", ms(b[2]), ms(g[2]), ratio(b[2], g[2]));
}
