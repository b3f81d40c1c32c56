//! The plan's curve (`SliceCurve::whole`: the readings over the plan's span in memory) must give exactly
//! the store's curve's answers, at any instant and total, inside or before its span.
#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)] // tests stop loudly (DEVELOPERS.md)

use chrono::{DateTime, Duration, Utc};
use proptest::prelude::*;
use tankbook::domain::charge::{Curve, RawReading};
use tankbook::domain::entry::Entry;
use tankbook::plant::{Opts, Plant};
use tankbook::store::{SliceCurve, Store, StoreCurve};

fn t0() -> DateTime<Utc> {
    DateTime::parse_from_rfc3339("2026-03-01T00:00:00Z").unwrap().to_utc()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]
    #[test]
    fn plan_curve_answers_as_the_store_curve(
        amps in proptest::collection::vec(0.0f64..45_000.0, 2..40),
        steps in proptest::collection::vec(1i64..240, 40),
        outs in proptest::collection::vec((0i64..4000, 10i64..600), 0..3),
        probes in proptest::collection::vec(-100i64..7000, 1..16),
        totals in proptest::collection::vec(0.0f64..8.0e6, 1..16),
        from_min in -100i64..6000,
        as_of_min in 0i64..6000,
    ) {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("p.db");
        let mut plant = Plant::open(&path).unwrap();
        let layout = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/fixtures/plant_check.toml")).unwrap();
        plant.load_layout(&layout, "plant_check.toml", t0()).unwrap();
        let mut m = 0;
        let readings: Vec<RawReading> = amps.iter().zip(&steps).map(|(a, s)| { m += s; RawReading { t: t0() + Duration::minutes(m), amps: a.round() } }).collect();
        let mut csv = String::from("time,circuit,amps\n");
        for r in &readings {
            csv.push_str(&format!("{},C1,{}\n", r.t.to_rfc3339(), r.amps));
        }
        plant.import_current(csv.as_bytes(), "p.csv", t0()).unwrap();
        let opts = Opts { by: "PT".into(), force: true, now: t0() };
        for (from, len) in &outs {
            let (from, to) = (t0() + Duration::minutes(*from), t0() + Duration::minutes(from + len));
            plant.record(&Entry::Outage { circuit: "C1".into(), from, to }, &opts).unwrap();
        }
        drop(plant);
        let as_of = t0() + Duration::minutes(as_of_min);
        let store = Store::open(&path).unwrap();
        let db = store.db();
        let cid = db.circuit("C1").unwrap().unwrap().id;
        let sc = StoreCurve::new(db, cid, as_of).unwrap();
        let pc = SliceCurve::whole(db, cid, as_of, t0() + Duration::minutes(from_min)).unwrap();
        for p in &probes {
            let t = t0() + Duration::minutes(*p);
            let (a, b) = (sc.cum_at(t).unwrap(), pc.cum_at(t).unwrap());
            prop_assert_eq!(a, b, "cum_at {}", p);
            if a.total() > 0.0 {
                prop_assert_eq!(sc.time_at(a.total()).unwrap(), pc.time_at(a.total()).unwrap(), "time_at cum_at({})", p);
            }
        }
        for total in &totals {
            prop_assert_eq!(sc.time_at(*total).unwrap(), pc.time_at(*total).unwrap(), "time_at {}", total);
        }
    }
}
