//! The forecast of every cell as of a time, with the circuits' data warnings.

use chrono::Duration;
use std::collections::HashMap;

use super::{Plant, PlantError, Result};
use crate::domain::charge::{GAP_WARNING, Time};
use crate::domain::entry::Field;
use crate::domain::forecast::{CellInput, Forecast, Warning, forecast_cell};
use crate::domain::plant_time::{relative, span_text};
use crate::store::{Db, StoreCurve};

/// How far back the forecast looks for reading gaps and stray readings.
const WARNING_LOOKBACK: Duration = Duration::days(30);

impl Plant {
    /// Forecasts every cell (or one) as of `as_of`; nothing after `as_of` is used.
    pub fn forecast(&self, as_of: Time, only_cell: Option<&str>) -> Result<Forecast> {
        self.refuse_damage()?;
        let db = self.store.db();
        db.plant_info()?.ok_or(PlantError::NoLayout)?;
        let mut cells = db.cells()?;
        if let Some(id) = only_cell {
            cells.retain(|c| c.id == id);
            if cells.is_empty() {
                return Err(PlantError::rejected(Field::Cell, format!("unknown cell {id}: it is not in the layout")));
            }
        }
        let params = db.params_at_all(as_of)?;
        let mut curves: HashMap<i64, StoreCurve<'_>> = HashMap::new();
        let mut warnings = Vec::new();
        for c in db.circuits()? {
            if !cells.iter().any(|x| x.circuit_id == c.id) {
                continue;
            }
            let curve = StoreCurve::new(db, c.id, as_of)?;
            warnings.extend(circuit_warnings(db, &c.name, c.id, &curve, as_of)?);
            curves.insert(c.id, curve);
        }
        let mut out = Vec::with_capacity(cells.len());
        for c in &cells {
            let Some(p) = params.get(&c.id) else { continue };
            let crop_started = db.crop_at(&c.id, as_of)?;
            let input = CellInput {
                cell: c.id.clone(),
                circuit: c.circuit.clone(),
                section: c.section.clone(),
                params: p.clone(),
                load: db.load_at(&c.id, as_of)?.map(|(_, t, n, kg)| (t, n, kg)),
                crop_started,
                cutouts: db.cutouts(&c.id, as_of)?,
                last_crop_efficiency: db.last_crop_efficiency(&c.id, as_of)?,
                last_voltage: db.last_voltage(&c.id, as_of)?,
                shorts: match crop_started {
                    Some(s) => db.shorts_since(&c.id, s, as_of)?,
                    None => None,
                },
            };
            let Some(curve) = curves.get(&c.circuit_id) else { continue };
            out.push(forecast_cell(&input, curve, as_of)?);
        }
        Ok(Forecast { schema: 1, as_of, cells: out, warnings })
    }
}

/// The circuits' data warnings, each with its time on the plant clock and its
/// age, so a gap of weeks ago is not read as news.
fn circuit_warnings(db: Db<'_>, name: &str, id: i64, curve: &StoreCurve<'_>, as_of: Time) -> Result<Vec<Warning>> {
    let w = |code, message: String, from, to| Warning { code, message, cell: None, circuit: Some(name.to_string()), from, to };
    let zone = db.plant_info()?.ok_or(PlantError::NoLayout)?.days.zone;
    let at = |t: Time| zone.local(t).format("%m-%d %H:%M").to_string();
    let since = as_of - WARNING_LOOKBACK;
    let mut v = Vec::new();
    for g in db.reading_gaps(id, since, as_of)? {
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
    for (t, a) in db.live_readings_in_outages(id, since, as_of)? {
        v.push(w(
            "reading_in_outage",
            format!("a reading of {a} A on {name} at {} ({}) falls inside a logged outage; it was ignored", at(t), relative(t, as_of)),
            Some(t),
            None,
        ));
    }
    match curve.last_reading() {
        None => v.push(w("no_readings", format!("no current readings for {name}: charge is estimated from setpoints only"), None, None)),
        Some(p) if as_of - p.t > GAP_WARNING => {
            let est = curve.projection().base_amps;
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
