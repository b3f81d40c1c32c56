//! The demo plant: deterministic under a fixed clock, and plausible against
//! the trade's typical figures (common practice, no source; DOMAIN.md, from memory).
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;
use common::*;

const NOW: &str = "2026-11-20T05:30:00Z";

fn demo(args: &[&str]) -> Tk {
    let tk = Tk::new(NOW);
    let mut a = vec!["demo", "--no-tui"];
    a.extend_from_slice(args);
    tk.ok(&a);
    tk
}

#[test]
fn same_clock_same_plant() {
    let a = demo(&["--cells", "30", "--days", "25"]);
    let b = demo(&["--cells", "30", "--days", "25"]);
    let fa = a.json(&["forecast", "--json"]);
    assert_eq!(fa, b.json(&["forecast", "--json"]));
    assert_eq!(fa["as_of"], NOW);
    let c = demo(&["--cells", "30", "--days", "25", "--seed", "8"]);
    assert_ne!(fa, c.json(&["forecast", "--json"]), "another seed gives another plant");
}

#[test]
fn demo_is_plausible_against_the_trade() {
    let tk = demo(&[]);
    let f = tk.json(&["forecast", "--json"]);
    let cells = f["cells"].as_array().unwrap();
    assert!(cells.len() >= 80, "{}", cells.len());
    let refining: Vec<&serde_json::Value> = cells.iter().filter(|c| c["anode_kind"] == "soluble").collect();
    let sections: std::collections::BTreeSet<&str> = refining.iter().map(|c| c["section"].as_str().unwrap()).collect();
    assert!(sections.len() >= 4, "{sections:?}");
    assert!(cells.iter().any(|c| c["anode_kind"] == "inert"), "a liberator section");
    let circuits: std::collections::BTreeSet<&str> = cells.iter().map(|c| c["circuit"].as_str().unwrap()).collect();
    assert!(circuits.len() >= 2);

    // Anode life 18–24 days (common practice, no source): set to predicted pull.
    for c in &refining {
        if let Some(due) = c["anode"]["pull_due"].as_str() {
            let days = hours_between(c["anode"]["set_at"].as_str().unwrap(), due) / 24.0;
            assert!((18.0..=24.0).contains(&days), "{} anode life {days:.1} d", c["cell"]);
        }
    }

    // Plant current efficiency 93–98 % (common practice, no source): mean of the measured crops.
    let effs: Vec<f64> = refining.iter().filter_map(|c| c["last_crop_efficiency"].as_f64()).collect();
    let mean = effs.iter().sum::<f64>() / effs.len() as f64;
    assert!((0.93..=0.98).contains(&mean), "plant efficiency {mean}");

    // The shorted cells are flagged: every cell with shorts piling up this crop reads low.
    let flagged: Vec<&str> = refining
        .iter()
        .filter(|c| c["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "low_efficiency"))
        .map(|c| c["cell"].as_str().unwrap())
        .collect();
    assert!(!flagged.is_empty() && flagged.len() <= refining.len() / 10, "{flagged:?}");
    for c in &refining {
        if c["shorts"].as_u64().unwrap_or(0) >= 6 {
            assert!(flagged.contains(&c["cell"].as_str().unwrap()), "{} has {} shorts but no flag", c["cell"], c["shorts"]);
        }
    }

    // Current density 250–340 A/m² (common practice, no source): mean circuit current over the
    // cathode faces (2 × anodes × face area), each circuit.
    let conn = rusqlite::Connection::open(&tk.db).unwrap();
    let mut st = conn
        .prepare(
            "SELECT c.name, avg(r.amps), (SELECT params FROM cell_params p JOIN cell ON cell.id = p.cell_id JOIN section s ON s.id = cell.section_id
              WHERE s.circuit_id = c.id AND p.params LIKE '%soluble%' LIMIT 1)
             FROM reading r JOIN circuit c ON c.id = r.circuit_id WHERE r.valid = 1 AND r.amps > 0 GROUP BY c.id",
        )
        .unwrap();
    let rows: Vec<(String, f64, String)> =
        st.query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?))).unwrap().map(Result::unwrap).collect();
    assert!(rows.len() >= 2);
    for (name, amps, params) in rows {
        let p: serde_json::Value = serde_json::from_str(&params).unwrap();
        let area = 2.0 * p["anodes_per_cell"].as_f64().unwrap() * p["face_area_m2"].as_f64().unwrap();
        let cd = amps / area;
        assert!((250.0..=340.0).contains(&cd), "{name}: {cd:.0} A/m²");
    }

    // A live-looking plant: cut-outs, crops at many ages, an outage and a gap in the log, and no data faults.
    assert!(cells.iter().any(|c| c["in_circuit"] == false));
    let fractions: Vec<f64> = refining.iter().filter_map(|c| c["anode"]["remaining_fraction"].as_f64()).collect();
    assert!(fractions.iter().any(|f| *f > 0.8) && fractions.iter().any(|f| *f < 0.3));
    assert!(f["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "reading_gap"));
    let ev = tk.json(&["events", "--limit", "5000", "--json"]);
    let by: std::collections::BTreeSet<&str> = ev["events"].as_array().unwrap().iter().map(|e| e["by"].as_str().unwrap()).collect();
    assert!(by.len() >= 3, "{by:?}");
    assert!(tk.ok(&["check"]).contains("ok:"));
}

#[test]
fn demo_refuses_a_real_plant_database() {
    let tk = Tk::with_layout(NOW, "plant_check.toml");
    let before = tk.dump();
    let err = tk.fails(1, &["demo", "--no-tui"]);
    assert!(err.contains("holds the plant 'Plant check'"), "{err}");
    assert_eq!(before, tk.dump());
}

#[test]
fn demo_again_replaces_the_demo_database() {
    let tk = demo(&["--cells", "20", "--days", "21"]);
    let out = tk.cmd().args(["demo", "--no-tui", "--cells", "20", "--days", "21"]).output().unwrap();
    assert!(out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("replacing the demo database"));
}

/// `tankbook forecast --json | head -c 10` and the like: a reader that stops
/// early ends the output quietly (exit 0, nothing on stderr), never a panic.
#[test]
fn a_reader_that_stops_early_is_not_an_error() {
    use std::io::Read;
    let tk = demo(&[]);
    for args in [&["forecast", "--json"][..], &["plan", "--json"], &["events", "--json", "--limit", "2000"], &["forecast"]] {
        let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_tankbook"))
            .args(args)
            .env("TANKBOOK_DB", &tk.db)
            .env("TANKBOOK_NOW", &tk.now)
            .stdout(std::process::Stdio::piped())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .unwrap();
        let mut head = [0u8; 10];
        child.stdout.take().unwrap().read_exact(&mut head).unwrap();
        // the read end is closed here, long before the output (well over a pipe's 64 KiB) is written
        let out = child.wait_with_output().unwrap();
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(out.status.success(), "{args:?}: {:?} {err}", out.status);
        assert!(!err.contains("panicked"), "{args:?}: {err}");
    }
}

/// `--reading-minutes` thins or thickens only the current log: the same cells,
/// three times the readings at 5 minutes, and the same plant to within the ripple.
#[test]
fn reading_minutes_change_the_log_not_the_plant() {
    let readings = |out: &str| -> f64 {
        let words: Vec<&str> = out.split_whitespace().collect();
        let i = words.iter().position(|w| *w == "readings").unwrap();
        words[i - 1].parse().unwrap()
    };
    // the summary goes to stderr
    let written = |tk: &Tk, args: &[&str]| {
        let out = tk.cmd().args(args).output().unwrap();
        assert!(out.status.success());
        String::from_utf8_lossy(&out.stderr).into_owned()
    };
    let a = Tk::new(NOW);
    let out15 = written(&a, &["demo", "--no-tui", "--cells", "30", "--days", "25"]);
    let b = Tk::new(NOW);
    let out5 = written(&b, &["demo", "--no-tui", "--cells", "30", "--days", "25", "--reading-minutes", "5"]);
    let ratio = readings(&out5) / readings(&out15);
    assert!((2.95..=3.01).contains(&ratio), "{out15} / {out5}");
    let (fa, fb) = (a.json(&["forecast", "--json"]), b.json(&["forecast", "--json"]));
    let cells = |f: &serde_json::Value| f["cells"].as_array().unwrap().iter().map(|c| c["cell"].to_string()).collect::<Vec<_>>();
    assert_eq!(cells(&fa), cells(&fb));
    let eff = |f: &serde_json::Value| {
        let e: Vec<f64> = f["cells"].as_array().unwrap().iter().filter_map(|c| c["last_crop_efficiency"].as_f64()).collect();
        e.iter().sum::<f64>() / e.len() as f64
    };
    assert!((eff(&fa) - eff(&fb)).abs() < 0.01, "{} vs {}", eff(&fa), eff(&fb));
}

/// The demo's entries go in at the end of each cell's history (replayed over
/// its open records alone); `check` rebuilds every cell from its whole log and
/// relearns from scratch, so it finds any difference. Then entries that go back
/// in time (a full replay) and undos, and the same check.
#[test]
fn entries_at_the_end_give_what_a_full_replay_gives() {
    let tk = demo(&["--cells", "40", "--days", "30"]);
    assert!(tk.ok(&["check"]).contains("ok"), "after the demo");
    let forecast = tk.json(&["forecast", "--json"]);
    let cell =
        forecast["cells"].as_array().unwrap().iter().find(|c| c["anode_kind"] == "soluble").unwrap()["cell"].as_str().unwrap().to_string();
    // a cut-out back in the past (it sorts before later entries of the cell), a harvest now, then undos
    tk.ok(&["log", "cutout", "--cell", &cell, "--from", "2026-11-01T07:00:00Z", "--to", "2026-11-01T08:00:00Z", "--by", "JD"]);
    tk.ok(&["log", "harvest", "--cell", &cell, "--at", "2026-11-20T05:00:00Z", "--total-kg", "100", "--by", "JD", "--force"]);
    assert!(tk.ok(&["check"]).contains("ok"), "after a back-dated cut-out and a harvest");
    tk.ok(&["undo", "--by", "JD"]);
    tk.ok(&["undo", "--by", "JD"]);
    assert!(tk.ok(&["check"]).contains("ok"), "after the undos");
}

/// A database from before migration 008 (no indexes of the open records)
/// upgrades on open, keeps its rows, and takes entries at the end again.
#[test]
fn a_database_from_before_008_upgrades_and_records() {
    let tk = demo(&["--cells", "20", "--days", "21"]);
    let before = tk.json(&["forecast", "--json"]);
    downgrade_to_before(&tk.db, "008");
    let cell = before["cells"][0]["cell"].as_str().unwrap().to_string();
    tk.ok(&["log", "voltage", "--cell", &cell, "--at", "2026-11-20T05:00:00Z", "--volts", "0.3", "--by", "JD"]);
    let c = rusqlite::Connection::open(&tk.db).unwrap();
    let n: i64 = c
        .query_row("SELECT count(*) FROM sqlite_master WHERE name IN ('anode_load_open', 'crop_open', 'cutout_open')", [], |r| r.get(0))
        .unwrap();
    assert_eq!(n, 3);
    let after = tk.json(&["forecast", "--json"]);
    assert_eq!(before["cells"].as_array().unwrap().len(), after["cells"].as_array().unwrap().len(), "the rows kept");
    assert_eq!(before["cells"][0]["cathode"], after["cells"][0]["cathode"], "a voltage changes no crop");
    tk.ok(&["log", "cutout", "--cell", &cell, "--from", "2026-11-20T05:10:00Z", "--to", "2026-11-20T05:20:00Z", "--by", "JD"]);
    assert!(tk.ok(&["check"]).contains("ok"));
}
