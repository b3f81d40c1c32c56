//! Smoothing a levelled plan: harvests moved inside their windows to even out
//! the stripping machine's daily cathodes, and anode deliveries levelled under the daily preparation limit.
//!
//! Both work on a plan that already meets its caps and never break them: the
//! harvests' smoothing only makes moves that keep every day within its cathode
//! and harvest-count capacity, and the deliveries cover every day's need.

use super::levelling::Weights;

/// A harvest as the smoothing sees it: where it is, where it may go, its size.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Placed {
    pub day: usize,
    pub earliest: usize,
    pub latest: usize,
    pub ideal: usize,
    /// Cathodes it takes off the stripping machine.
    pub cathodes: u64,
}

/// Each day's limits while smoothing: cathodes, and how many harvests the crane allows.
#[derive(Debug, Clone, PartialEq)]
pub struct DayLimits {
    pub cathodes: Vec<u64>,
    pub harvests: Vec<u32>,
}

/// Sum over the days of the squared daily cathodes: for a fixed total it is
/// least when the days are most even (it is the total's square over the days
/// plus the days times the variance), so it measures the spread.
pub fn spread(load: &[u64]) -> u128 {
    load.iter().map(|&x| u128::from(x) * u128::from(x)).sum()
}

fn distance(p: &Placed, day: usize, w: Weights) -> f64 {
    if day < p.ideal { (p.ideal - day) as f64 * w.early } else { (day - p.ideal) as f64 * w.late }
}

/// Moves harvests one at a time to another day of their window while that
/// lowers [`spread`] of `load` (ties: while it lowers the weighted distance
/// from the due days), never above `limits`. `load` and `count` are each
/// day's cathodes and harvests, the fixed ones (crops pulled with anode
/// changes) included; they are updated. Jobs are visited in the given order
/// and days from the earliest, so the result is deterministic. Each accepted
/// move lowers (spread, distance) lexicographically, so it stops; the number
/// of passes is also bounded. Returns how many moves were made.
///
/// This is a local search: with equal cathode counts a plan where no single
/// move helps can still be improved by swapping two harvests of different
/// days only when their sizes differ, so no optimality is claimed.
pub fn smooth(jobs: &mut [Placed], load: &mut [u64], count: &mut [u32], limits: &DayLimits, w: Weights) -> usize {
    let mut moves = 0;
    // each pass either moves something or ends the search; a bound for safety
    for _ in 0..64 {
        let mut moved = false;
        for p in jobs.iter_mut() {
            let a = p.day;
            let c = p.cathodes;
            let mut best: Option<(usize, i128, f64)> = None;
            for b in p.earliest..=p.latest.min(load.len().saturating_sub(1)) {
                if b == a || load[b] + c > limits.cathodes[b] || count[b] >= limits.harvests[b] {
                    continue;
                }
                // change of the sum of squares when c cathodes go from day a to day b
                let (la, lb, ci) = (i128::from(load[a]), i128::from(load[b]), i128::from(c));
                let d_sq = (lb + ci) * (lb + ci) + (la - ci) * (la - ci) - lb * lb - la * la;
                let d_cost = distance(p, b, w) - distance(p, a, w);
                let better = d_sq < 0 || (d_sq == 0 && d_cost < -1e-12);
                if better && best.is_none_or(|(_, s, k)| d_sq < s || (d_sq == s && d_cost < k - 1e-12)) {
                    best = Some((b, d_sq, d_cost));
                }
            }
            if let Some((b, _, _)) = best {
                load[a] -= c;
                count[a] -= 1;
                load[b] += c;
                count[b] += 1;
                p.day = b;
                moves += 1;
                moved = true;
            }
        }
        if !moved {
            break;
        }
    }
    moves
}

/// Daily deliveries of new anodes, each at most `per_day`, that keep the
/// stock (`stock` at the start, plus deliveries, less `used`) from going
/// below zero on any day and deliver no more than the plan needs: the least
/// concave majorant of the cumulative need (a taut string from nothing
/// before the first day to the need at the end), rounded up to whole anodes.
/// It delivers early rather than late, makes the largest day's delivery as
/// small as it can be (the steepest cumulative need per day), and never rises
/// from one day to the next. Needs that the stock and `per_day` cannot meet
/// (a plan that overdraws its supply) are clipped to `per_day`.
pub fn deliveries(stock: u64, per_day: u64, used: &[u64]) -> Vec<u64> {
    let n = used.len();
    // cumulative need beyond the stock through each day, as points (day, need); day -1 has none
    let mut need = Vec::with_capacity(n + 1);
    need.push((-1i64, 0u128));
    let mut acc = 0u128;
    for (d, &u) in used.iter().enumerate() {
        acc += u128::from(u);
        need.push((d as i64, acc.saturating_sub(u128::from(stock))));
    }
    // upper hull (concave) of the points, left to right
    let mut hull: Vec<(i64, u128)> = Vec::new();
    for &p in &need {
        while hull.len() >= 2 {
            let (o, a) = (hull[hull.len() - 2], hull[hull.len() - 1]);
            // a lies on or below the chord o → p: drop it
            let lhs = (a.1 as i128 - o.1 as i128) * i128::from(p.0 - o.0);
            let rhs = (p.1 as i128 - o.1 as i128) * i128::from(a.0 - o.0);
            if lhs <= rhs {
                hull.pop();
            } else {
                break;
            }
        }
        hull.push(p);
    }
    // the hull at each day, rounded up; differences are the deliveries
    let mut out = Vec::with_capacity(n);
    let mut prev = 0u128;
    let mut seg = 0;
    for d in 0..n as i64 {
        while seg + 1 < hull.len() && hull[seg + 1].0 < d {
            seg += 1;
        }
        let (x0, y0) = hull[seg];
        let (x1, y1) = hull[(seg + 1).min(hull.len() - 1)];
        let at = if x1 == x0 { y1 } else { y0 + ((y1 - y0) * (d - x0) as u128).div_ceil((x1 - x0) as u128) };
        let c = at.max(prev);
        out.push(u64::try_from(c - prev).unwrap_or(u64::MAX).min(per_day));
        prev = c;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const W: Weights = Weights { early: 1.0, late: 2.0 };

    fn job(day: usize, cathodes: u64) -> Placed {
        Placed { day, earliest: day.saturating_sub(1), latest: day + 1, ideal: day, cathodes }
    }

    #[test]
    fn six_harvests_due_on_one_day_spread_over_their_windows() {
        // Six crops of 51 cathodes due on day 1, each free to move a day either way; the cap-only
        // plan leaves 306 on day 1 and none beside it. By hand, two a day (102, 102, 102) is the
        // least sum of squares: 3 × 102² = 31 212 against 306² = 93 636.
        let mut jobs = vec![job(1, 51); 6];
        let mut load = vec![0, 306, 0];
        let mut count = vec![0, 6, 0];
        let limits = DayLimits { cathodes: vec![2000; 3], harvests: vec![10; 3] };
        let moves = smooth(&mut jobs, &mut load, &mut count, &limits, W);
        assert_eq!(load, vec![102, 102, 102]);
        assert_eq!(count, vec![2, 2, 2]);
        assert_eq!(moves, 4);
        assert_eq!(spread(&load), 31_212);
    }

    #[test]
    fn smoothing_keeps_the_limits_and_prefers_early_on_a_tie() {
        // Two crops due on day 1, crane allows one harvest on day 2: one stays, one moves; a move
        // to day 0 (early, cost 1) is preferred to day 2 (late, cost 2) at the same spread.
        let mut jobs = vec![job(1, 51); 2];
        let mut load = vec![0, 102, 0];
        let mut count = vec![0, 2, 0];
        let limits = DayLimits { cathodes: vec![2000; 3], harvests: vec![1, 10, 1] };
        smooth(&mut jobs, &mut load, &mut count, &limits, W);
        assert_eq!(load, vec![51, 51, 0]);
        // no room at all: nothing moves
        let mut jobs = vec![job(1, 51); 2];
        let mut load = vec![2000, 102, 2000];
        let mut count = vec![0, 2, 0];
        assert_eq!(smooth(&mut jobs, &mut load, &mut count, &DayLimits { cathodes: vec![2000; 3], harvests: vec![9; 3] }, W), 0);
    }

    #[test]
    fn deliveries_by_hand() {
        // 100 in stock, 300 used on day 3 (index 2): the need beyond stock is 0, 0, 200, 200; the
        // steepest start is 200 over 3 days, so 66.7, 133.3, 200 cumulative, rounded up: 67, 67, 66, 0.
        assert_eq!(deliveries(100, 300, &[0, 0, 300, 0]), vec![67, 67, 66, 0]);
        // 100 more on day 4: the need 300 over 4 days is steeper than 200 over 3, so 75 a day.
        assert_eq!(deliveries(100, 300, &[0, 0, 300, 100]), vec![75, 75, 75, 75]);
        // stock covers everything: no deliveries
        assert_eq!(deliveries(1000, 300, &[100, 0, 200]), vec![0, 0, 0]);
    }

    proptest! {
        #[test]
        fn deliveries_cover_every_day_within_the_limit(
            stock in 0u64..500,
            per_day in 1u64..300,
            raw in prop::collection::vec(0u64..400, 1..20),
        ) {
            // keep only uses the supply can meet, as a levelled plan does
            let mut used = Vec::new();
            let (mut have, mut need) = (stock, 0u64);
            for u in raw {
                have += per_day;
                let u = u.min(have - need);
                need += u;
                used.push(u);
            }
            let x = deliveries(stock, per_day, &used);
            let (mut s, mut peak) = (stock as i128, 0u64);
            for (d, (&u, &xd)) in used.iter().zip(&x).enumerate() {
                prop_assert!(xd <= per_day, "day {d}: {xd} > {per_day}");
                s += xd as i128 - u as i128;
                prop_assert!(s >= 0, "day {d}: stock {s}");
                peak = peak.max(xd);
            }
            // nothing delivered beyond the need: the last day ends with the stock or less, or at 0 beyond it
            let total_need: u64 = used.iter().sum();
            prop_assert!(x.iter().sum::<u64>() == total_need.saturating_sub(stock));
            // the peak is the least possible: the steepest cumulative need per day, rounded up
            let mut acc = 0u64;
            let least = used.iter().enumerate().map(|(d, &u)| { acc += u; acc.saturating_sub(stock).div_ceil(d as u64 + 1) }).max().unwrap_or(0);
            prop_assert_eq!(peak, least);
        }
    }
}
