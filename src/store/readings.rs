//! Rectifier readings with their cumulative charge, and the store's [`Curve`]:
//! the two readings around an instant are looked up, never the whole history.

use rusqlite::{OptionalExtension, params};

use super::{Db, Result, StoreError, secs, time};
use crate::domain::charge::{
    Around, Cum, Curve, MEAN_WINDOW, Point, Projection, RawReading, Span, Time, accumulate, cum_from, mean_in_service_amps, time_from,
    union,
};
use crate::domain::history::EventKind;

/// Readings inserted by one statement run (6 values each, within SQLite's 32 766 variables).
const ROWS_PER_INSERT: usize = 64;

fn point(r: &rusqlite::Row<'_>) -> rusqlite::Result<Point> {
    Ok(Point { t: time(r.get(0)?)?, amps: r.get(1)?, cum_ah: r.get(2)? })
}

impl Db<'_> {
    /// The stored current at this circuit and instant, if any.
    pub fn reading_at(&self, circuit_id: i64, t: Time) -> Result<Option<f64>> {
        let mut st = self.c.prepare_cached("SELECT amps FROM reading WHERE circuit_id = ?1 AND t = ?2")?;
        Ok(st.query_row(params![circuit_id, secs(t)], |r| r.get(0)).optional()?)
    }

    /// Adds new readings (the caller has skipped duplicates and rejected
    /// conflicts) and recomputes the cumulative charge from the earliest of them.
    pub fn add_readings(&self, circuit_id: i64, rows: &[RawReading]) -> Result<()> {
        let Some(first) = rows.iter().map(|r| r.t).min() else {
            return Ok(());
        };
        let mut st =
            self.c.prepare_cached("INSERT INTO reading(circuit_id, t, amps, cum_ah, valid, gap_before) VALUES (?1, ?2, ?3, 0, 1, 0)")?;
        for r in rows {
            st.execute(params![circuit_id, super::storable(r.t)?, r.amps])?;
        }
        self.recompute_charge(circuit_id, first)
    }

    /// The time of the circuit's latest stored reading (valid or not), if any.
    pub fn last_reading_time(&self, circuit_id: i64) -> Result<Option<Time>> {
        let mut st = self.c.prepare_cached("SELECT max(t) FROM reading WHERE circuit_id = ?1")?;
        let s: Option<i64> = st.query_row(params![circuit_id], |r| r.get(0))?;
        Ok(super::opt_time(s)?)
    }

    /// The circuit's last valid reading before `t` (where an appended run of readings continues the charge from).
    pub fn valid_reading_before(&self, circuit_id: i64, t: Time) -> Result<Option<Point>> {
        self.valid_before(circuit_id, t)
    }

    /// Appends readings that all lie after every stored reading of the circuit,
    /// in time order, continuing the cumulative charge from `prev` (the last
    /// valid reading before them): one prepared statement, no second pass.
    /// Returns the last valid point, where the next run continues from.
    pub fn append_readings(&self, circuit_id: i64, prev: Option<Point>, rows: &[RawReading], outages: &[Span]) -> Result<Option<Point>> {
        let all = accumulate(prev, rows, outages);
        // many rows a statement: SQLite's per-statement work, not the rows, was a third of an import
        let mut many = self.c.prepare_cached(&format!(
            "INSERT INTO reading(circuit_id, t, amps, cum_ah, valid, gap_before) VALUES {}",
            vec!["(?, ?, ?, ?, ?, ?)"; ROWS_PER_INSERT].join(", ")
        ))?;
        let mut one =
            self.c.prepare_cached("INSERT INTO reading(circuit_id, t, amps, cum_ah, valid, gap_before) VALUES (?1, ?2, ?3, ?4, ?5, ?6)")?;
        for chunk in all.chunks(ROWS_PER_INSERT) {
            if chunk.len() == ROWS_PER_INSERT {
                for (k, a) in chunk.iter().enumerate() {
                    let i = 6 * k;
                    many.raw_bind_parameter(i + 1, circuit_id)?;
                    many.raw_bind_parameter(i + 2, super::storable(a.t)?)?;
                    many.raw_bind_parameter(i + 3, a.amps)?;
                    many.raw_bind_parameter(i + 4, a.cum_ah)?;
                    many.raw_bind_parameter(i + 5, a.valid)?;
                    many.raw_bind_parameter(i + 6, a.gap_before)?;
                }
                many.raw_execute()?;
            } else {
                for a in chunk {
                    one.execute(params![circuit_id, super::storable(a.t)?, a.amps, a.cum_ah, a.valid, a.gap_before])?;
                }
            }
        }
        Ok(all.iter().rev().find(|a| a.valid).map(|a| Point { t: a.t, amps: a.amps, cum_ah: a.cum_ah }).or(prev))
    }

    /// Recomputes the stored cumulative charge of every reading at or after `from`
    /// (after a back-fill or a newly logged outage), continuing from the last valid reading before it.
    pub fn recompute_charge(&self, circuit_id: i64, from: Time) -> Result<()> {
        let outages = self.outages(circuit_id)?;
        let prev = self
            .c
            .prepare_cached("SELECT t, amps, cum_ah FROM reading WHERE circuit_id = ?1 AND valid = 1 AND t < ?2 ORDER BY t DESC LIMIT 1")?
            .query_row(params![circuit_id, secs(from)], point)
            .optional()?;
        let mut st = self.c.prepare_cached("SELECT t, amps FROM reading WHERE circuit_id = ?1 AND t >= ?2 ORDER BY t")?;
        let later: Vec<RawReading> = st
            .query_map(params![circuit_id, secs(from)], |r| Ok(RawReading { t: time(r.get(0)?)?, amps: r.get(1)? }))?
            .collect::<rusqlite::Result<_>>()?;
        let mut up =
            self.c.prepare_cached("UPDATE reading SET cum_ah = ?3, valid = ?4, gap_before = ?5 WHERE circuit_id = ?1 AND t = ?2")?;
        for a in accumulate(prev, &later, &outages) {
            up.execute(params![circuit_id, secs(a.t), a.cum_ah, a.valid, a.gap_before])?;
        }
        Ok(())
    }

    /// The circuit's live outages, merged.
    pub fn outages(&self, circuit_id: i64) -> Result<Vec<Span>> {
        let mut st = self.c.prepare_cached(
            "SELECT at, end_at FROM event e WHERE circuit_id = ?1 AND kind = ?2 AND end_at IS NOT NULL
             AND NOT EXISTS (SELECT 1 FROM event v WHERE v.voids = e.id)",
        )?;
        let spans: Vec<Span> = st
            .query_map(params![circuit_id, EventKind::Outage.name()], |r| Ok(Span { from: time(r.get(0)?)?, to: time(r.get(1)?)? }))?
            .collect::<rusqlite::Result<_>>()?;
        Ok(union(spans))
    }

    /// The circuit's live setpoints, by time.
    pub fn setpoints(&self, circuit_id: i64) -> Result<Vec<(Time, f64)>> {
        let mut st = self.c.prepare_cached(
            "SELECT at, amps FROM event e WHERE circuit_id = ?1 AND kind = ?2
             AND NOT EXISTS (SELECT 1 FROM event v WHERE v.voids = e.id) ORDER BY at, id",
        )?;
        let v = st.query_map(params![circuit_id, EventKind::Setpoint.name()], |r| Ok((time(r.get(0)?)?, r.get(1)?)))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    fn last_valid(&self, circuit_id: i64, until: Time) -> Result<Option<Point>> {
        let mut st = self.c.prepare_cached(
            "SELECT t, amps, cum_ah FROM reading WHERE circuit_id = ?1 AND valid = 1 AND t <= ?2 ORDER BY t DESC LIMIT 1",
        )?;
        Ok(st.query_row(params![circuit_id, secs(until)], point).optional()?)
    }

    fn first_valid_after(&self, circuit_id: i64, t: Time, until: Time) -> Result<Option<Point>> {
        let mut st = self.c.prepare_cached(
            "SELECT t, amps, cum_ah FROM reading WHERE circuit_id = ?1 AND valid = 1 AND t > ?2 AND t <= ?3 ORDER BY t LIMIT 1",
        )?;
        Ok(st.query_row(params![circuit_id, secs(t), secs(until)], point).optional()?)
    }

    /// The first valid reading whose cumulative charge reaches `cum`, with the
    /// valid reading before it, between the circuit's first and last valid
    /// readings `first` and `last` (as of the curve's instant). The charge never
    /// falls along time on a circuit (amps are ≥ 0; `charge_decreases` counts
    /// violations), so it is found by a search over time on the primary key:
    /// each probe is the last valid reading at or before an instant interpolated
    /// on the charge (halving whenever a guess did not halve the bracket) and its
    /// neighbour on the far side, which ends the search when the two straddle
    /// `cum` (on a near-straight curve, the first probe). The same rows as the
    /// smallest charge ≥ `cum` ordered by time, without an index on the charge
    /// that every import would pay for.
    fn first_reaching(&self, circuit_id: i64, cum: f64, first: Point, last: Point) -> Result<Option<(Option<Point>, Point)>> {
        // NaN reaches nothing, as `cum_ah >= NULL` in SQL
        if cum.is_nan() || last.cum_ah < cum {
            return Ok(None);
        }
        if first.cum_ah >= cum {
            return Ok(Some((None, first)));
        }
        // every valid reading at or before `lo` is below `cum`; `hi` reaches it
        let (mut lo, mut lo_cum, mut hi) = (secs(first.t), first.cum_ah, last);
        let mut interpolate = true;
        while secs(hi.t) - lo > 1 {
            let width = secs(hi.t) - lo;
            let guess = if interpolate {
                let frac = (cum - lo_cum) / (hi.cum_ah - lo_cum);
                lo + (frac * width as f64).ceil() as i64
            } else {
                lo + width / 2
            };
            let mid = guess.clamp(lo + 1, secs(hi.t) - 1);
            let Some(p) = self.last_valid(circuit_id, time(mid)?)? else {
                return Err(StoreError::Corrupt(format!("circuit {circuit_id}: no valid reading at or before {mid} after the first one")));
            };
            if p.cum_ah >= cum {
                match self.valid_before(circuit_id, p.t)? {
                    Some(b) if b.cum_ah >= cum => hi = b,
                    before => return Ok(Some((before, p))),
                }
            } else {
                // `hi` is valid and after `mid`, so a next reading exists
                let Some(n) = self.first_valid_after(circuit_id, p.t, hi.t)? else {
                    return Err(StoreError::Corrupt(format!("circuit {circuit_id}: no valid reading after {mid} before the last one")));
                };
                if n.cum_ah >= cum {
                    return Ok(Some((Some(p), n)));
                }
                (lo, lo_cum) = (secs(n.t), n.cum_ah);
            }
            interpolate = 2 * (secs(hi.t) - lo) <= width;
        }
        Ok(Some((self.valid_before(circuit_id, hi.t)?, hi)))
    }

    fn valid_before(&self, circuit_id: i64, t: Time) -> Result<Option<Point>> {
        let mut st = self
            .c
            .prepare_cached("SELECT t, amps, cum_ah FROM reading WHERE circuit_id = ?1 AND valid = 1 AND t < ?2 ORDER BY t DESC LIMIT 1")?;
        Ok(st.query_row(params![circuit_id, secs(t)], point).optional()?)
    }

    /// Stretches between readings longer than the gap limit and not covered by
    /// an outage, ending after `since` and by `until`.
    pub fn reading_gaps(&self, circuit_id: i64, since: Time, until: Time) -> Result<Vec<Span>> {
        let mut st = self.c.prepare_cached(
            "SELECT t FROM reading WHERE circuit_id = ?1 AND valid = 1 AND gap_before = 1 AND t > ?2 AND t <= ?3 ORDER BY t",
        )?;
        let ends: Vec<Time> =
            st.query_map(params![circuit_id, secs(since), secs(until)], |r| time(r.get(0)?))?.collect::<rusqlite::Result<_>>()?;
        let mut v = Vec::new();
        for end in ends {
            if let Some(p) = self.valid_before(circuit_id, end)? {
                v.push(Span { from: p.t, to: end });
            }
        }
        Ok(v)
    }

    /// Readings inside an outage that showed current, after `since`.
    pub fn live_readings_in_outages(&self, circuit_id: i64, since: Time, until: Time) -> Result<Vec<(Time, f64)>> {
        let mut st = self.c.prepare_cached(
            "SELECT t, amps FROM reading WHERE circuit_id = ?1 AND valid = 0 AND amps > 0 AND t > ?2 AND t <= ?3 ORDER BY t",
        )?;
        let v = st.query_map(params![circuit_id, secs(since), secs(until)], |r| Ok((time(r.get(0)?)?, r.get(1)?)))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// Valid readings of a circuit in `[from, to]` (for charts), thinned to at most `max` points.
    pub fn readings_between(&self, circuit_id: i64, from: Time, to: Time, max: usize) -> Result<Vec<Point>> {
        let n: i64 = self.c.query_row(
            "SELECT count(*) FROM reading WHERE circuit_id = ?1 AND valid = 1 AND t BETWEEN ?2 AND ?3",
            params![circuit_id, secs(from), secs(to)],
            |r| r.get(0),
        )?;
        let step = (n as usize).div_ceil(max.max(1)).max(1) as i64;
        let mut st = self.c.prepare_cached(
            "SELECT t, amps, cum_ah FROM (SELECT t, amps, cum_ah, row_number() OVER (ORDER BY t) AS k FROM reading
             WHERE circuit_id = ?1 AND valid = 1 AND t BETWEEN ?2 AND ?3) WHERE k % ?4 = 0 OR k = 1 ORDER BY t",
        )?;
        let v = st.query_map(params![circuit_id, secs(from), secs(to), step], point)?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// Readings whose cumulative charge goes down (there must be none).
    pub fn charge_decreases(&self) -> Result<i64> {
        Ok(self.c.query_row(
            "SELECT count(*) FROM (SELECT cum_ah, lag(cum_ah) OVER (PARTITION BY circuit_id ORDER BY t) AS prev FROM reading WHERE valid = 1)
             WHERE cum_ah < prev - 1e-6",
            [],
            |r| r.get(0),
        )?)
    }

    pub fn reading_count(&self) -> Result<i64> {
        Ok(self.c.query_row("SELECT count(*) FROM reading", [], |r| r.get(0))?)
    }

    pub fn record_import(&self, source: &str, at: Time, added: usize, skipped: usize) -> Result<()> {
        self.c.execute(
            "INSERT INTO import_batch(imported_at, source, added, skipped) VALUES (?1, ?2, ?3, ?4)",
            params![secs(at), source, added as i64, skipped as i64],
        )?;
        Ok(())
    }
}

/// A circuit's charge curve as of `as_of`, answered from the database.
pub struct StoreCurve<'c> {
    db: Db<'c>,
    circuit_id: i64,
    as_of: Time,
    last: Option<Point>,
    /// The first valid reading (when there is a last one): where a search for a charge starts.
    first: Option<Point>,
    outages: Vec<Span>,
    projection: Projection,
}

impl<'c> StoreCurve<'c> {
    pub fn new(db: Db<'c>, circuit_id: i64, as_of: Time) -> Result<Self> {
        let outages = db.outages(circuit_id)?;
        let setpoints = db.setpoints(circuit_id)?;
        let last = db.last_valid(circuit_id, as_of)?;
        let mut curve = StoreCurve {
            db,
            circuit_id,
            as_of,
            last,
            first: None,
            projection: Projection::new(last, None, &setpoints, outages.clone()),
            outages,
        };
        if let Some(p) = last {
            let a = p.t - MEAN_WINDOW;
            curve.first = db.first_valid_after(circuit_id, chrono::DateTime::<chrono::Utc>::MIN_UTC, as_of)?;
            let a = a.max(curve.first.map_or(a, |f| f.t));
            let cum_a = curve.cum_at(a)?.measured;
            let mean = mean_in_service_amps(a, cum_a, p.t, p.cum_ah, &curve.outages);
            curve.projection = Projection::new(last, mean, &setpoints, curve.outages.clone());
        }
        Ok(curve)
    }

    /// The last valid reading the curve uses.
    pub fn last_reading(&self) -> Option<Point> {
        self.last
    }

    pub fn projection(&self) -> &Projection {
        &self.projection
    }

    fn around(&self, t: Time) -> Result<Around> {
        let Some(last) = self.last else { return Ok(Around::BeforeFirst) };
        if t >= last.t {
            return Ok(Around::AfterLast(last));
        }
        let Some(p0) = self.db.last_valid(self.circuit_id, t)? else {
            return Ok(Around::BeforeFirst);
        };
        match self.db.first_valid_after(self.circuit_id, p0.t, self.as_of)? {
            Some(p1) => Ok(Around::Between(p0, p1)),
            None => Ok(Around::AfterLast(p0)),
        }
    }
}

impl Curve for StoreCurve<'_> {
    type Error = StoreError;
    fn cum_at(&self, t: Time) -> Result<Cum> {
        Ok(cum_from(self.around(t)?, t, &self.outages, &self.projection))
    }
    fn time_at(&self, total: f64) -> Result<Option<Time>> {
        // beyond the last reading's charge no reading reaches it: the projection answers, no query
        if self.last.is_some_and(|l| total > l.cum_ah) {
            return Ok(time_from(None, self.last, total, &self.outages, &self.projection));
        }
        let (Some(first), Some(last)) = (self.first, self.last) else {
            return Ok(time_from(None, self.last, total, &self.outages, &self.projection));
        };
        let hit = self.db.first_reaching(self.circuit_id, total, first, last)?;
        Ok(time_from(hit, self.last, total, &self.outages, &self.projection))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// What 002's `reading_cum` index answered: the smallest charge reaching
    /// `cum`, the earliest of equal ones.
    fn by_charge(db: Db<'_>, cum: f64, until: i64) -> Option<Point> {
        db.c.query_row(
            "SELECT t, amps, cum_ah FROM reading WHERE circuit_id = 1 AND valid = 1 AND cum_ah >= ?1 AND t <= ?2 ORDER BY cum_ah, t LIMIT 1",
            params![cum, until],
            point,
        )
        .optional()
        .unwrap()
    }

    #[test]
    fn the_search_over_time_finds_the_row_the_charge_order_found() {
        let dir = tempfile::tempdir().unwrap();
        let store = super::super::Store::open(&dir.path().join("t.db")).unwrap();
        let db = store.db();
        db.c.execute("INSERT INTO circuit(id, name, max_amps, position) VALUES (1, 'C1', 40000, 0)", []).unwrap();
        // irregular times, stretches of zero current (flat charge), invalid readings (outages)
        let (mut t, mut cum, mut seed) = (1_000_000_i64, 0.0_f64, 7_u64);
        let mut cums = Vec::new();
        db.c.execute_batch("BEGIN").unwrap();
        for _ in 0..3000 {
            seed = seed.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1_442_695_040_888_963_407);
            let r = seed >> 33;
            t += [60, 60, 60, 1, 2, 3600, 7][(r % 7) as usize];
            let amps = if r % 5 == 0 { 0.0 } else { 30000.0 + (r % 300) as f64 };
            let valid = r % 11 != 0;
            if valid {
                cum += amps / 60.0;
                cums.push(cum);
            }
            db.c.execute("INSERT INTO reading VALUES (1, ?1, ?2, ?3, ?4, 0)", params![t, amps, cum, valid]).unwrap();
        }
        db.c.execute_batch("COMMIT").unwrap();
        let all = |sql: &str| db.c.query_row(sql, [], point).unwrap();
        let first = all("SELECT t, amps, cum_ah FROM reading WHERE valid = 1 ORDER BY t LIMIT 1");
        let last = all("SELECT t, amps, cum_ah FROM reading WHERE valid = 1 ORDER BY t DESC LIMIT 1");
        let mut asked = vec![-1.0, 0.0, f64::NAN, f64::INFINITY, f64::NEG_INFINITY, cum + 1.0];
        for c in cums.iter().step_by(7) {
            asked.extend([*c, c - 1e-9, c + 1e-9, c - 0.5, c + 0.5]);
        }
        for x in asked {
            let old = by_charge(db, x, secs(last.t)).map(|p| (db.valid_before(1, p.t).unwrap(), p));
            assert_eq!(db.first_reaching(1, x, first, last).unwrap(), old, "charge {x}");
        }
    }
}
