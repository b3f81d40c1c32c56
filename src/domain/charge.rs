//! Rectifier current → charge: cumulative ampere-hours of a circuit from its
//! readings, outages and cut-outs, and the estimate that fills in after the last reading.
//!
//! Between two readings the current is taken as linear (a trapezoid). Outages and
//! cut-outs are steps: the trapezoid is clipped exactly at their bounds, and
//! overlapping intervals count once. A reading strictly inside an outage is
//! ignored. After the last reading the *projection* (setpoints, else the mean of
//! the last 24 h) supplies an estimate that is always reported apart from what
//! was measured.

use chrono::{DateTime, Duration, Utc};

/// Every instant in tankbook is UTC; the plant's zone matters only at the edges.
pub type Time = DateTime<Utc>;

/// A reading gap longer than this, not covered by an outage, is reported.
pub const GAP_WARNING: Duration = Duration::hours(2);

/// The window over which the future current is averaged when no setpoint applies.
pub const MEAN_WINDOW: Duration = Duration::hours(24);

/// How far ahead a due time is searched before it is called "not in sight".
pub const PROJECTION_HORIZON: Duration = Duration::days(3650);

/// A valid reading with the circuit's cumulative charge up to it.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Point {
    pub t: Time,
    pub amps: f64,
    pub cum_ah: f64,
}

/// A half-open interval `[from, to)`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, serde::Serialize)]
pub struct Span {
    pub from: Time,
    pub to: Time,
}

/// An interval that may still be open (a cut-out not yet closed).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub struct OpenSpan {
    pub from: Time,
    pub to: Option<Time>,
}

/// Hours between two instants (negative if `b` is before `a`).
pub fn hours(a: Time, b: Time) -> f64 {
    (b - a).num_milliseconds() as f64 / 3_600_000.0
}

fn ms(t: Time) -> i64 {
    t.timestamp_millis()
}

fn from_ms(v: i64) -> Time {
    DateTime::from_timestamp_millis(v).unwrap_or(DateTime::<Utc>::MAX_UTC)
}

/// Merge intervals into a sorted list of disjoint, non-empty spans (their union).
pub fn union(spans: impl IntoIterator<Item = Span>) -> Vec<Span> {
    let mut v: Vec<Span> = spans.into_iter().filter(|s| s.to > s.from).collect();
    v.sort();
    let mut out: Vec<Span> = Vec::with_capacity(v.len());
    for s in v {
        match out.last_mut() {
            Some(last) if s.from <= last.to => last.to = last.to.max(s.to),
            _ => out.push(s),
        }
    }
    out
}

/// The parts of `[a, b)` not covered by `off` (sorted, disjoint spans).
pub fn uncovered(a: Time, b: Time, off: &[Span]) -> Vec<Span> {
    let mut out = Vec::new();
    let mut cur = a;
    for s in off {
        if s.to <= cur {
            continue;
        }
        if s.from >= b {
            break;
        }
        if s.from > cur {
            out.push(Span { from: cur, to: s.from });
        }
        cur = cur.max(s.to);
        if cur >= b {
            break;
        }
    }
    if cur < b {
        out.push(Span { from: cur, to: b });
    }
    out
}

/// Whether `t` lies strictly inside one of the (merged) outages.
pub fn strictly_inside(t: Time, off: &[Span]) -> bool {
    off.iter().any(|s| s.from < t && t < s.to)
}

fn amps_at(p0: &Point, p1: &Point, t: Time) -> f64 {
    let span = hours(p0.t, p1.t);
    if span <= 0.0 {
        return p0.amps;
    }
    let f = (hours(p0.t, t) / span).clamp(0.0, 1.0);
    p0.amps + f * (p1.amps - p0.amps)
}

/// Ampere-hours over `[x, y]` within the segment between readings `p0` and `p1`,
/// with the trapezoid clipped at the outages.
pub fn segment_ah(p0: &Point, p1: &Point, outages: &[Span], x: Time, y: Time) -> f64 {
    let (x, y) = (x.max(p0.t), y.min(p1.t));
    if y <= x {
        return 0.0;
    }
    uncovered(x, y, outages).iter().map(|s| hours(s.from, s.to) * (amps_at(p0, p1, s.from) + amps_at(p0, p1, s.to)) / 2.0).sum()
}

/// Earliest instant in the segment at which the segment's charge since `p0`
/// reaches `ah` (by bisection to the millisecond; the charge is monotone).
fn segment_time_reaching(p0: &Point, p1: &Point, outages: &[Span], ah: f64) -> Time {
    let (mut lo, mut hi) = (ms(p0.t), ms(p1.t));
    while hi - lo > 1 {
        let mid = lo + (hi - lo) / 2;
        if segment_ah(p0, p1, outages, p0.t, from_ms(mid)) >= ah {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    from_ms(hi)
}

/// One new reading, before accumulation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RawReading {
    pub t: Time,
    pub amps: f64,
}

/// A reading after accumulation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Accumulated {
    pub t: Time,
    pub amps: f64,
    /// Cumulative charge at `t`; for an ignored reading, that of the previous valid one.
    pub cum_ah: f64,
    /// False for a reading strictly inside an outage (it is ignored).
    pub valid: bool,
    /// True when the stretch since the previous valid reading has an
    /// uncovered part longer than [`GAP_WARNING`].
    pub gap_before: bool,
}

/// Cumulative charge for `readings` (sorted by time, all after `prev`),
/// continuing from `prev`, the last valid reading before them.
pub fn accumulate(prev: Option<Point>, readings: &[RawReading], outages: &[Span]) -> Vec<Accumulated> {
    let mut last = prev;
    readings
        .iter()
        .map(|r| {
            if strictly_inside(r.t, outages) {
                let cum_ah = last.map_or(0.0, |p| p.cum_ah);
                return Accumulated { t: r.t, amps: r.amps, cum_ah, valid: false, gap_before: false };
            }
            let here = Point { t: r.t, amps: r.amps, cum_ah: 0.0 };
            let (cum_ah, gap_before) = match last {
                None => (0.0, false),
                Some(p) => {
                    let gap = uncovered(p.t, r.t, outages).iter().any(|s| s.to - s.from > GAP_WARNING);
                    (p.cum_ah + segment_ah(&p, &here, outages, p.t, r.t), gap)
                }
            };
            last = Some(Point { cum_ah, ..here });
            Accumulated { t: r.t, amps: r.amps, cum_ah, valid: true, gap_before }
        })
        .collect()
}

/// Time-weighted mean of the in-service current between two points of the
/// circuit's curve; `None` when no in-service time lies between them.
pub fn mean_in_service_amps(a: Time, cum_a: f64, b: Time, cum_b: f64, outages: &[Span]) -> Option<f64> {
    let h: f64 = uncovered(a, b, outages).iter().map(|s| hours(s.from, s.to)).sum();
    (h > 0.0).then(|| (cum_b - cum_a) / h)
}

/// The future current after the last reading: setpoints that start after it,
/// else a base current (the recent mean), both zero during outages.
#[derive(Debug, Clone, PartialEq)]
pub struct Projection {
    /// Where the estimate starts: the last valid reading, or the first setpoint
    /// when there are no readings at all. `None`: nothing to project from.
    pub start: Option<Time>,
    pub base_amps: f64,
    /// Setpoints after `start`, sorted by time.
    pub setpoints: Vec<(Time, f64)>,
    pub outages: Vec<Span>,
}

impl Projection {
    /// Builds the projection from the last valid reading (if any), the mean
    /// over [`MEAN_WINDOW`] before it, and all known setpoints.
    pub fn new(last: Option<Point>, recent_mean: Option<f64>, setpoints: &[(Time, f64)], outages: Vec<Span>) -> Self {
        let mut sp: Vec<(Time, f64)> = setpoints.iter().copied().filter(|(t, _)| last.is_none_or(|p| *t > p.t)).collect();
        sp.sort_by_key(|(t, _)| *t);
        let start = last.map(|p| p.t).or_else(|| sp.first().map(|(t, _)| *t));
        let base_amps = match last {
            Some(p) => recent_mean.unwrap_or(p.amps),
            None => 0.0,
        };
        Projection { start, base_amps, setpoints: sp, outages }
    }

    fn rate_at(&self, t: Time) -> f64 {
        self.setpoints.iter().rev().find(|(st, _)| *st <= t).map_or(self.base_amps, |(_, a)| *a)
    }

    /// Breakpoints (setpoint starts, outage bounds) strictly inside `(a, b)`.
    fn breaks(&self, a: Time, b: Time) -> Vec<Time> {
        let mut v: Vec<Time> = self
            .setpoints
            .iter()
            .map(|(t, _)| *t)
            .chain(self.outages.iter().flat_map(|s| [s.from, s.to]))
            .filter(|t| *t > a && *t < b)
            .collect();
        v.sort();
        v.dedup();
        v
    }

    /// Estimated ampere-hours over `[a, b]` (only the part after `start` counts).
    pub fn ah_between(&self, a: Time, b: Time) -> f64 {
        let Some(start) = self.start else { return 0.0 };
        let a = a.max(start);
        if b <= a {
            return 0.0;
        }
        let mut pts = vec![a];
        pts.extend(self.breaks(a, b));
        pts.push(b);
        pts.windows(2)
            .map(|w| {
                let live: f64 = uncovered(w[0], w[1], &self.outages).iter().map(|s| hours(s.from, s.to)).sum();
                live * self.rate_at(w[0])
            })
            .sum()
    }

    /// Earliest instant after `a` at which the estimate since `a` reaches `ah`;
    /// `None` if that does not happen within [`PROJECTION_HORIZON`].
    pub fn time_reaching(&self, a: Time, ah: f64) -> Option<Time> {
        let start = self.start?;
        let a = a.max(start);
        if ah <= 0.0 {
            return Some(a);
        }
        let end = a + PROJECTION_HORIZON;
        let mut pts = vec![a];
        pts.extend(self.breaks(a, end));
        pts.push(end);
        let mut left = ah;
        for w in pts.windows(2) {
            let rate = self.rate_at(w[0]);
            for s in uncovered(w[0], w[1], &self.outages) {
                let got = hours(s.from, s.to) * rate;
                if rate > 0.0 && got >= left {
                    let secs = left / rate * 3600.0;
                    return Some(s.from + Duration::milliseconds((secs * 1000.0).ceil() as i64));
                }
                left -= got;
            }
        }
        None
    }
}

/// Charge at an instant, split into what the readings measured and what the
/// projection estimated after the last reading.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Cum {
    pub measured: f64,
    pub estimated: f64,
}

impl Cum {
    pub fn total(&self) -> f64 {
        self.measured + self.estimated
    }
    fn minus(self, o: Cum) -> Cum {
        Cum { measured: self.measured - o.measured, estimated: self.estimated - o.estimated }
    }
    fn plus(self, o: Cum) -> Cum {
        Cum { measured: self.measured + o.measured, estimated: self.estimated + o.estimated }
    }
}

/// A circuit's cumulative charge as a function of time. Two implementations:
/// [`MemoryCurve`] (readings in memory) and the store's, which looks the two
/// readings around an instant up in the database instead of loading them all.
pub trait Curve {
    /// What a look-up can fail with (nothing, for a curve in memory).
    type Error;
    /// Cumulative charge at `t`.
    fn cum_at(&self, t: Time) -> Result<Cum, Self::Error>;
    /// Earliest instant at which the cumulative total reaches `total`.
    fn time_at(&self, total: f64) -> Result<Option<Time>, Self::Error>;
}

/// What lies around an instant on a circuit's reading record.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Around {
    /// No valid reading at or before the instant.
    BeforeFirst,
    /// Between two valid readings (`t0 <= t < t1`).
    Between(Point, Point),
    /// At or after the last valid reading that may be used.
    AfterLast(Point),
}

/// Cumulative charge at `t` given what lies around it.
pub fn cum_from(around: Around, t: Time, outages: &[Span], proj: &Projection) -> Cum {
    match around {
        Around::BeforeFirst => Cum { measured: 0.0, estimated: proj.ah_between(proj.start.unwrap_or(t), t) },
        Around::Between(p0, p1) => Cum { measured: p0.cum_ah + segment_ah(&p0, &p1, outages, p0.t, t), estimated: 0.0 },
        Around::AfterLast(p) => Cum { measured: p.cum_ah, estimated: proj.ah_between(p.t, t) },
    }
}

/// Earliest instant at which the cumulative total reaches `total`, given the
/// first valid reading whose cumulative charge reaches it (`hit`) and its predecessor.
pub fn time_from(
    hit: Option<(Option<Point>, Point)>,
    last: Option<Point>,
    total: f64,
    outages: &[Span],
    proj: &Projection,
) -> Option<Time> {
    match (hit, last) {
        (Some((None, p)), _) => Some(p.t),
        (Some((Some(p0), p1)), _) => Some(segment_time_reaching(&p0, &p1, outages, total - p0.cum_ah)),
        (None, Some(p)) => proj.time_reaching(p.t, total - p.cum_ah),
        (None, None) => proj.start.and_then(|s| proj.time_reaching(s, total)),
    }
}

/// A circuit's curve held in memory (tests, small imports).
#[derive(Debug, Clone)]
pub struct MemoryCurve {
    pub points: Vec<Point>,
    pub outages: Vec<Span>,
    pub projection: Projection,
}

impl MemoryCurve {
    /// Accumulates `readings` (any order) as of `as_of`: readings after it are not used.
    pub fn build(readings: &[RawReading], outages: &[Span], setpoints: &[(Time, f64)], as_of: Time) -> Self {
        let outages = union(outages.iter().copied());
        let mut rs: Vec<RawReading> = readings.iter().copied().filter(|r| r.t <= as_of).collect();
        rs.sort_by_key(|r| r.t);
        let points: Vec<Point> = accumulate(None, &rs, &outages)
            .into_iter()
            .filter(|a| a.valid)
            .map(|a| Point { t: a.t, amps: a.amps, cum_ah: a.cum_ah })
            .collect();
        let last = points.last().copied();
        let mut curve =
            MemoryCurve { points, outages: outages.clone(), projection: Projection::new(last, None, setpoints, outages.clone()) };
        if let Some(p) = last {
            let a = p.t - MEAN_WINDOW;
            let cum_a = curve.around_cum(a).measured;
            let mean = mean_in_service_amps(a.max(curve.points[0].t), cum_a, p.t, p.cum_ah, &outages);
            curve.projection = Projection::new(last, mean, setpoints, outages);
        }
        curve
    }

    fn around(&self, t: Time) -> Around {
        let i = self.points.partition_point(|p| p.t <= t);
        match i {
            0 => Around::BeforeFirst,
            i if i == self.points.len() => Around::AfterLast(self.points[i - 1]),
            i => Around::Between(self.points[i - 1], self.points[i]),
        }
    }
}

impl MemoryCurve {
    fn around_cum(&self, t: Time) -> Cum {
        cum_from(self.around(t), t, &self.outages, &self.projection)
    }
}

impl Curve for MemoryCurve {
    type Error = std::convert::Infallible;
    fn cum_at(&self, t: Time) -> Result<Cum, Self::Error> {
        Ok(self.around_cum(t))
    }
    fn time_at(&self, total: f64) -> Result<Option<Time>, Self::Error> {
        let i = self.points.partition_point(|p| p.cum_ah < total);
        let hit = self.points.get(i).map(|p| (i.checked_sub(1).map(|j| self.points[j]), *p));
        Ok(time_from(hit, self.points.last().copied(), total, &self.outages, &self.projection))
    }
}

/// The stretches of `[a, b)` (`b = None`: open-ended) during which a cell is in
/// circuit, given its cut-outs (an open cut-out runs for ever).
pub fn in_circuit(a: Time, b: Option<Time>, cutouts: &[OpenSpan]) -> Vec<(Time, Option<Time>)> {
    let far = DateTime::<Utc>::MAX_UTC;
    let off = union(cutouts.iter().map(|c| Span { from: c.from, to: c.to.unwrap_or(far) }));
    uncovered(a, b.unwrap_or(far), &off).into_iter().map(|s| (s.from, (s.to != far).then_some(s.to))).collect()
}

/// Charge through a cell over `[a, b]`: the circuit's charge less its cut-outs.
pub fn cell_charge<C: Curve>(curve: &C, cutouts: &[OpenSpan], a: Time, b: Time) -> Result<Cum, C::Error> {
    let mut acc = Cum::default();
    if b <= a {
        return Ok(acc);
    }
    for (x, y) in in_circuit(a, Some(b), cutouts) {
        let y = y.unwrap_or(b);
        acc = acc.plus(curve.cum_at(y)?.minus(curve.cum_at(x)?));
    }
    Ok(acc)
}

/// Earliest instant at which the cell's charge since `a` reaches `target_ah`
/// (in the past if it already has); `None` if not within the projection horizon
/// or the cell is cut out for good.
pub fn cell_time_reaching<C: Curve>(curve: &C, cutouts: &[OpenSpan], a: Time, target_ah: f64) -> Result<Option<Time>, C::Error> {
    if target_ah <= 0.0 {
        return Ok(Some(a));
    }
    let mut acc = 0.0;
    for (x, y) in in_circuit(a, None, cutouts) {
        let cx = curve.cum_at(x)?.total();
        let got = match y {
            Some(y) => curve.cum_at(y)?.total() - cx,
            None => f64::INFINITY,
        };
        if acc + got >= target_ah {
            return Ok(curve.time_at(cx + (target_ah - acc))?.map(|t| t.max(x)));
        }
        acc += got;
    }
    Ok(None)
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::TimeZone;
    use proptest::prelude::*;

    fn t(h: f64) -> Time {
        Utc.with_ymd_and_hms(2026, 3, 1, 0, 0, 0).unwrap() + Duration::milliseconds((h * 3_600_000.0) as i64)
    }
    fn r(h: f64, amps: f64) -> RawReading {
        RawReading { t: t(h), amps }
    }
    fn span(a: f64, b: f64) -> Span {
        Span { from: t(a), to: t(b) }
    }
    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() < 1e-6 * b.abs().max(1.0)
    }

    #[test]
    fn trapezoid_over_irregular_intervals() {
        // 0 h 100 A, 1 h 200 A, 3.5 h 200 A, 4 h 0 A: by hand 150 + 500 + 50 = 700 A·h.
        let c = MemoryCurve::build(&[r(0.0, 100.0), r(1.0, 200.0), r(3.5, 200.0), r(4.0, 0.0)], &[], &[], t(4.0));
        assert!(close(c.around_cum(t(4.0)).measured, 700.0));
        // half-way along the first segment the current is 150 A: 0.5·(100+150)/2
        assert!(close(c.around_cum(t(0.5)).measured, 62.5));
        assert_eq!(c.around_cum(t(4.0)).estimated, 0.0);
    }

    #[test]
    fn outage_clips_the_trapezoid_and_ignores_readings_inside() {
        // 1000 A flat from 0 to 10 h, outage 2–5 h with a stray 800 A reading at 3 h.
        let rs = [r(0.0, 1000.0), r(3.0, 800.0), r(10.0, 1000.0)];
        let c = MemoryCurve::build(&rs, &[span(2.0, 5.0)], &[], t(10.0));
        assert!(close(c.around_cum(t(10.0)).measured, 7000.0));
        let acc = accumulate(None, &rs, &[span(2.0, 5.0)]);
        assert!(!acc[1].valid);
        assert!(acc[2].gap_before, "5–10 h is a 5 h gap not covered by the outage");
    }

    #[test]
    fn overlapping_outages_count_once() {
        let rs = [r(0.0, 1000.0), r(10.0, 1000.0)];
        let c = MemoryCurve::build(&rs, &[span(2.0, 5.0), span(4.0, 6.0), span(5.5, 5.8)], &[], t(10.0));
        assert!(close(c.around_cum(t(10.0)).measured, 6000.0));
    }

    #[test]
    fn overlapping_and_open_cutouts() {
        let rs: Vec<RawReading> = (0..=24).map(|h| r(h as f64, 1000.0)).collect();
        let c = MemoryCurve::build(&rs, &[], &[], t(24.0));
        let cuts = [
            OpenSpan { from: t(2.0), to: Some(t(4.0)) },
            OpenSpan { from: t(3.0), to: Some(t(5.0)) },
            OpenSpan { from: t(20.0), to: None },
        ];
        // in circuit 0–2 and 5–20: 17 h at 1000 A
        assert!(close(cell_charge(&c, &cuts, t(0.0), t(24.0)).unwrap().total(), 17_000.0));
        // an open cut-out stops the cell for good: never reaches 18 000 A·h
        assert_eq!(cell_time_reaching(&c, &cuts, t(0.0), 18_000.0).unwrap(), None);
        assert_eq!(cell_time_reaching(&c, &cuts, t(0.0), 3_000.0).unwrap(), Some(t(6.0)));
    }

    #[test]
    fn readings_after_as_of_are_ignored_and_the_estimate_fills_in() {
        // readings every hour at 1000 A, then a 5000 A reading at 12 h, after as_of = 11.5 h
        let mut rs: Vec<RawReading> = (0..=10).map(|h| r(h as f64, 1000.0)).collect();
        rs.push(r(12.0, 5000.0));
        let c = MemoryCurve::build(&rs, &[], &[], t(11.5));
        let at = c.around_cum(t(11.5));
        assert!(close(at.measured, 10_000.0));
        // the estimate uses the 24 h mean (1000 A), not an interpolation towards 5000 A
        assert!(close(at.estimated, 1_500.0));
    }

    #[test]
    fn setpoint_after_last_reading_drives_the_estimate() {
        let rs: Vec<RawReading> = (0..=10).map(|h| r(h as f64, 1000.0)).collect();
        let sp = [(t(5.0), 9999.0), (t(12.0), 2000.0)];
        let c = MemoryCurve::build(&rs, &[], &sp, t(14.0));
        // 10–12 h at the mean (1000 A; the 5 h setpoint is before the last reading), 12–14 h at 2000 A
        assert!(close(c.around_cum(t(14.0)).estimated, 2000.0 + 4000.0));
        // 10 000 A·h measured + 2000 by 12 h, then 3000 more at 2000 A → 13.5 h
        assert_eq!(c.time_at(15_000.0).unwrap(), Some(t(13.5)));
    }

    #[test]
    fn future_outage_pauses_the_estimate() {
        let rs: Vec<RawReading> = (0..=10).map(|h| r(h as f64, 1000.0)).collect();
        let c = MemoryCurve::build(&rs, &[span(11.0, 13.0)], &[], t(10.0));
        assert!(close(c.around_cum(t(14.0)).estimated, 2000.0));
        assert_eq!(c.time_at(12_000.0).unwrap(), Some(t(14.0)));
    }

    #[test]
    fn mean_ignores_outage_time() {
        // last 24 h: 12 h at 2000 A, 12 h outage → in-service mean is 2000 A
        let rs = [r(0.0, 2000.0), r(12.0, 2000.0), r(24.0, 2000.0)];
        let c = MemoryCurve::build(&rs, &[span(12.0, 24.0)], &[], t(24.0));
        assert!(close(c.projection.base_amps, 2000.0), "{}", c.projection.base_amps);
    }

    #[test]
    fn time_at_inverts_inside_a_segment() {
        let c = MemoryCurve::build(&[r(0.0, 0.0), r(2.0, 200.0)], &[], &[], t(2.0));
        // a(t) = 100 t, cum = 50 t² → 50 A·h at 1 h
        let got = c.time_at(50.0).unwrap().unwrap();
        assert!((got - t(1.0)).num_milliseconds().abs() <= 1);
    }

    proptest! {
        #[test]
        fn charge_never_decreases(amps in proptest::collection::vec(0.0f64..45_000.0, 2..30),
                                  gaps in proptest::collection::vec(0.05f64..5.0, 30),
                                  out in proptest::collection::vec((0.0f64..60.0, 0.1f64..6.0), 0..4),
                                  probes in proptest::collection::vec(0.0f64..80.0, 2..20)) {
            let mut h = 0.0;
            let rs: Vec<RawReading> = amps.iter().zip(&gaps).map(|(a, g)| { h += g; r(h, *a) }).collect();
            let outs: Vec<Span> = out.iter().map(|(a, l)| span(*a, a + l)).collect();
            let c = MemoryCurve::build(&rs, &outs, &[], t(h * 0.8));
            let mut p = probes.clone();
            p.sort_by(f64::total_cmp);
            let vals: Vec<f64> = p.iter().map(|x| c.around_cum(t(*x)).total()).collect();
            for w in vals.windows(2) {
                prop_assert!(w[1] >= w[0] - 1e-9, "{vals:?}");
            }
        }

        #[test]
        fn a_cutout_never_adds_charge(amps in proptest::collection::vec(0.0f64..45_000.0, 2..20),
                                      cuts in proptest::collection::vec((0.0f64..30.0, 0.0f64..10.0), 0..5),
                                      a in 0.0f64..10.0, len in 0.0f64..30.0) {
            let rs: Vec<RawReading> = amps.iter().enumerate().map(|(i, x)| r(i as f64 * 1.5, *x)).collect();
            let c = MemoryCurve::build(&rs, &[], &[], t(25.0));
            let cs: Vec<OpenSpan> = cuts.iter().map(|(f, l)| OpenSpan { from: t(*f), to: Some(t(f + l)) }).collect();
            let with = cell_charge(&c, &cs, t(a), t(a + len)).unwrap().total();
            let without = cell_charge(&c, &[], t(a), t(a + len)).unwrap().total();
            prop_assert!(with <= without + 1e-9);
            prop_assert!(with >= -1e-9);
        }
    }
}
