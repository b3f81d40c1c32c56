//! A circuit's charge curve with the span a forecast needs held in memory: the
//! valid readings from just before the earliest instant asked about to `as_of`,
//! read in one range query, and looked up by binary search for every cell of the
//! circuit. When that span holds many more readings than the instants the
//! forecast will ask about (minute readings), only the two readings around each
//! of those instants are read instead, all in one statement.
//!
//! It answers exactly what [`StoreCurve`] answers (same points, same
//! arithmetic); an instant before the span, or a charge reached before it, is
//! asked of the [`StoreCurve`] it wraps. The charge never falls (amps are
//! checked to be ≥ 0 on import), so the first reading reaching a charge is found
//! by bisection on the cumulative charge, as `StoreCurve` finds it by time.

use chrono::Duration;
use rusqlite::params;
use std::collections::HashMap;

use super::readings::StoreCurve;
use super::{Db, Result, StoreError, secs, time};
use crate::domain::charge::{Around, Cum, Curve, Point, Projection, Time, cum_from, time_from};

/// The longest span held in memory: a load set longer ago than this (a cell
/// left idle for months) is looked up in the database instead, so the slice
/// stays small whatever the history.
pub const SLICE_SPAN: Duration = Duration::days(60);

/// The span is read whole when it holds at most this many readings per instant
/// asked about (else the readings around each instant are read).
const WHOLE_SPAN_PER_INSTANT: usize = 8;

/// A circuit's curve as of `as_of`, with `[from, as_of]` in memory.
pub struct SliceCurve<'c> {
    store: StoreCurve<'c>,
    /// Every valid reading in the span, oldest first; the first is the last
    /// valid reading at or before the span's start (when there is one).
    points: Vec<Point>,
    /// Whether the first point is a reading at or before the start: instants
    /// from it on are answered from memory.
    covered: bool,
    /// When the span is not read whole: the readings around each instant asked about.
    around: HashMap<Time, Around>,
}

impl<'c> SliceCurve<'c> {
    /// The curve of `circuit_id` as of `as_of`, with the readings from the last
    /// valid one at or before `from` (no earlier than [`SLICE_SPAN`] before
    /// `as_of`) in memory, or those around each of `instants` when the span holds
    /// many more readings than there are instants.
    pub fn new(db: Db<'c>, circuit_id: i64, as_of: Time, from: Time, instants: &[Time]) -> Result<Self> {
        Self::read(db, circuit_id, as_of, from, instants, None)
    }

    /// The curve with every valid reading of the span in memory (from the last
    /// one at or before `from`, no earlier than [`SLICE_SPAN`] before `as_of`):
    /// for the plan, which cannot list beforehand the instants it will ask about.
    pub fn whole(db: Db<'c>, circuit_id: i64, as_of: Time, from: Time) -> Result<Self> {
        Self::read(db, circuit_id, as_of, from, &[], Some(true))
    }

    /// [`SliceCurve::new`], with the choice between the whole span (`Some(true)`)
    /// and the readings around the instants (`Some(false)`) forced (for tests).
    pub fn read(db: Db<'c>, circuit_id: i64, as_of: Time, from: Time, instants: &[Time], whole: Option<bool>) -> Result<Self> {
        let store = StoreCurve::new(db, circuit_id, as_of)?;
        let from = from.max(as_of - SLICE_SPAN).min(as_of);
        let mut curve = SliceCurve { store, points: Vec::new(), covered: false, around: HashMap::new() };
        let Some(last) = curve.store.last_reading() else { return Ok(curve) };
        // the readings of the last day tell how densely the span is read
        let day: i64 =
            db.c.prepare_cached("SELECT count(*) FROM reading WHERE circuit_id = ?1 AND t > ?2 AND t <= ?3")?
                .query_row(params![circuit_id, secs(last.t - Duration::days(1)), secs(last.t)], |r| r.get(0))?;
        let days = (as_of - from).num_seconds() as f64 / 86_400.0;
        let span = (day.max(1) as f64 * days.max(1.0)).ceil() as usize;
        let mut wanted: Vec<i64> = instants.iter().filter(|t| **t >= from && **t < last.t).map(|t| secs(*t)).collect();
        wanted.sort_unstable();
        wanted.dedup();
        if whole.unwrap_or(span <= WHOLE_SPAN_PER_INSTANT * wanted.len().max(1)) {
            let mut st = db.c.prepare_cached(
                "SELECT t, amps, cum_ah FROM reading WHERE circuit_id = ?1 AND valid = 1 AND t <= ?3 AND t >= coalesce(
                     (SELECT max(t) FROM reading WHERE circuit_id = ?1 AND valid = 1 AND t <= ?2), ?2) ORDER BY t",
            )?;
            curve.points = st
                .query_map(params![circuit_id, secs(from), secs(as_of)], |r| {
                    Ok(Point { t: time(r.get(0)?)?, amps: r.get(1)?, cum_ah: r.get(2)? })
                })?
                .collect::<rusqlite::Result<_>>()?;
            curve.covered = curve.points.first().is_some_and(|p| p.t <= from);
            return Ok(curve);
        }
        // the two valid readings around each instant: what StoreCurve looks up for it
        let list = format!("[{}]", wanted.iter().map(|t| t.to_string()).collect::<Vec<_>>().join(","));
        let mut st = db.c.prepare_cached(
            "WITH q AS (SELECT j.value AS x, (SELECT r.t FROM reading r WHERE r.circuit_id = ?1 AND r.valid = 1 AND r.t <= j.value
                 ORDER BY r.t DESC LIMIT 1) AS t0 FROM json_each(?2) j)
             SELECT q.x, a.t, a.amps, a.cum_ah, b.t, b.amps, b.cum_ah FROM q
             LEFT JOIN reading a ON a.circuit_id = ?1 AND a.t = q.t0
             LEFT JOIN reading b ON b.circuit_id = ?1 AND b.t = (SELECT r.t FROM reading r WHERE r.circuit_id = ?1 AND r.valid = 1
                 AND r.t > q.t0 AND r.t <= ?3 ORDER BY r.t LIMIT 1)",
        )?;
        let mut rows = st.query(params![circuit_id, list, secs(as_of)])?;
        while let Some(r) = rows.next()? {
            let point = |i: usize| -> rusqlite::Result<Option<Point>> {
                Ok(match r.get::<_, Option<i64>>(i)? {
                    Some(t) => Some(Point { t: time(t)?, amps: r.get(i + 1)?, cum_ah: r.get(i + 2)? }),
                    None => None,
                })
            };
            let around = match (point(1)?, point(4)?) {
                (None, _) => Around::BeforeFirst,
                (Some(p0), Some(p1)) => Around::Between(p0, p1),
                (Some(p0), None) => Around::AfterLast(p0),
            };
            curve.around.insert(time(r.get(0)?)?, around);
        }
        Ok(curve)
    }

    /// The last valid reading the curve uses.
    pub fn last_reading(&self) -> Option<Point> {
        self.store.last_reading()
    }

    pub fn projection(&self) -> &Projection {
        self.store.projection()
    }

    fn outages(&self) -> &[crate::domain::charge::Span] {
        &self.store.projection().outages
    }
}

impl Curve for SliceCurve<'_> {
    type Error = StoreError;

    fn cum_at(&self, t: Time) -> Result<Cum> {
        let Some(last) = self.store.last_reading() else { return self.store.cum_at(t) };
        if let Some(a) = self.around.get(&t).filter(|_| t < last.t) {
            return Ok(cum_from(*a, t, self.outages(), self.projection()));
        }
        if !(self.covered && self.points.first().is_some_and(|p| t >= p.t) && t < last.t) {
            return self.store.cum_at(t);
        }
        // t lies in [points[0].t, last.t): a point at or before it and one after it are both held
        let i = self.points.partition_point(|p| p.t <= t);
        match (i.checked_sub(1).and_then(|j| self.points.get(j)), self.points.get(i)) {
            (Some(p0), Some(p1)) => Ok(cum_from(Around::Between(*p0, *p1), t, self.outages(), self.projection())),
            _ => self.store.cum_at(t),
        }
    }

    fn time_at(&self, total: f64) -> Result<Option<Time>> {
        let last = self.store.last_reading();
        // beyond the last reading's charge: the projection answers
        if last.is_some_and(|l| total > l.cum_ah) {
            return Ok(time_from(None, last, total, self.outages(), self.projection()));
        }
        match self.points.first() {
            // the first reading reaching `total` lies after the first point held: both it and its predecessor are held
            Some(p) if self.covered && total > p.cum_ah => {
                let i = self.points.partition_point(|p| p.cum_ah < total);
                match (i.checked_sub(1).and_then(|j| self.points.get(j)), self.points.get(i)) {
                    (Some(p0), Some(p1)) => Ok(time_from(Some((Some(*p0), *p1)), last, total, self.outages(), self.projection())),
                    _ => self.store.time_at(total),
                }
            }
            _ => self.store.time_at(total),
        }
    }
}
