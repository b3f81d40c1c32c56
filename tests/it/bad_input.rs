//! Every kind of bad input: exit code 1, a message naming the file, line and
//! field (or the option), and a database left exactly as it was.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;
use common::*;

fn plant() -> Tk {
    plant_check_day("2026-03-01T02:00:00Z")
}

/// Runs a command that must be rejected: exit 1, every fragment in the message, nothing changed.
fn rejected(tk: &Tk, args: &[&str], fragments: &[&str]) {
    let before = tk.dump();
    let err = tk.fails(1, args);
    for f in fragments {
        assert!(err.contains(f), "{args:?}: message lacks '{f}': {err}");
    }
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(before, tk.dump(), "{args:?} changed the database");
}

#[test]
fn bad_current_files() {
    let tk = plant();
    let cases: &[(&str, &[&str])] = &[
        ("short_row.csv", &["short_row.csv", "line 3", "row", "2 fields"]),
        ("unknown_circuit.csv", &["line 3", "field circuit", "C9"]),
        ("amps_not_number.csv", &["line 2", "field amps", "thirty"]),
        ("amps_negative.csv", &["line 4", "field amps", "negative"]),
        ("amps_above_max.csv", &["line 2", "field amps", "max_amps of 45000"]),
        ("time_without_offset.csv", &["line 2", "field time", "RFC 3339"]),
        ("conflicting_rows.csv", &["line 3", "field amps", "conflicts"]),
        ("wrong_header.csv", &["line 1", "header"]),
    ];
    for (file, frags) in cases {
        let path = fixture(&format!("bad/{file}"));
        rejected(&tk, &["import", "current", path.to_str().unwrap()], frags);
    }
    // a row that conflicts with a stored reading
    let csv = tk.file("conflict.csv", "time,circuit,amps\n2026-03-01T05:00:00Z,C1,29000\n");
    rejected(&tk, &["import", "current", &csv], &["line 2", "field amps", "stored 30000"]);
    // a good first row does not go in when a later one is bad
    let csv = tk.file("half.csv", "time,circuit,amps\n2026-03-02T01:00:00Z,C1,30000\n2026-03-02T02:00:00Z,C1,x\n");
    rejected(&tk, &["import", "current", &csv], &["line 3"]);
}

#[test]
fn bad_layouts() {
    let tk = plant();
    let cases: &[(&str, &[&str])] = &[
        ("zero_anodes.toml", &["zero_anodes.toml", "line 9", "anodes_per_cell is 0"]),
        ("scrap_lower_below_lugs.toml", &["line 15", "scrap_lower", "lug_kg"]),
        ("cathode_count.toml", &["line 10", "cathodes_as_given"]),
        ("efficiency_too_high.toml", &["line 17", "cathode_efficiency", "(0, 1]"]),
        ("scrap_bounds_order.toml", &["line 14", "out of order"]),
    ];
    for (file, frags) in cases {
        let path = fixture(&format!("bad/{file}"));
        rejected(&tk, &["layout", "load", path.to_str().unwrap()], frags);
    }
    let broken = tk.file("broken.toml", "[plant]\nname = \"x\"\n[[circuit]\n");
    rejected(&tk, &["layout", "load", &broken], &["broken.toml", "line 3"]);
}

#[test]
fn bad_entries() {
    let tk = plant();
    let log = |rest: &[&str]| -> Vec<String> { ["log"].iter().chain(rest).map(|s| s.to_string()).collect() };
    let cases: Vec<(Vec<String>, Vec<&str>)> = vec![
        (log(&["harvest", "--cell", "A09", "--at", "2026-03-01T12:00:00Z", "--total-kg", "500"]), vec!["--cell", "unknown cell A09"]),
        (log(&["harvest", "--cell", "A01", "--at", "2026-03-01T01:00:00Z", "--total-kg", "500"]), vec!["--at", "before the crop began"]),
        (log(&["harvest", "--cell", "A02", "--at", "2026-03-01T12:00:00Z", "--total-kg", "500"]), vec!["--at", "no crop is growing"]),
        (log(&["harvest", "--cell", "A01", "--at", "yesterday", "--total-kg", "500"]), vec!["--at", "'yesterday' is not a time"]),
        (log(&["harvest", "--cell", "A01", "--at", "2026-03-01T12:00:00Z", "--total-kg", "90000"]), vec!["--total-kg", "at most 15300 kg"]),
        (
            log(&["anodes", "--cell", "A02", "--at", "2026-03-01T12:00:00Z", "--count", "50", "--mean-kg", "38"]),
            vec!["--mean-kg", "100–600 kg"],
        ),
        (
            log(&["anodes", "--cell", "A01", "--at", "2026-03-01T12:00:00Z", "--count", "50", "--mean-kg", "380"]),
            vec!["already set", "scrap first"],
        ),
        (log(&["scrap", "--cell", "A01", "--at", "2026-03-01T12:00:00Z", "--total-kg", "20000"]), vec!["--total-kg", "at most 19000 kg"]),
        (log(&["scrap", "--cell", "A02", "--at", "2026-03-01T12:00:00Z", "--total-kg", "2000"]), vec!["--cell", "no anodes"]),
        (
            log(&["cutout", "--cell", "A01", "--from", "2026-03-01T12:00:00Z", "--to", "2026-03-01T11:00:00Z"]),
            vec!["--to", "ends before it starts"],
        ),
        (
            log(&["outage", "--circuit", "C1", "--from", "2026-03-01T12:00:00Z", "--to", "2026-03-01T11:00:00Z"]),
            vec!["--to", "ends before it starts"],
        ),
        (
            log(&["outage", "--circuit", "C7", "--from", "2026-03-01T10:00:00Z", "--to", "2026-03-01T11:00:00Z"]),
            vec!["--circuit", "unknown circuit C7"],
        ),
        (log(&["setpoint", "--circuit", "C1", "--from", "2026-03-02T10:00:00Z", "--amps", "50000"]), vec!["--amps", "0–45000 A"]),
        (log(&["voltage", "--cell", "A01", "--at", "2026-03-01T10:00:00Z", "--volts", "-1"]), vec!["--volts"]),
        (log(&["shorts", "--cell", "A01", "--at", "2026-03-01T10:00:00Z", "--count", "5", "--by", "J D"]), vec!["--by", "initials"]),
        // questioned: heavier than the charge allows (10 h at 30 kA plates at most 355.6 kg)
        (
            log(&["harvest", "--cell", "A01", "--at", "2026-03-01T12:00:00Z", "--total-kg", "400"]),
            vec!["heavier than the charge allows", "--force"],
        ),
    ];
    for (args, frags) in &cases {
        let a: Vec<&str> = args.iter().map(String::as_str).collect();
        rejected(&tk, &a, frags);
    }
}

#[test]
fn force_records_a_questioned_entry_and_marks_it() {
    let tk = plant();
    let out = tk.ok(&["log", "harvest", "--cell", "A01", "--at", "2026-03-01T12:00:00Z", "--total-kg", "400", "--force"]);
    assert!(out.contains("accepted with --force"), "{out}");
    let ev = tk.json(&["events", "--json"]);
    assert_eq!(ev["events"][0]["forced"], true);
}

#[test]
fn usage_errors_exit_2() {
    let tk = plant();
    let err = tk.fails(2, &["log", "harvest", "--at", "2026-03-01T12:00:00Z", "--total-kg", "400"]);
    assert!(err.contains("--cell"), "{err}");
    tk.fails(2, &["log", "harvest", "--cell", "A01", "--at", "x", "--total-kg", "heavy"]);
    tk.fails(2, &["frobnicate"]);
}

#[test]
fn no_layout_says_what_to_do() {
    let tk = Tk::new("2026-03-02T00:00:00Z");
    let err = tk.fails(1, &["forecast"]);
    assert!(err.contains("layout load"), "{err}");
    let out = tk.ok(&[]);
    assert!(out.contains("tankbook demo"), "{out}");
}
