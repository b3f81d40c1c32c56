//! `tankbook balance`: the copper balance closes exactly, and on a plant whose
//! efficiencies are known and whose weighings follow them, the residual is the
//! Faraday electrolyte gain.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use crate::common;

use common::Tk;
use serde_json::Value;

/// An invented test plant (not a real plant's data): one 30 kA circuit with two
/// refining cells on permanent cathodes (A), one on copper starter sheets (S) and
/// one liberator (L). Every section plates at a known efficiency.
const LAYOUT: &str = r#"
[plant]
name = "Balance test plant"
time_zone = "UTC"
day_starts_at = "06:00"

[defaults]
anodes_per_cell = 50
cathodes_per_cell = 51
new_anode_kg = 380.0
cathode_efficiency = 0.95
anode_efficiency = 1.0
anode_copper_fraction = 0.995
lug_kg = 20.0

[[circuit]]
name = "C1"
max_amps = 45000

[[circuit.section]]
name = "A"
cells = 2

[[circuit.section]]
name = "S"
cells = ["S01"]
starter_sheet_kg = 6.0

[[circuit.section]]
name = "L"
cells = ["L1"]
anode_kind = "inert"
anodes_per_cell = 40
cathodes_per_cell = 41
new_anode_kg = 250.0
cathode_efficiency = 0.80
low_efficiency_below = 0.70
"#;

/// ECE in kg/(A·h) = 3600·M/(zF), from CODATA 2018 F = 96 485.332 12 C/mol and
/// IUPAC M(Cu) = 63.546 g/mol (DOMAIN.md): 1.185 494 g/(A·h).
const ECE: f64 = 3600.0 * 63.546 / (2.0 * 96_485.332_12) / 1000.0;

fn test_plant() -> Tk {
    let tk = Tk::new("2026-03-02T06:00:00Z");
    let layout = tk.file("layout.toml", LAYOUT);
    tk.ok(&["layout", "load", &layout]);
    // 30 kA every hour, 2026-03-01 00:00 to 2026-03-02 06:00
    let pts: Vec<(f64, f64)> = (0..=30).map(|h| (h as f64, 30_000.0)).collect();
    let csv = tk.file("c.csv", &common::current_csv(&pts));
    tk.ok(&["import", "current", &csv]);
    let log = |args: &[&str]| tk.ok(&[&["log"], args].concat());
    log(&["anodes", "--cell", "A01", "--at", "2026-03-01T00:00:00Z", "--count", "50", "--mean-kg", "380"]);
    log(&["anodes", "--cell", "L1", "--at", "2026-03-01T00:00:00Z", "--count", "40", "--mean-kg", "250"]);
    log(&["anodes", "--cell", "A02", "--at", "2026-03-01T10:00:00Z", "--count", "50", "--mean-kg", "380"]);
    log(&["anodes", "--cell", "S01", "--at", "2026-03-01T08:00:00Z", "--count", "50", "--mean-kg", "380"]);
    log(&["cutout", "--cell", "A01", "--from", "2026-03-01T12:00:00Z", "--to", "2026-03-01T13:00:00Z"]);
    // weighed to the kilogram, as the efficiencies say (worked below)
    log(&["harvest", "--cell", "A01", "--at", "2026-03-01T20:00:00Z", "--total-kg", "642"]);
    log(&["harvest", "--cell", "S01", "--at", "2026-03-01T22:00:00Z", "--total-kg", "779"]);
    log(&["harvest", "--cell", "L1", "--at", "2026-03-01T20:00:00Z", "--total-kg", "569"]);
    tk
}

fn f(v: &Value, key: &str) -> f64 {
    v[key].as_f64().unwrap_or_else(|| panic!("{key} missing in {v}"))
}

fn assert_closes(b: &Value) {
    let mut all: Vec<&Value> = b["circuits"].as_array().expect("circuits").iter().collect();
    all.push(&b["plant"]);
    for c in all {
        let change = f(c, "in_cells_end_t") - f(c, "in_cells_start_t");
        let closed = f(c, "anode_in_t") + f(c, "starter_in_t") - f(c, "cathode_out_t") - f(c, "scrap_out_t") - change;
        assert!((closed - f(c, "residual_t")).abs() < 1e-9, "in − out − change = {closed}, residual {}", f(c, "residual_t"));
    }
}

/// The period is 2026-03-01 06:00 to 2026-03-02 00:00 (18 h at 30 kA = 30 000 A·h an hour).
///
/// Charge in the period: A01 17 h (cut out 12:00–13:00), A02 14 h (set 10:00),
/// S01 16 h (set 08:00), L1 18 h. Crops weighed (charge since each crop began):
/// A01 19 h × 30 kA × 0.95 × ECE = 641.95 kg → 642; S01 14 h → 473.01 kg plated
/// + 51 × 6 kg starter sheets = 779.01 → 779; L1 20 h × 0.80 → 569.04 → 569.
///
/// Faraday gain (refining cells, η_a − η_c = 0.05): ECE · 0.05 · (17 + 14 + 16) h ×
/// 30 000 A = 83.577 kg. In: A02 and S01 anodes 2 × 50 × 380 × 0.995 = 37 810 kg,
/// starter sheets 51 × 6 kg for S01's first crop and again for the crop that
/// began at its harvest = 612 kg. Out: 642 + 779 kg cathodes, no scrap. The held
/// copper falls by the anode copper dissolved and rises by the copper plated, so
/// the residual is the Faraday gain up to the weighings' rounding (±1.5 kg here),
/// well inside 1 % of the 1 421 kg of cathodes weighed. The liberator's 18 h at
/// 80 % took 512.13 kg out of the electrolyte.
#[test]
fn the_residual_is_the_faraday_gain_on_a_plant_with_known_efficiencies() {
    let tk = test_plant();
    let b = tk.json(&["balance", "--from", "2026-03-01T06:00:00Z", "--to", "2026-03-02T00:00:00Z", "--json"]);
    assert_eq!(b["schema"], 1);
    assert_eq!(b["from"], "2026-03-01T06:00:00Z");
    assert_eq!(b["to"], "2026-03-02T00:00:00Z");
    assert_closes(&b);
    let p = &b["plant"];
    let faraday = ECE * 0.05 * (17.0 + 14.0 + 16.0) * 30_000.0 / 1000.0;
    assert!((f(p, "faraday_electrolyte_t") - faraday).abs() < 1e-6, "{} vs {faraday}", f(p, "faraday_electrolyte_t"));
    assert!((f(p, "faraday_electrolyte_t") * 1000.0 - 83.577).abs() < 0.001);
    let out = f(p, "cathode_out_t");
    assert!((out - 1.421).abs() < 1e-9, "{out}");
    assert!((f(p, "residual_t") - faraday).abs() <= 0.01 * out, "residual {} vs Faraday {faraday}", f(p, "residual_t"));
    // and here, with weighings rounded to the kilogram, within 1.5 kg
    assert!((f(p, "residual_t") - faraday).abs() * 1000.0 < 1.5, "{}", f(p, "residual_t"));
    assert!((f(p, "anode_in_t") - 37.81).abs() < 1e-9);
    assert!((f(p, "starter_in_t") - 0.612).abs() < 1e-9);
    assert_eq!(f(p, "scrap_out_t"), 0.0);
    // the liberator is shown apart: weighed, and what it took out of the electrolyte
    assert!((f(p, "liberator_out_t") - 0.569).abs() < 1e-9);
    let lib = ECE * 18.0 * 30_000.0 * 0.80 / 1000.0;
    assert!((f(p, "liberator_faraday_t") - lib).abs() < 1e-6);
    assert!((f(p, "liberator_taken_t") - lib).abs() < 0.0015, "{}", f(p, "liberator_taken_t"));
    assert!((f(p, "electrolyte_net_t") - (f(p, "residual_t") - f(p, "liberator_taken_t"))).abs() < 1e-12);
    // one circuit: it is the plant
    let c = &b["circuits"][0];
    assert_eq!(c["circuit"], "C1");
    for key in ["anode_in_t", "cathode_out_t", "scrap_out_t", "in_cells_start_t", "in_cells_end_t", "residual_t", "faraday_electrolyte_t"] {
        assert!((f(c, key) - f(p, key)).abs() < 1e-12, "{key}");
    }
}

#[test]
fn a_weighing_error_shows_as_a_residual_away_from_faraday() {
    let tk = test_plant();
    // A02's crop weighed 100 kg light (and accepted with --force if questioned)
    tk.ok(&["log", "harvest", "--cell", "A02", "--at", "2026-03-01T23:00:00Z", "--total-kg", "373", "--force"]);
    let b = tk.json(&["balance", "--from", "2026-03-01T06:00:00Z", "--to", "2026-03-02T00:00:00Z", "--json"]);
    assert_closes(&b);
    let p = &b["plant"];
    // A02 plated 13 h × 30 kA × 0.95 × ECE = 439.2 kg; 373 kg weighed leaves 66 kg on the books as "in the electrolyte"
    let gap = (f(p, "residual_t") - f(p, "faraday_electrolyte_t")) * 1000.0;
    assert!((gap - (ECE * 13.0 * 30_000.0 * 0.95 - 373.0)).abs() < 1.5, "{gap}");
}

#[test]
fn the_default_period_is_the_month_so_far_and_a_bad_period_is_refused() {
    let tk = test_plant();
    let b = tk.json(&["balance", "--json"]);
    // production days start at 06:00 UTC: the month's first began 2026-03-01 06:00
    assert_eq!(b["from"], "2026-03-01T06:00:00Z");
    assert_eq!(b["to"], "2026-03-02T06:00:00Z");
    assert_closes(&b);
    let text = tk.ok(&["balance"]);
    assert!(text.contains("residual") && text.contains("C1") && text.contains("plant"), "{text}");
    let before = tk.dump();
    let e = tk.fails(1, &["balance", "--from", "2026-03-02T00:00:00Z", "--to", "2026-03-01T00:00:00Z"]);
    assert!(e.contains("--from"), "{e}");
    let e = tk.fails(1, &["balance", "--to", "2026-03-03T00:00:00Z"]);
    assert!(e.contains("--to") && e.contains("after now"), "{e}");
    let e = tk.fails(1, &["balance", "--from", "yesterday"]);
    assert!(e.contains("--from") && e.contains("not a time"), "{e}");
    assert_eq!(tk.dump(), before);
}

#[test]
fn the_demo_plants_month_balance_closes_and_stays_near_faraday() {
    let tk = Tk::new("2026-03-10T14:30:00Z");
    tk.ok(&["demo", "--no-tui", "--cells", "40", "--days", "30"]);
    let b = tk.json(&["balance", "--json"]);
    assert_closes(&b);
    let p = &b["plant"];
    assert_eq!(b["circuits"].as_array().map(Vec::len), Some(2));
    // the demo weighs with about 1 % scatter around its efficiencies: the month's residual
    // stays within a few per cent of the cathodes weighed from the Faraday figure
    let out = f(p, "cathode_out_t");
    assert!(out > 10.0, "{out}");
    assert!((f(p, "residual_t") - f(p, "faraday_electrolyte_t")).abs() < 0.03 * out, "{p}");
    assert!(f(p, "liberator_taken_t") > 0.0);
}

#[test]
fn starter_sheets_are_not_plated_copper_and_a_negative_sheet_is_refused() {
    let tk = test_plant();
    // S01's 779 kg went in without --force: 306 kg of it are starter sheets, so the crop
    // plated 473 kg on 14 h × 30 kA, 473 / (ECE · 420 000 A·h) = 95.0 % (the layout's η_c)
    let f = tk.json(&["forecast", "--cell", "S01", "--at", "2026-03-01T23:00:00Z", "--json"]);
    let eta = f["cells"][0]["last_crop_efficiency"].as_f64().expect("measured efficiency");
    assert!((eta - 473.0 / (ECE * 420_000.0)).abs() < 1e-9, "{eta}");
    assert!((eta - 0.95).abs() < 0.001);
    let bad = tk.file("bad.toml", &LAYOUT.replace("starter_sheet_kg = 6.0", "starter_sheet_kg = -6.0"));
    let before = tk.dump();
    let e = tk.fails(1, &["layout", "load", &bad]);
    assert!(e.contains("starter_sheet_kg"), "{e}");
    assert_eq!(tk.dump(), before);
}
