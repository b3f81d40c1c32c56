//! End to end in a real terminal: the binary cargo built for this test run, in
//! tmux at 80×24 on a demo database; a foreman moves to a cell, logs a harvest
//! through the form and quits; the headless forecast then shows the harvest saved.
//!
//! Needs tmux, so it is ignored by a plain `cargo test`; `.ci/run` installs tmux
//! and runs it with `cargo test -- --ignored`, where a missing tmux fails it.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use std::path::PathBuf;
use std::process::Command;
use std::time::{Duration, Instant};

const NOW: &str = "2026-11-20T05:30:00Z";

/// The binary cargo built for this test run (correct under any `CARGO_TARGET_DIR`).
fn binary() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_tankbook"))
}

/// Fails with the reason when tmux cannot be run: never a silent skip.
fn require_tmux() {
    match Command::new("tmux").arg("-V").output() {
        Ok(o) if o.status.success() => {}
        Ok(o) => panic!("this test needs tmux, and `tmux -V` failed: {}", String::from_utf8_lossy(&o.stderr)),
        Err(e) => panic!("this test needs tmux (apt-get install tmux; .ci/run installs it): {e}"),
    }
}

struct Tmux(String);

impl Tmux {
    fn run(&self, args: &[&str]) -> String {
        let out = Command::new("tmux").args(args).output().expect("tmux is needed for this test (apt-get install tmux)");
        String::from_utf8_lossy(&out.stdout).into_owned()
    }
    fn keys(&self, keys: &[&str]) {
        let mut a = vec!["send-keys", "-t", &self.0];
        a.extend_from_slice(keys);
        self.run(&a);
    }
    fn screen(&self) -> String {
        self.run(&["capture-pane", "-p", "-t", &self.0])
    }
    /// Waits (at most 20 s) until the screen shows `text`.
    fn wait_for(&self, text: &str) -> String {
        let start = Instant::now();
        loop {
            let s = self.screen();
            if s.contains(text) {
                return s;
            }
            assert!(start.elapsed() < Duration::from_secs(20), "waited for '{text}'; the screen shows:\n{s}");
            std::thread::sleep(Duration::from_millis(100));
        }
    }
}

impl Drop for Tmux {
    fn drop(&mut self) {
        let _ = Command::new("tmux").args(["kill-session", "-t", &self.0]).output();
    }
}

#[test]
#[ignore = "needs tmux"]
fn log_a_harvest_in_the_real_terminal() {
    require_tmux();
    let bin = binary();
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("demo.db");
    let st = Command::new(&bin).args(["--db", db.to_str().unwrap(), "demo", "--no-tui"]).env("TANKBOOK_NOW", NOW).output().unwrap();
    assert!(st.status.success(), "{}", String::from_utf8_lossy(&st.stderr));
    let forecast = |cell: &str| -> serde_json::Value {
        let out = Command::new(&bin)
            .args(["--db", db.to_str().unwrap(), "forecast", "--cell", cell, "--json"])
            .env("TANKBOOK_NOW", NOW)
            .output()
            .unwrap();
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let before = forecast("B02");
    // the crop as the charge predicts it (inner cathode × anodes = the whole crop), less 2 %
    let c = &before["cells"][0];
    let crop = c["cathode"]["inner_mass_kg"].as_f64().unwrap() * c["anode"]["count"].as_f64().unwrap();
    let weight = format!("{:.0}", crop * 0.98);

    let t = Tmux(format!("tankbook-e2e-{}", std::process::id()));
    let cmd = format!("TANKBOOK_NOW={NOW} {} --db {}", bin.display(), db.display());
    t.run(&["new-session", "-d", "-s", &t.0, "-x", "80", "-y", "24", &cmd]);
    t.wait_for("Who is logging");
    t.keys(&["M", "K", "Enter"]);
    t.wait_for("by MK");
    // move to B02: down to section B with the arrow keys, then right
    t.keys(&["Tab"]);
    t.keys(&["Right"]);
    t.keys(&["Enter"]);
    t.wait_for("B02 circuit R1");
    t.keys(&["n"]);
    t.wait_for("New entry");
    t.keys(&["h"]);
    t.wait_for("Copper kg per cell");
    t.keys(&[&weight]);
    t.keys(&["Enter"]);
    let review = t.wait_for("To be recorded");
    assert!(review.contains(&format!("B02: harvest {weight} kg")), "{review}");
    t.keys(&["y"]);
    t.wait_for("recorded harvest for B02");
    t.keys(&["q"]);
    let start = Instant::now();
    while Command::new("tmux").args(["has-session", "-t", &t.0]).output().map(|o| o.status.success()).unwrap_or(false) {
        assert!(start.elapsed() < Duration::from_secs(10), "tankbook did not quit");
        std::thread::sleep(Duration::from_millis(100));
    }

    let after = forecast("B02");
    let c = &after["cells"][0];
    assert_eq!(c["cathode"]["started_at"], NOW, "the next crop starts at the harvest");
    let eff = c["last_crop_efficiency"].as_f64().unwrap();
    // weighed at 98 % of the forecast, made at the cell's learnt efficiency
    let used = before["cells"][0]["cathode_efficiency"].as_f64().unwrap();
    assert!((eff - used * 0.98).abs() < 0.02, "{eff}");
}
