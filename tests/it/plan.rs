//! `tankbook plan` end to end: the plant check's windows and days against a hand
//! calculation, the command's contract, and the demo plant's capacities never exceeded.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;
use common::*;
use serde_json::Value;
use std::collections::BTreeSet;

// The DOMAIN.md plant check (derived from CODATA 2018 F and IUPAC M(Cu)): 50 × 380 kg anodes,
// 51 cathodes, 30 kA, w_Cu 0.995, η_a 1.0, η_c 0.96, lug 20 kg. Each anode loses
// 1.185 486e-3 kg/(A·h) · 600 A / 0.995 = 0.714 871 kg/h, so (1 − f)·380 kg takes
// 285 / 0.714 871 = 398.67 h to f = 0.25, 323 / 0.714 871 = 451.83 h to 0.15 (DOMAIN.md: 451.8 h),
// 342 / 0.714 871 = 478.41 h to 0.10. A cathode gains 1.185 486e-3 · 30 000 · 0.96 / 51 = 0.669 456 kg/h.
const UPPER_H: f64 = 398.67;
const TARGET_H: f64 = 451.83;
const LOWER_H: f64 = 478.41;
const CATHODE_KG_PER_H: f64 = 0.669_456;
const T0: &str = "2026-03-01T00:00:00Z";

/// The plant check with production days starting at 20:00 UTC, ten days of 30 kA
/// (to 2026-03-11T00:00Z, the clock), anodes set in A01 and L1 (inert) at T0.
fn plant_check_evening_days() -> Tk {
    let tk = Tk::new("2026-03-11T00:00:00Z");
    let text =
        std::fs::read_to_string(fixture("plant_check.toml")).unwrap().replace("day_starts_at = \"06:00\"", "day_starts_at = \"20:00\"");
    assert!(text.contains("\"20:00\""));
    let layout = tk.file("layout.toml", &text);
    tk.ok(&["layout", "load", &layout]);
    let pts: Vec<(f64, f64)> = (0..=240 * 4).map(|i| (i as f64 / 4.0, 30_000.0)).collect();
    let csv = tk.file("c.csv", &current_csv(&pts));
    tk.ok(&["import", "current", &csv]);
    tk.ok(&["log", "anodes", "--cell", "A01", "--at", T0, "--count", "50", "--mean-kg", "380"]);
    tk.ok(&["log", "anodes", "--cell", "L1", "--at", T0, "--count", "50", "--mean-kg", "380", "--force"]);
    tk
}

fn day<'a>(p: &'a Value, date: &str) -> &'a Value {
    p["days"].as_array().unwrap().iter().find(|d| d["date"] == date).unwrap_or_else(|| panic!("no day {date}"))
}

fn arr(v: &Value) -> &Vec<Value> {
    v.as_array().unwrap_or_else(|| panic!("not an array: {v}"))
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

#[test]
fn plant_check_windows_days_and_outputs() {
    let tk = plant_check_evening_days();
    let csv_path = tk.dir.path().join("jobs.csv");
    // cap-only: the figures below are each job's due day, worked by hand (smoothing is checked after)
    let p = tk.json(&["plan", "--days", "30", "--json", "--no-smoothing", "--csv", csv_path.to_str().unwrap()]);
    assert_eq!(p["schema"], 1);
    assert_eq!(p["harvests_smoothed"], 0);
    // 2026-03-11T00:00Z falls in the production day that began 2026-03-10T20:00Z
    assert_eq!(p["from"], "2026-03-10");
    assert_eq!(arr(&p["days"]).len(), 30);
    let advisory = p["advisory"].as_str().unwrap();
    for needle in ["advisory", "lock-out", "acid", "site procedures", "local codes", "qualified engineers"] {
        assert!(advisory.contains(needle), "{advisory}");
    }

    // The ideal, 451.83 h after the set, is 2026-03-19T19:50Z: before 20:00, so production day 03-18.
    // The window opens at 398.67 h (03-17T14:40Z → day 03-16) and closes at 478.41 h (03-20T22:25Z → day 03-20).
    let d = day(&p, "2026-03-18");
    let changes = arr(&d["anode_changes"]);
    assert_eq!(changes.len(), 1, "{changes:?}");
    let c = &changes[0];
    assert_eq!(c["cell"], "A01");
    assert_eq!(c["overdue"], false);
    assert!((f(&c["scrap_fraction"]) - 0.15).abs() < 1e-6, "{}", c["scrap_fraction"]);
    assert_eq!(c["window"]["earliest"], "2026-03-16");
    assert_eq!(c["window"]["ideal"], "2026-03-18");
    assert_eq!(c["window"]["latest"], "2026-03-20");
    for (key, h) in [("upper_at", UPPER_H), ("target_at", TARGET_H), ("lower_at", LOWER_H)] {
        let got = hours_between(T0, c[key].as_str().unwrap());
        assert!((got - h).abs() < 0.01, "{key}: {got} h");
    }
    // 50 new anodes × 380 kg = 19 t; scrap 50 × 0.15 × 380 kg = 2.85 t (by hand)
    assert_eq!(d["anodes_needed"], 50);
    assert!((f(&d["anode_tonnes"]) - 19.0).abs() < 1e-9);
    assert!((f(&d["scrap_tonnes"]) - 2.85).abs() < 1e-5);
    assert_eq!(d["crew_load"], 1);
    // the layout's crew default of 8 cells a day (common practice, no source)
    assert_eq!(d["crew_capacity"], 8);

    // The next load, assumed set at the ideal: ideal 903.66 h = 04-07T15:40Z → day 04-06.
    let next = day(&p, "2026-04-06");
    let c2 = &arr(&next["anode_changes"])[0];
    assert_eq!((c2["cell"].as_str(), c2["cycle"].as_u64()), (Some("A01"), Some(1)));
    assert!((hours_between(T0, c2["target_at"].as_str().unwrap()) - 2.0 * TARGET_H).abs() < 0.02);

    // Harvests: the 120 kg crop (179.25 h) is overdue, on day 0 with 240 h of copper:
    // 0.669 456 × 240 = 160.67 kg a cathode. The next, from now, reaches 120 kg 179.25 h later
    // (03-18T11:15Z → day 03-17), before the change; the last goes with the change.
    let first = arr(&day(&p, "2026-03-10")["harvests"]).iter().find(|h| h["cell"] == "A01").cloned().unwrap();
    assert_eq!(first["overdue"], true);
    assert!((f(&first["mass_kg"]) - CATHODE_KG_PER_H * 240.0).abs() < 0.01, "{}", first["mass_kg"]);
    let second = arr(&day(&p, "2026-03-17")["harvests"]).iter().find(|h| h["cell"] == "A01").cloned().unwrap();
    assert!((f(&second["mass_kg"]) - 120.0).abs() < 1e-3);
    let last = arr(&d["harvests"]).iter().find(|h| h["cell"] == "A01").cloned().unwrap();
    assert_eq!(last["with_anode_change"], true);
    // 419.25 h → 451.83 h: 32.58 h × 0.669 456 = 21.81 kg
    assert!((f(&last["mass_kg"]) - CATHODE_KG_PER_H * (TARGET_H - 419.25)).abs() < 0.01, "{}", last["mass_kg"]);
    // copper of that crop: 51 × 21.81 kg (by hand); the day's tonnes add up its crops
    assert!((f(&last["copper_kg"]) - 51.0 * CATHODE_KG_PER_H * (TARGET_H - 419.25)).abs() < 0.5);
    let crops: f64 = arr(&d["harvests"]).iter().map(|h| f(&h["copper_kg"])).sum();
    assert!((f(&d["copper_tonnes"]) - crops / 1000.0).abs() < 1e-9);

    // The inert cell is harvested but never has its anodes changed.
    let all_days = arr(&p["days"]);
    assert!(all_days.iter().flat_map(|d| arr(&d["anode_changes"])).all(|c| c["cell"] != "L1"));
    assert!(all_days.iter().flat_map(|d| arr(&d["harvests"])).any(|h| h["cell"] == "L1"));

    // One CSV row per planned job.
    let text = std::fs::read_to_string(&csv_path).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("date,kind,cell,circuit,section,fraction_or_kg,overdue"));
    let rows: Vec<&str> = lines.collect();
    let jobs: usize = all_days.iter().map(|d| arr(&d["anode_changes"]).len() + arr(&d["harvests"]).len()).sum();
    assert_eq!(rows.len(), jobs);
    let change_row = rows.iter().find(|r| r.starts_with("2026-03-18,anode_change,A01,C1,A,")).unwrap();
    let frac: f64 = change_row.split(',').nth(5).unwrap().parse().unwrap();
    assert!((frac - 0.15).abs() < 1e-6);
    assert!(rows.iter().any(|r| r.starts_with("2026-03-10,harvest,A01,C1,A,") && r.ends_with(",true")));

    // The table carries the caution too.
    let table = tk.ok(&["plan", "--days", "30"]);
    assert!(table.contains("CAUTION") && table.contains("site procedures") && table.contains("qualified engineers"), "{table}");
    assert!(table.lines().any(|l| l.contains("anode change") && l.contains("A01") && l.contains("15.0 %")), "{table}");
}

#[test]
fn plan_options_are_checked_and_nothing_is_written() {
    let tk = plant_check_evening_days();
    let before = tk.dump();
    for (args, field) in [
        (vec!["plan", "--from", "2026-03-01"], "--from"),
        (vec!["plan", "--days", "0"], "--days"),
        (vec!["plan", "--days", "400"], "--days"),
        (vec!["plan", "--crew-cells-per-day", "0"], "--crew-cells-per-day"),
        // 50 cathodes a day cannot strip one cell of 51
        (vec!["plan", "--harvest-cathodes-per-day", "50"], "--harvest-cathodes-per-day"),
        // outside A01's window 2026-03-16 … 2026-03-20
        (vec!["plan", "--move", "A01=2026-03-22"], "--move"),
        (vec!["plan", "--move", "L1=2026-03-18"], "--move"),
        (vec!["plan", "--move", "Z9=2026-03-18"], "--move"),
        (vec!["plan", "--csv", "/nonexistent-folder/jobs.csv"], "--csv"),
    ] {
        let err = tk.fails(1, &args);
        assert!(err.contains(field), "{args:?}: {err}");
    }
    for args in [vec!["plan", "--from", "10/03/2026"], vec!["plan", "--move", "A01"], vec!["plan", "--days", "x"]] {
        tk.fails(2, &args);
    }
    // a move inside the window
    let p = tk.json(&["plan", "--days", "14", "--json", "--move", "A01=2026-03-17"]);
    let c = &arr(&day(&p, "2026-03-17")["anode_changes"])[0];
    assert_eq!((c["cell"].as_str(), c["moved"].as_bool()), (Some("A01"), Some(true)));
    // a day before its ideal day the anodes are thicker: more than the 15 % target is left (by hand)
    assert!(f(&c["scrap_fraction"]) > 0.15);
    assert_eq!(tk.dump(), before, "planning changes nothing");
}

/// The production date of an instant in the demo plant: Europe/Madrid is UTC+1 from
/// 2026-10-25 to 2027-03-28 (IANA tz database) and the day starts at 06:00, so UTC − 5 h.
fn demo_day(t: &str) -> chrono::NaiveDate {
    let t = chrono::DateTime::parse_from_rfc3339(t).unwrap().to_utc();
    (t - chrono::Duration::hours(5)).date_naive()
}

fn date(s: &str) -> chrono::NaiveDate {
    chrono::NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
}

/// Every planned job inside its window, no day over its crew or stripping capacity.
fn check_capacities(p: &Value) {
    for d in arr(&p["days"]) {
        let date_s = d["date"].as_str().unwrap();
        let today = date(date_s);
        let changes = arr(&d["anode_changes"]);
        assert_eq!(d["crew_load"].as_u64(), Some(changes.len() as u64));
        assert!(d["crew_load"].as_u64() <= d["crew_capacity"].as_u64(), "{date_s}: crew over capacity");
        if !d["no_anode_work"].is_null() {
            assert_eq!(d["crew_capacity"], 0);
        }
        let cathodes: u64 = arr(&d["harvests"]).iter().map(|h| h["cathodes"].as_u64().unwrap()).sum();
        assert_eq!(d["harvest_cathodes"].as_u64(), Some(cathodes));
        assert!(cathodes <= d["harvest_capacity"].as_u64().unwrap(), "{date_s}: {cathodes} cathodes");
        // the demo runs two shifts: their loads add up to the day's
        let shifts = arr(&d["shifts"]);
        assert_eq!(shifts.len(), 2);
        assert_eq!(shifts.iter().map(|s| s["load"].as_u64().unwrap()).sum::<u64>(), d["crew_load"].as_u64().unwrap());
        let anodes: u64 = changes.iter().map(|c| c["anodes"].as_u64().unwrap()).sum();
        assert_eq!(d["anodes_needed"].as_u64(), Some(anodes));
        for job in changes.iter().chain(arr(&d["harvests"])) {
            let w = &job["window"];
            assert!(date(w["earliest"].as_str().unwrap()) <= today, "{job}");
            if let Some(l) = w["latest"].as_str() {
                assert!(today <= date(l), "{job}");
            }
        }
    }
}

#[test]
fn demo_plan_never_exceeds_capacity_or_supply() {
    let tk = Tk::new("2026-11-20T05:30:00Z");
    tk.ok(&["demo", "--no-tui"]);
    let p = tk.json(&["plan", "--days", "21", "--json"]);
    assert_eq!(p["from"], "2026-11-20");
    let days = arr(&p["days"]);
    let last = date(days.last().unwrap()["date"].as_str().unwrap());
    check_capacities(&p);
    // The planned R1 outage (five days ahead, in the demo) stops anode work in R1's cells only:
    // R2's changes stay on that day.
    let down: Vec<&Value> = days.iter().filter(|d| arr(&d["outages"]).iter().any(|o| o["circuit"] == "R1")).collect();
    assert!(!down.is_empty());
    for d in &down {
        assert!(d["no_anode_work"].is_null(), "R2 still works: {}", d["date"]);
        assert_eq!(arr(&d["outages"])[0]["anode_work"], "forbidden");
        let circuits: BTreeSet<&str> = arr(&d["anode_changes"]).iter().map(|c| c["circuit"].as_str().unwrap()).collect();
        assert!(!circuits.contains("R1"), "{}: {circuits:?}", d["date"]);
    }
    assert!(down.iter().any(|d| !arr(&d["anode_changes"]).is_empty()), "R2's changes stay on the outage day");

    // Every cell whose change is due by the plan's last day is placed or listed unplaced.
    let f = tk.json(&["forecast", "--json"]);
    let mut seen: BTreeSet<String> =
        days.iter().flat_map(|d| arr(&d["anode_changes"])).map(|c| c["cell"].as_str().unwrap().to_string()).collect();
    seen.extend(arr(&p["unplaced"]).iter().filter(|u| u["kind"] == "anode_change").map(|u| u["cell"].as_str().unwrap().to_string()));
    let mut due = 0;
    for c in arr(&f["cells"]) {
        if let Some(t) = c["anode"]["pull_due"].as_str()
            && c["anode_kind"] == "soluble"
            && demo_day(t) <= last
        {
            due += 1;
            assert!(seen.contains(c["cell"].as_str().unwrap()), "{} due {t} is missing from the plan", c["cell"]);
        }
    }
    assert!(due > 20, "the demo has changes due: {due}");
    for u in arr(&p["unplaced"]) {
        assert!(!u["reason"].as_str().unwrap().is_empty() && !u["message"].as_str().unwrap().is_empty(), "{u}");
    }

    // A limited anode supply is never overdrawn: 600 in stock and 150 a day.
    let s = tk.json(&["plan", "--days", "21", "--json", "--anode-stock", "600", "--anodes-per-day", "150"]);
    check_capacities(&s);
    let mut used = 0;
    for (i, d) in arr(&s["days"]).iter().enumerate() {
        used += d["anodes_needed"].as_u64().unwrap();
        assert!(used <= 600 + 150 * (i as u64 + 1), "day {i}: {used} anodes used");
    }
    let unlimited: u64 = days.iter().map(|d| d["anodes_needed"].as_u64().unwrap()).sum();
    assert!(used < unlimited, "the supply limit binds ({used} of {unlimited})");
    assert!(arr(&s["unplaced"]).iter().any(|u| u["reason"] == "no_anodes"));

    // A hand move inside the window, onto a day with a free crew place.
    let mut done = false;
    'find: for d in days {
        for c in arr(&d["anode_changes"]) {
            let (a, z) = (date(c["window"]["earliest"].as_str().unwrap()), date(c["window"]["latest"].as_str().unwrap()).min(last));
            let placed = date(d["date"].as_str().unwrap());
            for other in days {
                let od = date(other["date"].as_str().unwrap());
                if od != placed && a <= od && od <= z && other["crew_load"].as_u64() < other["crew_capacity"].as_u64() {
                    let cell = c["cell"].as_str().unwrap();
                    let mv = format!("{cell}={od}");
                    let m = tk.json(&["plan", "--days", "21", "--json", "--move", &mv]);
                    check_capacities(&m);
                    let there = arr(&day(&m, &od.to_string())["anode_changes"]).iter().find(|x| x["cell"] == cell).cloned().unwrap();
                    assert_eq!(there["moved"], true);
                    // and outside that window it is refused
                    let out = format!("{cell}={}", z.succ_opt().unwrap());
                    let err = tk.fails(1, &["plan", "--days", "22", "--move", &out]);
                    assert!(err.contains("--move") && err.contains("outside"), "{err}");
                    done = true;
                    break 'find;
                }
            }
        }
    }
    assert!(done, "the demo has a change that can be moved");

    // Over capacity: with two cells a day, moving a cell onto a full day inside its window is refused.
    let two = tk.json(&["plan", "--days", "21", "--json", "--crew-cells-per-day", "2"]);
    check_capacities(&two);
    let two_days = arr(&two["days"]);
    let full: Vec<chrono::NaiveDate> =
        two_days.iter().filter(|d| d["crew_load"] == 2 && d["crew_capacity"] == 2).map(|d| date(d["date"].as_str().unwrap())).collect();
    let mut refused = false;
    'over: for d in two_days {
        for c in arr(&d["anode_changes"]) {
            let (a, z) = (date(c["window"]["earliest"].as_str().unwrap()), date(c["window"]["latest"].as_str().unwrap()));
            let placed = date(d["date"].as_str().unwrap());
            if let Some(target) = full.iter().find(|f| **f != placed && a <= **f && **f <= z) {
                let mv = format!("{}={target}", c["cell"].as_str().unwrap());
                let err = tk.fails(1, &["plan", "--days", "21", "--crew-cells-per-day", "2", "--move", &mv]);
                assert!(err.contains("--move") && err.contains("over capacity"), "{err}");
                refused = true;
                break 'over;
            }
        }
    }
    assert!(refused, "a full day lies in some other cell's window");
}
