//! The forecast of every cell as of a time, with the circuits' data warnings.
//!
//! It reads the plant in a few statements (one per table for all cells, see
//! `store/snapshot.rs`) inside one read transaction, and each circuit's curve
//! once, with the span its cells need in memory (`store/curve_slice.rs`): no
//! part of it grows with the length of the history.

use chrono::Duration;
use std::collections::HashMap;

use super::patrol::patrol_input;
use super::{Plant, PlantError, Result, learn};
use crate::domain::charge::{Curve, GAP_WARNING, Point, Projection, Time};
use crate::domain::entry::Field;
use crate::domain::forecast::{CellInput, Forecast, Warning, forecast_cell};
use crate::domain::learn::CellLearnt;
use crate::domain::patrol::{PatrolCell, SUSPECT_SCORE, rank};
use crate::domain::plant_time::{PlantZone, relative, span_text};
use crate::store::{Db, LearnRow, SliceCurve, StoreCurve, StoreError, WeighingKind};

/// How far back the forecast looks for reading gaps and stray readings.
const WARNING_LOOKBACK: Duration = Duration::days(30);

impl Plant {
    /// Forecasts every cell (or one) as of `as_of`; nothing after `as_of` is used.
    pub fn forecast(&self, as_of: Time, only_cell: Option<&str>) -> Result<Forecast> {
        self.forecast_learnt_at(as_of, only_cell, as_of)
    }

    /// [`Plant::forecast`] as of `as_of`, with the efficiencies learnt from the
    /// weighings up to `learnt_at` instead: the copper balance holds both ends
    /// of its period at the efficiencies learnt by its end.
    pub(crate) fn forecast_learnt_at(&self, as_of: Time, only_cell: Option<&str>, learnt_at: Time) -> Result<Forecast> {
        self.forecast_cells(as_of, only_cell.as_ref().map(std::slice::from_ref), learnt_at)
    }

    /// The forecast of the cells in `only` (all if `None`): the screens' refresh after an entry (plant/refresh.rs).
    pub(crate) fn forecast_cells(&self, as_of: Time, only: Option<&[&str]>, learnt_at: Time) -> Result<Forecast> {
        self.refuse_damage()?;
        self.store.read(|db| {
            let cells = snapshots_learnt_at(db, as_of, only, learnt_at)?;
            let curves = slice_curves(db, &cells, as_of)?;
            forecast_of(db, &cells, &curves, as_of)
        })
    }
}

/// [`Plant::forecast`] the way it was computed before the batched reads: each
/// cell's state by its own queries and each charge looked up in the database.
/// The reference the fast path is tested against.
#[cfg(test)]
pub(crate) fn forecast_by_cell(db: Db<'_>, as_of: Time) -> Result<Forecast> {
    let cells = snapshots_by_cell(db, as_of, None, as_of)?;
    let mut curves = HashMap::new();
    for c in db.circuits()? {
        if cells.iter().any(|x| x.0 == c.id) {
            curves.insert(c.id, StoreCurve::new(db, c.id, as_of)?);
        }
    }
    forecast_of(db, &cells, &curves, as_of)
}

/// What the forecast needs of a circuit's curve beyond the charge look-ups.
trait CircuitCurve: Curve<Error = StoreError> {
    fn last(&self) -> Option<Point>;
    fn projected(&self) -> &Projection;
}

impl CircuitCurve for SliceCurve<'_> {
    fn last(&self) -> Option<Point> {
        self.last_reading()
    }
    fn projected(&self) -> &Projection {
        self.projection()
    }
}

impl CircuitCurve for StoreCurve<'_> {
    fn last(&self) -> Option<Point> {
        self.last_reading()
    }
    fn projected(&self) -> &Projection {
        self.projection()
    }
}

/// Each circuit's curve with the span its cells' charges are counted over in
/// memory: from the earliest instant a charge of its cells is counted from.
pub(crate) fn slice_curves<'c>(db: Db<'c>, cells: &[(i64, CellInput)], as_of: Time) -> Result<HashMap<i64, SliceCurve<'c>>> {
    slice_curves_read(db, cells, as_of, None)
}

/// [`slice_curves`] with [`SliceCurve::read`]'s choice forced (tests).
fn slice_curves_read<'c>(db: Db<'c>, cells: &[(i64, CellInput)], as_of: Time, whole: Option<bool>) -> Result<HashMap<i64, SliceCurve<'c>>> {
    // per circuit: where its span starts, and every instant a charge is counted from or to
    let mut span: HashMap<i64, (Time, Vec<Time>)> = HashMap::new();
    for (circuit, c) in cells {
        let first = c.charges_from().unwrap_or(as_of);
        let e = span.entry(*circuit).or_insert((first, Vec::new()));
        e.0 = e.0.min(first);
        e.1.extend(c.load.map(|l| l.0).into_iter().chain(c.crop_started));
        e.1.extend(c.cutouts.iter().flat_map(|s| std::iter::once(s.from).chain(s.to)));
    }
    let mut curves = HashMap::with_capacity(span.len());
    for c in db.circuits()? {
        if let Some((from, instants)) = span.get(&c.id) {
            curves.insert(c.id, SliceCurve::read(db, c.id, as_of, *from, instants, whole)?);
        }
    }
    Ok(curves)
}

/// The forecast of `cells` on their circuits' curves, with the circuits' warnings and the suspected shorts.
fn forecast_of<C: CircuitCurve>(db: Db<'_>, cells: &[(i64, CellInput)], curves: &HashMap<i64, C>, as_of: Time) -> Result<Forecast> {
    let zone = db.plant_info()?.ok_or(PlantError::NoLayout)?.days.zone;
    let mut warnings = Vec::new();
    for c in db.circuits()? {
        if let Some(curve) = curves.get(&c.id) {
            warnings.extend(circuit_warnings(db, &zone, &c.name, c.id, curve, as_of)?);
        }
    }
    // suspected shorts for the tiles: the patrol's score without the voltage
    // trend (which needs each crop's readings; `tankbook patrol` adds it)
    let mut patrol = Vec::new();
    for (_, c) in cells {
        patrol.extend(patrol_input(None, c, as_of)?);
    }
    let suspects: HashMap<String, PatrolCell> =
        rank(&patrol).into_iter().filter(|p| p.score >= SUSPECT_SCORE).map(|p| (p.cell.clone(), p)).collect();
    let mut out = Vec::with_capacity(cells.len());
    for (circuit_id, input) in cells {
        let Some(curve) = curves.get(circuit_id) else { continue };
        let mut f = forecast_cell(input, curve, as_of)?;
        if let Some(p) = suspects.get(&input.cell) {
            f.warnings.push(Warning {
                code: "suspected_short",
                message: format!("suspected short (patrol score {:.1}): {}", p.score, p.reasons.join("; ")),
                cell: Some(input.cell.clone()),
                circuit: None,
                from: Some(p.voltage_at),
                to: None,
            });
        }
        out.push(f);
    }
    Ok(Forecast { schema: 1, as_of, cells: out, warnings })
}

/// Every cell (or one) as of `as_of`, with its circuit's id: the one place the
/// forecast, the plan and the patrol get a cell's data from, learnt values included.
pub(crate) fn snapshots(db: Db<'_>, as_of: Time, only_cell: Option<&str>) -> Result<Vec<(i64, CellInput)>> {
    snapshots_learnt_at(db, as_of, only_cell.as_ref().map(std::slice::from_ref), as_of)
}

/// The cells of the layout (or the one asked for), their parameters and
/// learnt values at `as_of` (learnt from the weighings up to `learnt_at`), and
/// the sentences for their recent weighings left out of learning.
struct Common {
    cells: Vec<crate::store::CellRow>,
    params: HashMap<String, crate::domain::layout::CellParams>,
    learnt: HashMap<String, CellLearnt>,
    left_out: HashMap<String, Vec<String>>,
}

fn common(db: Db<'_>, as_of: Time, only: Option<&[&str]>, learnt_at: Time) -> Result<Common> {
    let info = db.plant_info()?.ok_or(PlantError::NoLayout)?;
    let mut cells = db.cells()?;
    if let Some(ids) = only {
        cells.retain(|c| ids.contains(&c.id.as_str()));
        if cells.is_empty() {
            return Err(PlantError::rejected(Field::Cell, format!("unknown cell {}: it is not in the layout", ids.join(", "))));
        }
    }
    let params = db.params_at_all(as_of)?;
    let learnt = learn::learnt_as_of(db, &cells, &params, learnt_at)?;
    let mut left_out: HashMap<String, Vec<String>> = HashMap::new();
    for r in db.left_out_rows(as_of - WARNING_LOOKBACK, as_of)? {
        left_out.entry(r.cell.clone()).or_default().push(left_out_sentence(&r, &info.days.zone));
    }
    Ok(Common { cells, params, learnt, left_out })
}

fn left_out_sentence(r: &LearnRow, zone: &PlantZone) -> String {
    let what = match r.kind {
        WeighingKind::Crop => "the crop weighed at",
        WeighingKind::Scrap => "the scrap weighed at",
    };
    let why = match r.left_out.as_deref() {
        Some("impossible") => "is impossible".to_string(),
        _ => format!("is far out of line with the cell's other weighings (robust z {:.1})", r.z.unwrap_or(f64::NAN)),
    };
    let value = match r.kind {
        WeighingKind::Crop => format!("{:.1} % efficiency", r.value * 100.0),
        WeighingKind::Scrap => format!("anode factor {:.3}", r.value),
    };
    format!("{what} {} ({value}) {why}: it is kept in the log but not learnt from", zone.show(r.ended_at))
}

/// [`snapshots`] with the values learnt from the weighings up to `learnt_at`:
/// every cell's state from the batched reads ([`Db::cell_states`]).
fn snapshots_learnt_at(db: Db<'_>, as_of: Time, only: Option<&[&str]>, learnt_at: Time) -> Result<Vec<(i64, CellInput)>> {
    let Common { cells, params, mut learnt, mut left_out } = common(db, as_of, only, learnt_at)?;
    let inert = |id: &str| params.get(id).is_some_and(|p| p.anode_kind == crate::domain::layout::AnodeKind::Inert);
    let mut states = db.cell_states(as_of, only, inert)?;
    let mut out = Vec::with_capacity(cells.len());
    for c in cells {
        let Some(p) = params.get(&c.id) else { continue };
        let s = states.remove(&c.id).unwrap_or_default();
        let input = CellInput {
            load: s.load,
            crop_started: s.crop_started,
            cutouts: s.cutouts,
            last_crop_efficiency: s.last_crop_efficiency,
            last_voltage: s.last_voltage,
            shorts: s.shorts,
            learnt: learnt.remove(&c.id).unwrap_or_else(|| CellLearnt::layout(p)),
            left_out: left_out.remove(&c.id).unwrap_or_default(),
            params: p.clone(),
            cell: c.id,
            circuit: c.circuit,
            section: c.section,
        };
        out.push((c.circuit_id, input));
    }
    Ok(out)
}

/// [`snapshots_learnt_at`] as it was computed before the batched reads: each
/// cell's state by its own queries, with every cut-out it ever had (the reference the tests compare with).
#[cfg(test)]
pub(crate) fn snapshots_by_cell(db: Db<'_>, as_of: Time, only_cell: Option<&str>, learnt_at: Time) -> Result<Vec<(i64, CellInput)>> {
    let Common { cells, params, mut learnt, mut left_out } = common(db, as_of, only_cell.as_ref().map(std::slice::from_ref), learnt_at)?;
    let mut out = Vec::with_capacity(cells.len());
    for c in cells {
        let Some(p) = params.get(&c.id) else { continue };
        let crop_started = db.crop_at(&c.id, as_of)?;
        let input = CellInput {
            load: db.load_at(&c.id, as_of)?.map(|(_, t, n, kg)| (t, n, kg)),
            crop_started,
            cutouts: db.cutouts(&c.id, as_of)?,
            last_crop_efficiency: db.last_crop_efficiency(&c.id, as_of)?,
            last_voltage: db.last_voltage(&c.id, as_of)?,
            shorts: match crop_started {
                Some(s) => db.shorts_since(&c.id, s, as_of)?,
                None => None,
            },
            learnt: learnt.remove(&c.id).unwrap_or_else(|| CellLearnt::layout(p)),
            left_out: left_out.remove(&c.id).unwrap_or_default(),
            params: p.clone(),
            cell: c.id,
            circuit: c.circuit,
            section: c.section,
        };
        out.push((c.circuit_id, input));
    }
    Ok(out)
}

/// The circuits' data warnings, each with its time on the plant clock and its
/// age, so a gap of weeks ago is not read as news.
fn circuit_warnings<C: CircuitCurve>(db: Db<'_>, zone: &PlantZone, name: &str, id: i64, curve: &C, as_of: Time) -> Result<Vec<Warning>> {
    let w = |code, message: String, from, to| Warning { code, message, cell: None, circuit: Some(name.to_string()), from, to };
    let at = |t: Time| zone.local(t).format("%m-%d %H:%M").to_string();
    let since = as_of - WARNING_LOOKBACK;
    let mut v = Vec::new();
    for g in db.flagged_gaps(id, since, as_of)? {
        v.push(w(
            "reading_gap",
            format!(
                "no current readings on {name} for {}, {} to {} ({}), and no outage logged for it",
                span_text(g.to - g.from),
                at(g.from),
                at(g.to),
                relative(g.to, as_of)
            ),
            Some(g.from),
            Some(g.to),
        ));
    }
    for (t, a) in db.flagged_live_in_outages(id, since, as_of)? {
        v.push(w(
            "reading_in_outage",
            format!("a reading of {a} A on {name} at {} ({}) falls inside a logged outage; it was ignored", at(t), relative(t, as_of)),
            Some(t),
            None,
        ));
    }
    match curve.last() {
        None => v.push(w("no_readings", format!("no current readings for {name}: charge is estimated from setpoints only"), None, None)),
        Some(p) if as_of - p.t > GAP_WARNING => {
            let est = curve.projected().base_amps;
            v.push(w(
                "stale_readings",
                format!(
                    "last reading on {name} is {} old ({}): charge since then is estimated at {est:.0} A",
                    span_text(as_of - p.t),
                    at(p.t)
                ),
                Some(p.t),
                Some(as_of),
            ));
        }
        Some(_) => {}
    }
    Ok(v)
}

#[cfg(test)]
#[path = "forecast_tests.rs"]
mod tests;
