//! The plan's decisions end to end: outages per circuit on a two-circuit plant,
//! kept moves through the event log and undo, approved plans and what changed
//! since, and smoothing against the cap-only plan on the demo.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;
use common::*;
use serde_json::Value;
use std::collections::BTreeMap;

// The DOMAIN.md plant check (derived from CODATA 2018 F and IUPAC M(Cu)): at 30 kA a load of
// 50 × 380 kg reaches 25 % after 398.67 h, 15 % after 451.83 h and 10 % after 478.41 h. Set at
// 2026-03-01T00:00Z with days starting 06:00 UTC: the window opens 03-17 14:40Z (day 03-17), the
// ideal 03-19 19:50Z (day 03-19), the window closes 03-20 22:25Z (day 03-20).
const T0: &str = "2026-03-01T00:00:00Z";
const NOW: &str = "2026-03-11T00:00:00Z";

/// 240 h at 30 kA on each circuit, from T0.
fn current(circuits: &[&str]) -> String {
    let t0 = chrono::DateTime::parse_from_rfc3339(T0).unwrap();
    let mut s = String::from("time,circuit,amps\n");
    for i in 0..=240 {
        let t = (t0 + chrono::Duration::hours(i)).to_utc().format("%Y-%m-%dT%H:%M:%SZ");
        for c in circuits {
            s.push_str(&format!("{t},{c},30000\n"));
        }
    }
    s
}

/// A plant not in the repository: the plant check's cells on two circuits, W1 (cells A01–A05)
/// and W2 (B01–B05), all set at T0; `extra` goes before `[defaults]`.
fn two_circuits(extra: &str) -> Tk {
    let text = std::fs::read_to_string(fixture("plant_check.toml")).unwrap();
    let head = &text[..text.find("[[circuit]]").unwrap()];
    let layout = format!(
        "{}\n[[circuit]]\nname = \"W1\"\nmax_amps = 45000\n[[circuit.section]]\nname = \"A\"\ncells = 5\n\
         [[circuit]]\nname = \"W2\"\nmax_amps = 45000\n[[circuit.section]]\nname = \"B\"\ncells = 5\n",
        head.replace("[defaults]", &format!("{extra}\n[defaults]"))
    );
    let tk = Tk::new(NOW);
    let path = tk.file("two.toml", &layout);
    tk.ok(&["layout", "load", &path]);
    let csv = tk.file("c.csv", &current(&["W1", "W2"]));
    tk.ok(&["import", "current", &csv]);
    for c in ["A01", "A02", "A03", "A04", "A05", "B01", "B02", "B03", "B04", "B05"] {
        tk.ok(&["log", "anodes", "--cell", c, "--at", T0, "--count", "50", "--mean-kg", "380"]);
    }
    tk
}

fn arr(v: &Value) -> &Vec<Value> {
    v.as_array().unwrap_or_else(|| panic!("not an array: {v}"))
}

/// Each cell's anode-change date.
fn change_dates(p: &Value) -> BTreeMap<String, String> {
    let mut out = BTreeMap::new();
    for d in arr(&p["days"]) {
        for c in arr(&d["anode_changes"]) {
            out.insert(c["cell"].as_str().unwrap().to_string(), d["date"].as_str().unwrap().to_string());
        }
    }
    out
}

fn change<'a>(p: &'a Value, cell: &str) -> &'a Value {
    arr(&p["days"])
        .iter()
        .flat_map(|d| arr(&d["anode_changes"]))
        .find(|c| c["cell"] == cell)
        .unwrap_or_else(|| panic!("no change of {cell}"))
}

#[test]
fn an_outage_on_one_circuit_moves_only_its_own_changes() {
    let tk = two_circuits("");
    let before = change_dates(&tk.json(&["plan", "--json", "--crew-cells-per-day", "10"]));
    assert!(before.values().all(|d| d == "2026-03-19"), "{before:?}");
    // a 3-hour outage on W1 on the ideal day
    tk.ok(&["log", "outage", "--circuit", "W1", "--from", "2026-03-19T10:00:00Z", "--to", "2026-03-19T13:00:00Z"]);
    let p = tk.json(&["plan", "--json", "--crew-cells-per-day", "10"]);
    let after = change_dates(&p);
    for (cell, d) in &after {
        // W2 keeps its day; W1 goes a day early (one day early costs 1, a day late 3)
        let want = if cell.starts_with('B') { "2026-03-19" } else { "2026-03-18" };
        assert_eq!(d, want, "{cell}: {after:?}");
    }
    let day = arr(&p["days"]).iter().find(|d| d["date"] == "2026-03-19").unwrap();
    assert!(day["no_anode_work"].is_null());
    assert_eq!(arr(&day["outages"])[0]["circuit"], "W1");
    let table = tk.ok(&["plan", "--crew-cells-per-day", "10"]);
    assert!(table.contains("outage on W1") && table.contains("no anode work in its cells"), "{table}");
}

#[test]
fn a_circuit_that_prefers_anode_work_in_its_outage_gets_it_then() {
    let tk = two_circuits("[plan.outage_anode_work]\nW1 = \"preferred\"\n");
    // the outage on 03-18, a day before the ideal, inside the window
    tk.ok(&["log", "outage", "--circuit", "W1", "--from", "2026-03-18T10:00:00Z", "--to", "2026-03-18T14:00:00Z"]);
    let p = tk.json(&["plan", "--json", "--crew-cells-per-day", "10"]);
    for (cell, d) in change_dates(&p) {
        let want = if cell.starts_with('A') { "2026-03-18" } else { "2026-03-19" };
        assert_eq!(d, want, "{cell}");
    }
    // a circuit the layout does not have is refused, naming the key
    let tk = Tk::new(NOW);
    let text = std::fs::read_to_string(fixture("plant_check.toml"))
        .unwrap()
        .replace("[defaults]", "[plan.outage_anode_work]\nX9 = \"preferred\"\n[defaults]");
    let path = tk.file("bad.toml", &text);
    let err = tk.fails(1, &["layout", "load", &path]);
    assert!(err.contains("plan.outage_anode_work") && err.contains("X9"), "{err}");
}

#[test]
fn a_kept_move_survives_later_entries_and_undo_takes_it_back() {
    let tk = two_circuits("");
    let p = tk.json(&["plan", "--json"]);
    assert_eq!(change(&p, "A02")["moved"], false);
    assert_eq!(arr(&p["kept_moves"]).len(), 0);
    let levelled = change_dates(&p)["A02"].clone();
    // keep A02 on 03-18; without --by (and no TANKBOOK_BY) it is a usage error
    let plain = tk.cmd().env_remove("TANKBOOK_BY").args(["plan", "--move", "A02=2026-03-18", "--keep"]).output().unwrap();
    assert_eq!(plain.status.code(), Some(2));
    // --keep without a --move is a usage error too
    tk.fails(2, &["plan", "--keep", "--by", "MK"]);
    let dump = tk.dump();
    let err = tk.fails(1, &["plan", "--move", "A02=2026-03-22", "--keep", "--by", "MK"]);
    assert!(err.contains("outside the cell's window"), "{err}");
    assert_eq!(tk.dump(), dump, "a refused kept move records nothing");
    let kept = tk.json(&["plan", "--json", "--move", "A02=2026-03-18", "--keep", "--by", "mk"]);
    let k = &arr(&kept["kept_moves"])[0];
    assert_eq!(
        (k["cell"].as_str(), k["date"].as_str(), k["by"].as_str(), k["applied"].as_bool()),
        (Some("A02"), Some("2026-03-18"), Some("MK"), Some(true))
    );
    let entry = k["entry"].as_i64().unwrap();
    let ev = tk.json(&["events", "--json"]);
    assert_eq!(arr(&ev["events"])[0]["kind"], "kept_move");
    assert_eq!(arr(&ev["events"])[0]["id"].as_i64(), Some(entry));

    // later plans apply it; a later entry (a harvest of the same cell) does not undo it
    tk.ok(&["log", "harvest", "--cell", "A02", "--at", "2026-03-08T12:00:00Z", "--total-kg", "6100", "--force"]);
    let p = tk.json(&["plan", "--json"]);
    let c = change(&p, "A02");
    assert_eq!(c["moved"], true);
    assert_eq!(change_dates(&p)["A02"], "2026-03-18");
    assert_eq!(arr(&p["kept_moves"])[0]["entry"].as_i64(), Some(entry));
    let table = tk.ok(&["plan"]);
    assert!(table.contains("kept move A02 to 2026-03-18 by MK"), "{table}");

    // no longer feasible (an outage on W1 logged for 03-18): dropped with the reason, not applied
    tk.ok(&["log", "outage", "--circuit", "W1", "--from", "2026-03-18T10:00:00Z", "--to", "2026-03-18T12:00:00Z"]);
    let p = tk.json(&["plan", "--json"]);
    let dropped = arr(&p["dropped_moves"]);
    assert_eq!(dropped.len(), 1, "{}", p["dropped_moves"]);
    assert_eq!((dropped[0]["cell"].as_str(), dropped[0]["entry"].as_i64()), (Some("A02"), Some(entry)));
    assert!(dropped[0]["reason"].as_str().unwrap().contains("circuit W1 is down"), "{}", dropped[0]["reason"]);
    assert_eq!(change(&p, "A02")["moved"], false);
    assert!(tk.ok(&["plan"]).contains("dropped: circuit W1 is down"));
    let outage = arr(&tk.json(&["events", "--json"])["events"])[0]["id"].as_i64().unwrap();
    tk.ok(&["undo", &outage.to_string()]);
    assert_eq!(change(&tk.json(&["plan", "--json"]), "A02")["moved"], true);

    // undo takes it back like any entry
    let out = tk.ok(&["undo", &entry.to_string()]);
    assert!(out.contains("kept_move"), "{out}");
    let p = tk.json(&["plan", "--json"]);
    assert!(arr(&p["kept_moves"]).is_empty() && arr(&p["dropped_moves"]).is_empty());
    assert_eq!(change(&p, "A02")["moved"], false);
    assert_eq!(change_dates(&p)["A02"], levelled);
    tk.ok(&["check"]);
}

#[test]
fn a_kept_move_is_done_once_the_anodes_are_changed() {
    let tk = two_circuits("");
    tk.ok(&["plan", "--move", "A02=2026-03-18", "--keep"]);
    // the change is logged (scrap, then new anodes) before the kept day: the decision is spent
    let at = "2026-03-10T12:00:00Z";
    tk.ok(&["log", "scrap", "--cell", "A02", "--at", at, "--total-kg", "3500", "--force"]);
    tk.ok(&["log", "anodes", "--cell", "A02", "--at", at, "--count", "50", "--mean-kg", "380"]);
    let p = tk.json(&["plan", "--json"]);
    assert!(arr(&p["kept_moves"]).is_empty() && arr(&p["dropped_moves"]).is_empty(), "{}", p["kept_moves"]);
}

#[test]
fn the_approved_plan_and_what_changed_since() {
    let tk = two_circuits("");
    let p = tk.json(&["plan", "--json"]);
    assert!(p["since_approved"].is_null());
    let a = tk.json(&["plan", "--json", "--approve", "--by", "sd"]);
    let x = &a["since_approved"];
    assert_eq!(
        (x["by"].as_str(), x["approved_from"].as_str(), x["approved_to"].as_str()),
        (Some("SD"), Some("2026-03-10"), Some("2026-03-23"))
    );
    assert!(arr(&x["moved"]).is_empty() && arr(&x["added"]).is_empty() && arr(&x["dropped"]).is_empty(), "{x}");
    let approved_id = x["approved"].as_i64().unwrap();
    // the next morning, the same length of plan: nothing due before today is called dropped
    let next = tk.cmd().env("TANKBOOK_NOW", "2026-03-12T00:00:00Z").args(["plan", "--json"]).output().unwrap();
    let next: Value = serde_json::from_slice(&next.stdout).unwrap();
    assert_eq!(next["from"], "2026-03-11");
    let y = &next["since_approved"];
    assert_eq!(y["approved"].as_i64(), Some(approved_id));
    assert!(arr(&y["dropped"]).iter().all(|j| j["date"].as_str().unwrap() >= "2026-03-11"), "{y}");
    assert!(arr(&y["added"]).iter().all(|j| j["date"].as_str().unwrap() <= "2026-03-23"), "{y}");
    // initials that are not initials are refused, and nothing is recorded
    let dump = tk.dump();
    let err = tk.fails(1, &["plan", "--approve", "--by", "S D"]);
    assert!(err.contains("--by"), "{err}");
    assert_eq!(tk.dump(), dump);

    // Since: a hand move (A02 a day earlier than approved) and a cell cut out with no end (B05:
    // its jobs dropped).
    let was = change_dates(&a)["A02"].clone();
    let to = (chrono::NaiveDate::parse_from_str(&was, "%Y-%m-%d").unwrap() - chrono::Duration::days(1)).to_string();
    let mv = format!("A02={to}");
    tk.ok(&["log", "cutout", "--cell", "B05", "--from", "2026-03-10T12:00:00Z"]);
    let p = tk.json(&["plan", "--json", "--move", &mv]);
    let x = &p["since_approved"];
    assert_eq!(x["approved"].as_i64(), Some(approved_id));
    let moved: Vec<(&str, &str, &str, &str)> = arr(&x["moved"])
        .iter()
        .map(|m| (m["cell"].as_str().unwrap(), m["kind"].as_str().unwrap(), m["from"].as_str().unwrap(), m["to"].as_str().unwrap()))
        .collect();
    assert!(moved.contains(&("A02", "anode_change", was.as_str(), to.as_str())), "{moved:?}");
    let dropped: Vec<(&str, &str)> =
        arr(&x["dropped"]).iter().map(|j| (j["cell"].as_str().unwrap(), j["kind"].as_str().unwrap())).collect();
    assert!(dropped.contains(&("B05", "anode_change")), "{dropped:?}");
    assert!(dropped.iter().all(|(c, _)| *c == "B05"), "only B05's jobs are dropped: {dropped:?}");
    assert!(arr(&x["added"]).is_empty(), "{x}");
    let table = tk.ok(&["plan", "--move", &mv]);
    assert!(table.contains("since the plan approved by SD") && table.contains("moved    anode change  A02"), "{table}");
    assert!(table.contains("dropped  anode change  B05"), "{table}");

    // cells added: a new load in a cell that had none when the plan was approved
    let tk = two_circuits("");
    tk.ok(&["log", "scrap", "--cell", "B04", "--at", "2026-03-10T12:00:00Z", "--total-kg", "9000", "--force"]);
    tk.ok(&["plan", "--approve"]);
    tk.ok(&["log", "anodes", "--cell", "B04", "--at", "2026-03-10T18:00:00Z", "--count", "50", "--mean-kg", "380"]);
    let x = tk.json(&["plan", "--json"])["since_approved"].clone();
    let added: Vec<(&str, &str)> = arr(&x["added"]).iter().map(|j| (j["cell"].as_str().unwrap(), j["kind"].as_str().unwrap())).collect();
    assert!(added.contains(&("B04", "harvest")), "{added:?}");
}

/// Sum of squared daily cathodes (the spread measure) and the count of harvests placed.
fn strip_spread(p: &Value) -> (u128, usize) {
    let days = arr(&p["days"]);
    let sq = days.iter().map(|d| u128::from(d["harvest_cathodes"].as_u64().unwrap()).pow(2)).sum();
    (sq, days.iter().map(|d| arr(&d["harvests"]).len()).sum())
}

#[test]
fn smoothing_on_the_demo_is_never_worse_than_the_cap_only_plan() {
    let tk = Tk::new("2026-11-20T05:30:00Z");
    tk.ok(&["demo", "--no-tui"]);
    for days in ["14", "28"] {
        let capped = tk.json(&["plan", "--days", days, "--json", "--no-smoothing"]);
        let smooth = tk.json(&["plan", "--days", days, "--json"]);
        let (a, na) = strip_spread(&capped);
        let (b, nb) = strip_spread(&smooth);
        assert_eq!(na, nb, "the same harvests are placed");
        assert_eq!(arr(&capped["unplaced"]).len(), arr(&smooth["unplaced"]).len());
        // the demo's crops bunch on some days, so the windows allow strictly better
        assert!(b < a, "{days} days: smoothed {b} against capped {a}");
        assert!(smooth["harvests_smoothed"].as_u64().unwrap() > 0);
        // the anode changes are the same: smoothing moves only harvests
        assert_eq!(change_dates(&capped), change_dates(&smooth));
        for d in arr(&smooth["days"]) {
            assert!(d["harvest_cathodes"].as_u64() <= d["harvest_capacity"].as_u64());
            for h in arr(&d["harvests"]) {
                let w = &h["window"];
                let date = d["date"].as_str().unwrap();
                assert!(w["earliest"].as_str().unwrap() <= date && date <= w["latest"].as_str().unwrap(), "{h}");
            }
        }
    }
}

#[test]
fn a_crane_budget_is_respected_and_named() {
    // 12 lifts a shift, one shift, 2 lifts a change and 2 its crop: 3 changes a day (by hand)
    let tk = two_circuits("[plan]\ncrew_cells_per_day = 10\ncrane_lifts_per_shift = 12\n");
    let p = tk.json(&["plan", "--json"]);
    for d in arr(&p["days"]) {
        let lifts = d["crane_lifts"].as_u64().unwrap();
        assert_eq!(d["crane_capacity"], 12);
        assert!(lifts <= 12, "{}: {lifts}", d["date"]);
        assert!(arr(&d["anode_changes"]).len() <= 3);
        let want = 2 * arr(&d["anode_changes"]).len() + 2 * arr(&d["harvests"]).len();
        assert_eq!(lifts, want as u64, "{}", d["date"]);
    }
    let ideal = arr(&p["days"]).iter().find(|d| d["date"] == "2026-03-19").unwrap();
    assert_eq!(ideal["bound_by"], "crane");
    assert_eq!(ideal["crew_capacity"], 3);
    // a budget too small for one change with its crop is refused, naming the key
    let tk = two_circuits("[plan]\ncrane_lifts_per_shift = 3\n");
    let err = tk.fails(1, &["plan"]);
    assert!(err.contains("plan.crane_lifts_per_shift"), "{err}");
}
