//! A circuit's charge curve for a plan: the valid readings over the plan's span
//! held in memory, answering exactly as [`StoreCurve`] does without a query per look-up.

use rusqlite::{OptionalExtension, params};

use super::readings::StoreCurve;
use super::{Db, Result, StoreError, secs, time};
use crate::domain::charge::{Around, Cum, Curve, Point, Span, Time, cum_from, time_from};

fn point(r: &rusqlite::Row<'_>) -> rusqlite::Result<Point> {
    Ok(Point { t: time(r.get(0)?)?, amps: r.get(1)?, cum_ah: r.get(2)? })
}

impl Db<'_> {
    /// The valid readings of a circuit from the last one at or before `from`
    /// (or the first one, if none is) up to `as_of`, in time order.
    pub fn valid_readings_from(&self, circuit_id: i64, from: Time, as_of: Time) -> Result<Vec<Point>> {
        let mut st = self.c.prepare_cached(
            "SELECT t, amps, cum_ah FROM reading WHERE circuit_id = ?1 AND valid = 1 AND t <= ?2 ORDER BY t DESC LIMIT 1",
        )?;
        let start: Option<Point> = st.query_row(params![circuit_id, secs(from.min(as_of))], point).optional()?;
        let lo = start.map_or(i64::MIN, |p| secs(p.t));
        let mut st = self
            .c
            .prepare_cached("SELECT t, amps, cum_ah FROM reading WHERE circuit_id = ?1 AND valid = 1 AND t >= ?2 AND t <= ?3 ORDER BY t")?;
        let rows = st.query_map(params![circuit_id, lo, secs(as_of)], point)?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }
}

/// [`StoreCurve`] with the readings from a given instant on in memory. A
/// look-up inside them is answered from memory with the same two readings
/// the store's queries would find (so the same arithmetic and the same
/// figures); one before them is passed to the store's curve.
///
/// Why the answers are the same: the readings held are every valid reading
/// from the first one held to the last one the store's curve uses, so the
/// last reading at or before an instant and the one after it are the
/// neighbours in the slice; the cumulative charge never decreases (amps are
/// never negative, `check` verifies it; a slice that does decrease is not
/// used), so the first reading by charge that reaches a total above the
/// first held one's charge is found by a binary search over the slice, and
/// no earlier reading reaches it.
pub struct PlanCurve<'c> {
    store: StoreCurve<'c>,
    outages: Vec<Span>,
    last: Option<Point>,
    points: Vec<Point>,
}

impl<'c> PlanCurve<'c> {
    /// The curve of circuit `circuit_id` as of `as_of`, with the readings
    /// from the last one at or before `from` in memory.
    pub fn new(db: Db<'c>, circuit_id: i64, from: Time, as_of: Time) -> Result<Self> {
        let store = StoreCurve::new(db, circuit_id, as_of)?;
        let outages = db.outages(circuit_id)?;
        let last = store.last_reading();
        let mut points = db.valid_readings_from(circuit_id, from, as_of)?;
        let rising = points.windows(2).all(|w| w[1].cum_ah >= w[0].cum_ah);
        if !rising || points.last().copied() != last {
            points.clear();
        }
        Ok(PlanCurve { store, outages, last, points })
    }
}

impl Curve for PlanCurve<'_> {
    type Error = StoreError;

    fn cum_at(&self, t: Time) -> Result<Cum> {
        let (Some(last), Some(first)) = (self.last, self.points.first()) else {
            return self.store.cum_at(t);
        };
        if t < first.t {
            return self.store.cum_at(t);
        }
        let around = if t >= last.t {
            Around::AfterLast(last)
        } else {
            // first.t <= t < last.t: both neighbours are held
            let i = self.points.partition_point(|p| p.t <= t);
            match (i.checked_sub(1).and_then(|j| self.points.get(j)), self.points.get(i)) {
                (Some(p0), Some(p1)) => Around::Between(*p0, *p1),
                _ => return self.store.cum_at(t),
            }
        };
        Ok(cum_from(around, t, &self.outages, self.store.projection()))
    }

    fn time_at(&self, total: f64) -> Result<Option<Time>> {
        let (Some(last), Some(first)) = (self.last, self.points.first()) else {
            return self.store.time_at(total);
        };
        if total > last.cum_ah || total <= first.cum_ah {
            // beyond the last reading the store's curve needs no query either
            return self.store.time_at(total);
        }
        let i = self.points.partition_point(|p| p.cum_ah < total);
        match (i.checked_sub(1).and_then(|j| self.points.get(j)), self.points.get(i)) {
            (Some(p0), Some(p1)) => Ok(time_from(Some((Some(*p0), *p1)), self.last, total, &self.outages, self.store.projection())),
            _ => self.store.time_at(total),
        }
    }
}
