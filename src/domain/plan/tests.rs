//! The plan's tests: windows, crops, levelling, moves and warnings on the
//! DOMAIN.md plant check, each figure worked out by hand beside it.

use super::changes::{overdrawn, remaining_supply};
use super::report::{fill_changes, fill_harvests, harvest_room};
use super::*;
use crate::domain::charge::{MemoryCurve, RawReading, Span};
use crate::domain::layout::{AnodeKind, CellParams, OutageWork};
use crate::domain::levelling::Weights;
use crate::domain::plant_time::{PlantZone, ProductionDays, parse_day_start};
use crate::domain::smoothing;
use chrono::{Duration, TimeZone, Utc};
use std::collections::BTreeMap;

// The DOMAIN.md plant check (derived from CODATA 2018 F and IUPAC M(Cu)):
// 50 anodes × 380 kg, 51 cathodes, 30 kA flat, w_Cu 0.995, η_a 1.0, η_c 0.96, lug 20 kg.
// By hand: ECE = 3600·63.546/(2·96 485.332 12) = 1.185 486 g/(A·h); each anode carries
// 30 000/50 = 600 A and loses 1.185 486e-3 · 600 / 0.995 = 0.714 871 kg/h. Loss to
// fraction f is (1 − f)·380 kg:
//   f = 0.25: 285 kg / 0.714 871 = 398.67 h
//   f = 0.15: 323 kg / 0.714 871 = 451.83 h (DOMAIN.md: 451.8 h)
//   f = 0.10: 342 kg / 0.714 871 = 478.41 h
// Each cathode gains 1.185 486e-3 · 30 000 · 0.96 / 51 = 0.669 456 kg/h: 120 kg after
// 179.25 h (DOMAIN.md).
const UPPER_H: f64 = 398.67;
const TARGET_H: f64 = 451.83;
const LOWER_H: f64 = 478.41;
const CATHODE_KG_PER_H: f64 = 0.669_456;

fn t0() -> Time {
    Utc.with_ymd_and_hms(2026, 3, 1, 0, 0, 0).unwrap()
}
fn at(h: f64) -> Time {
    t0() + Duration::milliseconds((h * 3_600_000.0) as i64)
}
fn hours_after_t0(t: Time) -> f64 {
    (t - t0()).num_milliseconds() as f64 / 3_600_000.0
}
fn date(y: i32, m: u32, d: u32) -> NaiveDate {
    NaiveDate::from_ymd_opt(y, m, d).unwrap()
}
/// 30 kA flat from t0 to `now_h`, read hourly; the estimate after it is the same 30 kA.
fn flat(now_h: u32) -> HashMap<String, MemoryCurve> {
    let rs: Vec<RawReading> = (0..=now_h).map(|h| RawReading { t: at(f64::from(h)), amps: 30_000.0 }).collect();
    HashMap::from([("C1".to_string(), MemoryCurve::build(&rs, &[], &[], at(f64::from(now_h))))])
}
/// Production days in UTC starting at `start` (HH:MM).
fn calendar(start: &str, now: Time, len: usize) -> Calendar {
    let days = ProductionDays { zone: PlantZone::parse("UTC").unwrap(), day_starts_at: parse_day_start(start).unwrap() };
    Calendar::new(days, days.day_of(now), len)
}
fn rules(crew: u32) -> Rules {
    Rules {
        crew_cells_per_day: crew,
        shifts_per_day: 1,
        harvest_cathodes_per_day: 2000,
        // the layout defaults: a day late costs three days early (common practice, no source)
        weights: Weights { early: 1.0, late: 3.0 },
        anode_stock: None,
        anodes_per_day: None,
        no_anode_work: Vec::new(),
        outages: Vec::new(),
        outage_work: BTreeMap::new(),
        whole_sections: false,
        crane: None,
        smooth_harvests: true,
        light_crop_fraction: 0.6,
    }
}
/// A plant-check cell (CellParams::default() is the plant check) with a load set at `set_h`.
fn cell(id: &str, set_h: f64) -> CellInput {
    CellInput {
        cell: id.to_string(),
        circuit: "C1".into(),
        section: "A".into(),
        params: CellParams::default(),
        load: Some((at(set_h), 50, 380.0)),
        crop_started: Some(at(set_h)),
        cutouts: Vec::new(),
        last_crop_efficiency: None,
        last_voltage: None,
        shorts: None,
        learnt: crate::domain::learn::CellLearnt::layout(&CellParams::default()),
        left_out: Vec::new(),
    }
}
fn input(now_h: u32, start: &str, len: usize, rules: Rules, cells: Vec<CellInput>) -> PlanInput {
    let now = at(f64::from(now_h));
    PlanInput { now, calendar: calendar(start, now, len), rules, cells, moves: Vec::new(), kept: Vec::new() }
}
fn changes(p: &Plan) -> Vec<(usize, &AnodeChange)> {
    p.days.iter().enumerate().flat_map(|(d, x)| x.anode_changes.iter().map(move |c| (d, c))).collect()
}
fn harvests(p: &Plan) -> Vec<(usize, &Harvest)> {
    p.days.iter().enumerate().flat_map(|(d, x)| x.harvests.iter().map(move |h| (d, h))).collect()
}

#[test]
fn learnt_efficiencies_move_the_window_and_the_crops() {
    // A cell whose anodes dissolve at a learnt factor of 0.90 reaches 15 % after
    // 451.83 h / 0.90 = 502.0 h (the plant check, derived); its crops plate at a learnt 0.88.
    let mut c = cell("A01", 0.0);
    c.learnt.anode.value = 0.90;
    c.learnt.cathode.value = 0.88;
    let inp = input(240, "20:00", 30, rules(8), vec![c]);
    let curves = flat(240);
    let o = outlook(&inp.cells[0], &curves["C1"], &inp.calendar, inp.now).unwrap();
    let ch = o.cycles[0].change.as_ref().unwrap();
    assert!((hours_after_t0(ch.target_at) - TARGET_H / 0.90).abs() < 0.01, "{:?}", ch.target_at);
    // the first crop reaches 120 kg a cathode after 179.25 h × 0.96 / 0.88 = 195.5 h
    let h = hours_after_t0(o.cycles[0].harvests[0].due_at);
    assert!((h - 179.25 * 0.96 / 0.88).abs() < 0.05, "{h}");
}

#[test]
fn plant_check_window_and_ideal_day_with_a_day_start_that_matters() {
    // Days start at 20:00 UTC, so a crossing in the evening before 20:00 belongs to the
    // previous production day. Now is 2026-03-11 00:00Z, in the production day 2026-03-10.
    let inp = input(240, "20:00", 30, rules(8), vec![cell("A01", 0.0)]);
    assert_eq!(inp.calendar.from, date(2026, 3, 10));
    let curves = flat(240);
    let o = outlook(&inp.cells[0], &curves["C1"], &inp.calendar, inp.now).unwrap();
    let ch = o.cycles[0].change.as_ref().unwrap();
    assert!((hours_after_t0(ch.upper_at.unwrap()) - UPPER_H).abs() < 0.01, "{:?}", ch.upper_at);
    assert!((hours_after_t0(ch.target_at) - TARGET_H).abs() < 0.01, "{:?}", ch.target_at);
    assert!((hours_after_t0(ch.lower_at.unwrap()) - LOWER_H).abs() < 0.01, "{:?}", ch.lower_at);
    // 398.67 h = 03-17 14:40Z → day 03-16 (index 6; the calendar date would give 7);
    // 451.83 h = 03-19 19:50Z → day 03-18 (index 8, not 9); 478.41 h = 03-20 22:25Z → day 03-20 (index 10).
    assert_eq!((ch.earliest, ch.ideal, ch.latest), (6, 8, 10));
    assert!(!ch.overdue);

    let p = plan(&inp, &curves).unwrap();
    let cs = changes(&p);
    let first = cs.iter().find(|(_, c)| c.cycle == 0).unwrap();
    assert_eq!(first.0, 8);
    assert_eq!(p.days[8].date, date(2026, 3, 18));
    assert_eq!(first.1.window, Window { earliest: date(2026, 3, 16), ideal: date(2026, 3, 18), latest: Some(date(2026, 3, 20)) });
    // on its ideal day the change is predicted at its ideal time: 15 % left
    assert!((first.1.scrap_fraction - 0.15).abs() < 1e-6, "{}", first.1.scrap_fraction);
    // 50 anodes × 380 kg = 19.0 t of new anodes; scrap 50 × 0.15 × 380 kg = 2.85 t (by hand)
    assert_eq!(p.days[8].anodes_needed, 50);
    assert!((p.days[8].anode_tonnes - 19.0).abs() < 1e-9);
    assert!((p.days[8].scrap_tonnes - 2.85).abs() < 1e-5);
}

#[test]
fn the_next_load_assumes_the_first_change_on_its_ideal_day() {
    // Same cell over 30 days: the second load is set at 451.83 h with 50 × 380 kg, so its
    // crossings are at 451.83 + 398.67 = 850.50 h (04-05 10:30Z → day 04-04, index 25),
    // 903.66 h (04-07 15:40Z → day 04-06, index 27) and 930.24 h (04-08 18:14Z → day 04-07, index 28).
    let inp = input(240, "20:00", 30, rules(8), vec![cell("A01", 0.0)]);
    let curves = flat(240);
    let o = outlook(&inp.cells[0], &curves["C1"], &inp.calendar, inp.now).unwrap();
    // a third load follows the second's ideal (04-07, inside the 30 days), its window after the plan
    assert_eq!(o.cycles.len(), 3);
    assert!(o.cycles[2].change.as_ref().is_some_and(|c| c.earliest >= 30));
    let second = &o.cycles[1];
    assert!((hours_after_t0(second.set_at) - TARGET_H).abs() < 0.01);
    let load = second.load.unwrap();
    assert_eq!((load.count, load.initial_kg), (50, 380.0));
    let ch = second.change.as_ref().unwrap();
    assert!((hours_after_t0(ch.target_at) - 2.0 * TARGET_H).abs() < 0.02);
    assert_eq!((ch.earliest, ch.ideal, ch.latest), (25, 27, 28));
    let p = plan(&inp, &curves).unwrap();
    let cs = changes(&p);
    assert_eq!(cs.iter().map(|(d, c)| (*d, c.cycle)).collect::<Vec<_>>(), vec![(8, 0), (27, 1)]);
}

#[test]
fn the_next_load_starts_on_the_day_its_change_is_levelled_or_moved_to() {
    // Two plant-check cells set together, one crew place a day: both are ideal on 03-18
    // (index 8, days from 20:00), one goes a day early (cheaper than late), to the end of
    // 03-17's production day (03-18T19:59:59Z, 427.9997 h). Its next load is set then, so its
    // next change is ideal 451.83 h later (879.83 h = 04-06 15:50Z → day 04-05, index 26), not
    // at 2 × 451.83 = 903.66 h as the outlook on its own assumes (index 27).
    let inp = input(240, "20:00", 30, rules(1), vec![cell("A01", 0.0), cell("A02", 0.0)]);
    let curves = flat(240);
    let p = plan(&inp, &curves).unwrap();
    let cs = changes(&p);
    let of = |cell: &str, k: usize| cs.iter().find(|(_, c)| c.cell == cell && c.cycle == k).map(|(d, c)| (*d, *c)).unwrap();
    let early = if of("A01", 0).0 == 7 { "A01" } else { "A02" };
    assert_eq!(of(early, 0).0, 7);
    assert!((hours_after_t0(of(early, 0).1.at) - 427.9997).abs() < 0.001);
    for id in ["A01", "A02"] {
        let (first, next) = (of(id, 0).1, of(id, 1).1);
        assert!((hours_after_t0(next.target_at) - hours_after_t0(first.at) - TARGET_H).abs() < 0.01, "{id}: {:?}", next.target_at);
    }
    assert_eq!(of(early, 1).1.window.ideal, date(2026, 4, 5));
    assert!((hours_after_t0(of(early, 1).1.target_at) - 879.83).abs() < 0.01);
    // a hand move of a cell's first change to 03-16 (index 6): its next load is set at the end
    // of that day (03-17T19:59:59Z, 403.9997 h), its next ideal 451.83 h later (855.83 h)
    let mut m = input(240, "20:00", 30, rules(8), vec![cell("A01", 0.0)]);
    m.moves = vec![("A01".into(), date(2026, 3, 16))];
    let p = plan(&m, &curves).unwrap();
    let cs = changes(&p);
    let first = cs.iter().find(|(_, c)| c.cycle == 0).unwrap().1;
    let next = cs.iter().find(|(_, c)| c.cycle == 1).unwrap().1;
    assert!(first.moved && (hours_after_t0(first.at) - 403.9997).abs() < 0.001);
    assert!((hours_after_t0(next.target_at) - 855.83).abs() < 0.01, "{:?}", next.target_at);
    // the first crop of the next load starts at the moved change too: 120 kg after 179.25 h (03-25 07:15Z → day 03-24)
    let h = harvests(&p).into_iter().find(|(_, h)| (hours_after_t0(h.at) - (403.9997 + 179.25)).abs() < 0.01);
    assert!(h.is_some_and(|(_, h)| (h.mass_kg - 120.0).abs() < 1e-3), "{:?}", harvests(&p));
}

#[test]
fn the_plans_crops_are_the_forecasts_harvest_times() {
    // One rule for both (crop_target): the forecast's harvest_due of the running crop is
    // the plan's first crop time, with and without crops_per_anode_cycle. A crop begun
    // 100 h after the set: with 3 crops the next part of the life is the second (301.22 h,
    // at least half a crop of 150.61 h after 100 h); at target mass, 100 + 179.25 = 279.25 h.
    use crate::domain::forecast::forecast_cell;
    let curves = flat(120);
    for (k, want_h) in [(Some(3), 2.0 * TARGET_H / 3.0), (None, 100.0 + 179.25)] {
        let mut c = cell("A01", 0.0);
        c.crop_started = Some(at(100.0));
        c.params.crops_per_anode_cycle = k;
        let inp = input(120, "20:00", 20, rules(8), vec![c]);
        let f = forecast_cell(&inp.cells[0], &curves["C1"], inp.now).unwrap();
        let k_due = f.cathode.as_ref().unwrap().harvest_due.unwrap();
        assert!((hours_after_t0(k_due) - want_h).abs() < 0.01, "{k:?}: {k_due}");
        let w = f.cathode.as_ref().unwrap().harvest_window.unwrap();
        assert!(w.early <= k_due && k_due <= w.late, "{k:?}: {w:?}");
        let p = plan(&inp, &curves).unwrap();
        let (_, h) = harvests(&p).into_iter().min_by_key(|(_, h)| h.at).unwrap();
        assert_eq!(h.at, k_due, "{k:?}");
        assert!(!h.overdue);
    }
}

#[test]
fn crops_split_the_anode_life_in_three_and_the_last_goes_with_the_change() {
    // crops_per_anode_cycle = 3: boundaries at 451.83/3 = 150.61 h (03-07 06:37Z → day 03-06, index 5)
    // and 301.22 h (03-13 13:13Z → day 03-12, index 11); the third crop goes with the change
    // (03-19 19:50Z → day 03-18, index 17). Each crop: 0.669 456 kg/h × 150.61 h = 100.83 kg.
    let mut c = cell("A01", 0.0);
    c.params.crops_per_anode_cycle = Some(3);
    let inp = input(24, "20:00", 20, rules(8), vec![c]);
    let p = plan(&inp, &flat(24)).unwrap();
    let hs = harvests(&p);
    assert_eq!(hs.iter().map(|(d, h)| (*d, h.with_anode_change)).collect::<Vec<_>>(), vec![(5, false), (11, false), (17, true)]);
    for (_, h) in &hs {
        assert!((h.mass_kg - CATHODE_KG_PER_H * TARGET_H / 3.0).abs() < 0.01, "{}", h.mass_kg);
        assert!(!h.overdue);
    }
    assert_eq!(changes(&p).iter().map(|(d, _)| *d).collect::<Vec<_>>(), vec![17]);
    // copper: 51 cathodes × 100.83 kg = 5.142 t on the change day (by hand)
    assert!((p.days[17].copper_tonnes - 51.0 * CATHODE_KG_PER_H * TARGET_H / 3.0 / 1000.0).abs() < 1e-5);
}

#[test]
fn crops_at_target_mass_between_changes() {
    // No crops_per_anode_cycle: 120 kg after 179.25 h (03-08 11:15Z → day 03-07, index 6), the next
    // after 358.5 h (03-15 22:30Z → day 03-15, index 14); the last crop, 358.5 → 451.83 h, goes with the
    // change: 0.669 456 × 93.33 h = 62.48 kg.
    let inp = input(24, "20:00", 20, rules(8), vec![cell("A01", 0.0)]);
    let p = plan(&inp, &flat(24)).unwrap();
    let hs = harvests(&p);
    assert_eq!(hs.iter().map(|(d, _)| *d).collect::<Vec<_>>(), vec![6, 14, 17]);
    assert!((hs[0].1.mass_kg - 120.0).abs() < 1e-3, "{}", hs[0].1.mass_kg);
    assert!((hs[1].1.mass_kg - 120.0).abs() < 1e-3, "{}", hs[1].1.mass_kg);
    assert!((hs[2].1.mass_kg - CATHODE_KG_PER_H * (TARGET_H - 358.5)).abs() < 0.01, "{}", hs[2].1.mass_kg);
    assert!(hs[2].1.with_anode_change);
}

#[test]
fn overdue_change_goes_on_the_first_day_marked_overdue() {
    // Now is 460 h after the set: past the ideal (451.83 h), before scrap_lower (478.41 h).
    // At now: 1 − 460 × 0.714 871 / 380 = 0.134 63 left (by hand).
    let inp = input(460, "06:00", 5, rules(8), vec![cell("A01", 0.0)]);
    let p = plan(&inp, &flat(460)).unwrap();
    let cs = changes(&p);
    assert_eq!(cs.len(), 1);
    assert_eq!(cs[0].0, 0);
    assert!(cs[0].1.overdue);
    assert_eq!(cs[0].1.at, inp.now);
    assert!((cs[0].1.scrap_fraction - 0.134_63).abs() < 1e-4, "{}", cs[0].1.scrap_fraction);
}

#[test]
fn inert_cells_have_harvests_and_no_anode_changes() {
    // An inert cell whose crop began at t0; now 200 h: the 120 kg harvest (179.25 h) is overdue, on day 0,
    // with 0.669 456 × 200 = 133.89 kg at now (by hand).
    let mut c = cell("L1", 0.0);
    c.params.anode_kind = AnodeKind::Inert;
    let inp = input(200, "06:00", 14, rules(8), vec![c]);
    let p = plan(&inp, &flat(200)).unwrap();
    assert!(changes(&p).is_empty());
    let hs = harvests(&p);
    assert!(!hs.is_empty());
    assert_eq!(hs[0].0, 0);
    assert!(hs[0].1.overdue);
    assert!((hs[0].1.mass_kg - CATHODE_KG_PER_H * 200.0).abs() < 0.01, "{}", hs[0].1.mass_kg);
    // the next crop starts at now and is due 179.25 h later, not overdue
    assert!(hs.iter().skip(1).all(|(_, h)| !h.overdue && (h.mass_kg - 120.0).abs() < 1e-3));
}

#[test]
fn a_wave_of_thirty_cells_spreads_early_rather_than_late() {
    // 30 cells set together; scrap_lower 0.07 (26.6 kg, above the 20 kg lugs) widens the window:
    // 0.07 is reached after 353.4 kg / 0.714 871 = 494.36 h. Days start 08:00 UTC, so the
    // ideal (03-19 19:50Z) is day 03-19, the window opens 03-17 (14:40Z) and closes 03-21 (14:21Z).
    let cells: Vec<CellInput> = (1..=30)
        .map(|i| {
            let mut c = cell(&format!("A{i:02}"), 0.0);
            c.params.scrap_lower = 0.07;
            c
        })
        .collect();
    let inp = input(24, "08:00", 28, rules(8), cells);
    let p = plan(&inp, &flat(24)).unwrap();
    assert!(p.exact);
    assert!(p.unplaced.is_empty(), "{:?}", p.unplaced);
    let ideal = (date(2026, 3, 19) - inp.calendar.from).num_days() as usize;
    let mut per_day = vec![0; 28];
    for (d, c) in changes(&p) {
        assert!(d + 2 >= ideal && d <= ideal + 2, "{} on day {d}", c.cell);
        per_day[d] += 1;
    }
    assert!(per_day.iter().all(|n| *n <= 8), "{per_day:?}");
    // By hand, early 1 and late 3 a day: 8 on the ideal day, 8 a day early (1 each), 8 two days
    // early (2 each, cheaper than 3 for a day late), the last 6 a day late.
    assert_eq!(&per_day[ideal - 2..=ideal + 2], &[8, 8, 8, 6, 0]);
    let early: usize = per_day[..ideal].iter().sum();
    let late: usize = per_day[ideal + 1..].iter().sum();
    assert!(early > late, "early {early} late {late}");
}

#[test]
fn days_without_anode_work_are_avoided() {
    // The ideal day 03-18 (20:00 day start, as above) overlaps a planned outage; 03-17 is a no-work date.
    let mut r = rules(8);
    r.outages = vec![(
        "C1".into(),
        Span { from: Utc.with_ymd_and_hms(2026, 3, 19, 10, 0, 0).unwrap(), to: Utc.with_ymd_and_hms(2026, 3, 19, 14, 0, 0).unwrap() },
    )];
    r.no_anode_work = vec![date(2026, 3, 17)];
    let inp = input(240, "20:00", 14, r, vec![cell("A01", 0.0)]);
    let p = plan(&inp, &flat(240)).unwrap();
    assert_eq!(p.days[8].crew_capacity, 0);
    assert!(p.days[8].no_anode_work.as_deref().unwrap_or("").contains("outage on C1"));
    assert_eq!(p.days[7].crew_capacity, 0);
    // a day late costs 3, two days early 2: the window 03-16 … 03-20 leaves 03-16 (index 6)
    assert_eq!(changes(&p).iter().map(|(d, _)| *d).collect::<Vec<_>>(), vec![6]);
}

#[test]
fn the_anode_supply_is_never_overdrawn() {
    // Three changes of 50 anodes each in the same window, 100 anodes in stock and none delivered.
    let mut r = rules(8);
    r.anode_stock = Some(100);
    let cells = vec![cell("A01", 0.0), cell("A02", 0.0), cell("A03", 0.0)];
    let inp = input(240, "20:00", 14, r, cells);
    let p = plan(&inp, &flat(240)).unwrap();
    let used: u64 = p.days.iter().map(|d| d.anodes_needed).sum();
    assert_eq!(used, 100);
    assert_eq!(p.unplaced.len(), 1);
    assert_eq!(p.unplaced[0].reason, Reason::NoAnodes);
    assert_eq!(p.unplaced[0].cell, "A03", "ties go by cell id");
}

#[test]
fn stripping_capacity_holds_with_unequal_cathode_counts() {
    // Sixteen cells due within a few days: half with 51 cathodes, half with 41 (40 anodes), and a
    // stripping machine of 200 cathodes a day: at most 3 cells of 51 a day, or more with the smaller ones.
    let cells: Vec<CellInput> = (1..=16)
        .map(|i| {
            let mut c = cell(&format!("A{i:02}"), 0.0);
            if i % 2 == 0 {
                c.params.anodes_per_cell = 40;
                c.params.cathodes_per_cell = 41;
                c.load = Some((t0(), 40, 380.0));
            }
            c
        })
        .collect();
    let mut r = rules(8);
    r.harvest_cathodes_per_day = 200;
    let inp = input(100, "06:00", 5, r, cells);
    let p = plan(&inp, &flat(100)).unwrap();
    for d in &p.days {
        let n: u64 = d.harvests.iter().map(|h| u64::from(h.cathodes)).sum();
        assert_eq!(n, d.harvest_cathodes);
        assert!(n <= 200, "{}: {n}", d.date);
        for h in &d.harvests {
            let l = h.window.latest.unwrap();
            assert!(h.window.earliest <= d.date && d.date <= l, "{} {}", h.cell, d.date);
            assert!(l - h.window.ideal <= Duration::days(1) && h.window.ideal - h.window.earliest <= Duration::days(1));
        }
    }
    let placed = harvests(&p).len();
    let left: Vec<&UnplacedJob> = p.unplaced.iter().filter(|u| u.kind == JobKind::Harvest).collect();
    assert_eq!(placed + left.len(), 16, "each cell's one crop is placed or listed");
    assert!(!left.is_empty() && left.iter().all(|u| u.reason == Reason::NoStrippingCapacity));
    assert!(!p.harvests_exact);
}

#[test]
fn hand_moves_are_checked_against_window_and_capacity() {
    let run = |crew: u32, moves: Vec<(&str, NaiveDate)>| {
        let mut inp = input(240, "20:00", 14, rules(crew), vec![cell("A01", 0.0), cell("A02", 0.0)]);
        inp.moves = moves.into_iter().map(|(c, d)| (c.to_string(), d)).collect();
        plan(&inp, &flat(240))
    };
    // inside the window 03-16 … 03-20
    let p = run(8, vec![("A02", date(2026, 3, 19))]).unwrap();
    let moved: Vec<(usize, &str, bool)> = changes(&p).iter().map(|(d, c)| (*d, c.cell.as_str(), c.moved)).collect();
    assert_eq!(moved, vec![(8, "A01", false), (9, "A02", true)]);
    // outside it
    let e = run(8, vec![("A02", date(2026, 3, 21))]).unwrap_err();
    assert!(matches!(&e, PlanError::Move { message, .. } if message.contains("outside the cell's window")), "{e}");
    // onto a full day: with one cell a day the levelling gives A01 03-17 and A02 its ideal 03-18
    // (one day early costs 1 either way; ties go to the smaller day in cell-id order)
    let p = run(1, vec![]).unwrap();
    assert_eq!(changes(&p).iter().map(|(d, c)| (*d, c.cell.as_str())).collect::<Vec<_>>(), vec![(7, "A01"), (8, "A02")]);
    let e = run(1, vec![("A02", date(2026, 3, 17))]).unwrap_err();
    assert!(matches!(&e, PlanError::Move { message, .. } if message.contains("over capacity")), "{e}");
    // after moving A01 away first, the day is free
    let p = run(1, vec![("A01", date(2026, 3, 20)), ("A02", date(2026, 3, 17))]).unwrap();
    assert_eq!(changes(&p).iter().map(|(d, c)| (*d, c.cell.as_str())).collect::<Vec<_>>(), vec![(7, "A02"), (10, "A01")]);
    assert!(matches!(run(8, vec![("Z99", date(2026, 3, 18))]), Err(PlanError::Move { .. })));
}

#[test]
fn whole_sections_change_on_one_day() {
    let mut r = rules(8);
    r.whole_sections = true;
    // A02 set 20 h later than A01: its window 03-17 … 03-21, its ideal 03-19; common window 03-17 … 03-20
    let inp = input(240, "20:00", 14, r, vec![cell("A01", 0.0), cell("A02", 20.0)]);
    let p = plan(&inp, &flat(240)).unwrap();
    let days: Vec<usize> = changes(&p).iter().map(|(d, _)| *d).collect();
    assert_eq!(days.len(), 2);
    assert_eq!(days[0], days[1]);
}

#[test]
fn shifts_split_the_day() {
    let shift = |load, capacity| ShiftLoad { load, capacity, harvests: 0, crane_lifts: None };
    assert_eq!(fill_changes(&[false; 5], 8, 2, None), vec![shift(4, 4), shift(1, 4)]);
    let caps: Vec<u32> = fill_changes(&[], 7, 3, None).iter().map(|s| s.capacity).collect();
    assert_eq!(caps, vec![3, 2, 2]);
    assert_eq!(fill_changes(&[false; 3], 8, 1, None), vec![shift(3, 8)]);
    // with a crane of 9 lifts a shift, 2 a change and 2 a harvest: a change with its crop is 4 lifts,
    // one without it 2; the 9 − 8 = 1 lift left in the first shift takes no harvest, the 9 − 6 in the
    // second takes one (by hand)
    let crane = Some(Crane { lifts_per_shift: 9, per_anode_change: 2, per_harvest: 2 });
    let mut sh = fill_changes(&[true, true, true, false], 4, 2, crane);
    assert_eq!(sh.iter().map(|s| s.crane_lifts).collect::<Vec<_>>(), vec![Some(8), Some(6)]);
    assert_eq!(harvest_room(&sh, crane), 1);
    fill_harvests(&mut sh, 1, crane);
    assert_eq!(sh.iter().map(|s| (s.harvests, s.crane_lifts)).collect::<Vec<_>>(), vec![(0, Some(8)), (1, Some(8))]);
    // without a crane budget the harvests are split evenly over the shifts
    let mut sh = fill_changes(&[true; 3], 8, 3, None);
    fill_harvests(&mut sh, 5, None);
    assert_eq!(sh.iter().map(|s| s.harvests).collect::<Vec<_>>(), vec![2, 2, 1]);
}

#[test]
fn remaining_supply_keeps_what_later_days_need() {
    // stock 100, 50 a day; 150 used on day 1: cumulative 150, 200, 250 less 0, 150, 150 → 150, 50, 100;
    // a use on day 0 must also fit day 1, so 50, 50, 100 are left (by hand).
    let (stock, per) = remaining_supply(100, &[50, 50, 50], &[0, 150, 0]);
    assert_eq!(stock, 0);
    assert_eq!(per, vec![50, 0, 50]);
    assert_eq!(overdrawn(100, &[50, 50, 50], &[0, 201, 0]), Some(1));
    assert_eq!(overdrawn(100, &[50, 50, 50], &[0, 200, 50]), None);
}

/// `flat` on two circuits, C1 and C2.
fn flat2(now_h: u32) -> HashMap<String, MemoryCurve> {
    let mut c = flat(now_h);
    let one = c["C1"].clone();
    c.insert("C2".to_string(), one);
    c
}
fn on(circuit: &str, id: &str) -> CellInput {
    CellInput { circuit: circuit.to_string(), ..cell(id, 0.0) }
}
fn outage_on(circuit: &str, from_h: f64, to_h: f64) -> (String, Span) {
    (circuit.to_string(), Span { from: at(from_h), to: at(to_h) })
}
/// Day index of each cell's change.
fn change_days(p: &Plan) -> BTreeMap<String, usize> {
    changes(p).iter().map(|(d, c)| (c.cell.clone(), *d)).collect()
}

#[test]
fn an_outage_on_one_circuit_leaves_the_other_circuits_changes_where_they_are() {
    // Five cells on C1 and five on C2, all set at t0: ideal 451.83 h = 03-19 19:50Z → day 03-18
    // (days start 20:00; index 8). A 3-h outage on C1 that day (03-19 10:00–13:00Z).
    let cells: Vec<CellInput> =
        (1..=5).map(|i| on("C1", &format!("A{i:02}"))).chain((1..=5).map(|i| on("C2", &format!("B{i:02}")))).collect();
    let mut r = rules(10);
    r.outages = vec![outage_on("C1", 442.0, 445.0)];
    let inp = input(240, "20:00", 14, r, cells.clone());
    let p = plan(&inp, &flat2(240)).unwrap();
    let days = change_days(&p);
    // C2's five stay on their ideal day; C1's go a day early (cost 1 each, cheaper than 3 late)
    for i in 1..=5 {
        assert_eq!(days[&format!("B{i:02}")], 8, "{days:?}");
        assert_eq!(days[&format!("A{i:02}")], 7, "{days:?}");
    }
    // the day still has anode work (for C2), and says which circuit is down
    assert_eq!(p.days[8].no_anode_work, None);
    assert_eq!(p.days[8].outages.len(), 1);
    assert_eq!((p.days[8].outages[0].circuit.as_str(), p.days[8].outages[0].anode_work), ("C1", OutageWork::Forbidden));
    assert_eq!(p.days[8].crew_capacity, 10);
    // a hand move of a C1 cell onto the outage day is refused; a C2 cell may go there
    let mut m = inp.clone();
    m.moves = vec![("A01".into(), date(2026, 3, 18))];
    let e = plan(&m, &flat2(240)).unwrap_err();
    assert!(e.to_string().contains("circuit C1 is down"), "{e}");
    // Preferred on C1, with the outage a day before the ideal (03-17, index 7): C1's cells go
    // there (the outage day is their ideal), C2's stay on 03-18.
    let mut r = rules(10);
    r.outages = vec![outage_on("C1", 418.0, 421.0)];
    r.outage_work = BTreeMap::from([("C1".to_string(), OutageWork::Preferred)]);
    let p = plan(&input(240, "20:00", 14, r, cells), &flat2(240)).unwrap();
    let days = change_days(&p);
    assert!((1..=5).all(|i| days[&format!("A{i:02}")] == 7 && days[&format!("B{i:02}")] == 8), "{days:?}");
    assert_eq!(p.days[7].outages[0].anode_work, OutageWork::Preferred);
}

#[test]
fn an_outage_on_every_circuit_stops_anode_work() {
    let mut r = rules(10);
    r.outages = vec![outage_on("C1", 442.0, 445.0), outage_on("C2", 443.0, 444.0)];
    let p = plan(&input(240, "20:00", 14, r, vec![on("C1", "A01"), on("C2", "B01")]), &flat2(240)).unwrap();
    assert_eq!(p.days[8].crew_capacity, 0);
    let why = p.days[8].no_anode_work.as_deref().unwrap_or("");
    assert!(why.contains("outage on C1") && why.contains("outage on C2"), "{why}");
}

#[test]
fn kept_moves_apply_while_feasible_and_are_dropped_with_the_reason() {
    let kept = |cell: &str, d: NaiveDate, entry: i64| KeptMove { cell: cell.into(), date: d, by: "JD".into(), entry, applied: false };
    let mut inp = input(240, "20:00", 14, rules(1), vec![cell("A01", 0.0), cell("A02", 0.0), cell("A03", 0.0)]);
    // A01 kept on 03-20 (inside its window 03-16 … 03-20); A02 kept on 03-21 (outside it)
    inp.kept = vec![kept("A01", date(2026, 3, 20), 11), kept("A02", date(2026, 3, 21), 12), kept("A03", date(2026, 4, 30), 13)];
    let p = plan(&inp, &flat(240)).unwrap();
    let a01 = changes(&p).into_iter().find(|(_, c)| c.cell == "A01").unwrap();
    assert_eq!((a01.0, a01.1.moved), (10, true));
    assert_eq!(p.kept_moves.iter().map(|k| (k.cell.as_str(), k.applied)).collect::<Vec<_>>(), vec![("A01", true), ("A03", false)]);
    assert_eq!(p.dropped_moves.len(), 1);
    assert_eq!((p.dropped_moves[0].cell.as_str(), p.dropped_moves[0].entry), ("A02", 12));
    assert!(p.dropped_moves[0].reason.contains("outside the cell's window"), "{}", p.dropped_moves[0].reason);
    // a hand move of the same cell overrides the kept one
    inp.moves = vec![("A01".into(), date(2026, 3, 19))];
    let p = plan(&inp, &flat(240)).unwrap();
    assert!(p.dropped_moves.iter().any(|d| d.cell == "A01" && d.reason.contains("overridden")));
    assert_eq!(change_days(&p)["A01"], 9);
}

#[test]
fn light_last_crops_are_warned() {
    // Without crops_per_anode_cycle the crop pulled with the anodes is 62.48 kg (see
    // crops_at_target_mass_between_changes), below 0.6 × 120 = 72 kg: warned and flagged.
    let inp = input(24, "20:00", 20, rules(8), vec![cell("A01", 0.0)]);
    let p = plan(&inp, &flat(24)).unwrap();
    assert_eq!(p.warnings.len(), 1);
    assert_eq!(
        (p.warnings[0].kind, p.warnings[0].cell.as_str(), p.warnings[0].date),
        (WarningKind::LightLastCrop, "A01", date(2026, 3, 18))
    );
    assert!(p.warnings[0].message.contains("crops_per_anode_cycle"));
    assert!(harvests(&p).iter().all(|(_, h)| h.light == h.with_anode_change));
    // at 0.5 (60 kg) it is not light; with three equal crops there is no light last crop
    let mut r = rules(8);
    r.light_crop_fraction = 0.5;
    assert!(plan(&input(24, "20:00", 20, r, vec![cell("A01", 0.0)]), &flat(24)).unwrap().warnings.is_empty());
    let mut c = cell("A01", 0.0);
    c.params.crops_per_anode_cycle = Some(3);
    assert!(plan(&input(24, "20:00", 20, rules(8), vec![c]), &flat(24)).unwrap().warnings.is_empty());
}

#[test]
fn bound_by_names_the_constraint_that_kept_a_job_off_the_day() {
    // The thirty-cell wave: 8 on the ideal day and 8 on each of the two days before, 6 a day
    // late (see a_wave_of_thirty_cells_spreads_early_rather_than_late): the crew binds the
    // ideal day and the two days early; the day after takes what is left, so it binds nothing.
    let cells: Vec<CellInput> = (1..=30)
        .map(|i| {
            let mut c = cell(&format!("A{i:02}"), 0.0);
            c.params.scrap_lower = 0.07;
            c
        })
        .collect();
    let mut r = rules(8);
    r.smooth_harvests = false;
    let inp = input(24, "08:00", 28, r.clone(), cells.clone());
    let p = plan(&inp, &flat(24)).unwrap();
    let ideal = (date(2026, 3, 19) - inp.calendar.from).num_days() as usize;
    assert_eq!(p.days[ideal].bound_by, Some(Bound::Crew));
    assert_eq!(p.days[ideal - 1].bound_by, Some(Bound::Crew));
    assert_eq!(p.days[ideal + 1].bound_by, None);
    // a crane of 20 lifts a shift (2 + 2 a change with its crop): 5 changes a day, the crane binds
    r.crane = Some(Crane { lifts_per_shift: 20, per_anode_change: 2, per_harvest: 2 });
    let p = plan(&input(24, "08:00", 28, r.clone(), cells.clone()), &flat(24)).unwrap();
    assert_eq!(p.days[ideal].bound_by, Some(Bound::Crane));
    assert_eq!(p.days[ideal].crew_capacity, 5);
    assert_eq!(p.days[ideal].crane_lifts, Some(20));
    // 5 anodes a day and none in stock: 95 by the ideal day, one change of 50 by then; the anodes bind
    let mut r = rules(8);
    r.anodes_per_day = Some(5);
    let p = plan(&input(24, "08:00", 28, r, cells), &flat(24)).unwrap();
    assert!(p.days[ideal].crew_load < 8);
    assert_eq!(p.days[ideal].bound_by, Some(Bound::Anodes));
    assert!(p.days.iter().all(|d| d.anodes_delivered.is_some_and(|x| x <= 5)));
}

#[test]
fn the_anode_stock_line_follows_levelled_deliveries() {
    // Two changes of 50 anodes on 03-18 (index 8) with 20 in stock and up to 30 a day: the need
    // beyond stock is 80 by day 8, so 80/9 = 8.9 a day, rounded up cumulatively (by hand).
    let mut r = rules(8);
    r.anode_stock = Some(20);
    r.anodes_per_day = Some(30);
    let p = plan(&input(240, "20:00", 14, r, vec![cell("A01", 0.0), cell("A02", 0.0)]), &flat(240)).unwrap();
    assert_eq!(change_days(&p).values().copied().collect::<Vec<_>>(), vec![8, 8]);
    let delivered: Vec<u64> = p.days.iter().map(|d| d.anodes_delivered.unwrap()).collect();
    assert_eq!(&delivered[..9], &[9, 9, 9, 9, 9, 9, 9, 9, 8]);
    assert!(delivered[9..].iter().all(|x| *x == 0));
    let stock: Vec<u64> = p.days.iter().map(|d| d.anode_stock.unwrap()).collect();
    assert_eq!(&stock[..9], &[29, 38, 47, 56, 65, 74, 83, 92, 0]);
    // unlimited supply: no stock line
    let p = plan(&input(240, "20:00", 14, rules(8), vec![cell("A01", 0.0)]), &flat(240)).unwrap();
    assert!(p.days.iter().all(|d| d.anode_stock.is_none() && d.anodes_delivered.is_none()));
}

#[test]
fn smoothing_spreads_crops_due_together_and_never_worsens_the_spread() {
    // Six cells set together: their first crops are all due 179.25 h after the set (day 03-07
    // with 20:00 day starts, index 6), each free to move a day either way. Capped only, the
    // stripping machine takes 6 × 51 = 306 cathodes that day and none beside it; smoothed, two a
    // day (102, 102, 102), by hand.
    let cells: Vec<CellInput> = (1..=6).map(|i| cell(&format!("A{i:02}"), 0.0)).collect();
    let mut r = rules(8);
    r.smooth_harvests = false;
    let capped = plan(&input(24, "20:00", 14, r, cells.clone()), &flat(24)).unwrap();
    let smooth = plan(&input(24, "20:00", 14, rules(8), cells), &flat(24)).unwrap();
    let load = |p: &Plan| p.days.iter().map(|d| d.harvest_cathodes).collect::<Vec<u64>>();
    assert_eq!(&load(&capped)[5..8], &[0, 306, 0]);
    assert_eq!(&load(&smooth)[5..8], &[102, 102, 102]);
    assert!(smoothing::spread(&load(&smooth)) < smoothing::spread(&load(&capped)));
    assert_eq!(smooth.harvests_smoothed, 4);
    assert!(!smooth.harvests_exact && capped.harvests_exact);
    assert_eq!(harvests(&smooth).len(), harvests(&capped).len());
}

proptest::proptest! {
    #![proptest_config(proptest::prelude::ProptestConfig::with_cases(48))]
    #[test]
    fn the_crane_budget_is_never_exceeded(
        sets in proptest::collection::vec(0u32..400, 1..14),
        lifts in 4u32..30,
        per_change in 1u32..4,
        per_harvest in 1u32..4,
        shifts in 1u32..4,
        crew in 1u32..10,
        smooth in proptest::bool::ANY,
    ) {
        let cells: Vec<CellInput> = sets.iter().enumerate().map(|(i, h)| cell(&format!("A{i:02}"), -f64::from(*h))).collect();
        let mut r = rules(crew);
        r.shifts_per_day = shifts;
        r.smooth_harvests = smooth;
        let crane = Crane { lifts_per_shift: lifts, per_anode_change: per_change, per_harvest };
        r.crane = Some(crane);
        // a t0 far enough back for every set: the curve starts 400 h earlier
        let now_h = 400;
        let rs: Vec<RawReading> = (0..=now_h + 400).map(|h| RawReading { t: at(f64::from(h) - 400.0), amps: 30_000.0 }).collect();
        let curves = HashMap::from([("C1".to_string(), MemoryCurve::build(&rs, &[], &[], at(f64::from(now_h))))]);
        let inp = input(now_h, "06:00", 21, r, cells);
        match plan(&inp, &curves) {
            Ok(p) => {
                let budget = lifts * shifts;
                for d in &p.days {
                    let crops = d.harvests.iter().filter(|h| h.with_anode_change).count() as u32;
                    let others = d.harvests.len() as u32 - crops;
                    let want = d.anode_changes.len() as u32 * per_change + (crops + others) * per_harvest;
                    proptest::prop_assert_eq!(d.crane_lifts, Some(want), "{}", d.date);
                    proptest::prop_assert!(want <= budget, "{}: {want} lifts > {budget}", d.date);
                    proptest::prop_assert_eq!(d.crane_capacity, Some(budget));
                    if shifts > 1 {
                        proptest::prop_assert_eq!(d.shifts.iter().filter_map(|s| s.crane_lifts).sum::<u32>(), want);
                        proptest::prop_assert_eq!(d.shifts.iter().map(|s| s.harvests).sum::<u32>(), others);
                        for s in &d.shifts {
                            proptest::prop_assert!(s.crane_lifts.unwrap_or(0) <= lifts, "{}: a shift over its lifts {:?}", d.date, d.shifts);
                        }
                    }
                }
            }
            // too small a budget for one change with its crop is refused, naming the key
            Err(PlanError::Rule { key, .. }) => proptest::prop_assert!(lifts < per_change + per_harvest && key == "crane_lifts_per_shift"),
            Err(e) => proptest::prop_assert!(false, "{e}"),
        }
    }
}
