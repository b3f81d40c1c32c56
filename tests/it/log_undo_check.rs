//! The event log: entries, undo as an appended void, cut-outs, the same-instant
//! order, integrity checks and backups.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;
use common::*;

fn plant() -> Tk {
    plant_check_day("2026-03-01T00:00:00Z")
}

#[test]
fn undo_appends_a_void_and_restores_the_forecast() {
    let tk = plant();
    let before = tk.json(&["forecast", "--cell", "A01", "--json"]);
    tk.ok(&["log", "harvest", "--cell", "A01", "--at", "2026-03-01T12:00:00Z", "--total-kg", "300"]);
    let harvested = tk.json(&["forecast", "--cell", "A01", "--json"]);
    assert_ne!(before["cells"], harvested["cells"]);
    let out = tk.ok(&["undo", "--by", "MK"]);
    assert!(out.contains("undid entry 2"), "{out}");
    assert_eq!(before["cells"], tk.json(&["forecast", "--cell", "A01", "--json"])["cells"]);
    let ev = tk.json(&["events", "--json"]);
    let ev = ev["events"].as_array().unwrap();
    assert_eq!(ev.len(), 3, "the harvest stays in the log, with its void");
    assert_eq!(ev[0]["kind"], "void");
    assert_eq!(ev[0]["voids"], 2);
    assert_eq!(ev[0]["by"], "MK");
    assert_eq!(ev[1]["voided"], true);
    let err = tk.fails(1, &["undo", "2"]);
    assert!(err.contains("already undone"), "{err}");
    let err = tk.fails(1, &["undo", "3"]);
    assert!(err.contains("itself an undo"), "{err}");
}

#[test]
fn undo_that_would_break_the_history_is_refused() {
    let tk = plant();
    tk.ok(&["log", "harvest", "--cell", "A01", "--at", "2026-03-01T12:00:00Z", "--total-kg", "300"]);
    let before = tk.dump();
    let err = tk.fails(1, &["undo", "1"]);
    assert!(err.contains("inconsistent"), "{err}");
    assert_eq!(before, tk.dump());
}

#[test]
fn open_cutout_takes_the_cell_out_until_closed() {
    let tk = plant();
    tk.ok(&["log", "cutout", "--cell", "A01", "--from", "2026-03-01T12:00:00Z"]);
    let f = tk.json(&["forecast", "--cell", "A01", "--json"]);
    let c = &f["cells"][0];
    assert_eq!(c["in_circuit"], false);
    assert!((c["charge_ah"].as_f64().unwrap() - 12.0 * 30_000.0).abs() < 1e-6);
    assert!(c["cathode"]["harvest_due"].is_null(), "no harvest while cut out for good");
    let err = tk.fails(1, &["log", "cutout", "--cell", "A01", "--from", "2026-03-01T13:00:00Z"]);
    assert!(err.contains("already cut out"), "{err}");
    tk.ok(&["log", "cutout", "--cell", "A01", "--from", "2026-03-01T12:00:00Z", "--to", "2026-03-01T18:00:00Z"]);
    let c = &tk.json(&["forecast", "--cell", "A01", "--json"])["cells"][0];
    assert_eq!(c["in_circuit"], true);
    assert!((c["charge_ah"].as_f64().unwrap() - 18.0 * 30_000.0).abs() < 1e-6);
    // as of a time inside the cut-out, the later closing is not yet known
    let c = &tk.json(&["forecast", "--cell", "A01", "--at", "2026-03-01T15:00:00Z", "--json"])["cells"][0];
    assert_eq!(c["in_circuit"], false);
}

#[test]
fn same_instant_anode_change_applies_scrap_harvest_anodes() {
    let tk = plant();
    let at = "2026-03-01T20:00:00Z";
    // entered in the "wrong" order: the new anodes first
    tk.fails(1, &["log", "anodes", "--cell", "A01", "--at", at, "--count", "50", "--mean-kg", "375"]);
    tk.ok(&["log", "harvest", "--cell", "A01", "--at", at, "--total-kg", "650"]);
    tk.ok(&["log", "scrap", "--cell", "A01", "--at", at, "--total-kg", "17800", "--force"]);
    tk.ok(&["log", "anodes", "--cell", "A01", "--at", at, "--count", "50", "--mean-kg", "375"]);
    let c = &tk.json(&["forecast", "--cell", "A01", "--json"])["cells"][0];
    assert_eq!(c["anode"]["initial_kg"].as_f64(), Some(375.0));
    assert_eq!(c["anode"]["set_at"], at);
    assert_eq!(c["cathode"]["started_at"], at);
    assert!((c["charge_ah"].as_f64().unwrap() - 4.0 * 30_000.0).abs() < 1e-6);
}

#[test]
fn check_passes_and_catches_tampering() {
    let tk = plant();
    tk.ok(&["log", "harvest", "--cell", "A01", "--at", "2026-03-01T12:00:00Z", "--total-kg", "300"]);
    let out = tk.ok(&["check"]);
    assert!(out.contains("ok:"), "{out}");
    {
        let c = rusqlite::Connection::open(&tk.db).unwrap();
        c.execute("DELETE FROM crop WHERE started_at > 0 AND ended_at IS NULL", []).unwrap();
    }
    let err = tk.fails(1, &["check"]);
    assert!(err.contains("problems found"), "{err}");
    let out = tk.cmd().arg("check").output().unwrap();
    assert!(String::from_utf8_lossy(&out.stdout).contains("stored records differ"));
}

#[test]
fn backup_copies_a_live_database() {
    let tk = plant();
    let dest = tk.dir.path().join("copy.db");
    let out = tk.ok(&["backup", dest.to_str().unwrap()]);
    assert!(out.contains("integrity checked"), "{out}");
    let copy = Tk { dir: tempfile::tempdir().unwrap(), db: dest.clone(), now: tk.now.clone() };
    assert_eq!(copy.json(&["forecast", "--json"]), tk.json(&["forecast", "--json"]));
    let err = tk.fails(1, &["backup", dest.to_str().unwrap()]);
    assert!(err.contains("already exists"), "{err}");
}

#[test]
fn a_layout_update_applies_from_its_load_time() {
    let tk = plant();
    let text =
        std::fs::read_to_string(fixture("plant_check.toml")).unwrap().replace("cathode_efficiency = 0.96", "cathode_efficiency = 0.94");
    let later = Tk { dir: tempfile::tempdir().unwrap(), db: tk.db.clone(), now: "2026-03-02T06:00:00Z".into() };
    let f = later.file("l2.toml", &text);
    let out = later.ok(&["layout", "load", &f]);
    assert!(out.contains("5 with changed parameters"), "{out}");
    let after = tk.json(&["forecast", "--cell", "A01", "--at", "2026-03-02T12:00:00Z", "--json"]);
    assert_eq!(after["cells"][0]["cathode_efficiency"].as_f64(), Some(0.94));
    let before = tk.json(&["forecast", "--cell", "A01", "--at", "2026-03-02T01:00:00Z", "--json"]);
    assert_eq!(before["cells"][0]["cathode_efficiency"].as_f64(), Some(0.96));
}

#[test]
fn a_late_cutout_inside_a_harvested_crop_changes_its_efficiency() {
    let tk = plant();
    tk.ok(&["log", "harvest", "--cell", "A01", "--at", "2026-03-01T12:00:00Z", "--total-kg", "400", "--force"]);
    let eff = |tk: &Tk| tk.json(&["forecast", "--cell", "A01", "--json"])["cells"][0]["last_crop_efficiency"].as_f64().unwrap();
    // by hand: 12 h at 30 kA = 360 000 A·h → 426.8 kg at 100 % (ECE 1.18549 g/(A·h), CODATA/IUPAC)
    let before = eff(&tk);
    assert!((before - 400.0 / (1.185_486e-3 * 360_000.0)).abs() < 1e-4, "{before}");
    tk.ok(&["log", "cutout", "--cell", "A01", "--from", "2026-03-01T03:00:00Z", "--to", "2026-03-01T05:00:00Z"]);
    let after = eff(&tk);
    assert!((after - 400.0 / (1.185_486e-3 * 300_000.0)).abs() < 1e-4, "{after}");
    assert!(tk.ok(&["check"]).contains("ok:"));
}
