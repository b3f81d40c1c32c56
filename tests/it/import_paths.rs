//! The import appends in-order rows with their charge computed as they stream,
//! and puts back-fills and out-of-order rows in at the end: whatever the order
//! and the split into files, the stored readings must equal the charge
//! accumulated over all readings at once (the domain's `accumulate`).
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use chrono::{DateTime, Duration, Utc};
use proptest::prelude::*;
use tankbook::domain::charge::{RawReading, Span, accumulate};
use tankbook::domain::entry::Entry;
use tankbook::plant::{Opts, Plant, PlantError};

use crate::common;

fn t0() -> DateTime<Utc> {
    DateTime::parse_from_rfc3339("2026-03-01T00:00:00Z").unwrap().to_utc()
}

fn csv(rows: &[RawReading]) -> String {
    let mut s = String::from("time,circuit,amps\n");
    for r in rows {
        s.push_str(&format!("{},C1,{}\n", r.t.format("%Y-%m-%dT%H:%M:%SZ"), r.amps));
    }
    s
}

fn stored(path: &std::path::Path) -> Vec<(i64, f64, f64, bool, bool)> {
    let c = rusqlite::Connection::open(path).unwrap();
    let mut st = c.prepare("SELECT t, amps, cum_ah, valid, gap_before FROM reading ORDER BY t").unwrap();
    st.query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?))).unwrap().map(Result::unwrap).collect()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]
    #[test]
    fn any_order_and_split_stores_the_same_charge(
        amps in proptest::collection::vec(0.0f64..45_000.0, 2..60),
        steps in proptest::collection::vec(1i64..300, 60),
        outs in proptest::collection::vec((0i64..6000, 10i64..600), 0..3),
        cuts in proptest::collection::vec(0usize..60, 0..4),
        order in proptest::collection::vec(any::<u32>(), 60),
        repeat in 0usize..60,
    ) {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("p.db");
        let mut plant = Plant::open(&path).unwrap();
        let layout = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/fixtures/plant_check.toml")).unwrap();
        plant.load_layout(&layout, "plant_check.toml", t0()).unwrap();
        let opts = Opts { by: "PT".into(), force: true, now: t0() };
        let mut spans = Vec::new();
        for (from, len) in &outs {
            let (from, to) = (t0() + Duration::minutes(*from), t0() + Duration::minutes(from + len));
            plant.record(&Entry::Outage { circuit: "C1".into(), from, to }, &opts).unwrap();
            spans.push(Span { from, to });
        }
        let mut m = 0;
        let all: Vec<RawReading> =
            amps.iter().zip(&steps).map(|(a, s)| { m += s; RawReading { t: t0() + Duration::minutes(m), amps: a.round() } }).collect();
        // split into files at the cuts; each file's rows shuffled by `order` when its first key is odd
        let mut bounds: Vec<usize> = cuts.iter().map(|c| c % all.len()).chain([0, all.len()]).collect();
        bounds.sort();
        bounds.dedup();
        let mut files: Vec<Vec<RawReading>> = bounds.windows(2).map(|w| all[w[0]..w[1]].to_vec()).collect();
        for (i, f) in files.iter_mut().enumerate() {
            if order[i] % 2 == 1 {
                let mut keyed: Vec<(u32, RawReading)> = f.iter().zip(&order).map(|(r, k)| (*k, *r)).collect();
                keyed.sort_by_key(|(k, _)| *k);
                *f = keyed.into_iter().map(|(_, r)| r).collect();
            }
            // a repeated row is skipped wherever it falls
            if let Some(r) = f.get(repeat % f.len().max(1)).copied() {
                f.push(r);
            }
        }
        // the files come in back to front when the first key says so (every file a back-fill)
        if order[0] % 3 == 0 {
            files.reverse();
        }
        let mut added = 0;
        for f in &files {
            added += plant.import_current(csv(f).as_bytes(), "p.csv", t0()).unwrap().added;
        }
        prop_assert_eq!(added, all.len());
        drop(plant);
        let want: Vec<(i64, f64, f64, bool, bool)> =
            accumulate(None, &all, &tankbook::domain::charge::union(spans)).iter().map(|a| (a.t.timestamp(), a.amps, a.cum_ah, a.valid, a.gap_before)).collect();
        let got = stored(&path);
        prop_assert_eq!(got.len(), want.len());
        for (g, w) in got.iter().zip(&want) {
            prop_assert_eq!((g.0, g.1, g.3, g.4), (w.0, w.1, w.3, w.4));
            prop_assert!((g.2 - w.2).abs() <= 1e-6 * w.2.max(1.0), "{g:?} vs {w:?}");
        }
    }
}

#[test]
fn a_conflict_with_an_appended_row_names_the_file_and_changes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("p.db");
    let mut plant = Plant::open(&path).unwrap();
    let layout = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/fixtures/plant_check.toml")).unwrap();
    plant.load_layout(&layout, "plant_check.toml", t0()).unwrap();
    // in order, then back in time to a row appended earlier in the same file with another current
    let text = "time,circuit,amps\n2026-03-01T01:00:00Z,C1,30000\n2026-03-01T02:00:00Z,C1,30000\n2026-03-01T01:00:00Z,C1,31000\n";
    let err = plant.import_current(text.as_bytes(), "meter.csv", t0()).unwrap_err();
    let PlantError::Input { file, line, field, message } = err else { panic!("not an input error: {err:?}") };
    assert_eq!((file.as_str(), line, field.as_str()), ("meter.csv", 4, "amps"));
    assert!(message.contains("conflicts with 30000 A"), "{message}");
    drop(plant);
    assert!(stored(&path).is_empty());
}

/// A database from before migration 009 (with 002's `reading_cum` index on the
/// charge) upgrades: the index goes, and the forecast and the plan, whose due
/// times look up the first reading reaching a charge, are the same as before.
#[test]
fn a_database_from_before_009_upgrades_and_finds_the_same_due_times() {
    let tk = common::Tk::new("2026-11-20T05:30:00Z");
    tk.ok(&["demo", "--no-tui", "--cells", "20", "--days", "21"]);
    let forecast = tk.ok(&["forecast", "--json"]);
    let plan = tk.ok(&["plan", "--days", "28", "--json"]);
    common::downgrade_to_before(&tk.db, "009");
    let index = |c: &rusqlite::Connection| -> i64 {
        c.query_row("SELECT count(*) FROM sqlite_master WHERE name = 'reading_cum'", [], |r| r.get(0)).unwrap()
    };
    {
        // what 002 made and 008's databases still had
        let c = rusqlite::Connection::open(&tk.db).unwrap();
        c.execute_batch("CREATE INDEX reading_cum ON reading(circuit_id, cum_ah, t) WHERE valid = 1").unwrap();
        assert_eq!(index(&c), 1);
    }
    assert_eq!(tk.ok(&["forecast", "--json"]), forecast);
    let c = rusqlite::Connection::open(&tk.db).unwrap();
    assert_eq!(index(&c), 0, "009 drops it");
    let version: i64 = c.query_row("PRAGMA user_version", [], |r| r.get(0)).unwrap();
    assert_eq!(version, tankbook::store::MIGRATIONS.len() as i64);
    assert_eq!(tk.ok(&["plan", "--days", "28", "--json"]), plan);
    assert!(tk.ok(&["check"]).contains("ok"));
}
