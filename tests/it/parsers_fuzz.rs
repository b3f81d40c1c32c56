//! The parsers a foreman's input reaches, fed arbitrary and half-right input:
//! current CSV rows, layout TOML, typed times and cell ranges. Never a panic;
//! an error always says what is wrong (and where, for files).
//!
//! `cargo test` runs a few hundred cases per parser; `scripts/fuzz.sh` runs the
//! same properties with `FUZZ_CASES` cases each (over a million in all).
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use proptest::prelude::*;
use std::collections::HashMap;
use tankbook::domain::layout;
use tankbook::domain::plant_time::PlantZone;
use tankbook::plant::{PlantError, parse_current_csv};
use tankbook::tui::form::parse_cells;

fn config() -> ProptestConfig {
    let cases = std::env::var("FUZZ_CASES").ok().and_then(|s| s.parse().ok()).unwrap_or(256);
    ProptestConfig { cases, failure_persistence: None, ..ProptestConfig::default() }
}

fn circuits() -> HashMap<String, (i64, f64)> {
    HashMap::from([("C1".to_string(), (1, 45_000.0)), ("C2".to_string(), (2, 20_000.0))])
}

/// A field as a meter export might write it, or as it might go wrong.
fn time_field() -> impl Strategy<Value = String> {
    prop_oneof![
        (2000i32..2100, 1u32..13, 1u32..29, 0u32..24, 0u32..60)
            .prop_map(|(y, mo, d, h, mi)| format!("{y:04}-{mo:02}-{d:02}T{h:02}:{mi:02}:00Z")),
        (0i32..10000, 1u32..13, 1u32..29).prop_map(|(y, mo, d)| format!("{y:04}-{mo:02}-{d:02}T00:00:00-23:59")),
        "[0-9T:Z+ .-]{0,30}",
        any::<String>(),
    ]
}

fn amps_field() -> impl Strategy<Value = String> {
    prop_oneof![
        (0.0f64..50_000.0).prop_map(|a| format!("{a}")),
        any::<f64>().prop_map(|a| a.to_string()),
        Just("NaN".to_string()),
        Just("inf".to_string()),
        Just("-0".to_string()),
        "[0-9eE.+-]{0,12}",
        any::<String>(),
    ]
}

fn circuit_field() -> impl Strategy<Value = String> {
    prop_oneof![Just("C1".to_string()), Just("C2".to_string()), Just("c1".to_string()), "[A-Z0-9 ]{0,4}", any::<String>()]
}

fn row() -> impl Strategy<Value = String> {
    prop_oneof![
        8 => (time_field(), circuit_field(), amps_field()).prop_map(|(t, c, a)| format!("{t},{c},{a}")),
        1 => "[^\n]{0,40}",
        1 => (time_field(), circuit_field()).prop_map(|(t, c)| format!("{t},{c}")),
        1 => (time_field(), circuit_field(), amps_field()).prop_map(|(t, c, a)| format!("\"{t}\",{c},{a},extra")),
    ]
}

fn csv_text() -> impl Strategy<Value = Vec<u8>> {
    prop_oneof![
        4 => (prop_oneof![Just("time,circuit,amps".to_string()), Just("Time, Circuit, Amps".to_string()), "[a-z,]{0,20}"], proptest::collection::vec(row(), 0..12))
            .prop_map(|(h, rows)| format!("{h}\n{}", rows.join("\n")).into_bytes()),
        1 => proptest::collection::vec(any::<u8>(), 0..200),
    ]
}

const LAYOUT: &str = include_str!("../../fixtures/plant_check.toml");

/// The plant-check layout with a few lines replaced, dropped or scrambled.
fn layout_text() -> impl Strategy<Value = String> {
    let lines: Vec<String> = LAYOUT.lines().map(str::to_string).collect();
    let n = lines.len();
    prop_oneof![
        3 => proptest::collection::vec((0..n, prop_oneof![
                Just(String::new()),
                "[a-z_]{1,20} = [0-9.e-]{0,10}",
                "\\[\\[?[a-z.]{0,16}\\]?\\]?",
                "cells = (\\[\"[A-Z0-9]{0,3}\"(, \"[A-Z0-9]{0,3}\"){0,3}\\]|[0-9]{1,6})",
                "(scrap|cathode|anode)_[a-z]{0,8} = -?[0-9.]{0,8}",
                "keep_backups = [0-9-]{0,6}",
                "time_zone = \"[A-Za-z/+:0-9]{0,16}\"",
                any::<String>(),
            ]), 1..5)
            .prop_map(move |edits| {
                let mut l = lines.clone();
                for (i, s) in edits {
                    l[i] = s;
                }
                l.join("\n")
            }),
        1 => any::<String>(),
        1 => "[\\[\\]a-z_=\" 0-9.\n]{0,300}",
    ]
}

fn zone() -> impl Strategy<Value = PlantZone> {
    prop_oneof![Just("UTC"), Just("+02:00"), Just("-09:30"), Just("Europe/Madrid"), Just("America/Santiago")]
        .prop_map(|z| PlantZone::parse(z).unwrap())
}

fn typed_time() -> impl Strategy<Value = String> {
    prop_oneof![
        (1900i32..2200, 1u32..13, 1u32..32, 0u32..25, 0u32..61).prop_map(|(y, mo, d, h, mi)| format!("{y}-{mo:02}-{d:02} {h:02}:{mi:02}")),
        (-300000i32..300000, 1u32..13, 1u32..29).prop_map(|(y, mo, d)| format!("{y}-{mo:02}-{d:02}T12:00")),
        "[+-]?[0-9]{1,6}-[0-9]{2}-[0-9]{2}[T ][0-9]{2}:[0-9]{2}(:[0-9]{2})?([+-][0-9]{2}:[0-9]{2}|Z)?",
        any::<String>(),
    ]
}

fn plant_cells() -> Vec<String> {
    let mut v: Vec<String> = (1..=12).map(|i| format!("A{i:02}")).collect();
    v.extend((1..=12).map(|i| format!("B{i:02}")));
    v.push("L1".into());
    v
}

fn cells_text() -> impl Strategy<Value = String> {
    prop_oneof![
        proptest::collection::vec(prop_oneof!["[ABLabl][0-9]{1,2}", "[ABL][0-9]{2}-[ABL][0-9]{2}", "[ -,]{0,3}", any::<String>()], 0..5)
            .prop_map(|p| p.join(",")),
        any::<String>(),
    ]
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn current_csv_rows_never_panic_and_errors_say_where(text in csv_text()) {
        match parse_current_csv(&text[..], "meter.csv", &circuits()) {
            Ok(rows) => {
                for (cid, readings) in &rows.rows {
                    let max = if *cid == 1 { 45_000.0 } else { 20_000.0 };
                    for (t, (amps, line)) in readings {
                        prop_assert!(*amps >= 0.0 && *amps <= max && amps.is_finite());
                        prop_assert!(*line >= 2);
                        prop_assert!(t.timestamp() >= -62_167_219_200 && t.timestamp() <= 253_402_300_799);
                    }
                }
            }
            Err(PlantError::Input { file, line, field, message }) => {
                prop_assert_eq!(file, "meter.csv");
                prop_assert!(["header", "row", "time", "circuit", "amps"].contains(&field.as_str()), "{}", field);
                prop_assert!(line >= 1 || field == "row", "line {} field {}", line, field);
                prop_assert!(!message.is_empty());
            }
            Err(e) => prop_assert!(false, "not an input error: {e:?}"),
        }
    }

    #[test]
    fn layout_files_never_panic_and_errors_name_a_line_in_the_file(text in layout_text()) {
        if let Err(e) = layout::parse(&text) {
            prop_assert!(!e.message.is_empty() && !e.field.is_empty(), "{e:?}");
            if let Some(l) = e.line {
                prop_assert!(l >= 1 && l <= text.lines().count().max(1) + 1, "line {l} of {}", text.lines().count());
            }
        }
    }

    #[test]
    fn typed_times_never_panic(z in zone(), s in typed_time()) {
        match z.parse_time(&s) {
            Ok(t) => {
                // what the plant shows parses back to the same minute, unless the wall clock repeats
                // it; before 1970 time zones may have had offsets in seconds (local mean time)
                let shown = z.show(t);
                if let (true, Ok(back)) = (t.timestamp() >= 0, z.parse_time(&shown)) {
                    prop_assert_eq!(back.timestamp().div_euclid(60), t.timestamp().div_euclid(60), "{} shown as {}", s, shown);
                }
            }
            Err(e) => prop_assert!(!e.to_string().is_empty()),
        }
    }

    #[test]
    fn cell_ranges_never_panic_and_name_only_plant_cells(s in cells_text()) {
        let all = plant_cells();
        match parse_cells(&s, &all) {
            Ok(cells) => {
                prop_assert!(!cells.is_empty());
                prop_assert!(cells.iter().all(|c| all.contains(c)));
                let mut seen = std::collections::HashSet::new();
                prop_assert!(cells.iter().all(|c| seen.insert(c)), "a cell twice: {cells:?}");
            }
            Err(m) => prop_assert!(!m.is_empty()),
        }
    }
}

proptest! {
    // 144 possible inputs: a fixed number of cases, whatever FUZZ_CASES says
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn cell_ranges_between_any_ends_are_every_cell_between_them(i in 1usize..=12, j in 1usize..=12) {
        let all = plant_cells();
        let r = parse_cells(&format!("A{i:02}-a{j:02}"), &all);
        if i <= j {
            let cells = r.unwrap();
            prop_assert_eq!(cells.len(), j - i + 1);
            prop_assert_eq!(cells[0].clone(), format!("A{i:02}"));
        } else {
            prop_assert!(r.unwrap_err().contains("backwards"));
        }
    }
}
