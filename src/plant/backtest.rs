//! The back-test on the plant's own history: every weighed crop and scrap in a
//! period beside its ex-ante prediction and the fixed-efficiency one.
//!
//! Ex ante: a crop is predicted from the values learnt from the weighings
//! logged at or before the time the crop began (the weighing that opened it
//! counts as before), a scrap from those at or before its load was set; the
//! crop's own measured charge is used. So a later weighing never changes an
//! earlier row; an undo of an earlier entry, or back-filled current, may. The
//! fixed figure uses each cell's layout values as of the end of the period.
//!
//! The rows are handed to a [`BacktestSink`] as they are made, so a year of
//! them need not be held ([`Plant::backtest`] collects them for those who want
//! them all). Each section's learn rows are read once, in time order, and each
//! (section, start, kind) learnt over their prefix weighed by then.

use std::collections::HashMap;
use std::collections::hash_map::Entry;
use std::hash::Hash;
use std::ops::ControlFlow;

use super::learn::{SectionHistory, cell_estimate};
use super::{Plant, PlantError, Result, far_future};
use crate::domain::anode::AnodeLoad;
use crate::domain::backtest::{Backtest, Crop, CropRow, Name, Scrap, ScrapRow, Summary, SummaryAcc, crop_row, scrap_row};
use crate::domain::charge::{Time, cell_time_reaching};
use crate::domain::electrochem::charge_for_copper_ah;
use crate::domain::entry::Field;
use crate::domain::layout::CellParams;
use crate::domain::learn::{Estimate, SectionLearnt};
use crate::store::{Db, LearnRow, StoreCurve, WeighingKind};

/// Where the back-test's rows go, one at a time in the order of their
/// weighings (then cell, then kind); `Break` stops the back-test there.
pub trait BacktestSink {
    fn crop(&mut self, row: CropRow) -> ControlFlow<()>;
    fn scrap(&mut self, row: ScrapRow) -> ControlFlow<()>;
}

/// Every row kept.
#[derive(Default)]
struct Collect {
    crops: Vec<CropRow>,
    scrap: Vec<ScrapRow>,
}

impl BacktestSink for Collect {
    fn crop(&mut self, row: CropRow) -> ControlFlow<()> {
        self.crops.push(row);
        ControlFlow::Continue(())
    }

    fn scrap(&mut self, row: ScrapRow) -> ControlFlow<()> {
        self.scrap.push(row);
        ControlFlow::Continue(())
    }
}

/// A cell as its rows name it.
struct Place {
    cell: Name,
    circuit: Name,
    section: Name,
    circuit_id: i64,
}

/// A section by a number (as met) and a cell's place in it.
type SectionAt = (u32, Option<usize>);

fn intern<'c>(names: &mut HashMap<&'c str, Name>, s: &'c str) -> Name {
    names.entry(s).or_insert_with(|| Name::from(s)).clone()
}

/// One use of `k` done: what is kept for it is dropped after its last.
fn used<K: Eq + Hash, V>(uses: &mut HashMap<K, u32>, kept: &mut HashMap<K, V>, k: &K) {
    if let Some(n) = uses.get_mut(k) {
        *n -= 1;
        if *n == 0 {
            uses.remove(k);
            kept.remove(k);
        }
    }
}

/// A back-test row.
enum Row {
    Crop(CropRow),
    Scrap(ScrapRow),
}

/// The row of a learn row `r` of the cell at `place`, predicted at the
/// ex-ante estimate `l` (`None`: a scrap weighing without its load's count or mass).
fn row_of<'d>(
    db: Db<'d>,
    curves: &mut HashMap<i64, StoreCurve<'d>>,
    r: &LearnRow,
    place: &Place,
    p: &CellParams,
    l: &Estimate,
) -> Result<Option<Row>> {
    Ok(Some(match r.kind {
        WeighingKind::Crop => {
            let curve = match curves.entry(place.circuit_id) {
                Entry::Occupied(e) => e.into_mut(),
                Entry::Vacant(e) => e.insert(StoreCurve::new(db, place.circuit_id, far_future())?),
            };
            let cuts = db.cutouts(&r.cell, far_future())?;
            let reach = cell_time_reaching(&*curve, &cuts, r.started_at, charge_for_copper_ah(r.weighed_kg, l.value))?;
            let c = Crop {
                cell: &place.cell,
                circuit: &place.circuit,
                section: &place.section,
                started_at: r.started_at,
                harvested_at: r.ended_at,
                charge_ah: r.charge_ah,
                weighed_kg: r.weighed_kg,
            };
            Row::Crop(crop_row(&c, l, p.cathode_efficiency, reach))
        }
        WeighingKind::Scrap => {
            let (Some(count), Some(set_kg)) = (r.count, r.set_kg) else { return Ok(None) };
            let load = AnodeLoad { initial_kg: set_kg, count, efficiency: 1.0, copper_fraction: p.anode_copper_fraction, lug_kg: p.lug_kg };
            let s = Scrap {
                cell: &place.cell,
                circuit: &place.circuit,
                section: &place.section,
                set_at: r.started_at,
                pulled_at: r.ended_at,
                charge_ah: r.charge_ah,
                weighed_kg: r.weighed_kg,
                load,
            };
            Row::Scrap(scrap_row(&s, l, p.anode_efficiency))
        }
    }))
}

impl Plant {
    /// Back-tests the weighings in `[from, to]` (weighing times; `from` defaults
    /// to the first weighing), optionally of one cell, every row kept.
    pub fn backtest(&self, from: Option<Time>, to: Time, only_cell: Option<&str>) -> Result<Backtest> {
        let (from, to) = self.backtest_period(from, to, only_cell)?;
        let mut rows = Collect::default();
        let summary = self.backtest_each(from, to, only_cell, &mut rows)?;
        Ok(Backtest { schema: 1, from, to, crops: rows.crops, scrap: rows.scrap, summary })
    }

    /// The period [`Plant::backtest`] covers (`from` defaults to the first
    /// weighing), refused as it refuses it.
    pub fn backtest_period(&self, from: Option<Time>, to: Time, only_cell: Option<&str>) -> Result<(Time, Time)> {
        let db = self.store.db();
        db.plant_info()?.ok_or(PlantError::NoLayout)?;
        let from = match from {
            Some(t) => t,
            None => db.earliest_weighing_at()?.unwrap_or(to).min(to),
        };
        if to < from {
            return Err(PlantError::rejected(Field::To, "the period ends before it starts"));
        }
        if let Some(id) = only_cell
            && !db.cells()?.iter().any(|c| c.id == id)
        {
            return Err(PlantError::rejected(Field::Cell, format!("unknown cell {id}: it is not in the layout")));
        }
        Ok((from, to))
    }

    /// Back-tests the weighings in `[from, to]`, optionally of one cell,
    /// handing each row to `sink` as it is made; the summary of the rows handed.
    pub fn backtest_each(&self, from: Time, to: Time, only_cell: Option<&str>, sink: &mut impl BacktestSink) -> Result<Summary> {
        let (from, to) = self.backtest_period(Some(from), to, only_cell)?;
        let db = self.store.db();
        let cells = db.cells()?;
        let params = db.params_at_all(to)?;
        // each name once, shared by the rows
        let mut names: HashMap<&str, Name> = HashMap::new();
        let mut places: HashMap<&str, Place> = HashMap::with_capacity(cells.len());
        for c in &cells {
            let place = Place {
                cell: intern(&mut names, &c.id),
                circuit: intern(&mut names, &c.circuit),
                section: intern(&mut names, &c.section),
                circuit_id: c.circuit_id,
            };
            places.insert(c.id.as_str(), place);
        }
        drop(names);
        let mut curves: HashMap<i64, StoreCurve<'_>> = HashMap::new();
        // each cell's section and place in it, each section's learn rows (read
        // when first needed, dropped after their last use) and the values
        // learnt as of a (section, time, kind), dropped after their last use
        let mut section_at: HashMap<String, SectionAt> = HashMap::new();
        let mut sections = 0u32;
        let mut section_of = |cell: &str| -> Result<SectionAt> {
            if let Some(&at) = section_at.get(cell) {
                return Ok(at);
            }
            let n = sections;
            sections += 1;
            let members = db.section_cells(cell)?;
            for (i, c) in members.into_iter().enumerate() {
                section_at.entry(c).or_insert((n, Some(i)));
            }
            Ok(*section_at.entry(cell.to_string()).or_insert((n, None)))
        };
        // two passes over the rows as they are read: first how many rows need
        // each section and each key's values, then the rows
        let mut section_uses: HashMap<u32, u32> = HashMap::new();
        let mut key_uses: HashMap<(u32, Time, WeighingKind), u32> = HashMap::new();
        db.each_learn_row(only_cell, from, to, |r| -> Result<()> {
            if places.contains_key(r.cell.as_str()) && params.contains_key(&r.cell) {
                let (n, _) = section_of(&r.cell)?;
                *section_uses.entry(n).or_default() += 1;
                *key_uses.entry((n, r.started_at, r.kind)).or_default() += 1;
            }
            Ok(())
        })?;
        let mut histories: HashMap<u32, SectionHistory> = HashMap::new();
        let mut known: HashMap<(u32, Time, WeighingKind), SectionLearnt> = HashMap::new();
        let mut summary = SummaryAcc::default();
        let mut stopped = false;
        db.each_learn_row(only_cell, from, to, |r| -> Result<()> {
            let (false, Some(place), Some(p)) = (stopped, places.get(r.cell.as_str()), params.get(&r.cell)) else { return Ok(()) };
            let (n, i) = section_of(&r.cell)?;
            let key = (n, r.started_at, r.kind);
            let learnt = match known.entry(key) {
                Entry::Occupied(e) => e.into_mut(),
                Entry::Vacant(e) => {
                    let history = match histories.entry(n) {
                        Entry::Occupied(h) => h.into_mut(),
                        // every row's start is at or before its weighing, at or before `to`
                        Entry::Vacant(h) => h.insert(SectionHistory::read(db, &r.cell, to)?),
                    };
                    e.insert(history.learnt_until(r.kind, r.started_at))
                }
            };
            let l = cell_estimate(learnt, r.kind, i, p);
            used(&mut key_uses, &mut known, &key);
            used(&mut section_uses, &mut histories, &n);
            let flow = match row_of(db, &mut curves, &r, place, p, &l)? {
                Some(Row::Crop(row)) => {
                    summary.crop(&row);
                    sink.crop(row)
                }
                Some(Row::Scrap(row)) => {
                    summary.scrap(&row);
                    sink.scrap(row)
                }
                None => ControlFlow::Continue(()),
            };
            stopped = flow.is_break();
            Ok(())
        })?;
        Ok(summary.summary())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::demo::{DemoSpec, build};
    use crate::domain::backtest::summarise;
    use crate::domain::learn::{CellLearnt, Source};
    use crate::plant::learn::learnt_until;

    fn now() -> Time {
        chrono::DateTime::parse_from_rfc3339("2026-11-20T05:30:00Z").unwrap().to_utc()
    }

    /// The demo plant (two circuits, several sections, weighings of many cells interleaved in time).
    fn demo() -> (tempfile::TempDir, Plant) {
        let dir = tempfile::tempdir().unwrap();
        let mut plant = Plant::open(&dir.path().join("demo.db")).unwrap();
        build(&mut plant, &DemoSpec { cells: 102, days: 60, seed: 11, reading_minutes: 30 }, now()).unwrap();
        (dir, plant)
    }

    /// The back-test as it was made before the section's rows were read once:
    /// every (section, start) learnt by [`learnt_until`], which reads its rows
    /// from the store again; the reference of the faster path.
    fn backtest_by_learnt_until(plant: &Plant, from: Option<Time>, to: Time, only_cell: Option<&str>) -> Backtest {
        let (from, to) = plant.backtest_period(from, to, only_cell).unwrap();
        let db = plant.store.db();
        let cells = db.cells().unwrap();
        let params = db.params_at_all(to).unwrap();
        let mut curves = HashMap::new();
        let (mut crops, mut scrap) = (Vec::new(), Vec::new());
        for r in db.learn_rows(only_cell, from, to).unwrap() {
            let (Some(cell), Some(p)) = (cells.iter().find(|c| c.id == r.cell), params.get(&r.cell)) else { continue };
            let l =
                learnt_until(db, &r.cell, r.started_at, &params).unwrap().get(&r.cell).copied().unwrap_or_else(|| CellLearnt::layout(p));
            let place = Place {
                cell: Name::from(cell.id.as_str()),
                circuit: Name::from(cell.circuit.as_str()),
                section: Name::from(cell.section.as_str()),
                circuit_id: cell.circuit_id,
            };
            let estimate = match r.kind {
                WeighingKind::Crop => l.cathode,
                WeighingKind::Scrap => l.anode,
            };
            match row_of(db, &mut curves, &r, &place, p, &estimate).unwrap() {
                Some(Row::Crop(row)) => crops.push(row),
                Some(Row::Scrap(row)) => scrap.push(row),
                None => {}
            }
        }
        let summary = summarise(&crops, &scrap);
        Backtest { schema: 1, from, to, crops, scrap, summary }
    }

    #[test]
    fn the_sections_read_once_learn_what_learnt_until_learns_at_every_boundary() {
        let (_dir, plant) = demo();
        let db = plant.store.db();
        let params = db.params_at_all(far_future()).unwrap();
        let rows = db.learn_rows(None, db.earliest_weighing_at().unwrap().unwrap(), far_future()).unwrap();
        let mut sections: HashMap<String, (SectionHistory, Vec<String>)> = HashMap::new();
        let (mut checked, mut learnt_from_cells) = (0, 0);
        // every weighing's start, its own time and the second before it: the
        // weighings at the time count, those a second later do not
        for r in rows.iter().step_by(3) {
            let first = db.section_cells(&r.cell).unwrap();
            let (history, members) = sections
                .entry(first[0].clone())
                .or_insert_with(|| (SectionHistory::read(db, &r.cell, far_future()).unwrap(), first.clone()));
            for until in [r.started_at, r.ended_at, r.ended_at - chrono::Duration::seconds(1)] {
                let old = learnt_until(db, &r.cell, until, &params).unwrap();
                for kind in [WeighingKind::Crop, WeighingKind::Scrap] {
                    let learnt = history.learnt_until(kind, until);
                    for (i, c) in members.iter().enumerate() {
                        let Some(p) = params.get(c) else { continue };
                        let new = cell_estimate(&learnt, kind, Some(i), p);
                        let was = match kind {
                            WeighingKind::Crop => old[c].cathode,
                            WeighingKind::Scrap => old[c].anode,
                        };
                        assert_eq!(new, was, "{c} {kind:?} as of {until}");
                        checked += 1;
                        learnt_from_cells += usize::from(new.source == Source::Cell);
                    }
                }
            }
        }
        assert!(sections.len() >= 4, "{} sections", sections.len());
        assert!(learnt_from_cells > checked / 4, "{learnt_from_cells} of {checked} learnt from the cells' own weighings");
    }

    #[test]
    fn the_streamed_backtest_is_the_one_learnt_by_learnt_until() {
        let (_dir, plant) = demo();
        let whole = plant.backtest(None, now(), None).unwrap();
        assert_eq!(whole, backtest_by_learnt_until(&plant, None, now(), None));
        assert!(whole.crops.len() > 100 && !whole.scrap.is_empty(), "{} crops, {} scrap", whole.crops.len(), whole.scrap.len());
        assert!(whole.crops.iter().any(|r| r.cathode_efficiency_source == Source::Cell));
        assert_eq!(whole.summary, summarise(&whole.crops, &whole.scrap));
        // a part of the period, one cell
        let from = now() - chrono::Duration::days(20);
        let to = now() - chrono::Duration::days(3);
        assert_eq!(plant.backtest(Some(from), to, None).unwrap(), backtest_by_learnt_until(&plant, Some(from), to, None));
        let cell = &whole.crops[whole.crops.len() / 2].cell;
        let one = plant.backtest(None, now(), Some(cell)).unwrap();
        assert!(!one.crops.is_empty());
        assert_eq!(one, backtest_by_learnt_until(&plant, None, now(), Some(cell)));
    }

    /// Stops at the first crop.
    #[derive(Default)]
    struct First(Vec<CropRow>, Vec<ScrapRow>);

    impl BacktestSink for First {
        fn crop(&mut self, row: CropRow) -> ControlFlow<()> {
            self.0.push(row);
            ControlFlow::Break(())
        }
        fn scrap(&mut self, row: ScrapRow) -> ControlFlow<()> {
            self.1.push(row);
            ControlFlow::Continue(())
        }
    }

    #[test]
    fn a_sink_that_stops_gets_no_more_rows_and_the_summary_of_those_it_got() {
        let (_dir, plant) = demo();
        let (from, to) = plant.backtest_period(None, now(), None).unwrap();
        let mut first = First::default();
        let s = plant.backtest_each(from, to, None, &mut first).unwrap();
        assert_eq!(first.0.len(), 1);
        assert_eq!(s, summarise(&first.0, &first.1));
        let whole = plant.backtest(None, now(), None).unwrap();
        assert_eq!(first.0[0], whole.crops[0]);
        assert!(whole.crops.len() > 1);
    }
}
