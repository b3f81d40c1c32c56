//! The forecast's look-ups (migration 007: a cell's entries by kind, cut-outs
//! by their end) on a database written before them: it upgrades and forecasts the same.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;

#[test]
fn a_database_from_before_the_snapshot_look_ups_upgrades_and_forecasts_the_same() {
    let tk = common::plant_check_day("2026-03-01T00:00:00Z");
    for args in [
        &["log", "cutout", "--cell", "A01", "--from", "2026-03-01T04:00:00Z", "--to", "2026-03-01T05:00:00Z"][..],
        &["log", "cutout", "--cell", "A02", "--from", "2026-03-01T03:00:00Z"],
        &["log", "voltage", "--cell", "A01", "--at", "2026-03-01T10:00:00Z", "--volts", "0.21"],
        &["log", "shorts", "--cell", "A01", "--at", "2026-03-01T11:00:00Z", "--count", "2"],
        &["log", "anodes", "--cell", "A03", "--at", "2026-03-01T02:00:00Z", "--count", "50", "--mean-kg", "380"],
        &["log", "harvest", "--cell", "A03", "--at", "2026-03-01T20:00:00Z", "--total-kg", "700", "--force"],
    ] {
        tk.ok(args);
    }
    let now = tk.json(&["forecast", "--json"]);
    let before = tk.json(&["forecast", "--at", "2026-03-01T12:00:00Z", "--json"]);
    // what a tankbook before migration 007 wrote: the same rows, no look-ups
    common::downgrade_to_before(&tk.db, "007");
    {
        let c = rusqlite::Connection::open(&tk.db).unwrap();
        let n: i64 = c
            .query_row(
                "SELECT count(*) FROM sqlite_master WHERE name IN ('event_cell_kind', 'cutout_end', 'learn_weighing_left_out', 'reading_flagged')",
                [],
                |r| r.get(0),
            )
            .unwrap();
        assert_eq!(n, 0);
    }
    assert_eq!(tk.json(&["forecast", "--json"]), now);
    assert_eq!(tk.json(&["forecast", "--at", "2026-03-01T12:00:00Z", "--json"]), before);
    let c = rusqlite::Connection::open(&tk.db).unwrap();
    let n: i64 = c
        .query_row(
            "SELECT count(*) FROM sqlite_master WHERE name IN ('event_cell_kind', 'cutout_end', 'learn_weighing_left_out', 'reading_flagged')",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(n, 4, "the upgrade made the look-ups");
    let a01 = now["cells"].as_array().unwrap().iter().find(|c| c["cell"] == "A01").unwrap();
    assert_eq!(a01["shorts"], 2);
    let a02 = now["cells"].as_array().unwrap().iter().find(|c| c["cell"] == "A02").unwrap();
    assert_eq!(a02["in_circuit"], false);
}
