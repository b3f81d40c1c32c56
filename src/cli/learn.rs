//! Printing what the plant learns: the patrol list and the back-test.

use anyhow::Result;
use std::cell::{Cell, RefCell};
use std::fmt::Write as _;
use std::io::Write as _;
use std::ops::ControlFlow;

use super::args::{BacktestArgs, PatrolArgs};
use super::print::{emit, json};
use crate::domain::backtest::{CropRow, ScrapRow, Summary};
use crate::domain::charge::Time;
use crate::domain::entry::Field;
use crate::plant::{BacktestSink, Plant, PlantError};

pub fn patrol(plant: &Plant, a: &PatrolArgs, now: Time) -> Result<()> {
    let p = plant.patrol(now)?;
    if a.json {
        return json(&p);
    }
    let mut out = String::new();
    writeln!(out, "cells to check for shorts as of {}, most suspect first", plant.show_time(p.as_of))?;
    writeln!(
        out,
        "{:<7} {:<5} {:<4} {:>6} {:>7} {:>8} {:>7} {:>6} {:>6}  reasons",
        "cell", "circ", "sect", "score", "volts", "median", "dev mV", "η %", "shorts"
    )?;
    for c in &p.cells {
        writeln!(
            out,
            "{:<7} {:<5} {:<4} {:>6.1} {:>7.3} {:>8.3} {:>7.0} {:>6.1} {:>6}  {}",
            c.cell,
            c.circuit,
            c.section,
            c.score,
            c.voltage,
            c.section_median_v,
            c.deviation_mv,
            c.cathode_efficiency * 100.0,
            c.shorts_this_crop,
            c.reasons.join("; ")
        )?;
    }
    if p.cells.is_empty() {
        writeln!(out, "no in-circuit cell has a voltage reading in the last 24 h")?;
    }
    emit(&out)
}

pub fn backtest(plant: &Plant, a: &BacktestArgs, now: Time) -> Result<()> {
    let from = a.from.as_deref().map(|s| plant.parse_time(Field::From, s)).transpose()?;
    let to = match &a.to {
        Some(s) => plant.parse_time(Field::To, s)?,
        None => now,
    };
    let (from, to) = plant.backtest_period(from, to, a.cell.as_deref())?;
    if a.json {
        return backtest_json(plant, from, to, a.cell.as_deref());
    }
    // the crops' lines as they come, then the summary above them
    let mut lines = Lines { plant, out: String::new(), failed: None };
    let s = plant.backtest_each(from, to, a.cell.as_deref(), &mut lines)?;
    if let Some(e) = lines.failed {
        return Err(e.into());
    }
    let mut out = String::new();
    let f = |x: Option<f64>, unit: &str| x.map_or("-".to_string(), |v| format!("{v:.2}{unit}"));
    writeln!(
        out,
        "back-test of the weighings from {} to {} (predictions ex ante, on each crop's measured charge)",
        plant.show_time(from),
        plant.show_time(to)
    )?;
    writeln!(
        out,
        "crops: {}  mass error (MAPE) learnt {}  fixed {}  bias {}  harvest time error {}",
        s.crops,
        f(s.mass_mape_pct, " %"),
        f(s.fixed_mass_mape_pct, " %"),
        f(s.mass_bias_pct, " %"),
        f(s.harvest_time_mae_h, " h")
    )?;
    writeln!(out, "scrap: {}  error learnt {}  fixed {}", s.scrap, f(s.scrap_mae_pp, " points"), f(s.fixed_scrap_mae_pp, " points"))?;
    writeln!(
        out,
        "{:<7} {:<17} {:>9} {:>9} {:>9} {:>7} {:>7} {:<7}",
        "cell", "harvested", "weighed", "learnt", "fixed", "err %", "fix %", "source"
    )?;
    emit(&out)?;
    emit(&lines.out)
}

/// The back-test table's crop lines, written as the rows come.
struct Lines<'p> {
    plant: &'p Plant,
    out: String,
    failed: Option<std::fmt::Error>,
}

impl BacktestSink for Lines<'_> {
    fn crop(&mut self, r: CropRow) -> ControlFlow<()> {
        let line = writeln!(
            self.out,
            "{:<7} {:<17} {:>9.0} {:>9.0} {:>9.0} {:>7.2} {:>7.2} {:<7}",
            r.cell,
            self.plant.show_time(r.harvested_at),
            r.weighed_kg,
            r.predicted_kg,
            r.fixed_kg,
            r.error_pct,
            r.fixed_error_pct,
            r.cathode_efficiency_source.name()
        );
        match line {
            Ok(()) => ControlFlow::Continue(()),
            Err(e) => {
                self.failed = Some(e);
                ControlFlow::Break(())
            }
        }
    }

    fn scrap(&mut self, _: ScrapRow) -> ControlFlow<()> {
        ControlFlow::Continue(())
    }
}

/// `backtest --json`: the same bytes as the whole `Backtest` pretty-printed
/// (schema, from, to, crops, scrap, summary), the crops written as they are
/// made; only the scrap rows (after them) are held until the crops are done.
fn backtest_json(plant: &Plant, from: Time, to: Time, cell: Option<&str>) -> Result<()> {
    use serde::ser::{SerializeStruct, Serializer};
    use std::io::ErrorKind::BrokenPipe;
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    let crops = CropStream { plant, from, to, cell, scrap: RefCell::new(Vec::new()), summary: Cell::new(None), failed: RefCell::new(None) };
    let written = (|| -> std::result::Result<(), serde_json::Error> {
        let mut ser = serde_json::Serializer::pretty(&mut out);
        let mut st = (&mut ser).serialize_struct("Backtest", 6)?;
        st.serialize_field("schema", &1u32)?;
        st.serialize_field("from", &from)?;
        st.serialize_field("to", &to)?;
        st.serialize_field("crops", &crops)?;
        st.serialize_field("scrap", &*crops.scrap.borrow())?;
        st.serialize_field("summary", &crops.summary.get())?;
        st.end()
    })();
    if let Some(e) = crops.failed.take() {
        return Err(e.into());
    }
    match written {
        Err(e) if e.io_error_kind() == Some(BrokenPipe) => return Ok(()),
        r => r?,
    }
    match out.write_all(b"\n").and_then(|()| out.flush()) {
        Err(e) if e.kind() == BrokenPipe => Ok(()),
        r => Ok(r?),
    }
}

/// The back-test's crops as a JSON array, made while it is written: the
/// back-test runs inside its serialisation, keeping the scrap rows and the
/// summary for the fields after it (or why it failed).
struct CropStream<'p> {
    plant: &'p Plant,
    from: Time,
    to: Time,
    cell: Option<&'p str>,
    scrap: RefCell<Vec<ScrapRow>>,
    summary: Cell<Option<Summary>>,
    failed: RefCell<Option<PlantError>>,
}

impl serde::Serialize for CropStream<'_> {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        use serde::ser::{Error, SerializeSeq};
        let mut sink = SeqSink { seq: s.serialize_seq(None)?, failed: None, scrap: Vec::new() };
        match self.plant.backtest_each(self.from, self.to, self.cell, &mut sink) {
            Ok(summary) => self.summary.set(Some(summary)),
            Err(e) => {
                let said = S::Error::custom(format!("the back-test failed: {e}"));
                *self.failed.borrow_mut() = Some(e);
                return Err(said);
            }
        }
        if let Some(e) = sink.failed {
            return Err(e);
        }
        *self.scrap.borrow_mut() = sink.scrap;
        sink.seq.end()
    }
}

/// Each crop row written into the array as it comes; the scrap rows kept.
struct SeqSink<Q: serde::ser::SerializeSeq> {
    seq: Q,
    failed: Option<Q::Error>,
    scrap: Vec<ScrapRow>,
}

impl<Q: serde::ser::SerializeSeq> BacktestSink for SeqSink<Q> {
    fn crop(&mut self, r: CropRow) -> ControlFlow<()> {
        match self.seq.serialize_element(&r) {
            Ok(()) => ControlFlow::Continue(()),
            Err(e) => {
                self.failed = Some(e);
                ControlFlow::Break(())
            }
        }
    }

    fn scrap(&mut self, r: ScrapRow) -> ControlFlow<()> {
        self.scrap.push(r);
        ControlFlow::Continue(())
    }
}
