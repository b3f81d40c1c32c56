//! One timeline: `plan` and `forecast` give each crop the same harvest time and
//! call the same crops overdue (with and without `crops_per_anode_cycle`), and a
//! next anode load's window follows the day its change before it is planned on.
//! On a plant built here through the command line (invented figures), and on the demo.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;
use chrono::{DateTime, Duration, Utc};
use common::*;
use serde_json::Value;

/// The clock: 300 h after the first reading.
const T0: &str = "2026-05-01T00:00:00Z";
const NOW: &str = "2026-05-13T12:00:00Z";

fn t(s: &str) -> DateTime<Utc> {
    DateTime::parse_from_rfc3339(s).unwrap_or_else(|e| panic!("{s}: {e}")).to_utc()
}
fn at_h(h: f64) -> String {
    (t(T0) + Duration::seconds((h * 3600.0).round() as i64)).format("%Y-%m-%dT%H:%M:%SZ").to_string()
}
fn arr(v: &Value) -> &Vec<Value> {
    v.as_array().unwrap_or_else(|| panic!("not an array: {v}"))
}
fn s(v: &Value) -> &str {
    v.as_str().unwrap_or_else(|| panic!("not a string: {v}"))
}

/// An invented two-section refinery on one circuit, in Lima (UTC−5, production days
/// from 07:00): 40 anodes of 340 kg and 41 cathodes a cell, 28 kA with a dip to 20 kA.
fn layout(crops: Option<u32>) -> String {
    let crops = crops.map_or(String::new(), |k| format!("crops_per_anode_cycle = {k}\n"));
    format!(
        "[plant]\nname = \"Timeline test refinery\"\ntime_zone = \"America/Lima\"\nday_starts_at = \"07:00\"\n\n\
         [defaults]\nanodes_per_cell = 40\ncathodes_per_cell = 41\nface_area_m2 = 0.9\nnew_anode_kg = 340.0\n\
         scrap_target = 0.15\nscrap_upper = 0.25\nscrap_lower = 0.10\ncathode_target_kg = 120.0\n\
         cathode_efficiency = 0.96\nanode_efficiency = 1.0\nanode_copper_fraction = 0.995\nlug_kg = 18.0\n\
         thin_anode_mm = 3.0\nlow_efficiency_below = 0.90\n{crops}\n\
         [plan]\ncrew_cells_per_day = 4\nharvest_cathodes_per_day = 1000\n\n\
         [[circuit]]\nname = \"E1\"\nmax_amps = 40000\n\n\
         [[circuit.section]]\nname = \"N\"\ncells = 6\n\n[[circuit.section]]\nname = \"S\"\ncells = 4\n"
    )
}

/// The plant: its layout, 300 h of readings, anodes set at staggered times and
/// crops harvested part-way, so running crops begin off the parts of the anode life.
fn plant(crops: Option<u32>) -> Tk {
    let tk = Tk::new(NOW);
    let l = tk.file("layout.toml", &layout(crops));
    tk.ok(&["layout", "load", &l]);
    let mut csv = String::from("time,circuit,amps\n");
    for q in 0..=300 * 4 {
        let h = f64::from(q) / 4.0;
        let amps = if (120.0..160.0).contains(&h) { 20_000.0 } else { 28_000.0 };
        csv.push_str(&format!("{},E1,{amps}\n", at_h(h)));
    }
    let csv = tk.file("e1.csv", &csv);
    tk.ok(&["import", "current", &csv]);
    // (cell, anodes set at h, harvests at h)
    let cells: [(&str, f64, &[f64]); 10] = [
        ("N01", 0.0, &[]),
        ("N02", 20.0, &[135.0]),
        ("N03", 60.0, &[176.0]),
        ("N04", 100.0, &[]),
        ("N05", 150.0, &[]),
        ("N06", 200.0, &[]),
        ("S01", 10.0, &[164.0]),
        ("S02", 2.0, &[120.0, 250.0]),
        ("S03", 40.0, &[155.5]),
        ("S04", 270.0, &[]),
    ];
    for (cell, set, harvests) in cells {
        tk.ok(&["log", "anodes", "--cell", cell, "--at", &at_h(set), "--count", "40", "--mean-kg", "340", "--force"]);
        let mut from = set;
        for h in harvests {
            // about what 96 % of the charge plates (1.185 486 g/(A·h), DOMAIN.md), at the mean current
            let kg = 1.185_486e-3 * 26_000.0 * (h - from) * 0.96;
            tk.ok(&["log", "harvest", "--cell", cell, "--at", &at_h(*h), "--total-kg", &format!("{kg:.0}"), "--force"]);
            from = *h;
        }
    }
    tk
}

/// Checks each cell's first planned harvest against the forecast's `harvest_due`;
/// returns how many cells were checked, and how many of them were overdue.
fn plan_agrees_with_forecast(tk: &Tk, now: &str, days: &str) -> (usize, usize) {
    let f = tk.json(&["forecast", "--json"]);
    let p = tk.json(&["plan", "--days", days, "--json"]);
    let now = t(now);
    let plan_days = arr(&p["days"]);
    let starts: Vec<DateTime<Utc>> = plan_days.iter().map(|d| t(s(&d["starts_at"]))).collect();
    let end = t(s(&plan_days.last().unwrap()["starts_at"])) + Duration::hours(24);
    // the production date an instant falls in (the plan's own day starts)
    let date_of = |x: DateTime<Utc>| starts.iter().rposition(|st| *st <= x).map(|i| s(&plan_days[i]["date"]).to_string());
    let (mut checked, mut overdue) = (0, 0);
    for c in arr(&f["cells"]) {
        let cell = s(&c["cell"]);
        let Some(due) = c["cathode"]["harvest_due"].as_str() else { continue };
        let due_t = t(due);
        // the forecast's 90 % window holds its own due time
        let w = &c["cathode"]["harvest_window"];
        if !w.is_null() {
            assert!(t(s(&w["early"])) <= due_t && due_t <= t(s(&w["late"])), "{cell}: {due} outside {w}");
        }
        if due_t >= end || arr(&p["unplaced"]).iter().any(|u| u["cell"] == cell && u["kind"] == "harvest") {
            continue;
        }
        let mut mine: Vec<(&str, &Value)> = plan_days
            .iter()
            .flat_map(|d| arr(&d["harvests"]).iter().filter(|h| h["cell"] == cell).map(move |h| (s(&d["date"]), h)))
            .collect();
        mine.sort_by_key(|(_, h)| t(s(&h["at"])));
        let (date, h) = *mine.first().unwrap_or_else(|| panic!("{cell}: due {due} and not planned"));
        // overdue in the plan exactly when the forecast's time has passed
        assert_eq!(h["overdue"].as_bool(), Some(due_t <= now), "{cell}: forecast due {due}, now {now}, plan {h}");
        let window = &h["window"];
        let inside = |d: &str| s(&window["earliest"]) <= d && d <= s(&window["latest"]);
        assert!(inside(date), "{cell}: planned {date} outside {window}");
        if due_t <= now {
            overdue += 1;
            assert!(date <= s(&plan_days[1]["date"]), "{cell}: overdue and planned on {date}");
        } else if h["with_anode_change"] == true {
            // pulled with the anodes: the forecast's time is the change's own, or a crop due on
            // the change's day (before it) is pulled with it
            let ch = plan_days.iter().flat_map(|d| arr(&d["anode_changes"])).find(|x| x["cell"] == cell && x["cycle"] == 0).unwrap();
            let same = s(&ch["target_at"]) == due;
            let near = date_of(due_t).is_some_and(|d| d.as_str() <= date);
            assert!(same || near, "{cell}: forecast {due}, with the change {ch}");
        } else {
            // the plan's own crop: due on the forecast's day, at the forecast's time when planned that day
            let want = date_of(due_t).unwrap();
            assert_eq!(s(&window["ideal"]), want, "{cell}: forecast {due}, plan {h}");
            if date == want {
                let gap = (t(s(&h["at"])) - due_t).num_seconds().abs();
                assert!(gap <= 1, "{cell}: planned at {} against the forecast's {due}", h["at"]);
            }
        }
        checked += 1;
    }
    (checked, overdue)
}

#[test]
fn plan_and_forecast_share_harvest_times_and_overdue_with_equal_crops() {
    let tk = plant(Some(3));
    let (checked, overdue) = plan_agrees_with_forecast(&tk, NOW, "21");
    assert_eq!(checked, 10, "every cell has a crop in the plan");
    // The life's parts have passed for several running crops (N01 from its set at 0 h, N02 …):
    // overdue in both; crops on the old target-mass rule would not be.
    assert!(overdue >= 3, "{overdue}");
}

#[test]
fn plan_and_forecast_share_harvest_times_and_overdue_at_target_mass() {
    let tk = plant(None);
    let (checked, overdue) = plan_agrees_with_forecast(&tk, NOW, "21");
    assert_eq!(checked, 10);
    assert!(overdue >= 1, "{overdue}");
    // S02's crop began at 250 h: at 120 kg a cathode it would be due after its anodes are
    // pulled, so the forecast has it due with them, at the change's ideal time
    let f = tk.json(&["forecast", "--json", "--cell", "S02"]);
    let c = &arr(&f["cells"])[0];
    assert_eq!(c["cathode"]["harvest_due"], c["anode"]["pull_due"], "{c}");
}

#[test]
fn the_demo_plan_and_forecast_share_harvest_times() {
    let tk = Tk::new("2026-11-20T05:30:00Z");
    tk.ok(&["demo", "--no-tui"]);
    let (checked, _) = plan_agrees_with_forecast(&tk, "2026-11-20T05:30:00Z", "14");
    assert!(checked > 80, "{checked}");
}

#[test]
fn a_next_window_follows_the_moved_first_change() {
    // N06 (set at 200 h) is ideal about 346 h later; moved a day early, its next load is set
    // at the end of that production day, and the next change's ideal moves with it.
    let tk = plant(Some(3));
    let plan = |args: &[&str]| {
        let mut a = vec!["plan", "--days", "35", "--json", "--crew-cells-per-day", "8"];
        a.extend_from_slice(args);
        tk.json(&a)
    };
    let changes = |p: &Value| -> Vec<Value> {
        arr(&p["days"]).iter().flat_map(|d| arr(&d["anode_changes"]).iter().filter(|c| c["cell"] == "N06").cloned()).collect()
    };
    let first = plan(&[]);
    let cs = changes(&first);
    assert_eq!(cs.len(), 2, "{cs:?}");
    let ideal = s(&cs[0]["window"]["ideal"]).to_string();
    let earlier = (chrono::NaiveDate::parse_from_str(&ideal, "%Y-%m-%d").unwrap() - Duration::days(1)).to_string();
    let moved = plan(&["--move", &format!("N06={earlier}")]);
    let ms = changes(&moved);
    assert_eq!(ms.len(), 2, "{ms:?}");
    assert_eq!((ms[0]["moved"].as_bool(), s(&ms[0]["window"]["ideal"])), (Some(true), ideal.as_str()));
    // the second load's life, from each plan's first change as planned, is the same length
    // (the projected current is flat), so the moved plan's next change comes that much earlier
    let life = |c: &[Value]| t(s(&c[1]["target_at"])) - t(s(&c[0]["at"]));
    assert!((life(&cs) - life(&ms)).num_seconds().abs() <= 60, "{:?} {:?}", life(&cs), life(&ms));
    let shift = t(s(&cs[0]["at"])) - t(s(&ms[0]["at"]));
    assert!(shift > Duration::hours(1), "{shift:?}");
    assert_eq!(t(s(&cs[1]["target_at"])) - t(s(&ms[1]["target_at"])), shift);
}
