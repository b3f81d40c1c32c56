//! Learning on a simulated plant of our own (not the demo): the learnt forecast
//! against the fixed rule, the patrol list, the back-test's contract, left-out
//! weighings, undo, and an upgrade from a database older than learning.
//!
//! The simulated plant (a seeded generator, so every run is the same):
//! - one 30 kA circuit (hourly readings with ±0.4 % ripple and 0.2 % noise),
//!   60 days; the DOMAIN.md plant-check cells (50 anodes × 380 kg, 51 cathodes);
//! - section S: 15 refining cells, each with its own current efficiency
//!   0.957 + 0.008·N(0,1), except three shorted cells (S04, S09, S13) at
//!   0.875 + 0.005·N(0,1) whose voltage reads 80 mV low (0.22 V against 0.30 V,
//!   each reading ± 6 mV); a shorted cell also dissolves less anode (factor
//!   η/0.96, DOMAIN.md: a short bypasses both electrodes); S15 is never weighed;
//! - crops harvested about every 180 h and weighed with 0.4 % scatter; anodes
//!   changed about every 450 h, scrap weighed with 1 % scatter;
//! - section L: three inert-anode (liberator) cells at η ≈ 0.72, crops only.
//!
//! Every figure here is invented for the test.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)
use crate::common;

use chrono::{DateTime, Duration, TimeZone, Utc};
use std::collections::HashMap;
use std::path::Path;

use common::Tk;
use tankbook::domain::anode::AnodeLoad;
use tankbook::domain::charge::{MemoryCurve, RawReading, cell_charge};
use tankbook::domain::electrochem::ECE_KG_PER_AH;
use tankbook::domain::entry::Entry;
use tankbook::plant::{Opts, Plant};

type Time = DateTime<Utc>;

const LAYOUT: &str = r#"
[plant]
name = "Learning test plant"
time_zone = "UTC"
day_starts_at = "06:00"

[defaults]
anodes_per_cell = 50
cathodes_per_cell = 51
face_area_m2 = 1.0
new_anode_kg = 380.0
scrap_target = 0.15
scrap_upper = 0.25
scrap_lower = 0.10
cathode_target_kg = 120.0
cathode_efficiency = 0.96
anode_efficiency = 1.0
anode_copper_fraction = 0.995
lug_kg = 20.0
thin_anode_mm = 3.0
low_efficiency_below = 0.90

[[circuit]]
name = "C1"
max_amps = 45000

[[circuit.section]]
name = "S"
cells = 15

[[circuit.section]]
name = "L"
cells = 3
anode_kind = "inert"
cathode_efficiency = 0.75
low_efficiency_below = 0.60
cathode_target_kg = 60.0
"#;

const SHORTED: [&str; 3] = ["S04", "S09", "S13"];

/// splitmix64 and Box–Muller: a small seeded generator.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let u = self.unit().max(1e-12);
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * self.unit()).cos()
    }
}

fn t0() -> Time {
    Utc.with_ymd_and_hms(2026, 3, 1, 0, 0, 0).unwrap()
}

fn slot(t: Time) -> Time {
    // whole hours: entries at the readings' times
    Utc.timestamp_opt(t.timestamp() / 3600 * 3600, 0).unwrap()
}

struct Sim {
    now: Time,
    /// Each cell's true efficiency.
    eta: HashMap<String, f64>,
    /// Running crops at `now`: cell → start.
    running: HashMap<String, Time>,
    curve: MemoryCurve,
    rng: Rng,
}

fn opts(t: Time, force: bool) -> Opts {
    Opts { by: "SIM".into(), force, now: t }
}

/// Writes the simulated plant into `db` through the plant API; the clock stops at day 60.
fn simulate(db: &Path, seed: u64) -> Sim {
    let mut rng = Rng(seed);
    let now = t0() + Duration::days(60);
    let mut plant = Plant::open(db).unwrap();
    plant.load_layout(LAYOUT, "learn test layout", t0()).unwrap();
    let mut readings = Vec::new();
    let mut csv = String::from("time,circuit,amps\n");
    let mut t = t0();
    while t <= now {
        let h = (t - t0()).num_hours() as f64;
        let amps = (30_000.0 * (1.0 + 0.004 * (std::f64::consts::TAU * h / 24.0).sin() + 0.002 * rng.normal())).round();
        csv.push_str(&format!("{},C1,{amps}\n", t.format("%Y-%m-%dT%H:%M:%SZ")));
        readings.push(RawReading { t, amps });
        t += Duration::hours(1);
    }
    plant.import_current(csv.as_bytes(), "sim current", t0()).unwrap();
    let curve = MemoryCurve::build(&readings, &[], &[], now);
    let q = |a: Time, b: Time| cell_charge(&curve, &[], a, b).unwrap_or_else(|e| match e {}).total();

    let mut eta = HashMap::new();
    let mut running = HashMap::new();
    let mut entries: Vec<(Time, u8, Entry)> = Vec::new();
    for i in 1..=15 {
        let cell = format!("S{i:02}");
        let shorted = SHORTED.contains(&cell.as_str());
        let e = if shorted { 0.875 + 0.005 * rng.normal() } else { 0.957 + 0.008 * rng.normal() };
        let factor = e / 0.96;
        eta.insert(cell.clone(), e);
        for d in 0..60 {
            let at = t0() + Duration::days(d) + Duration::hours(6);
            let v = if shorted { 0.22 } else { 0.30 } + 0.006 * rng.normal();
            entries.push((at, 3, Entry::Voltage { cell: cell.clone(), at, volts: (v * 1000.0).round() / 1000.0 }));
        }
        if cell == "S15" {
            continue; // never weighed: it takes its section's value
        }
        let mut set = slot(t0() + Duration::hours((i as i64) * 30));
        let mut mean = (380.0 + 3.0 * rng.normal()).round();
        entries.push((set, 2, Entry::Anodes { cell: cell.clone(), at: set, count: 50, mean_kg: mean }));
        let mut crop = set;
        loop {
            let harvest = slot(crop + Duration::hours(180 + (6.0 * rng.normal()) as i64));
            let change = slot(set + Duration::hours(450 + (10.0 * rng.normal()) as i64));
            let next = harvest.min(change);
            if next >= now {
                break;
            }
            let kg = (ECE_KG_PER_AH * q(crop, next) * e * (1.0 + 0.004 * rng.normal())).round();
            if next == change {
                let load = AnodeLoad { initial_kg: mean, count: 50, efficiency: factor, copper_fraction: 0.995, lug_kg: 20.0 };
                let scrap = (load.remaining_kg(q(set, change)) * 50.0 * (1.0 + 0.01 * rng.normal())).round();
                entries.push((change, 0, Entry::Scrap { cell: cell.clone(), at: change, total_kg: scrap }));
                entries.push((change, 1, Entry::Harvest { cell: cell.clone(), at: change, total_kg: kg }));
                mean = (380.0 + 3.0 * rng.normal()).round();
                entries.push((change, 2, Entry::Anodes { cell: cell.clone(), at: change, count: 50, mean_kg: mean }));
                set = change;
            } else {
                entries.push((harvest, 1, Entry::Harvest { cell: cell.clone(), at: harvest, total_kg: kg }));
            }
            crop = next;
        }
        running.insert(cell.clone(), crop);
    }
    for i in 1..=3 {
        let cell = format!("L{i:02}");
        let e = 0.72 + 0.02 * rng.normal();
        eta.insert(cell.clone(), e);
        let set = slot(t0() + Duration::hours(2 + i));
        entries.push((set, 2, Entry::Anodes { cell: cell.clone(), at: set, count: 50, mean_kg: 250.0 }));
        let mut crop = set;
        loop {
            let harvest = slot(crop + Duration::hours(110 + (4.0 * rng.normal()) as i64));
            if harvest >= now {
                break;
            }
            let kg = (ECE_KG_PER_AH * q(crop, harvest) * e * (1.0 + 0.004 * rng.normal())).round();
            entries.push((harvest, 1, Entry::Harvest { cell: cell.clone(), at: harvest, total_kg: kg }));
            crop = harvest;
        }
        for d in 0..60 {
            let at = t0() + Duration::days(d) + Duration::hours(6);
            entries.push((
                at,
                3,
                Entry::Voltage { cell: cell.clone(), at, volts: ((2.0 + 0.03 * rng.normal()) * 1000.0).round() / 1000.0 },
            ));
        }
        running.insert(cell.clone(), crop);
    }
    entries.sort_by_key(|a| (a.0, a.1));
    let batch: Vec<(Entry, Opts)> = entries.into_iter().map(|(t, _, e)| (e, opts(t, false))).collect();
    plant.record_batch(&batch).unwrap();
    Sim { now, eta, running, curve, rng }
}

fn close_rel(a: f64, b: f64, tol: f64) -> bool {
    ((a - b) / b).abs() <= tol
}

/// Three seeds of the simulated plant: every running crop grown a day or more is
/// harvested at the end and weighed, and its forecast judged against the weighing.
#[test]
fn the_learnt_forecast_of_the_running_crop_beats_the_fixed_rule() {
    let (mut learnt, mut fixed) = (Vec::new(), Vec::new());
    for seed in [11, 12, 13] {
        let (l, f) = running_crops(seed);
        learnt.extend(l);
        fixed.extend(f);
    }
    assert!(learnt.len() >= 25, "{}", learnt.len());
    let mape = learnt.iter().sum::<f64>() / learnt.len() as f64;
    let fixed_mape = fixed.iter().sum::<f64>() / fixed.len() as f64;
    eprintln!("running crops: learnt MAPE {mape:.3} %, fixed {fixed_mape:.3} % over {} crops", learnt.len());
    assert!(mape < 0.5, "learnt MAPE {mape} %");
    assert!(mape < fixed_mape / 3.0, "learnt {mape} % against fixed {fixed_mape} %");
}

/// One simulated plant's running crops: the learnt and the fixed rule's absolute errors, %.
fn running_crops(seed: u64) -> (Vec<f64>, Vec<f64>) {
    let tk = Tk::new("2026-04-30T00:00:00Z");
    let mut sim = simulate(&tk.db, seed);
    let now = sim.now;
    let forecast = tk.json(&["forecast", "--json"]);
    let cells = forecast["cells"].as_array().unwrap();
    let by_cell: HashMap<&str, &serde_json::Value> = cells.iter().map(|c| (c["cell"].as_str().unwrap(), c)).collect();
    // the contract's new fields
    for c in cells {
        for k in ["cathode_efficiency_source", "cathode_efficiency_se", "crops_learnt", "anode_factor", "anode_factor_source"] {
            assert!(c.get(k).is_some(), "{k} missing in {c}");
        }
    }
    let s15 = by_cell["S15"];
    assert_eq!(s15["cathode_efficiency_source"], "section");
    assert_eq!(s15["crops_learnt"], 0);
    for id in SHORTED {
        let c = by_cell[id];
        assert_eq!(c["cathode_efficiency_source"], "cell");
        assert!(c["crops_learnt"].as_u64().unwrap() >= 5, "{c}");
        assert!(close_rel(c["cathode_efficiency"].as_f64().unwrap(), sim.eta[id], 0.01), "{id}: {c}");
        assert!(c["anode_factor"].as_f64().unwrap() < 0.95, "{id}: {c}");
        assert!(c["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "low_efficiency"), "{c}");
    }
    // the liberators learn their cathode efficiency; their inert anodes keep the layout's factor
    assert_eq!(by_cell["L01"]["cathode_efficiency_source"], "cell");
    assert_eq!(by_cell["L01"]["anode_factor_source"], "layout");
    // the 90 % windows hold the due times
    for c in cells {
        if let Some(k) = c["cathode"].as_object()
            && let (Some(due), Some(w)) = (k["harvest_due"].as_str(), k["harvest_window"].as_object())
        {
            let (e, l) = (w["early"].as_str().unwrap(), w["late"].as_str().unwrap());
            assert!(e <= due && due <= l, "{c}");
        }
    }

    // The running crops of the cells grown for a day or more are harvested now,
    // and weighed; their forecast is judged against that weighing.
    let mut plant = Plant::open(&tk.db).unwrap();
    let mut learnt_err = Vec::new();
    let mut fixed_err = Vec::new();
    let mut harvests = Vec::new();
    let mut ids: Vec<&String> = sim.running.keys().collect();
    ids.sort();
    for id in ids {
        let start = sim.running[id];
        if now - start < Duration::days(1) {
            continue;
        }
        let q = cell_charge(&sim.curve, &[], start, now).unwrap_or_else(|e| match e {}).total();
        let weighed = (ECE_KG_PER_AH * q * sim.eta[id] * (1.0 + 0.004 * sim.rng.normal())).round();
        let c = by_cell[id.as_str()];
        let cathodes = 51.0;
        let predicted = c["cathode"]["mass_kg"].as_f64().unwrap() * cathodes;
        let fixed = predicted / c["cathode_efficiency"].as_f64().unwrap() * if id.starts_with('L') { 0.75 } else { 0.96 };
        learnt_err.push(((predicted - weighed) / weighed).abs() * 100.0);
        fixed_err.push(((fixed - weighed) / weighed).abs() * 100.0);
        harvests.push((Entry::Harvest { cell: id.clone(), at: now, total_kg: weighed }, opts(now, false)));
    }
    let mape = learnt_err.iter().sum::<f64>() / learnt_err.len() as f64;
    let fixed_mape = fixed_err.iter().sum::<f64>() / fixed_err.len() as f64;

    // The back-test of those weighings says the same (ex ante, on the measured charge).
    plant.record_batch(&harvests).unwrap();
    let b = tk.json(&["backtest", "--json", "--from", "2026-04-30T00:00:00Z"]);
    let s = &b["summary"];
    assert_eq!(s["crops"].as_u64().unwrap() as usize, learnt_err.len());
    assert!((s["mass_mape_pct"].as_f64().unwrap() - mape).abs() < 0.05, "{s} vs {mape}");
    assert!((s["fixed_mass_mape_pct"].as_f64().unwrap() - fixed_mape).abs() < 0.05, "{s} vs {fixed_mape}");
    (learnt_err, fixed_err)
}

#[test]
fn the_patrol_puts_the_shorted_cells_first() {
    let tk = Tk::new("2026-04-30T00:00:00Z");
    simulate(&tk.db, 23);
    let p = tk.json(&["patrol", "--json"]);
    assert_eq!(p["schema"], 1);
    assert_eq!(p["as_of"], "2026-04-30T00:00:00Z");
    let cells = p["cells"].as_array().unwrap();
    // every in-circuit cell with a voltage in the last 24 h: 15 refining + 3 liberators
    assert_eq!(cells.len(), 18);
    let mut top: Vec<&str> = cells[..3].iter().map(|c| c["cell"].as_str().unwrap()).collect();
    top.sort();
    assert_eq!(top, SHORTED);
    for c in cells {
        for k in [
            "cell",
            "circuit",
            "section",
            "score",
            "voltage",
            "section_median_v",
            "deviation_mv",
            "cathode_efficiency",
            "shorts_this_crop",
            "reasons",
        ] {
            assert!(c.get(k).is_some(), "{k} missing in {c}");
        }
        let dev = c["voltage"].as_f64().unwrap() - c["section_median_v"].as_f64().unwrap();
        assert!((c["deviation_mv"].as_f64().unwrap() - dev * 1000.0).abs() < 1e-6);
    }
    assert!(cells[0]["deviation_mv"].as_f64().unwrap() < -50.0);
    let scores: Vec<f64> = cells.iter().map(|c| c["score"].as_f64().unwrap()).collect();
    assert!(scores.windows(2).all(|w| w[0] >= w[1]), "{scores:?}");
    // the tiles mark them too
    let f = tk.json(&["forecast", "--json"]);
    let suspects: Vec<&str> = f["cells"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|c| c["warnings"].as_array().unwrap().iter().any(|w| w["code"] == "suspected_short"))
        .map(|c| c["cell"].as_str().unwrap())
        .collect();
    assert_eq!(suspects, SHORTED, "{}", serde_json::to_string_pretty(&p["cells"]).unwrap());
    // a hard short reads near 0 V: it tops the list even when the reading had to be forced
    tk.ok(&["log", "voltage", "--cell", "S02", "--at", "2026-04-29T22:00:00Z", "--volts", "0.02", "--force"]);
    let p = tk.json(&["patrol", "--json"]);
    assert_eq!(p["cells"][0]["cell"], "S02");
    assert!(p["cells"][0]["reasons"].as_array().unwrap().iter().any(|r| r.as_str().unwrap().contains("hard short")));
}

#[test]
fn the_backtest_is_ex_ante_and_its_summary_agrees_with_its_rows() {
    let tk = Tk::new("2026-04-30T00:00:00Z");
    let sim = simulate(&tk.db, 5);
    let before = tk.json(&["backtest", "--json"]);
    let crops = before["crops"].as_array().unwrap();
    let scrap = before["scrap"].as_array().unwrap();
    assert!(crops.len() > 80 && scrap.len() > 15, "{} {}", crops.len(), scrap.len());
    for r in crops {
        for k in ["cell", "started_at", "harvested_at", "weighed_kg", "predicted_kg", "fixed_kg"] {
            assert!(r.get(k).is_some(), "{k} missing in {r}");
        }
    }
    for r in scrap {
        for k in ["cell", "pulled_at", "weighed_kg", "predicted_kg", "fixed_kg"] {
            assert!(r.get(k).is_some(), "{k} missing in {r}");
        }
    }
    // the summary is the mean over the rows
    let mape = crops
        .iter()
        .map(|r| {
            let (p, w) = (r["predicted_kg"].as_f64().unwrap(), r["weighed_kg"].as_f64().unwrap());
            (p - w).abs() / w * 100.0
        })
        .sum::<f64>()
        / crops.len() as f64;
    let s = &before["summary"];
    assert_eq!(s["crops"].as_u64().unwrap() as usize, crops.len());
    assert!((s["mass_mape_pct"].as_f64().unwrap() - mape).abs() < 1e-9);
    for k in ["fixed_mass_mape_pct", "mass_bias_pct", "harvest_time_mae_h", "scrap_mae_pp", "fixed_scrap_mae_pp"] {
        assert!(s[k].as_f64().is_some(), "{k}: {s}");
    }
    let scrap_mae = scrap
        .iter()
        .map(|r| {
            (r["predicted_kg"].as_f64().unwrap() - r["weighed_kg"].as_f64().unwrap()).abs() / (50.0 * r["set_kg"].as_f64().unwrap()) * 100.0
        })
        .sum::<f64>()
        / scrap.len() as f64;
    assert!((s["scrap_mae_pp"].as_f64().unwrap() - scrap_mae).abs() < 1e-9);
    assert!(s["mass_mape_pct"].as_f64().unwrap() < s["fixed_mass_mape_pct"].as_f64().unwrap());
    // inert-anode cells: their crops are back-tested, they have no scrap rows
    assert!(crops.iter().any(|r| r["cell"] == "L01"));
    assert!(scrap.iter().all(|r| !r["cell"].as_str().unwrap().starts_with('L')));
    // a cell's first crop knows nothing of its own: it leans on the section or the layout
    let first = crops.iter().find(|r| r["cell"] == "S01").unwrap();
    assert_ne!(first["cathode_efficiency_source"], "cell");

    // Ex ante: a later weighing (a far-off crop weighed light) changes no earlier row.
    let start = sim.running["S01"];
    let q = cell_charge(&sim.curve, &[], start, sim.now).unwrap_or_else(|e| match e {}).total();
    let light = (ECE_KG_PER_AH * q * 0.80).round().to_string();
    tk.ok(&["log", "harvest", "--cell", "S01", "--at", "2026-04-30T00:00:00Z", "--total-kg", &light]);
    let after = tk.json(&["backtest", "--json"]);
    let after_crops = after["crops"].as_array().unwrap();
    assert_eq!(after_crops.len(), crops.len() + 1);
    assert_eq!(&after_crops[..crops.len()], &crops[..], "an earlier row changed");
    assert_eq!(after["scrap"], before["scrap"]);
    // … and the forecast leaves it out, far out of line with the cell's own crops, and says so
    let f = tk.json(&["forecast", "--cell", "S01", "--json"]);
    let w = f["cells"][0]["warnings"].as_array().unwrap().iter().find(|w| w["code"] == "weighing_not_learnt").cloned();
    assert!(w.is_some_and(|w| w["message"].as_str().unwrap().contains("far out of line")), "{f}");
    // --cell and --from narrow the rows
    let one = tk.json(&["backtest", "--json", "--cell", "S02", "--from", "2026-04-01T00:00:00Z"]);
    let rows = one["crops"].as_array().unwrap();
    assert!(!rows.is_empty() && rows.iter().all(|r| r["cell"] == "S02" && r["harvested_at"].as_str().unwrap() >= "2026-04-01"));
    let err = tk.fails(1, &["backtest", "--cell", "Z99"]);
    assert!(err.contains("--cell"), "{err}");
}

#[test]
fn an_impossible_weighing_stays_in_the_log_is_not_learnt_and_undo_restores() {
    let tk = Tk::new("2026-04-30T00:00:00Z");
    let sim = simulate(&tk.db, 17);
    let cell = |tk: &Tk| tk.json(&["forecast", "--cell", "S03", "--json"])["cells"][0].clone();
    let before = cell(&tk);
    // a forecast as of an earlier time learns only from the weighings up to it
    let earlier = tk.json(&["forecast", "--cell", "S03", "--at", "2026-04-10T00:00:00Z", "--json"])["cells"][0].clone();
    assert!(earlier["crops_learnt"].as_u64().unwrap() < before["crops_learnt"].as_u64().unwrap(), "{earlier}");
    let dump = tk.dump();
    let start = sim.running["S03"];
    let q = cell_charge(&sim.curve, &[], start, sim.now).unwrap_or_else(|e| match e {}).total();
    // 104 % of what the charge can plate: impossible
    let heavy = (ECE_KG_PER_AH * q * 1.04).round().to_string();
    let err = tk.fails(1, &["log", "harvest", "--cell", "S03", "--at", "2026-04-30T00:00:00Z", "--total-kg", &heavy]);
    assert!(err.contains("heavier than the charge allows"), "{err}");
    assert_eq!(tk.dump(), dump);
    tk.ok(&["log", "harvest", "--cell", "S03", "--at", "2026-04-30T00:00:00Z", "--total-kg", &heavy, "--force"]);
    let after = cell(&tk);
    assert_eq!(after["crops_learnt"], before["crops_learnt"]);
    assert_eq!(after["cathode_efficiency"], before["cathode_efficiency"]);
    let w = after["warnings"].as_array().unwrap().iter().find(|w| w["code"] == "weighing_not_learnt").expect("a warning");
    assert!(w["message"].as_str().unwrap().contains("impossible"), "{w}");
    let events = tk.json(&["events", "--cell", "S03", "--json"]);
    assert!(events.to_string().contains(&heavy));
    // a plausible weighing is learnt from: the count goes up
    tk.ok(&["undo"]);
    assert_eq!(cell(&tk)["warnings"], before["warnings"]);
    let fine = (ECE_KG_PER_AH * q * sim.eta["S03"]).round().to_string();
    tk.ok(&["log", "harvest", "--cell", "S03", "--at", "2026-04-30T00:00:00Z", "--total-kg", &fine]);
    let learnt = cell(&tk);
    assert_eq!(learnt["crops_learnt"].as_u64().unwrap(), before["crops_learnt"].as_u64().unwrap() + 1);
    tk.ok(&["undo"]);
    assert_eq!(cell(&tk)["cathode_efficiency"], before["cathode_efficiency"]);
}

#[test]
fn a_database_from_before_learning_learns_when_opened() {
    let tk = Tk::new("2026-04-30T00:00:00Z");
    simulate(&tk.db, 3);
    let learnt = tk.json(&["forecast", "--json"]);
    // what a tankbook before learning (migration 003) wrote
    common::downgrade_to_before(&tk.db, "003");
    assert_eq!(tk.json(&["forecast", "--json"]), learnt);
    // check: the stored values are what learning afresh gives, and a tampered one is found
    let out = tk.cmd().args(["check", "--json"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stdout));
    {
        let c = rusqlite::Connection::open(&tk.db).unwrap();
        c.execute("UPDATE cell_learnt SET cathode_value = 0.5 WHERE cell_id = 'S01'", []).unwrap();
    }
    let out = tk.cmd().args(["check", "--json"]).output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    let problems = String::from_utf8_lossy(&out.stdout);
    assert!(problems.contains("learnt efficiencies differ"), "{problems}");
}
