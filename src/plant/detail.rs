//! What the screens show beyond the forecast: one cell in depth, and each
//! circuit's recent current. Read-only.

use chrono::Duration;
use serde::Serialize;

use super::{Plant, PlantError, Result};
use crate::domain::charge::{Curve, Point, Span, Time};
use crate::domain::entry::Field;
use crate::domain::forecast::CellForecast;
use crate::domain::history::Event;
use crate::domain::layout::CellParams;
use crate::domain::outlook::{Trajectory, trajectory};
use crate::store::StoreCurve;

/// One cell in depth.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CellDetail {
    pub forecast: CellForecast,
    pub params: CellParams,
    /// Measured efficiency of each harvested crop: (harvest time, efficiency, kg).
    pub efficiencies: Vec<(Time, f64, f64)>,
    /// The cell's entries, newest first.
    pub events: Vec<Event>,
    /// Charge and anode mass from the anode set (or crop start) to past the pull due.
    pub trajectory: Option<Trajectory>,
    /// The circuit's last reading: the trajectory is measured up to it, projected after.
    pub last_reading: Option<Time>,
}

/// A circuit's recent current.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CircuitTrend {
    pub name: String,
    pub max_amps: f64,
    pub points: Vec<(Time, f64)>,
    pub outages: Vec<Span>,
    pub gaps: Vec<Span>,
    /// Charge since the production day began (measured, estimated).
    pub today_ah: (f64, f64),
    pub day_start: Time,
    pub last_reading: Option<Point>,
    /// The current the estimate uses after the last reading.
    pub projected_amps: f64,
}

impl Plant {
    /// One cell's forecast, history and trajectory as of `as_of`.
    pub fn cell_detail(&self, cell: &str, as_of: Time) -> Result<CellDetail> {
        let f = self.forecast(as_of, Some(cell))?;
        let forecast = f.cells.into_iter().next().ok_or_else(|| PlantError::rejected(Field::Cell, format!("unknown cell {cell}")))?;
        let db = self.store.db();
        let row = db.cell(cell)?.ok_or_else(|| PlantError::rejected(Field::Cell, format!("unknown cell {cell}")))?;
        let params = db.params_at(cell, as_of)?;
        let curve = StoreCurve::new(db, row.circuit_id, as_of)?;
        let cutouts = db.cutouts(cell, as_of)?;
        let load = db.load_at(cell, as_of)?.map(|(_, t, n, kg)| (t, n, kg));
        let from = load.map(|l| l.0).or(forecast.cathode.as_ref().map(|c| c.started_at));
        let trajectory = match from {
            Some(from) => {
                let due = forecast.anode.as_ref().and_then(|a| a.pull_due).or(forecast.cathode.as_ref().and_then(|c| c.harvest_due));
                let until = due.map_or(as_of + Duration::days(3), |d| d.max(as_of) + Duration::hours(12));
                // the anodes dissolve at the cell's learnt factor, as in the forecast
                let run = CellParams { anode_efficiency: forecast.anode_factor, ..params.clone() };
                Some(trajectory(&curve, &cutouts, &run, load, from, until, 80)?)
            }
            None => None,
        };
        Ok(CellDetail {
            efficiencies: db.crop_efficiencies(cell, as_of)?,
            events: db.recent_events(Some(cell), 30)?,
            last_reading: curve.last_reading().map(|p| p.t),
            forecast,
            params,
            trajectory,
        })
    }

    /// Each circuit's current over the `days` before `as_of`, with outages,
    /// gaps and the charge of the production day so far.
    pub fn rectifiers(&self, as_of: Time, days: i64) -> Result<Vec<CircuitTrend>> {
        let db = self.store.db();
        let info = self.info()?;
        let from = as_of - Duration::days(days);
        let day_start = info.days.start_of(info.days.day_of(as_of));
        let mut out = Vec::new();
        for c in db.circuits()? {
            let curve = StoreCurve::new(db, c.id, as_of)?;
            let (a, b) = (curve.cum_at(day_start)?, curve.cum_at(as_of)?);
            out.push(CircuitTrend {
                points: db.readings_between(c.id, from, as_of, 600)?.into_iter().map(|p| (p.t, p.amps)).collect(),
                outages: db.outages(c.id)?.into_iter().filter(|s| s.to > from).collect(),
                gaps: db.reading_gaps(c.id, from, as_of)?,
                today_ah: (b.measured - a.measured, b.estimated - a.estimated),
                day_start,
                last_reading: curve.last_reading(),
                projected_amps: curve.projection().base_amps,
                name: c.name,
                max_amps: c.max_amps,
            });
        }
        Ok(out)
    }
}
