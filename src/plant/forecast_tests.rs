//! The fast forecast (batched reads, curves in memory) against the forecast
//! computed the old way, after random entries and undos.

use proptest::prelude::*;

use super::forecast_by_cell;
use crate::domain::entry::Entry;
use crate::plant::{Opts, Plant, learn, rebuild};

const LAYOUT: &str = include_str!("../../fixtures/plant_check.toml");
const CELLS: [&str; 5] = ["A01", "A02", "A03", "A04", "L1"];
/// Hours of readings after the start (three weeks).
const HOURS: u32 = 500;

fn t0() -> crate::domain::charge::Time {
    chrono::DateTime::parse_from_rfc3339("2026-03-01T00:00:00Z").unwrap().to_utc()
}

fn at(h: u32) -> crate::domain::charge::Time {
    t0() + chrono::Duration::hours(i64::from(h))
}

fn opts() -> Opts {
    Opts { by: "JD".into(), force: true, now: at(HOURS + 100) }
}

/// One entry (or undo) of the random sequence.
#[derive(Debug, Clone)]
enum Op {
    Anodes(usize, u32),
    /// Cell, hour, kg per cathode.
    Harvest(usize, u32, f64),
    /// Cell, hour, scrap kg per anode.
    Scrap(usize, u32, f64),
    Shorts(usize, u32, u32),
    /// An open cut-out from the hour.
    CutStart(usize, u32),
    /// The cell's open cut-out closed at the hour (a closed one of 3 h ending then when none is open).
    CutEnd(usize, u32),
    Voltage(usize, u32, f64),
    /// An outage of C1: hour, length in hours.
    Outage(u32, u32),
    /// Undo the newest entry (`None`) or the n-th recorded one.
    Undo(Option<usize>),
}

fn op() -> impl Strategy<Value = Op> {
    let cell = 0..CELLS.len();
    let hour = 0..HOURS;
    prop_oneof![
        3 => (cell.clone(), hour.clone()).prop_map(|(c, h)| Op::Anodes(c, h)),
        3 => (cell.clone(), hour.clone(), 60.0..140.0f64).prop_map(|(c, h, kg)| Op::Harvest(c, h, kg)),
        2 => (cell.clone(), hour.clone(), 40.0..80.0f64).prop_map(|(c, h, kg)| Op::Scrap(c, h, kg)),
        1 => (cell.clone(), hour.clone(), 1..4u32).prop_map(|(c, h, n)| Op::Shorts(c, h, n)),
        1 => (cell.clone(), hour.clone()).prop_map(|(c, h)| Op::CutStart(c, h)),
        1 => (cell.clone(), hour.clone()).prop_map(|(c, h)| Op::CutEnd(c, h)),
        2 => (cell.clone(), hour.clone(), 0.05..0.45f64).prop_map(|(c, h, v)| Op::Voltage(c, h, v)),
        1 => (hour.clone(), 1..8u32).prop_map(|(h, n)| Op::Outage(h, n)),
        2 => proptest::option::of(0..30usize).prop_map(Op::Undo),
    ]
}

/// Hourly readings of C1 that wander between 20 and 40 kA, with two holes (a
/// gap the warnings name, unless an outage covers it).
fn readings() -> String {
    let mut s = String::from("time,circuit,amps\n");
    for h in (0..=HOURS).filter(|h| !(150..154).contains(h) && !(300..303).contains(h)) {
        let amps = 30_000.0 + 10_000.0 * (f64::from(h) * 0.37).sin();
        s.push_str(&format!("{},C1,{amps:.1}\n", at(h).to_rfc3339()));
    }
    s
}

/// Windows of the plant-wide reads, in hours: loads, crops, voltages.
fn hours(load: i64, crop: i64, voltage: i64) -> crate::store::Windows {
    let h = chrono::Duration::hours;
    crate::store::Windows { load: h(load), crop: h(crop), voltage: h(voltage) }
}

/// Plays the sequence; entries the plant refuses are skipped, as a foreman's would be.
fn play(p: &mut Plant, ops: &[Op]) {
    let mut ids = Vec::new();
    let mut open: [Option<u32>; CELLS.len()] = [None; CELLS.len()];
    for o in ops {
        let cell = |c: usize| CELLS[c].to_string();
        let entry = match *o {
            Op::Anodes(c, h) => Entry::Anodes { cell: cell(c), at: at(h), count: 50, mean_kg: 380.0 },
            Op::Harvest(c, h, kg) => Entry::Harvest { cell: cell(c), at: at(h), total_kg: kg * 51.0 },
            Op::Scrap(c, h, kg) => Entry::Scrap { cell: cell(c), at: at(h), total_kg: kg * 50.0 },
            Op::Shorts(c, h, n) => Entry::Shorts { cell: cell(c), at: at(h), count: n },
            Op::CutStart(c, h) => {
                open[c] = Some(h);
                Entry::Cutout { cell: cell(c), from: at(h), to: None }
            }
            Op::CutEnd(c, h) => match open[c].take() {
                Some(from) => Entry::Cutout { cell: cell(c), from: at(from), to: Some(at(h.max(from + 1))) },
                None => Entry::Cutout { cell: cell(c), from: at(h.saturating_sub(3)), to: Some(at(h.max(1))) },
            },
            Op::Voltage(c, h, v) => Entry::Voltage { cell: cell(c), at: at(h), volts: v },
            Op::Outage(h, n) => Entry::Outage { circuit: "C1".into(), from: at(h), to: at(h + n) },
            Op::Undo(which) => {
                let target = which.and_then(|i| ids.get(i % ids.len().max(1)).copied());
                let _ = p.undo(target, &opts());
                continue;
            }
        };
        if let Ok(r) = p.record(&entry, &opts()) {
            ids.push(r.event);
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 64, ..ProptestConfig::default() })]

    /// After any sequence of entries and undos, the forecast from the batched
    /// reads and the in-memory curves equals, field by field, the one from each
    /// cell's own queries and the database curve, both on the derived records as
    /// kept up to date entry by entry and after rebuilding every cell's records
    /// and learning afresh from the whole log.
    #[test]
    fn the_fast_forecast_is_the_full_recompute(ops in proptest::collection::vec(op(), 1..60), when in 0..HOURS + 60) {
        let dir = tempfile::tempdir().unwrap();
        let mut p = Plant::open(&dir.path().join("p.db")).unwrap();
        p.load_layout(LAYOUT, "plant_check.toml", t0()).unwrap();
        p.import_current(readings().as_bytes(), "c1.csv", at(HOURS)).unwrap();
        play(&mut p, &ops);
        for as_of in [at(when), at(HOURS + 24)] {
            // the warnings' readings from the flagged ones are those the whole window gives
            let db = p.store.db();
            let c1 = db.circuit("C1").unwrap().unwrap().id;
            for since in [at(0), as_of - chrono::Duration::days(30), at(200)] {
                prop_assert_eq!(db.flagged_gaps(c1, since, as_of).unwrap(), db.reading_gaps(c1, since, as_of).unwrap());
                prop_assert_eq!(db.flagged_live_in_outages(c1, since, as_of).unwrap(), db.live_readings_in_outages(c1, since, as_of).unwrap());
            }
            // the plant-wide ranges give what the cells' own reads give, however
            // short the windows (every record read per cell) or long
            let params = db.params_at_all(as_of).unwrap();
            let inert = |id: &str| params.get(id).is_some_and(|p| p.anode_kind == crate::domain::layout::AnodeKind::Inert);
            let usual = db.cell_states(as_of, None, inert).unwrap();
            for w in [hours(1, 1, 1), hours(60, 30, 10), hours(2000, 2000, 2000)] {
                prop_assert_eq!(&db.cell_states_within(as_of, None, inert, w).unwrap(), &usual, "as of {}, {:?}", as_of, w);
            }
            let fast = p.forecast(as_of, None).unwrap();
            let by_cell = forecast_by_cell(p.store.db(), as_of).unwrap();
            prop_assert_eq!(&fast, &by_cell, "as of {}", as_of);
            // both ways of holding the curve: the whole span, the readings around each instant
            let db = p.store.db();
            let cells = super::snapshots(db, as_of, None).unwrap();
            for whole in [true, false] {
                let curves = super::slice_curves_read(db, &cells, as_of, Some(whole)).unwrap();
                let f = super::forecast_of(db, &cells, &curves, as_of).unwrap();
                prop_assert_eq!(&f, &by_cell, "as of {}, whole span {}", as_of, whole);
            }
            let full = p.store.preview(|db| -> crate::plant::Result<_> {
                for c in CELLS {
                    rebuild(db, c, false)?;
                }
                learn::relearn_all(db)?;
                forecast_by_cell(db, as_of)
            }).unwrap();
            prop_assert_eq!(&fast, &full, "as of {} after a rebuild", as_of);
        }
    }
}

/// A cell's snapshot by the batched reads is the one by its own queries, but
/// for the cut-outs that end before its running load's set and crop's start
/// (they cover none of the charges counted).
#[test]
fn the_batched_snapshot_is_the_per_cell_one() {
    let dir = tempfile::tempdir().unwrap();
    let mut p = Plant::open(&dir.path().join("p.db")).unwrap();
    p.load_layout(LAYOUT, "plant_check.toml", t0()).unwrap();
    p.import_current(readings().as_bytes(), "c1.csv", at(HOURS)).unwrap();
    play(
        &mut p,
        &[
            Op::CutStart(0, 2),
            Op::CutEnd(0, 5),
            Op::Anodes(0, 10),
            Op::Voltage(0, 11, 0.3),
            Op::Harvest(0, 200, 110.0),
            Op::CutStart(0, 200),
            Op::CutEnd(0, 203),
            Op::Shorts(0, 210, 2),
            Op::CutStart(0, 300),
        ],
    );
    let as_of = at(HOURS);
    let fast = super::snapshots(p.store.db(), as_of, None).unwrap();
    let slow = super::snapshots_by_cell(p.store.db(), as_of, None, as_of).unwrap();
    assert_eq!(fast.len(), slow.len());
    for ((_, f), (_, s)) in fast.iter().zip(&slow) {
        let since = s.charges_from().unwrap_or(as_of);
        let kept: Vec<_> = s.cutouts.iter().copied().filter(|c| c.to.is_none_or(|to| to >= since)).collect();
        assert_eq!(f.cutouts, kept, "{}", f.cell);
        assert_eq!(crate::domain::forecast::CellInput { cutouts: kept.clone(), ..s.clone() }, *f);
    }
    let a01 = &fast[0].1;
    assert_eq!(a01.cutouts.len(), 2, "the cut-out before the anodes were set is left out: {:?}", a01.cutouts);
    assert_eq!(a01.shorts.map(|s| s.0), Some(2));
    assert_eq!(a01.crop_started, Some(at(200)));
}
