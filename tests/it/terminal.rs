//! The screens in a real pseudo-terminal: the test binary runs in a pty made by
//! `portable-pty`, and `vt100` reads what it draws. Nothing but Rust is needed
//! (no tmux). What is proved: the program ends with its terminal, a signal
//! restores the terminal, a resize is redrawn, a form typed when the terminal
//! died comes back, and help reaches the quit key at 80×24. Also: without a
//! terminal, bare `tankbook` prints the forecast table.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use portable_pty::{Child, CommandBuilder, MasterPty, PtySize, native_pty_system};
use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

const NOW: &str = "2026-11-20T05:30:00Z";

fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_tankbook")
}

/// A small demo plant in its own folder.
fn plant() -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("plant.db");
    let out = std::process::Command::new(bin())
        .args(["--db", db.to_str().unwrap(), "demo", "--no-tui", "--cells", "20", "--days", "21"])
        .env("TANKBOOK_NOW", NOW)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    (dir, db)
}

/// tankbook running in a pseudo-terminal, and the screen it drew.
struct Term {
    master: Option<Box<dyn MasterPty + Send>>,
    writer: Option<Box<dyn Write + Send>>,
    child: Box<dyn Child + Send + Sync>,
    screen: Arc<Mutex<vt100::Parser>>,
    /// Tells the screen reader to let go of its copy of the master side.
    hang_up: Arc<AtomicBool>,
}

fn nz(n: u16) -> std::num::NonZeroU16 {
    std::num::NonZeroU16::new(n).unwrap()
}

fn size(cols: u16, rows: u16) -> PtySize {
    PtySize { rows, cols, pixel_width: 0, pixel_height: 0 }
}

impl Term {
    fn open(db: &Path) -> Term {
        let pair = native_pty_system().openpty(size(80, 24)).unwrap();
        let mut cmd = CommandBuilder::new(bin());
        cmd.args(["--db", db.to_str().unwrap()]);
        cmd.env("TANKBOOK_NOW", NOW);
        cmd.env("TERM", "xterm-256color");
        let child = pair.slave.spawn_command(cmd).unwrap();
        drop(pair.slave);
        let screen = Arc::new(Mutex::new(vt100::Parser::new(nz(24), nz(80), 0)));
        let mut reader = pair.master.try_clone_reader().unwrap();
        let feed = Arc::clone(&screen);
        let hang_up = Arc::new(AtomicBool::new(false));
        let stop = Arc::clone(&hang_up);
        std::thread::spawn(move || {
            let mut buf = [0u8; 8192];
            while let Ok(n) = reader.read(&mut buf) {
                if n == 0 || stop.load(Ordering::SeqCst) {
                    break;
                }
                feed.lock().unwrap().process(&buf[..n]);
            }
        });
        let writer = pair.master.take_writer().unwrap();
        Term { master: Some(pair.master), writer: Some(writer), child, screen, hang_up }
    }

    fn text(&self) -> String {
        self.screen.lock().unwrap().screen().contents()
    }

    /// Waits until the screen shows `what` (5 s at most); the screen if it never does.
    fn wait_for(&self, what: &str) -> Result<(), String> {
        let end = Instant::now() + Duration::from_secs(5);
        while Instant::now() < end {
            if self.text().contains(what) {
                return Ok(());
            }
            std::thread::sleep(Duration::from_millis(50));
        }
        Err(self.text())
    }

    fn send(&mut self, keys: &str) {
        let w = self.writer.as_mut().unwrap();
        w.write_all(keys.as_bytes()).unwrap();
        w.flush().unwrap();
        // one read of the terminal per key, as a person types
        std::thread::sleep(Duration::from_millis(60));
    }

    fn type_keys(&mut self, s: &str) {
        for c in s.chars() {
            self.send(&c.to_string());
        }
    }

    fn start(&mut self) {
        self.wait_for("Who is logging").unwrap();
        self.type_keys("ak");
        self.send("\r");
        self.wait_for("logging as AK").unwrap();
    }

    /// Waits for the program to end: how long it took, or `None` after `limit`.
    /// Ending means exiting cleanly: not killed by a signal or an abort.
    fn exited_within(&mut self, limit: Duration) -> Option<Duration> {
        let t0 = Instant::now();
        while t0.elapsed() < limit {
            if let Some(status) = self.child.try_wait().unwrap() {
                assert!(status.success(), "tankbook ended with {status:?}");
                return Some(t0.elapsed());
            }
            std::thread::sleep(Duration::from_millis(20));
        }
        None
    }

    /// The terminal goes away: every copy of its master side is closed, as a
    /// closed window or a dropped link does. The reader's copy is let go after
    /// its next read, which a size change makes the program draw.
    fn close(&mut self) {
        self.hang_up.store(true, Ordering::SeqCst);
        let _ = self.master.as_ref().unwrap().resize(size(81, 24));
        self.writer.take();
        self.master.take();
    }

    fn local_flags(&self) -> String {
        let t = self.master.as_ref().unwrap().get_termios().unwrap();
        format!("{:?}", t.local_flags)
    }

    fn signal(&self, sig: &str) {
        let pid = self.child.process_id().unwrap().to_string();
        assert!(std::process::Command::new("kill").args([sig, &pid]).status().unwrap().success());
    }
}

impl Drop for Term {
    fn drop(&mut self) {
        if self.child.try_wait().ok().flatten().is_none() {
            let _ = self.child.kill();
        }
    }
}

#[test]
fn the_program_ends_when_its_terminal_is_closed() {
    let (_dir, db) = plant();
    let mut t = Term::open(&db);
    t.start();
    t.close();
    let took = t.exited_within(Duration::from_secs(2));
    assert!(took.is_some(), "tankbook outlived its terminal by more than 2 s");
}

#[test]
fn sigterm_ends_the_screens_and_restores_the_terminal() {
    let (_dir, db) = plant();
    let mut t = Term::open(&db);
    t.start();
    let raw = t.local_flags();
    assert!(!raw.contains("ICANON") && !raw.contains("ECHO "), "the screens run in raw mode: {raw}");
    assert!(t.screen.lock().unwrap().screen().alternate_screen());
    t.signal("-TERM");
    assert!(t.exited_within(Duration::from_secs(2)).is_some(), "SIGTERM did not end tankbook within 2 s");
    let cooked = t.local_flags();
    assert!(cooked.contains("ICANON") && cooked.contains("ECHO"), "line mode and echo are back: {cooked}");
    // the reader thread may still be feeding the last bytes the program wrote
    // before it exited: give it a moment (a loaded machine is slow), then judge
    let restored = || {
        let p = t.screen.lock().unwrap();
        (!p.screen().alternate_screen(), !p.screen().hide_cursor())
    };
    let deadline = Instant::now() + Duration::from_secs(2);
    while restored() != (true, true) && Instant::now() < deadline {
        std::thread::sleep(Duration::from_millis(20));
    }
    let (main_screen, cursor_shown) = restored();
    assert!(main_screen, "back on the main screen");
    assert!(cursor_shown, "the cursor is shown again");
}

#[test]
fn a_resize_to_40x12_and_back_is_redrawn() {
    let (_dir, db) = plant();
    let mut t = Term::open(&db);
    t.start();
    t.wait_for("? help  q quit").unwrap();
    t.screen.lock().unwrap().set_size(nz(12), nz(40));
    t.master.as_ref().unwrap().resize(size(40, 12)).unwrap();
    // the status line (as of …) is drawn on the last of the 12 rows
    let end = Instant::now() + Duration::from_secs(5);
    let row = |t: &Term, r: u16| t.screen.lock().unwrap().screen().contents_between(r, 0, r, 80);
    while Instant::now() < end && !row(&t, 10).contains("as of") {
        std::thread::sleep(Duration::from_millis(50));
    }
    assert!(row(&t, 10).contains("as of"), "{}", t.text());
    assert!(t.text().lines().all(|l| l.chars().count() <= 40), "{}", t.text());
    assert!(t.child.try_wait().unwrap().is_none(), "still running at 40×12");
    t.screen.lock().unwrap().set_size(nz(24), nz(80));
    t.master.as_ref().unwrap().resize(size(80, 24)).unwrap();
    let end = Instant::now() + Duration::from_secs(5);
    while Instant::now() < end && !row(&t, 23).contains("q quit") {
        std::thread::sleep(Duration::from_millis(50));
    }
    assert!(row(&t, 23).contains("q quit"), "{}", t.text());
    t.send("q");
    assert!(t.exited_within(Duration::from_secs(2)).is_some());
}

#[test]
fn a_form_typed_when_the_terminal_died_comes_back_at_the_next_start() {
    let (_dir, db) = plant();
    let mut t = Term::open(&db);
    t.start();
    t.type_keys("nh");
    t.wait_for("Harvest").unwrap();
    t.type_keys("4321");
    t.wait_for("4321").unwrap();
    t.close();
    assert!(t.exited_within(Duration::from_secs(2)).is_some());
    drop(t);

    let mut t = Term::open(&db);
    t.start();
    t.wait_for("An entry was left unfinished").unwrap();
    t.wait_for("4321").unwrap();
    t.send("\r");
    t.wait_for("the draft is open again").unwrap();
    assert!(t.text().contains("Copper kg per cell: 4321"), "{}", t.text());
    // taken up: the next start offers nothing
    t.send("\x1b");
    t.send("q");
    assert!(t.exited_within(Duration::from_secs(2)).is_some());
    drop(t);
    let mut t = Term::open(&db);
    t.start();
    std::thread::sleep(Duration::from_millis(300));
    assert!(!t.text().contains("left unfinished"), "{}", t.text());
}

#[test]
fn help_reaches_the_quit_key_at_80x24() {
    let (_dir, db) = plant();
    let mut t = Term::open(&db);
    t.start();
    t.send("?");
    t.wait_for("Help").unwrap();
    assert!(!t.text().contains("q/Ctrl-C  quit"));
    t.send("\x1b[F");
    t.wait_for("q/Ctrl-C  quit").unwrap();
    t.send("q");
    t.wait_for("q quit").unwrap();
    assert!(t.child.try_wait().unwrap().is_none(), "q closes the help; it does not quit");
    t.send("q");
    assert!(t.exited_within(Duration::from_secs(2)).is_some());
}

#[test]
fn without_a_terminal_bare_tankbook_prints_the_forecast_table() {
    let (_dir, db) = plant();
    let out = std::process::Command::new(bin())
        .args(["--db", db.to_str().unwrap()])
        .env("TANKBOOK_NOW", NOW)
        .stdin(std::process::Stdio::null())
        .output()
        .unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    assert!(stdout.contains("forecast as of") && stdout.contains("harvest due"), "{stdout}");
    assert!(stdout.lines().filter(|l| l.starts_with("A0")).count() >= 3, "{stdout}");
}

#[test]
fn ctrl_c_in_a_form_ends_at_once_and_keeps_the_form() {
    let (_dir, db) = plant();
    let mut t = Term::open(&db);
    t.start();
    t.type_keys("nt");
    t.wait_for("Shorts found").unwrap();
    t.type_keys("3");
    t.send("\x03");
    assert!(t.exited_within(Duration::from_secs(2)).is_some(), "Ctrl-C ends the screens");
    drop(t);
    let mut t = Term::open(&db);
    t.start();
    t.wait_for("Shorts found: typed but not recorded").unwrap();
    t.wait_for("ended by Ctrl-C").unwrap();
}
