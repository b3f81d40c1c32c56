//! Exact levelling of anode changes over production days: min-cost flow
//! when each change takes one crew slot, with the guarantee stated below otherwise.

use std::cmp::{Ordering, Reverse};
use std::collections::{BTreeMap, VecDeque};
use std::fmt;
use std::ops::{Add, Neg, Sub};

mod day_flow;

/// Largest number of placement units (a cell on its own, or a whole group
/// counted once) that [`level`] hands to the exact branch and bound when the
/// min-cost flow does not apply; bigger instances get the repaired relaxation
/// with `exact == false`.
pub const EXACT_SEARCH_MAX_UNITS: usize = 40;

/// Work budget of the branch and bound, in nodes; solving a node's flow
/// relaxation over c cells is charged as c more nodes, since that is about
/// what it costs. When the budget runs out (roughly a tenth of a second of
/// work), [`level`] returns the best plan found so far with `exact == false`.
/// The count is deterministic, so the same input always gives the same plan.
pub const EXACT_SEARCH_NODE_LIMIT: u64 = 100_000;

/// Node budget of the crew-only packing search used to choose between
/// [`Unplaced::NoAnodes`] and [`Unplaced::NoCrewCapacity`] for groups.
const FEASIBILITY_NODE_LIMIT: u64 = 100_000;

/// Exact integer weights above this are not tried at all.
const EXACT_WEIGHT_LIMIT: u128 = 1 << 120;

/// One cell whose anodes are due for a change.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Task {
    /// Cell id. Must be unique within one call; it is also the tie-break order.
    pub cell: String,
    /// First day (index into the horizon) on which the change may be done.
    pub earliest: usize,
    /// Last day on which the change may be done; may lie beyond the horizon,
    /// in which case only the days inside the horizon are used.
    pub latest: usize,
    /// Preferred day. For costing it is clamped into `earliest..=latest`
    /// (the task's own window, not the horizon-clipped one), so an overdue
    /// task whose ideal lies before `earliest` prefers `earliest`.
    pub ideal: usize,
    /// New anodes the change consumes (the cell's anode count).
    pub anodes: u32,
    /// Section changed together: all tasks with the same `Some(g)` are
    /// placed on one common day or are all unplaced.
    pub group: Option<u32>,
    /// Days of the horizon on which this task may not be done although the
    /// crew works (its own circuit is down for an outage), in any order.
    pub days_off: Vec<usize>,
}

/// What the tankhouse can do on each day of the horizon.
#[derive(Debug, Clone, PartialEq)]
pub struct Capacity {
    /// Cells the crew can change on day `d`; 0 for non-working days and outages.
    /// Its length is the horizon.
    pub crew: Vec<u32>,
    /// New anodes on hand at the start of day 0. `u64::MAX` is fine for
    /// "unlimited": all supply arithmetic is done in `u128`.
    pub anode_stock: u64,
    /// Anodes prepared on day `d`, usable on day `d` or later. Must have the
    /// same length as `crew`.
    pub anodes_per_day: Vec<u64>,
}

/// Price of one day away from a task's ideal day.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Weights {
    /// Cost per day a change is done before its ideal day (extra scrap).
    pub early: f64,
    /// Cost per day a change is done after its ideal day (dropped anodes).
    pub late: f64,
}

/// Why a task got no day.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Unplaced {
    /// Its window starts at or after the end of the horizon (for a group
    /// member: the group's common window does).
    WindowOutsideHorizon,
    /// Every day of its horizon-clipped window has crew 0 (for a group
    /// member: of the group's common window, which may be empty when the
    /// members' windows do not overlap).
    NoWorkingDayInWindow,
    /// The crew could not fit it: even ignoring anodes, it cannot be added to
    /// the cells that were placed, however those are re-arranged (for a group,
    /// when that packing check exceeds its budget: no day of its window has
    /// enough free crew left).
    NoCrewCapacity,
    /// The crew could fit it alongside the placed cells (re-arranging days if
    /// needed), but the anode supply does not allow it (when the plan is not
    /// `exact`: not with the other changes as planned).
    NoAnodes,
}

/// A levelled plan.
#[derive(Debug, Clone, PartialEq)]
pub struct Levelled {
    /// Day of each input task, in input order; `None` if unplaced.
    pub day: Vec<Option<usize>>,
    /// Every unplaced task as (input index, reason), in increasing index order.
    pub unplaced: Vec<(usize, Unplaced)>,
    /// Total weighted distance from the ideal days of the placed tasks,
    /// computed with the caller's weights.
    pub cost: f64,
    /// `true`: the plan is proven optimal (fewest unplaced tasks, then least
    /// cost) and is the lexicographically smallest optimal plan by cell id.
    /// `false`: only the feasibility guarantees of [`level`] hold.
    pub exact: bool,
}

/// Input that [`level`] refuses.
#[derive(Debug, Clone, PartialEq)]
pub enum LevelError {
    /// `crew` and `anodes_per_day` have different lengths.
    HorizonMismatch {
        /// Length of `crew`.
        crew_days: usize,
        /// Length of `anodes_per_day`.
        supply_days: usize,
    },
    /// A weight is not a finite number greater than zero.
    BadWeights {
        /// The early weight given.
        early: f64,
        /// The late weight given.
        late: f64,
    },
    /// A task with `earliest > latest`.
    EmptyWindow {
        /// The task's cell id.
        cell: String,
        /// Its `earliest`.
        earliest: usize,
        /// Its `latest`.
        latest: usize,
    },
    /// Two tasks share a cell id, so the tie-break would depend on input order.
    DuplicateCell {
        /// The repeated id.
        cell: String,
    },
    /// Distances or weights so large that exact integer costs could overflow
    /// `i128` (e.g. an ideal day near `usize::MAX`).
    TooLarge,
    /// An internal consistency check failed; this is a bug, never expected.
    Internal(&'static str),
}

impl fmt::Display for LevelError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::HorizonMismatch { crew_days, supply_days } => {
                write!(f, "crew covers {crew_days} days but anode preparation covers {supply_days}")
            }
            Self::BadWeights { early, late } => write!(f, "weights must be finite and greater than zero (early {early}, late {late})"),
            Self::EmptyWindow { cell, earliest, latest } => write!(f, "cell {cell}: earliest day {earliest} is after latest day {latest}"),
            Self::DuplicateCell { cell } => write!(f, "cell {cell} appears more than once"),
            Self::TooLarge => write!(f, "days or weights too large to cost exactly"),
            Self::Internal(what) => write!(f, "internal error in levelling: {what}"),
        }
    }
}

impl std::error::Error for LevelError {}

/// Levels anode changes over the horizon `0..cap.crew.len()`.
///
/// Objective, lexicographic: fewest unplaced tasks; then least total of
/// `w.late * (day - ideal)` for late and `w.early * (ideal - day)` for early
/// changes (ideal clamped into the task's window); then the plan whose days,
/// read in cell-id order with "unplaced" after every day, are
/// lexicographically smallest. The result does not depend on input order.
///
/// Method:
/// * No groups, and every placeable task uses the same number of anodes (or
///   the supply can never run short): successive-shortest-path min-cost flow,
///   source → task → task-day → day (crew) → supply chain → sink, with an
///   unplaced arc per task whose cost is a separate, dominant component of a
///   lexicographic cost, so no big-M is needed. Supply is counted in whole
///   changes from the cumulative anodes through each day. Ties are then
///   resolved by moving each task in cell order to its smallest day reachable
///   through a zero-reduced-cost cycle, which keeps the optimum. The flow runs
///   on a graph of days only (`levelling::day_flow`: a placed task's move to another
///   day is an arc between the two days, kept in an ordered set per pair), so
///   a shortest path costs about days × window instead of tasks × days; the
///   general graph's flow stays in the tests as the reference it must equal.
/// * Otherwise (different anode counts under binding supply, or groups): each
///   group becomes one unit (crew use = member count, anodes = sum, cost =
///   sum, window = intersection). Up to [`EXACT_SEARCH_MAX_UNITS`] units, a
///   depth-first branch and bound decides units (larger groups first, then
///   single cells, ties in cell-id order) and tries each unit's days
///   cheapest first (the relaxation's day before that), unplaced last,
///   checking crew and cumulative supply incrementally. Its
///   bounds: cost so far plus each remaining unit's cheapest day still
///   feasible; then the exact min-cost flow optimum of the remaining units
///   with groups split and anodes turned into limits on how many cells fit
///   through each day (the most of the smallest consumers that the anodes
///   cover, and a Moore-Hodgson count over the latest usable days). When
///   that relaxed optimum keeps groups whole and fits the real anodes it
///   closes the subtree. Ties with the incumbent are settled by comparing
///   plans, so the tie-break holds whatever the exploration order. It proves
///   the optimum unless it exceeds [`EXACT_SEARCH_NODE_LIMIT`]; it starts
///   from the repaired relaxation below, so it never returns anything worse.
/// * Larger instances, or an exhausted budget: the same flow relaxation over
///   all units, then a repair: groups are inserted first on their cheapest
///   feasible day, single cells keep their relaxed day unless that day
///   overdraws the cumulative supply (then the largest consumers leave),
///   the rest are inserted on their cheapest feasible day, and a few passes
///   move units to cheaper feasible days and make room for unplaced units by
///   moving the units on one of their days elsewhere, when that improves the
///   plan. No optimality is claimed.
///
/// Costs are compared exactly in integers: the two weights are turned into
/// integers in exactly their ratio (an f64 is an integer times a power of
/// two) whenever every cost sum then stays well inside `i128`; for a plan of
/// a thousand cells over a month that holds for any two weights within a
/// factor of about 10^12. Otherwise the ratio is rounded to 61 bits and
/// `exact` is `false`; if even that could overflow (days near `usize::MAX`
/// from an ideal), the result is [`LevelError::TooLarge`].
///
/// Guaranteed in every mode: crew capacity and cumulative anode supply are
/// never exceeded; each task is either on a day inside its window clipped to
/// the horizon or listed in `unplaced` with a reason; groups share one day or
/// are wholly unplaced. With `exact == true` the plan is also optimal as
/// above. A task whose window lies wholly beyond the horizon is not an error:
/// it is unplaced with [`Unplaced::WindowOutsideHorizon`].
pub fn level(tasks: &[Task], cap: &Capacity, w: Weights) -> Result<Levelled, LevelError> {
    solve(tasks, cap, w, Method::Auto)
}

/// How [`solve`] picks its method; only tests ask for anything but `Auto`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Method {
    /// As documented on [`level`].
    Auto,
    /// Branch and bound whatever the instance, from an empty seed, with or
    /// without the flow relaxation (so tests can check the bare search).
    #[cfg_attr(not(test), allow(dead_code))]
    Search { relax: bool },
}

fn solve(tasks: &[Task], cap: &Capacity, w: Weights, method: Method) -> Result<Levelled, LevelError> {
    if cap.crew.len() != cap.anodes_per_day.len() {
        return Err(LevelError::HorizonMismatch { crew_days: cap.crew.len(), supply_days: cap.anodes_per_day.len() });
    }
    let positive = |x: f64| x.is_finite() && x > 0.0;
    if !positive(w.early) || !positive(w.late) {
        return Err(LevelError::BadWeights { early: w.early, late: w.late });
    }
    if let Some(t) = tasks.iter().find(|t| t.earliest > t.latest) {
        return Err(LevelError::EmptyWindow { cell: t.cell.clone(), earliest: t.earliest, latest: t.latest });
    }
    let n = tasks.len();
    let h = cap.crew.len();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| tasks[a].cell.cmp(&tasks[b].cell));
    if let Some(pair) = order.windows(2).find(|p| tasks[p[0]].cell == tasks[p[1]].cell) {
        return Err(LevelError::DuplicateCell { cell: tasks[pair[0]].cell.clone() });
    }

    // Cumulative anodes available through each day; u128 so that "unlimited"
    // (u64::MAX everywhere) cannot overflow.
    let cum: Vec<u128> = cap
        .anodes_per_day
        .iter()
        .scan(u128::from(cap.anode_stock), |acc, &p| {
            *acc = acc.saturating_add(u128::from(p));
            Some(*acc)
        })
        .collect();

    // Exact integer weights when the instance leaves room for them, else a
    // rounded ratio (and no claim of exactness).
    let exact_try = exact_weights(w).map(|ws| (ws, true));
    let rounded_try = Some((rounded_weights(w), false));
    let (built, weights_exact) = exact_try
        .into_iter()
        .chain(rounded_try)
        .find_map(|((we, wl), is_exact)| {
            build_items(tasks, &order, &cap.crew, we, wl).ok().filter(|b| has_headroom(b, h)).map(|b| (b, is_exact))
        })
        .ok_or(LevelError::TooLarge)?;
    let Built { items, excluded, .. } = built;

    let grouped = items.iter().any(|it| it.size > 1);
    let first_anodes = items.first().map(|it| it.anodes);
    let equal_anodes = items.iter().all(|it| Some(it.anodes) == first_anodes);
    let never_binds = supply_never_binds(&items, &cum);

    let (assign, proven) = if let Method::Search { relax } = method {
        branch_and_bound(&items, &cap.crew, &cum, vec![None; items.len()], relax)?
    } else if !grouped && (equal_anodes || never_binds) {
        let per = if never_binds { 0 } else { first_anodes.unwrap_or(0) };
        let units = cumulative_units(&cum, per, items.len());
        let options: Vec<Vec<(usize, i128)>> = items.iter().map(Item::options).collect();
        (day_flow::assign(&options, &cap.crew, units.as_deref(), None)?, true)
    } else {
        let seed = repair(&items, &cap.crew, &cum)?;
        if items.len() <= EXACT_SEARCH_MAX_UNITS { branch_and_bound(&items, &cap.crew, &cum, seed, true)? } else { (seed, false) }
    };

    let mut day = vec![None; n];
    let mut reason: Vec<Option<Unplaced>> = vec![None; n];
    for (members, why) in &excluded {
        for &i in members {
            reason[i] = Some(*why);
        }
    }
    let item_reasons = reasons(&items, &assign, &cap.crew);
    for ((item, placed), why) in items.iter().zip(&assign).zip(item_reasons) {
        for &i in &item.members {
            day[i] = *placed;
            reason[i] = why;
        }
    }
    let (mut early_days, mut late_days) = (0u128, 0u128);
    for (t, d) in tasks.iter().zip(&day) {
        if let Some(d) = *d {
            let (e, l) = offsets(clamped_ideal(t), d);
            early_days = early_days.saturating_add(e as u128);
            late_days = late_days.saturating_add(l as u128);
        }
    }
    let cost = w.early * early_days as f64 + w.late * late_days as f64;
    let unplaced = reason.iter().enumerate().filter_map(|(i, r)| r.map(|r| (i, r))).collect();
    Ok(Levelled { day, unplaced, cost, exact: proven && (weights_exact || items.is_empty()) })
}

// ---------------------------------------------------------------------------
// Costs

/// Lexicographic cost: unplaced tasks first, then weighted distance. Being an
/// ordered group, it works in shortest paths and bounds like a number while
/// letting the first objective dominate without a big-M constant.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Default)]
struct Cost {
    unplaced: i128,
    dist: i128,
}

impl Cost {
    const ZERO: Cost = Cost { unplaced: 0, dist: 0 };

    fn placed(dist: i128) -> Self {
        Cost { unplaced: 0, dist }
    }

    fn dropped(tasks: u64) -> Self {
        Cost { unplaced: i128::from(tasks), dist: 0 }
    }
}

impl Add for Cost {
    type Output = Cost;
    fn add(self, o: Cost) -> Cost {
        Cost { unplaced: self.unplaced + o.unplaced, dist: self.dist + o.dist }
    }
}

impl Sub for Cost {
    type Output = Cost;
    fn sub(self, o: Cost) -> Cost {
        Cost { unplaced: self.unplaced - o.unplaced, dist: self.dist - o.dist }
    }
}

impl Neg for Cost {
    type Output = Cost;
    fn neg(self) -> Cost {
        Cost { unplaced: -self.unplaced, dist: -self.dist }
    }
}

/// Odd mantissa and binary exponent with `x == m * 2^e` (x finite, > 0).
fn decompose(x: f64) -> (u64, i32) {
    let bits = x.to_bits();
    let exp = ((bits >> 52) & 0x7ff) as i32;
    let frac = bits & ((1u64 << 52) - 1);
    let (m, e) = if exp == 0 { (frac, -1074) } else { (frac | (1u64 << 52), exp - 1075) };
    if m == 0 {
        return (0, 0);
    }
    let tz = m.trailing_zeros();
    (m >> tz, e + tz as i32)
}

fn gcd(mut a: u128, mut b: u128) -> u128 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

/// Integers in exactly the ratio early : late, if both fit in 120 bits.
fn exact_weights(w: Weights) -> Option<(i128, i128)> {
    let (m1, e1) = decompose(w.early);
    let (m2, e2) = decompose(w.late);
    let base = e1.min(e2);
    let (s1, s2) = ((e1 - base) as u32, (e2 - base) as u32);
    if s1 > 67 || s2 > 67 || m1 == 0 || m2 == 0 {
        return None;
    }
    let a = u128::from(m1) << s1;
    let b = u128::from(m2) << s2;
    let g = gcd(a, b).max(1);
    let (a, b) = (a / g, b / g);
    (a <= EXACT_WEIGHT_LIMIT && b <= EXACT_WEIGHT_LIMIT).then_some((a as i128, b as i128))
}

/// Integers in nearly the ratio early : late, the larger being 2^61.
fn rounded_weights(w: Weights) -> (i128, i128) {
    let top = w.early.max(w.late);
    let scale = |x: f64| ((x / top) * 2f64.powi(61)).round().max(1.0) as i128;
    (scale(w.early), scale(w.late))
}

/// Whether every cost, sum and shortest-path potential stays well inside
/// i128: potentials are bounded by (nodes x largest arc cost).
fn has_headroom(built: &Built, h: usize) -> bool {
    let members: usize = built.items.iter().map(|it| it.members.len()).sum();
    let nodes = members as u128 + 2 * h as u128 + 8;
    built
        .cost_total
        .checked_add(1)
        .and_then(|c| c.checked_mul(nodes))
        .and_then(|c| c.checked_mul(16))
        .is_some_and(|c| c <= i128::MAX as u128)
}

fn clamped_ideal(t: &Task) -> usize {
    t.ideal.max(t.earliest).min(t.latest)
}

/// (days early, days late) of `day` against `ideal`.
fn offsets(ideal: usize, day: usize) -> (usize, usize) {
    if day < ideal { (ideal - day, 0) } else { (0, day - ideal) }
}

fn task_cost(t: &Task, day: usize, we: i128, wl: i128) -> Option<i128> {
    let (e, l) = offsets(clamped_ideal(t), day);
    we.checked_mul(i128::try_from(e).ok()?)?.checked_add(wl.checked_mul(i128::try_from(l).ok()?)?)
}

// ---------------------------------------------------------------------------
// Placement units

/// A placement unit: one cell, or a whole group that moves as one.
struct Item {
    /// Input indices, in cell-id order.
    members: Vec<usize>,
    /// Position of each member in cell-id order.
    ranks: Vec<usize>,
    /// Crew slots it takes (member count).
    size: u64,
    /// Anodes it consumes (sum over members).
    anodes: u128,
    /// Each member's anodes.
    member_anodes: Vec<u128>,
    /// Days it may use (inside the common window, crew >= size), increasing.
    days: Vec<usize>,
    /// Its cost on each of `days`.
    costs: Vec<i128>,
    /// Each member's cost on each of `days`.
    member_costs: Vec<Vec<i128>>,
}

impl Item {
    fn options(&self) -> Vec<(usize, i128)> {
        self.days.iter().copied().zip(self.costs.iter().copied()).collect()
    }
}

struct Built {
    /// Units that have at least one usable day, sorted by first member's id.
    items: Vec<Item>,
    /// Members of units that can never be placed, with the reason.
    excluded: Vec<(Vec<usize>, Unplaced)>,
    /// Sum over units of their largest cost: bounds every cost sum.
    cost_total: u128,
}

fn build_items(tasks: &[Task], order: &[usize], crew: &[u32], we: i128, wl: i128) -> Result<Built, LevelError> {
    let h = crew.len();
    let mut groups: BTreeMap<u32, Vec<usize>> = BTreeMap::new();
    let mut units: Vec<Vec<usize>> = Vec::new();
    for &i in order {
        match tasks[i].group {
            Some(g) => groups.entry(g).or_default().push(i),
            None => units.push(vec![i]),
        }
    }
    units.extend(groups.into_values());
    // Cell-id order of each unit's first member is the order of the
    // tie-break, so sort by it (ranks are unique: ids are).
    let mut rank = vec![0usize; tasks.len()];
    for (r, &i) in order.iter().enumerate() {
        rank[i] = r;
    }
    units.sort_by_key(|m| m.first().map_or(usize::MAX, |&i| rank[i]));

    let mut items = Vec::new();
    let mut excluded = Vec::new();
    let mut cost_total: u128 = 0;
    for members in units {
        let lo = members.iter().map(|&i| tasks[i].earliest).max().unwrap_or(0);
        let hi = members.iter().map(|&i| tasks[i].latest).min().unwrap_or(0).min(h.saturating_sub(1));
        if lo >= h {
            excluded.push((members, Unplaced::WindowOutsideHorizon));
            continue;
        }
        let off = |d: usize| members.iter().any(|&i| tasks[i].days_off.contains(&d));
        if (lo..=hi).all(|d| crew.get(d).is_none_or(|&c| c == 0) || off(d)) {
            excluded.push((members, Unplaced::NoWorkingDayInWindow));
            continue;
        }
        let size = members.len() as u64;
        let days: Vec<usize> = (lo..=hi).filter(|&d| !off(d) && crew.get(d).is_some_and(|&c| u64::from(c) >= size)).collect();
        if days.is_empty() {
            excluded.push((members, Unplaced::NoCrewCapacity));
            continue;
        }
        let mut member_costs = Vec::with_capacity(members.len());
        for &i in &members {
            let row = days.iter().map(|&d| task_cost(&tasks[i], d, we, wl)).collect::<Option<Vec<i128>>>().ok_or(LevelError::TooLarge)?;
            member_costs.push(row);
        }
        let mut costs = vec![0i128; days.len()];
        for row in &member_costs {
            for (c, &m) in costs.iter_mut().zip(row) {
                *c = c.checked_add(m).ok_or(LevelError::TooLarge)?;
            }
        }
        let worst = costs.iter().copied().max().unwrap_or(0).max(0) as u128;
        cost_total = cost_total.checked_add(worst).ok_or(LevelError::TooLarge)?;
        let anodes = members.iter().map(|&i| u128::from(tasks[i].anodes)).sum();
        items.push(Item {
            ranks: members.iter().map(|&i| rank[i]).collect(),
            member_anodes: members.iter().map(|&i| u128::from(tasks[i].anodes)).collect(),
            members,
            size,
            anodes,
            days,
            costs,
            member_costs,
        });
    }
    Ok(Built { items, excluded, cost_total })
}

/// True when, on every day, the anodes available so far cover every unit
/// that could possibly be placed by then: supply is then irrelevant.
fn supply_never_binds(items: &[Item], cum: &[u128]) -> bool {
    let mut need = vec![0u128; cum.len()];
    for it in items {
        if let Some(slot) = it.days.first().and_then(|&d| need.get_mut(d)) {
            *slot = slot.saturating_add(it.anodes);
        }
    }
    let mut acc = 0u128;
    need.iter().zip(cum).all(|(&n, &c)| {
        acc = acc.saturating_add(n);
        acc <= c
    })
}

/// Changes of `per` anodes each allowed through each day, capped at `m`
/// (more can never be used); `None` when supply is not a constraint.
fn cumulative_units(cum: &[u128], per: u128, m: usize) -> Option<Vec<u64>> {
    if per == 0 {
        return None;
    }
    Some(cum.iter().map(|&c| (c / per).min(m as u128) as u64).collect())
}

/// For cells given as (first usable day, anodes) and the anodes `cap[d]`
/// that days `0..=d` may still take (non-decreasing), how many cells can be
/// changed on days `0..=d` at most: only cells usable by day d count, and
/// taking the smallest consumers first gives the most.
fn count_limits(cells: &[(usize, u128)], cap: &[u128]) -> Vec<u64> {
    let mut by_day = cells.to_vec();
    by_day.sort_unstable();
    let mut eligible: Vec<u128> = Vec::with_capacity(by_day.len());
    let mut next = by_day.iter().peekable();
    cap.iter()
        .enumerate()
        .map(|(d, &limit)| {
            while let Some(&(_, a)) = next.next_if(|&&(first, _)| first <= d) {
                let at = eligible.partition_point(|&x| x <= a);
                eligible.insert(at, a);
            }
            let mut total = 0u128;
            eligible
                .iter()
                .take_while(|&&a| {
                    total = total.saturating_add(a);
                    total <= limit
                })
                .count() as u64
        })
        .collect()
}

// ---------------------------------------------------------------------------
// Min-cost flow

#[cfg(test)]
struct Arc {
    to: usize,
    cap: i64,
    cost: Cost,
}

#[cfg(test)]
/// Residual graph; arc `e` and its reverse `e ^ 1` are stored together.
struct Graph {
    arcs: Vec<Arc>,
    adj: Vec<Vec<usize>>,
}

#[cfg(test)]
impl Graph {
    fn new(nodes: usize) -> Self {
        Graph { arcs: Vec::new(), adj: vec![Vec::new(); nodes] }
    }

    fn add(&mut self, from: usize, to: usize, cap: i64, cost: Cost) -> usize {
        let id = self.arcs.len();
        self.arcs.push(Arc { to, cap, cost });
        self.arcs.push(Arc { to: from, cap: 0, cost: -cost });
        self.adj[from].push(id);
        self.adj[to].push(id + 1);
        id
    }

    fn push(&mut self, e: usize) {
        self.arcs[e].cap -= 1;
        self.arcs[e ^ 1].cap += 1;
    }

    fn tail(&self, e: usize) -> usize {
        self.arcs[e ^ 1].to
    }

    /// Shortest distances from `starts` over residual arcs (Bellman-Ford with
    /// a queue: residual arcs have negative costs) and the arc into each node.
    fn shortest(&self, starts: &[usize]) -> Result<(Vec<Option<Cost>>, Vec<usize>), LevelError> {
        let v = self.adj.len();
        let mut dist: Vec<Option<Cost>> = vec![None; v];
        let mut via = vec![usize::MAX; v];
        let mut queued = vec![false; v];
        let mut rounds = vec![0usize; v];
        let mut queue = VecDeque::new();
        for &s in starts {
            dist[s] = Some(Cost::ZERO);
            queued[s] = true;
            queue.push_back(s);
        }
        while let Some(u) = queue.pop_front() {
            queued[u] = false;
            let Some(du) = dist[u] else { continue };
            for &e in &self.adj[u] {
                let arc = &self.arcs[e];
                if arc.cap <= 0 {
                    continue;
                }
                let nd = du + arc.cost;
                if dist[arc.to].is_none_or(|old| nd < old) {
                    dist[arc.to] = Some(nd);
                    via[arc.to] = e;
                    if !queued[arc.to] {
                        rounds[arc.to] += 1;
                        // A node relaxed more than |V| times means a negative
                        // cycle, impossible for a min-cost residual graph.
                        if rounds[arc.to] > v + 1 {
                            return Err(LevelError::Internal("negative cycle in residual graph"));
                        }
                        queued[arc.to] = true;
                        queue.push_back(arc.to);
                    }
                }
            }
        }
        Ok((dist, via))
    }
}

#[cfg(test)]
/// Assigns each task (given in cell-id order) to one of its `(day, cost)`
/// options or to nothing, minimising (unplaced, cost), with at most
/// `crew[d]` tasks on day `d`, at most `cum_units[d]` tasks on days `0..=d`
/// and at most `limit` tasks in all. With `lexmin`, ties go to the smallest
/// days in task order.
fn flow_assign(
    options: &[Vec<(usize, i128)>],
    crew: &[u32],
    cum_units: Option<&[u64]>,
    limit: Option<usize>,
    lexmin: bool,
) -> Result<Vec<Option<usize>>, LevelError> {
    let m = options.len();
    let h = crew.len();
    if m == 0 {
        return Ok(Vec::new());
    }
    let (source, sink) = (0usize, 1usize);
    let task_node = |i: usize| 2 + i;
    let day_node = |d: usize| 2 + m + d;
    let supply_node = |d: usize| 2 + m + h + d;
    // Every placed task passes this node, which caps how many are placed.
    let placed = 2 + m + 2 * h;
    let all = i64::try_from(m).map_err(|_| LevelError::TooLarge)?;
    let mut g = Graph::new(3 + m + 2 * h);
    let most = limit.map_or(all, |l| i64::try_from(l).unwrap_or(all).min(all));
    g.add(placed, sink, most, Cost::ZERO);

    let mut task_arcs: Vec<Vec<(usize, usize)>> = Vec::with_capacity(m);
    let mut drop_arc = Vec::with_capacity(m);
    for (i, opts) in options.iter().enumerate() {
        g.add(source, task_node(i), 1, Cost::ZERO);
        let arcs = opts.iter().filter(|&&(d, _)| d < h).map(|&(d, c)| (d, g.add(task_node(i), day_node(d), 1, Cost::placed(c)))).collect();
        task_arcs.push(arcs);
        drop_arc.push(g.add(task_node(i), sink, 1, Cost::dropped(1)));
    }
    for (d, &c) in crew.iter().enumerate() {
        if c > 0 {
            g.add(day_node(d), supply_node(d), i64::from(c).min(all), Cost::ZERO);
        }
        // A change on day d may use anodes made on any earlier day.
        if d > 0 {
            g.add(supply_node(d), supply_node(d - 1), all, Cost::ZERO);
        }
    }
    match cum_units {
        None => {
            if h > 0 {
                g.add(supply_node(0), placed, all, Cost::ZERO);
            }
        }
        Some(units) => {
            // Changes through day d are also changes through every later
            // day, so the binding allowance is the suffix minimum, which is
            // non-decreasing and can be fed in day by day.
            let mut allowed: Vec<u64> = units.iter().take(h).map(|&u| u.min(m as u64)).collect();
            for d in (0..allowed.len().saturating_sub(1)).rev() {
                allowed[d] = allowed[d].min(allowed[d + 1]);
            }
            let mut before = 0u64;
            for (d, &u) in allowed.iter().enumerate() {
                let fresh = u.saturating_sub(before);
                if fresh > 0 {
                    let cap = i64::try_from(fresh).map_err(|_| LevelError::TooLarge)?;
                    g.add(supply_node(d), placed, cap, Cost::ZERO);
                }
                before = before.max(u);
            }
        }
    }

    // Successive shortest paths: each task carries one unit and can always
    // reach the sink through its unplaced arc, so exactly m augmentations.
    for _ in 0..m {
        let (dist, via) = g.shortest(&[source])?;
        if dist[sink].is_none() {
            return Err(LevelError::Internal("sink unreachable"));
        }
        let mut node = sink;
        let mut steps = 0;
        while node != source {
            let e = via[node];
            if e == usize::MAX || steps > g.adj.len() {
                return Err(LevelError::Internal("broken shortest path"));
            }
            g.push(e);
            node = g.tail(e);
            steps += 1;
        }
    }

    if lexmin {
        lexicographic_ties(&mut g, &task_arcs, &drop_arc, source)?;
    }

    Ok(task_arcs.iter().map(|arcs| arcs.iter().find(|&&(_, e)| g.arcs[e].cap == 0).map(|&(d, _)| d)).collect())
}

#[cfg(test)]
/// Among all min-cost flows, moves to the one whose task days (in task order,
/// unplaced last) are lexicographically smallest. With optimal potentials,
/// the optimal flows are exactly those reachable by cycles of zero reduced
/// cost; a task's unit moves to a smaller day iff such a cycle runs through
/// it, and freezing decided tasks keeps earlier choices.
fn lexicographic_ties(g: &mut Graph, task_arcs: &[Vec<(usize, usize)>], drop_arc: &[usize], source: usize) -> Result<(), LevelError> {
    let v = g.adj.len();
    let every: Vec<usize> = (0..v).collect();
    let (dist, _) = g.shortest(&every)?;
    let pot: Vec<Cost> = dist.into_iter().map(|d| d.unwrap_or(Cost::ZERO)).collect();
    let reduced = |g: &Graph, e: usize| g.arcs[e].cost + pot[g.tail(e)] - pot[g.arcs[e].to];

    let mut blocked = vec![false; v];
    blocked[source] = true;
    let mut seen = vec![false; v];
    let mut next = vec![usize::MAX; v];
    for (i, arcs) in task_arcs.iter().enumerate() {
        let t = 2 + i;
        blocked[t] = true;
        let current = arcs.iter().map(|&(_, e)| e).chain(std::iter::once(drop_arc[i])).find(|&e| g.arcs[e].cap == 0);
        let Some(current) = current else {
            return Err(LevelError::Internal("task without flow"));
        };
        if reduced(g, current) != Cost::ZERO {
            continue;
        }
        let target = g.arcs[current].to;
        // Which nodes can reach `target` through zero-reduced-cost residual
        // arcs avoiding frozen tasks, and by which arc.
        seen.iter_mut().for_each(|s| *s = false);
        seen[target] = true;
        let mut queue = VecDeque::from([target]);
        while let Some(x) = queue.pop_front() {
            for &out in &g.adj[x] {
                let into = out ^ 1;
                let y = g.arcs[out].to;
                if seen[y] || blocked[y] || g.arcs[into].cap <= 0 {
                    continue;
                }
                if reduced(g, into) != Cost::ZERO {
                    continue;
                }
                seen[y] = true;
                next[y] = into;
                queue.push_back(y);
            }
        }
        let better = arcs
            .iter()
            .take_while(|&&(_, e)| e != current)
            .find(|&&(_, e)| g.arcs[e].cap > 0 && seen[g.arcs[e].to] && reduced(g, e) == Cost::ZERO)
            .map(|&(_, e)| e);
        if let Some(first) = better {
            g.push(first);
            let mut node = g.arcs[first].to;
            let mut steps = 0;
            while node != target {
                let e = next[node];
                if e == usize::MAX || steps > v {
                    return Err(LevelError::Internal("broken tie-break cycle"));
                }
                g.push(e);
                node = g.arcs[e].to;
                steps += 1;
            }
            g.push(current ^ 1);
        }
    }
    Ok(())
}

// ---------------------------------------------------------------------------
// Capacity bookkeeping for units

#[derive(Clone)]
struct Load {
    crew_left: Vec<u64>,
    /// Anodes still unclaimed through each day (cumulative slack).
    slack: Vec<u128>,
}

impl Load {
    fn new(crew: &[u32], cum: &[u128]) -> Self {
        Load { crew_left: crew.iter().map(|&c| u64::from(c)).collect(), slack: cum.to_vec() }
    }

    fn fits(&self, d: usize, it: &Item) -> bool {
        self.crew_left.get(d).is_some_and(|&c| c >= it.size) && self.slack.get(d..).is_some_and(|s| s.iter().all(|&x| x >= it.anodes))
    }

    fn place(&mut self, d: usize, it: &Item) {
        if let Some(c) = self.crew_left.get_mut(d) {
            *c = c.saturating_sub(it.size);
        }
        for s in self.slack.iter_mut().skip(d) {
            *s = s.saturating_sub(it.anodes);
        }
    }

    fn remove(&mut self, d: usize, it: &Item) {
        if let Some(c) = self.crew_left.get_mut(d) {
            *c = c.saturating_add(it.size);
        }
        for s in self.slack.iter_mut().skip(d) {
            *s = s.saturating_add(it.anodes);
        }
    }

    /// Cheapest day the unit fits on now, smaller day on equal cost.
    fn best_fit(&self, it: &Item) -> Option<(usize, i128)> {
        it.days.iter().zip(&it.costs).filter(|&(&d, _)| self.fits(d, it)).min_by_key(|&(&d, &c)| (c, d)).map(|(&d, &c)| (d, c))
    }
}

fn cost_on(it: &Item, d: usize) -> i128 {
    it.days.iter().position(|&x| x == d).and_then(|p| it.costs.get(p).copied()).unwrap_or(0)
}

fn plan_value(items: &[Item], assign: &[Option<usize>]) -> Cost {
    items.iter().zip(assign).fold(Cost::ZERO, |acc, (it, a)| {
        acc + match a {
            Some(d) => Cost::placed(cost_on(it, *d)),
            None => Cost::dropped(it.size),
        }
    })
}

// ---------------------------------------------------------------------------
// Relaxation and repair

/// Feasible plan from the relaxed flow (groups split, anodes only as counts
/// from [`count_limits`]), repaired and then improved by local moves.
fn repair(items: &[Item], crew: &[u32], cum: &[u128]) -> Result<Vec<Option<usize>>, LevelError> {
    let h = crew.len();
    let mut options = Vec::new();
    let mut owner = Vec::new();
    for (k, it) in items.iter().enumerate() {
        for row in &it.member_costs {
            options.push(it.days.iter().copied().zip(row.iter().copied()).collect());
            owner.push(k);
        }
    }
    let cells: Vec<(usize, u128)> = items
        .iter()
        .filter_map(|it| Some((*it.days.first()?, it)))
        .flat_map(|(first, it)| it.member_anodes.iter().map(move |&a| (first, a)))
        .collect();
    let units = count_limits(&cells, cum);
    let relaxed = day_flow::assign(&options, crew, Some(&units), None)?;

    // Single cells keep their relaxed day unless their day overdraws the
    // cumulative supply; groups are always re-inserted whole.
    let mut by_day: Vec<Vec<usize>> = vec![Vec::new(); h];
    for (&k, day) in owner.iter().zip(&relaxed) {
        if let (Some(d), Some(it)) = (day, items.get(k))
            && it.size == 1
            && let Some(list) = by_day.get_mut(*d)
        {
            list.push(k);
        }
    }
    let mut assign: Vec<Option<usize>> = vec![None; items.len()];
    let mut used = 0u128;
    for (d, (list, &avail)) in by_day.iter_mut().zip(cum).enumerate() {
        // Largest consumers (then largest ids) leave first.
        list.sort_by_key(|&k| (items[k].anodes, k));
        used = list.iter().fold(used, |u, &k| u.saturating_add(items[k].anodes));
        while used > avail {
            match list.pop() {
                Some(k) => used = used.saturating_sub(items[k].anodes),
                None => break,
            }
        }
        for &k in list.iter() {
            assign[k] = Some(d);
        }
    }
    // Groups are the hardest to fit, so they claim days first; the relaxed
    // single cells then keep their day where it still fits.
    let mut load = Load::new(crew, cum);
    let mut groups: Vec<usize> = (0..items.len()).filter(|&k| items[k].size > 1).collect();
    groups.sort_by_key(|&k| (Reverse(items[k].size), items[k].days.len(), k));
    for &k in &groups {
        if let Some((d, _)) = load.best_fit(&items[k]) {
            load.place(d, &items[k]);
            assign[k] = Some(d);
        }
    }
    for (k, it) in items.iter().enumerate() {
        if it.size == 1
            && let Some(d) = assign[k]
        {
            if load.fits(d, it) {
                load.place(d, it);
            } else {
                assign[k] = None;
            }
        }
    }
    let mut pending: Vec<usize> = (0..items.len()).filter(|&k| assign[k].is_none() && items[k].size == 1).collect();
    pending.sort_by_key(|&k| (Reverse(items[k].anodes), k));
    for k in pending {
        if let Some((d, _)) = load.best_fit(&items[k]) {
            load.place(d, &items[k]);
            assign[k] = Some(d);
        }
    }
    for _ in 0..4 {
        let mut changed = false;
        for (k, it) in items.iter().enumerate() {
            let Some(old) = assign[k] else { continue };
            load.remove(old, it);
            match load.best_fit(it) {
                Some((d, c)) if c < cost_on(it, old) => {
                    load.place(d, it);
                    assign[k] = Some(d);
                    changed = true;
                }
                _ => load.place(old, it),
            }
        }
        let mut unplaced: Vec<usize> = (0..items.len()).filter(|&k| assign[k].is_none()).collect();
        unplaced.sort_by_key(|&k| (Reverse(items[k].size), k));
        for k in unplaced {
            if let Some((d, _)) = load.best_fit(&items[k]) {
                load.place(d, &items[k]);
                assign[k] = Some(d);
                changed = true;
            } else if eject_for(items, &mut assign, &mut load, k) {
                changed = true;
            }
        }
        if !changed {
            break;
        }
    }
    Ok(assign)
}

/// Tries to place unplaced unit `k` on one of its days by taking the units
/// there off and re-inserting them elsewhere; keeps the first such move that
/// improves the plan's value, else leaves everything as it was.
fn eject_for(items: &[Item], assign: &mut [Option<usize>], load: &mut Load, k: usize) -> bool {
    let Some(it) = items.get(k) else {
        return false;
    };
    for &d in &it.days {
        // Latest ids leave first, only as many as make room.
        let on_day: Vec<usize> = (0..items.len()).rev().filter(|&j| j != k && assign[j] == Some(d)).collect();
        if on_day.is_empty() {
            continue;
        }
        let saved_load = load.clone();
        let mut evicted = Vec::new();
        for j in on_day {
            if load.fits(d, it) {
                break;
            }
            load.remove(d, &items[j]);
            assign[j] = None;
            evicted.push(j);
        }
        if load.fits(d, it) {
            load.place(d, it);
            assign[k] = Some(d);
            // Value change: k placed, evicted units re-placed or dropped.
            let mut change = Cost::placed(cost_on(it, d)) - Cost::dropped(it.size);
            evicted.sort_by_key(|&j| (Reverse(items[j].size), j));
            for &j in &evicted {
                change = change - Cost::placed(cost_on(&items[j], d));
                match load.best_fit(&items[j]) {
                    Some((e, c)) => {
                        load.place(e, &items[j]);
                        assign[j] = Some(e);
                        change = change + Cost::placed(c);
                    }
                    None => change = change + Cost::dropped(items[j].size),
                }
            }
            if change < Cost::ZERO {
                return true;
            }
            assign[k] = None;
        }
        for &j in &evicted {
            assign[j] = Some(d);
        }
        *load = saved_load;
    }
    false
}

// ---------------------------------------------------------------------------
// Branch and bound

struct Search<'a> {
    items: &'a [Item],
    /// Order in which units are decided.
    order: Vec<usize>,
    /// Whether each unit's entry in `current` is decided (None = unplaced).
    decided: Vec<bool>,
    load: Load,
    current: Vec<Option<usize>>,
    best: Vec<Option<usize>>,
    best_value: Cost,
    nodes: u64,
    aborted: bool,
    /// Whether to use the flow relaxation (always, except in tests).
    relax: bool,
}

/// What a flow relaxation tells the search about a node.
struct Relaxation {
    /// Lower bound on the value of the undecided units.
    bound: Cost,
    /// Day the relaxation gives the unit about to be decided.
    hint: Option<Option<usize>>,
    /// The best completion, when the relaxed plan is feasible as it is.
    solved: Option<Vec<Option<usize>>>,
}

/// Lexicographic order of plans: days compare as numbers, unplaced last.
fn lex_cmp(a: &[Option<usize>], b: &[Option<usize>]) -> Ordering {
    let key = |o: &Option<usize>| o.map_or(usize::MAX, |d| d);
    a.iter().map(key).cmp(b.iter().map(key))
}

/// Suffix minimum of the cumulative slack: the anodes a unit placed on day
/// `d` may take without starving any later day.
fn suffix_min(slack: &[u128]) -> Vec<u128> {
    let mut out = slack.to_vec();
    for d in (0..out.len().saturating_sub(1)).rev() {
        out[d] = out[d].min(out[d + 1]);
    }
    out
}

impl Search<'_> {
    /// Whether nothing below the current node can beat the incumbent: a
    /// worse bound, or an equal one while the decided units already make
    /// every plan below lexicographically larger than the incumbent.
    fn prunes(&self, bound: Cost) -> bool {
        if bound != self.best_value {
            return bound > self.best_value;
        }
        let key = |o: Option<usize>| o.map_or(usize::MAX, |d| d);
        for ((&cur, &best), &fixed) in self.current.iter().zip(&self.best).zip(&self.decided) {
            if !fixed {
                return false;
            }
            match key(cur).cmp(&key(best)) {
                Ordering::Less => return false,
                Ordering::Greater => return true,
                Ordering::Equal => {}
            }
        }
        // Identical to the incumbent: nothing new below.
        true
    }

    fn fits_fast(&self, d: usize, it: &Item, suffix_min: &[u128]) -> bool {
        self.load.crew_left.get(d).is_some_and(|&c| c >= it.size) && suffix_min.get(d).is_some_and(|&s| s >= it.anodes)
    }

    /// Cheapest outcome for `it` alone given the current load: a lower bound.
    fn cheapest(&self, it: &Item, suffix_min: &[u128]) -> Cost {
        it.days
            .iter()
            .zip(&it.costs)
            .filter(|&(&d, _)| self.fits_fast(d, it, suffix_min))
            .map(|(_, &c)| Cost::placed(c))
            .min()
            .unwrap_or(Cost::dropped(it.size))
    }

    /// Optimum of the undecided units `open` relaxed (groups split into cells
    /// sharing the remaining crew; anodes only as limits on how many cells
    /// fit through each day, from [`count_limits`] and [`most_placeable`]),
    /// solved exactly by min-cost flow with the
    /// lexicographic tie-break. Every real completion is feasible for it, so
    /// its value is a lower bound; when its plan keeps groups together and
    /// respects the real anodes, it is the best completion, tie-break
    /// included, and is returned (one day per unit of `open`).
    fn relaxed(&self, open: &[usize], suffix_min: &[u128]) -> Result<Relaxation, LevelError> {
        let items = self.items;
        let mut cells: Vec<(usize, usize, usize)> =
            open.iter().enumerate().flat_map(|(o, &j)| items[j].ranks.iter().enumerate().map(move |(m, &r)| (r, o, m))).collect();
        cells.sort_unstable();
        let options: Vec<Vec<(usize, i128)>> = cells
            .iter()
            .map(|&(_, o, m)| {
                let it = &items[open[o]];
                it.days
                    .iter()
                    .zip(&it.member_costs[m])
                    .filter(|&(&d, _)| self.fits_fast(d, it, suffix_min))
                    .map(|(&d, &c)| (d, c))
                    .collect()
            })
            .collect();
        let firsts: Vec<(usize, u128)> = cells
            .iter()
            .zip(&options)
            .filter_map(|(&(_, o, m), opts)| Some((opts.first()?.0, *items[open[o]].member_anodes.get(m)?)))
            .collect();
        let units = count_limits(&firsts, suffix_min);
        let crew: Vec<u32> = self.load.crew_left.iter().map(|&c| u32::try_from(c).unwrap_or(u32::MAX)).collect();
        let limit = most_placeable(&cells, &options, items, open, suffix_min);
        let days = day_flow::assign(&options, &crew, Some(&units), Some(limit))?;

        let mut value = Cost::ZERO;
        let mut unit_day: Vec<Option<Option<usize>>> = vec![None; open.len()];
        let mut together = true;
        for (&(_, o, m), day) in cells.iter().zip(&days) {
            let it = &items[open[o]];
            value = value
                + match day {
                    Some(d) => Cost::placed(it.days.iter().position(|x| x == d).map_or(0, |p| it.member_costs[m][p])),
                    None => Cost::dropped(1),
                };
            match unit_day[o] {
                None => unit_day[o] = Some(*day),
                Some(other) => together &= other == *day,
            }
        }
        let plan: Vec<Option<usize>> = unit_day.into_iter().map(Option::flatten).collect();
        let mut out = Relaxation { bound: value, hint: plan.first().copied(), solved: None };
        if !together {
            return Ok(out);
        }
        let mut load = self.load.clone();
        for (&j, d) in open.iter().zip(&plan) {
            if let Some(d) = *d {
                if !load.fits(d, &items[j]) {
                    return Ok(out);
                }
                load.place(d, &items[j]);
            }
        }
        out.solved = Some(plan);
        Ok(out)
    }

    fn offer(&mut self, value: Cost) {
        if value < self.best_value || (value == self.best_value && lex_cmp(&self.current, &self.best) == Ordering::Less) {
            self.best.clone_from(&self.current);
            self.best_value = value;
        }
    }

    /// Decides `order[pos]`: its cheapest days first (good plans early prune
    /// more), unplaced last. Ties with the incumbent are settled by comparing
    /// plans, so the order of exploration does not affect the result.
    fn run(&mut self, pos: usize, value: Cost) -> Result<(), LevelError> {
        self.nodes += 1;
        if self.nodes > EXACT_SEARCH_NODE_LIMIT {
            self.aborted = true;
            return Ok(());
        }
        let items = self.items;
        let Some(&k) = self.order.get(pos) else {
            self.offer(value);
            return Ok(());
        };
        let it = &items[k];
        let open = self.order.get(pos..).unwrap_or(&[]).to_vec();
        let suffix_min = suffix_min(&self.load.slack);
        let rest = open.iter().skip(1).fold(Cost::ZERO, |acc, &j| acc + self.cheapest(&items[j], &suffix_min));
        if self.prunes(value + self.cheapest(it, &suffix_min) + rest) {
            return Ok(());
        }
        // The cheap bound ignores that units compete for crew and anodes;
        // the flow relaxation does not, and may even solve the subtree.
        let mut hint = None;
        if self.relax {
            self.nodes += open.iter().map(|&j| items[j].size).sum::<u64>();
            let relaxation = self.relaxed(&open, &suffix_min)?;
            if self.prunes(value + relaxation.bound) {
                return Ok(());
            }
            if let Some(plan) = relaxation.solved {
                for (&j, d) in open.iter().zip(plan) {
                    self.current[j] = d;
                    self.decided[j] = true;
                }
                self.offer(value + relaxation.bound);
                for &j in &open {
                    self.current[j] = None;
                    self.decided[j] = false;
                }
                return Ok(());
            }
            hint = relaxation.hint;
        }
        // The relaxation's choice first (a dive towards good plans), then the
        // cheapest days, unplaced last.
        let mut choices: Vec<(bool, Cost, Option<usize>)> = it
            .days
            .iter()
            .zip(&it.costs)
            .filter(|&(&d, _)| self.fits_fast(d, it, &suffix_min))
            .map(|(&d, &c)| (hint != Some(Some(d)), Cost::placed(c), Some(d)))
            .collect();
        choices.push((true, Cost::dropped(it.size), None));
        choices.sort_unstable_by_key(|&(later, c, d)| (later, d.is_none(), c, d));
        self.decided[k] = true;
        for (_, c, d) in choices {
            self.current[k] = d;
            if self.prunes(value + c + rest) {
                continue;
            }
            if let Some(d) = d {
                self.load.place(d, it);
                self.run(pos + 1, value + c)?;
                self.load.remove(d, it);
            } else {
                self.run(pos + 1, value + c)?;
            }
            if self.aborted {
                break;
            }
        }
        self.current[k] = None;
        self.decided[k] = false;
        Ok(())
    }
}

/// Upper bound on how many of `cells` can still be placed, by anodes alone:
/// each cell is moved to its latest usable day (which only loosens the
/// cumulative supply limits), and the most cells that then meet every
/// cumulative limit are found by Moore-Hodgson (take cells by deadline,
/// dropping the largest consumer whenever a limit is overrun).
fn most_placeable(
    cells: &[(usize, usize, usize)],
    options: &[Vec<(usize, i128)>],
    items: &[Item],
    open: &[usize],
    suffix_min: &[u128],
) -> usize {
    let mut jobs: Vec<(usize, u128)> = cells
        .iter()
        .zip(options)
        .filter_map(|(&(_, o, m), opts)| {
            let last = opts.last()?.0;
            let it = items.get(*open.get(o)?)?;
            let anodes = it.member_anodes.get(m).copied()?;
            Some((last, anodes))
        })
        .collect();
    jobs.sort_unstable();
    let mut taken = std::collections::BinaryHeap::new();
    let mut total = 0u128;
    for (deadline, anodes) in jobs {
        taken.push(anodes);
        total = total.saturating_add(anodes);
        let limit = suffix_min.get(deadline).copied().unwrap_or(0);
        while total > limit {
            match taken.pop() {
                Some(a) => total = total.saturating_sub(a),
                None => break,
            }
        }
    }
    taken.len()
}

/// Best plan and whether the search completed (so the plan is optimal).
fn branch_and_bound(
    items: &[Item],
    crew: &[u32],
    cum: &[u128],
    seed: Vec<Option<usize>>,
    relax: bool,
) -> Result<(Vec<Option<usize>>, bool), LevelError> {
    let best_value = plan_value(items, &seed);
    // Groups first: once they are fixed, the flow relaxation of the single
    // cells left is tight, while split groups make it weak.
    let mut order: Vec<usize> = (0..items.len()).collect();
    order.sort_by_key(|&k| (Reverse(items[k].size), k));
    let mut search = Search {
        items,
        order,
        decided: vec![false; items.len()],
        load: Load::new(crew, cum),
        current: vec![None; items.len()],
        best: seed,
        best_value,
        nodes: 0,
        aborted: false,
        relax,
    };
    search.run(0, Cost::ZERO)?;
    Ok((search.best, !search.aborted))
}

// ---------------------------------------------------------------------------
// Reasons

/// Reason for each unplaced unit (`None` for placed ones): anodes if the
/// crew could take it beside the placed units, crew otherwise.
fn reasons(items: &[Item], assign: &[Option<usize>], crew: &[u32]) -> Vec<Option<Unplaced>> {
    let mut crew_left: Vec<u64> = crew.iter().map(|&c| u64::from(c)).collect();
    let mut on_day: Vec<Vec<usize>> = vec![Vec::new(); crew.len()];
    for (k, (it, a)) in items.iter().zip(assign).enumerate() {
        if let Some(d) = *a
            && let Some(c) = crew_left.get_mut(d)
        {
            *c = c.saturating_sub(it.size);
            on_day[d].push(k);
        }
    }
    let placed_units_single = items.iter().zip(assign).all(|(it, a)| a.is_none() || it.size == 1);
    items
        .iter()
        .zip(assign)
        .enumerate()
        .map(|(k, (it, a))| {
            if a.is_some() {
                return None;
            }
            let free_now = it.days.iter().any(|&d| crew_left.get(d).is_some_and(|&c| c >= it.size));
            let fits = free_now
                || if placed_units_single && it.size == 1 {
                    crew_path(items, &on_day, &crew_left, it)
                } else {
                    let mut list: Vec<&Item> = items.iter().zip(assign).filter(|(_, a)| a.is_some()).map(|(other, _)| other).collect();
                    list.push(&items[k]);
                    crew_packs(list, crew).unwrap_or(false)
                };
            Some(if fits { Unplaced::NoAnodes } else { Unplaced::NoCrewCapacity })
        })
        .collect()
}

/// Augmenting-path search: can single cell `it` join the placed single
/// cells by crew alone, moving placed cells to other days of their windows?
fn crew_path(items: &[Item], on_day: &[Vec<usize>], crew_left: &[u64], it: &Item) -> bool {
    let mut seen = vec![false; crew_left.len()];
    let mut queue: VecDeque<usize> = VecDeque::new();
    for &d in &it.days {
        if let Some(s) = seen.get_mut(d)
            && !*s
        {
            *s = true;
            queue.push_back(d);
        }
    }
    while let Some(x) = queue.pop_front() {
        if crew_left.get(x).is_some_and(|&c| c > 0) {
            return true;
        }
        for &j in on_day.get(x).map_or(&[][..], Vec::as_slice) {
            for &y in &items[j].days {
                if let Some(s) = seen.get_mut(y)
                    && !*s
                {
                    *s = true;
                    queue.push_back(y);
                }
            }
        }
    }
    false
}

/// Can all `list` units be given days by crew alone? `None` if the search
/// budget ran out.
fn crew_packs(mut list: Vec<&Item>, crew: &[u32]) -> Option<bool> {
    fn go(list: &[&Item], left: &mut [u64], nodes: &mut u64) -> Option<bool> {
        *nodes += 1;
        if *nodes > FEASIBILITY_NODE_LIMIT {
            return None;
        }
        let Some((it, rest)) = list.split_first() else {
            return Some(true);
        };
        for &d in &it.days {
            if left.get(d).is_some_and(|&c| c >= it.size) {
                left[d] -= it.size;
                let r = go(rest, left, nodes);
                left[d] += it.size;
                if r != Some(false) {
                    return r;
                }
            }
        }
        Some(false)
    }
    // Most constrained first keeps the search small.
    list.sort_by_key(|it| (it.days.len(), Reverse(it.size)));
    let mut left: Vec<u64> = crew.iter().map(|&c| u64::from(c)).collect();
    let mut nodes = 0;
    go(&list, &mut left, &mut nodes)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn task(cell: &str, earliest: usize, latest: usize, ideal: usize) -> Task {
        Task { cell: cell.to_string(), earliest, latest, ideal, anodes: 50, group: None, days_off: Vec::new() }
    }

    fn unlimited(crew: Vec<u32>) -> Capacity {
        let h = crew.len();
        Capacity { crew, anode_stock: u64::MAX, anodes_per_day: vec![u64::MAX; h] }
    }

    const W13: Weights = Weights { early: 1.0, late: 3.0 };

    /// Horizon-clipped window, or None if it lies beyond the horizon.
    fn clipped(t: &Task, h: usize) -> Option<(usize, usize)> {
        (t.earliest < h).then(|| (t.earliest, t.latest.min(h - 1)))
    }

    /// The objective's cost of one task on day `d`, written out afresh so
    /// that the brute force does not share the solver's code.
    fn weighted(t: &Task, d: usize, w: Weights) -> f64 {
        let ideal = t.ideal.clamp(t.earliest, t.latest);
        if d > ideal { w.late * (d - ideal) as f64 } else { w.early * (ideal - d) as f64 }
    }

    /// Whether the days satisfy windows, groups, crew and (if asked) supply.
    fn feasible(tasks: &[Task], cap: &Capacity, days: &[Option<usize>], supply: bool) -> bool {
        let h = cap.crew.len();
        let mut per_day = vec![0u32; h];
        let mut anodes = vec![0u128; h];
        for (t, d) in tasks.iter().zip(days) {
            if let Some(d) = *d {
                match clipped(t, h) {
                    Some((lo, hi)) if (lo..=hi).contains(&d) => {}
                    _ => return false,
                }
                per_day[d] += 1;
                anodes[d] += u128::from(t.anodes);
            }
        }
        for (a, ta) in tasks.iter().zip(days) {
            for (b, tb) in tasks.iter().zip(days) {
                if a.group.is_some() && a.group == b.group && ta != tb {
                    return false;
                }
            }
        }
        if per_day.iter().zip(&cap.crew).any(|(&u, &c)| u > c) {
            return false;
        }
        if supply {
            let (mut have, mut used) = (u128::from(cap.anode_stock), 0u128);
            for (&p, &a) in cap.anodes_per_day.iter().zip(&anodes) {
                have += u128::from(p);
                used += a;
                if used > have {
                    return false;
                }
            }
        }
        true
    }

    /// The optimum found by trying every assignment.
    #[derive(Debug)]
    struct Optimum {
        unplaced: usize,
        cost: f64,
        /// Lexicographically smallest optimal days (cell-id order,
        /// unplaced last), per input index.
        days: Vec<Option<usize>>,
    }

    /// Enumerates every assignment (each task: a day of its clipped window,
    /// or unplaced) in lexicographic order by cell id and keeps the first
    /// one with the fewest unplaced tasks and then the least cost.
    fn brute_force(tasks: &[Task], cap: &Capacity, w: Weights) -> Optimum {
        fn go(
            k: usize,
            order: &[usize],
            tasks: &[Task],
            cap: &Capacity,
            w: Weights,
            days: &mut Vec<Option<usize>>,
            best: &mut Option<Optimum>,
        ) {
            let Some(&i) = order.get(k) else {
                if !feasible(tasks, cap, days, true) {
                    return;
                }
                let unplaced = days.iter().filter(|d| d.is_none()).count();
                let cost: f64 = order.iter().filter_map(|&j| days[j].map(|d| weighted(&tasks[j], d, w))).sum();
                let better = match best {
                    None => true,
                    Some(b) => unplaced < b.unplaced || (unplaced == b.unplaced && cost < b.cost - 1e-9 * b.cost.max(1.0)),
                };
                if better {
                    *best = Some(Optimum { unplaced, cost, days: days.clone() });
                }
                return;
            };
            let h = cap.crew.len();
            let mut options: Vec<Option<usize>> = match clipped(&tasks[i], h) {
                Some((lo, hi)) => (lo..=hi).map(Some).collect(),
                None => Vec::new(),
            };
            options.push(None);
            for o in options {
                days[i] = o;
                // Crew is checked early only to keep the enumeration quick.
                if let Some(d) = o
                    && days.iter().filter(|&&x| x == Some(d)).count() as u32 > cap.crew[d]
                {
                    continue;
                }
                go(k + 1, order, tasks, cap, w, days, best);
            }
            days[i] = None;
        }
        let mut order: Vec<usize> = (0..tasks.len()).collect();
        order.sort_by(|&a, &b| tasks[a].cell.cmp(&tasks[b].cell));
        let mut best = None;
        go(0, &order, tasks, cap, w, &mut vec![None; tasks.len()], &mut best);
        best.unwrap_or(Optimum { unplaced: tasks.len(), cost: 0.0, days: vec![None; tasks.len()] })
    }

    /// Whether all tasks in `set` can be placed by crew, windows and groups alone.
    fn crew_only_brute(tasks: &[Task], cap: &Capacity, set: &[usize]) -> bool {
        fn go(k: usize, set: &[usize], tasks: &[Task], cap: &Capacity, days: &mut Vec<Option<usize>>) -> bool {
            let Some(&i) = set.get(k) else {
                return feasible(tasks, cap, days, false);
            };
            let Some((lo, hi)) = clipped(&tasks[i], cap.crew.len()) else {
                return false;
            };
            for d in lo..=hi {
                days[i] = Some(d);
                if go(k + 1, set, tasks, cap, days) {
                    return true;
                }
            }
            days[i] = None;
            false
        }
        go(0, set, tasks, cap, &mut vec![None; tasks.len()])
    }

    /// Guarantees that hold in every mode.
    fn check_plan(tasks: &[Task], cap: &Capacity, w: Weights, out: &Levelled) -> Result<(), String> {
        if out.day.len() != tasks.len() {
            return Err("day has wrong length".into());
        }
        if !feasible(tasks, cap, &out.day, true) {
            return Err(format!("infeasible plan {:?}", out.day));
        }
        let listed: Vec<usize> = out.unplaced.iter().map(|&(i, _)| i).collect();
        let expected: Vec<usize> = (0..tasks.len()).filter(|&i| out.day[i].is_none()).collect();
        if listed != expected {
            return Err(format!("unplaced list {listed:?}, expected {expected:?}"));
        }
        let cost: f64 = tasks.iter().zip(&out.day).filter_map(|(t, d)| d.map(|d| weighted(t, d, w))).sum();
        if (cost - out.cost).abs() > 1e-9 * cost.max(1.0) {
            return Err(format!("cost {} but days cost {cost}", out.cost));
        }
        Ok(())
    }

    /// Reasons are truthful (checked by brute force; small instances only).
    fn check_reasons(tasks: &[Task], cap: &Capacity, out: &Levelled) -> Result<(), String> {
        let h = cap.crew.len();
        let placed: Vec<usize> = (0..tasks.len()).filter(|&i| out.day[i].is_some()).collect();
        for &(i, why) in &out.unplaced {
            let unit: Vec<usize> = match tasks[i].group {
                Some(g) => (0..tasks.len()).filter(|&j| tasks[j].group == Some(g)).collect(),
                None => vec![i],
            };
            let lo = unit.iter().map(|&j| tasks[j].earliest).max().unwrap_or(0);
            let hi = unit.iter().map(|&j| tasks[j].latest).min().unwrap_or(0);
            let expected = if lo >= h {
                Unplaced::WindowOutsideHorizon
            } else if (lo..=hi.min(h - 1)).all(|d| cap.crew[d] == 0) {
                Unplaced::NoWorkingDayInWindow
            } else {
                let mut set = placed.clone();
                set.extend(&unit);
                if crew_only_brute(tasks, cap, &set) { Unplaced::NoAnodes } else { Unplaced::NoCrewCapacity }
            };
            if why != expected {
                return Err(format!("task {i}: reason {why:?}, expected {expected:?}"));
            }
        }
        Ok(())
    }

    type Instance = (Vec<Task>, Capacity, Weights);

    /// Small random instances; weights are multiples of 1/4 so that sums
    /// are exact in f64 and ties can be compared exactly.
    fn small(equal_anodes: bool, groups: bool) -> impl Strategy<Value = Instance> {
        (1usize..=5).prop_flat_map(move |h| {
            let raw_task = (0..h + 1, 0usize..3, 0..h + 2, 0usize..5, 0u32..4);
            (
                prop::collection::vec(raw_task, 0..=6),
                prop::collection::vec(0u32..=3, h),
                // Scaled to the anode counts (50 each, or 0 to 50 in tens)
                // so that supply often binds, often exactly.
                prop::collection::vec((0u64..=if equal_anodes { 24 } else { 5 }).prop_map(|k| 5 * k), h),
                prop_oneof![(0u64..=if equal_anodes { 40 } else { 16 }).prop_map(|k| 5 * k), Just(u64::MAX)],
                1u32..=8,
                1u32..=16,
            )
                .prop_map(move |(raw, crew, anodes_per_day, anode_stock, e, l)| {
                    let tasks = raw
                        .into_iter()
                        .enumerate()
                        .map(|(i, (earliest, len, ideal, a, g))| Task {
                            // Ids out of input order: 5 is invertible mod 11.
                            cell: format!("C{:02}", (i * 5 + 3) % 11),
                            earliest,
                            latest: earliest + len,
                            ideal,
                            anodes: if equal_anodes { 50 } else { [0, 10, 20, 30, 50][a] },
                            group: match (groups, g) {
                                (true, 2) => Some(7),
                                (true, 3) => Some(9),
                                _ => None,
                            },
                            days_off: Vec::new(),
                        })
                        .collect();
                    let cap = Capacity { crew, anode_stock, anodes_per_day };
                    let w = Weights { early: f64::from(e) / 4.0, late: f64::from(l) / 4.0 };
                    (tasks, cap, w)
                })
        })
    }

    fn agrees_with_brute_force((tasks, cap, w): Instance, method: Method) -> Result<(), TestCaseError> {
        let out = solve(&tasks, &cap, w, method).map_err(|e| TestCaseError::fail(e.to_string()))?;
        let best = brute_force(&tasks, &cap, w);
        check_plan(&tasks, &cap, w, &out).map_err(TestCaseError::fail)?;
        check_reasons(&tasks, &cap, &out).map_err(TestCaseError::fail)?;
        prop_assert!(out.exact);
        prop_assert_eq!(out.unplaced.len(), best.unplaced);
        prop_assert!((out.cost - best.cost).abs() <= 1e-6, "cost {} vs {}", out.cost, best.cost);
        prop_assert_eq!(&out.day, &best.days, "tie-break differs");
        Ok(())
    }

    proptest! {
        #[test]
        fn equal_anodes_match_brute_force(inst in small(true, false)) {
            agrees_with_brute_force(inst, Method::Auto)?;
        }

        #[test]
        fn unequal_anodes_and_groups_match_brute_force(inst in small(false, true)) {
            agrees_with_brute_force(inst, Method::Auto)?;
        }

        #[test]
        fn bare_search_matches_brute_force(inst in prop_oneof![small(true, false), small(false, true)]) {
            // The branch and bound alone, without the flow relaxation that
            // usually settles small instances at the root.
            agrees_with_brute_force(inst, Method::Search { relax: false })?;
        }

        #[test]
        fn search_from_empty_seed_matches_brute_force(inst in prop_oneof![small(true, false), small(false, true)]) {
            agrees_with_brute_force(inst, Method::Search { relax: true })?;
        }

        #[test]
        fn real_weights_match_brute_force(
            (tasks, cap, _) in small(true, false),
            early in 0.01f64..50.0,
            late in 0.01f64..50.0,
        ) {
            let w = Weights { early, late };
            let out = level(&tasks, &cap, w).map_err(|e| TestCaseError::fail(e.to_string()))?;
            let best = brute_force(&tasks, &cap, w);
            check_plan(&tasks, &cap, w, &out).map_err(TestCaseError::fail)?;
            prop_assert!(out.exact);
            prop_assert_eq!(out.unplaced.len(), best.unplaced);
            prop_assert!((out.cost - best.cost).abs() <= 1e-6 * best.cost.max(1.0),
                "cost {} vs {}", out.cost, best.cost);
        }

        #[test]
        fn shuffled_input_gives_same_days(
            (tasks, cap, w, perm) in small(false, true).prop_flat_map(|(t, c, w)| {
                let idx: Vec<usize> = (0..t.len()).collect();
                (Just(t), Just(c), Just(w), Just(idx).prop_shuffle())
            })
        ) {
            let a = level(&tasks, &cap, w).map_err(|e| TestCaseError::fail(e.to_string()))?;
            let shuffled: Vec<Task> = perm.iter().map(|&i| tasks[i].clone()).collect();
            let b = level(&shuffled, &cap, w).map_err(|e| TestCaseError::fail(e.to_string()))?;
            for (pos, &i) in perm.iter().enumerate() {
                prop_assert_eq!(a.day[i], b.day[pos], "cell {}", &tasks[i].cell);
            }
            let reason = |out: &Levelled, i: usize| out.unplaced.iter().find(|u| u.0 == i).map(|u| u.1);
            for (pos, &i) in perm.iter().enumerate() {
                prop_assert_eq!(reason(&a, i), reason(&b, pos));
            }
            prop_assert_eq!(a.cost, b.cost);
        }

        #[test]
        fn large_instances_stay_feasible(
            (tasks, cap) in sized(90..130, 2),
        ) {
            let out = level(&tasks, &cap, W13).map_err(|e| TestCaseError::fail(e.to_string()))?;
            check_plan(&tasks, &cap, W13, &out).map_err(TestCaseError::fail)?;
        }
    }

    /// Random inputs of the flow itself, larger than the brute force can take:
    /// options (increasing days, V-shaped costs around an ideal), crew, cumulative units, a limit.
    type FlowInstance = (Vec<Vec<(usize, i128)>>, Vec<u32>, Option<Vec<u64>>, Option<usize>);

    fn flow_instance() -> impl Strategy<Value = FlowInstance> {
        (1usize..12).prop_flat_map(|h| {
            (
                prop::collection::vec((0..h + 2, 0usize..6, 0..h + 3, 1i128..4, 1i128..6, prop::collection::vec(0..h + 2, 0..3)), 0..40),
                prop::collection::vec(0u32..5, h),
                prop::option::of(prop::collection::vec(0u64..30, h)),
                prop::option::of(0usize..30),
            )
                .prop_map(|(raw, crew, units, limit)| {
                    let options = raw
                        .into_iter()
                        .map(|(lo, len, ideal, we, wl, off)| {
                            (lo..=lo + len)
                                .filter(|d| !off.contains(d))
                                .map(|d| {
                                    let c = if d < ideal { we * (ideal - d) as i128 } else { wl * (d - ideal) as i128 };
                                    (d, c)
                                })
                                .collect()
                        })
                        .collect();
                    let units = units.map(|mut u| {
                        // cumulative: non-decreasing
                        for d in 1..u.len() {
                            u[d] = u[d].max(u[d - 1]);
                        }
                        u
                    });
                    (options, crew, units, limit)
                })
        })
    }

    proptest! {
        #[test]
        fn the_day_graph_flow_equals_the_general_graph_flow((options, crew, units, limit) in flow_instance()) {
            let general = flow_assign(&options, &crew, units.as_deref(), limit, true).map_err(|e| TestCaseError::fail(e.to_string()))?;
            let days = day_flow::assign(&options, &crew, units.as_deref(), limit).map_err(|e| TestCaseError::fail(e.to_string()))?;
            prop_assert_eq!(days, general);
        }
    }

    proptest! {
        // Each case may run the search to its node budget: keep them few.
        #![proptest_config(ProptestConfig::with_cases(16))]

        #[test]
        fn medium_instances_stay_feasible(
            (tasks, cap) in sized(15..40, 4),
        ) {
            let out = level(&tasks, &cap, W13).map_err(|e| TestCaseError::fail(e.to_string()))?;
            check_plan(&tasks, &cap, W13, &out).map_err(TestCaseError::fail)?;
        }
    }

    /// Random instances too big for brute force, with `groups` sections,
    /// unequal anode counts and tight anode supply.
    fn sized(tasks: std::ops::Range<usize>, groups: u32) -> impl Strategy<Value = (Vec<Task>, Capacity)> {
        (
            5usize..15,
            prop::collection::vec((0usize..16, 0usize..5, 0usize..16, 20u32..80, 0u32..30), tasks),
            prop::collection::vec(0u32..8, 15),
            prop::collection::vec(0u64..250, 15),
            0u64..400,
        )
            .prop_map(move |(h, raw, crew, supply, stock)| {
                let tasks = raw
                    .iter()
                    .enumerate()
                    .map(|(i, &(e, len, ideal, a, g))| Task {
                        // Ids out of input order (7 is invertible mod 211).
                        cell: format!("L{:03}", (i * 7) % 211),
                        // Mostly inside the horizon, a few running past it.
                        earliest: e % (h + 1),
                        latest: e % (h + 1) + len,
                        ideal,
                        anodes: a,
                        group: (g < 3 * groups).then_some(g / 3),
                        days_off: Vec::new(),
                    })
                    .collect();
                let cap = Capacity { crew: crew[..h].to_vec(), anode_stock: stock, anodes_per_day: supply[..h].to_vec() };
                (tasks, cap)
            })
    }

    #[test]
    fn days_off_are_never_used_and_other_tasks_keep_the_day() {
        // Two cells ideal on day 1, crew 2 a day; A's circuit is down on day 1 (a day off for A only).
        // By hand: B stays on day 1 (cost 0); A goes a day early to day 0 (cost 1, cheaper than 3 late).
        let a = Task { days_off: vec![1], ..task("A", 0, 3, 1) };
        let out = level(&[a.clone(), task("B", 0, 3, 1)], &unlimited(vec![2, 2, 2, 2]), W13).unwrap();
        assert_eq!(out.day, vec![Some(0), Some(1)]);
        assert!(out.exact);
        // every day of A's window off: no working day in the window, B unaffected
        let off = Task { days_off: vec![0, 1, 2, 3], ..a };
        let out = level(&[off, task("B", 0, 3, 1)], &unlimited(vec![2, 2, 2, 2]), W13).unwrap();
        assert_eq!(out.day, vec![None, Some(1)]);
        assert_eq!(out.unplaced, vec![(0, Unplaced::NoWorkingDayInWindow)]);
    }

    #[test]
    fn brute_force_helper_finds_known_optimum() {
        // Two cells, one slot on day 1 only: one is unplaced, the other costs 0.
        let tasks = vec![task("B", 0, 2, 1), task("A", 0, 2, 1)];
        let cap = unlimited(vec![0, 1, 0]);
        let best = brute_force(&tasks, &cap, W13);
        assert_eq!(best.unplaced, 1);
        assert_eq!(best.cost, 0.0);
        assert_eq!(best.days, vec![None, Some(1)]);
    }

    #[test]
    fn wave_of_thirty_cells() {
        let tasks: Vec<Task> = (1..=30).map(|i| task(&format!("A{i:02}"), 3, 7, 5)).collect();
        let cap = unlimited(vec![8; 14]);
        let out = level(&tasks, &cap, W13).expect("valid input");
        assert!(out.exact);
        assert!(out.unplaced.is_empty());
        let mut per_day = [0usize; 14];
        for d in out.day.iter().flatten() {
            assert!((3..=7).contains(d));
            per_day[*d] += 1;
        }
        assert!(per_day.iter().all(|&c| c <= 8));
        let early = out.day.iter().flatten().filter(|&&d| d < 5).count();
        let late = out.day.iter().flatten().filter(|&&d| d > 5).count();
        assert!(early > late);
        // Per cell: day 5 costs 0, day 4 costs 1, day 3 costs 2, day 6 costs
        // 3, day 7 costs 6. Cheapest slots first: 8 on day 5 (0), 8 on day 4
        // (8), 8 on day 3 (16); the last 6 go to day 6 at 3 each (18), since
        // day 6 (3) is cheaper than day 7 (6). Optimum 0 + 8 + 16 + 18 = 42.
        assert_eq!(per_day[3..=7], [8, 8, 8, 6, 0]);
        assert_eq!(out.cost, 42.0);
        // Tie-break: the smallest ids take the smallest days.
        for (i, d) in out.day.iter().enumerate() {
            let want = match i {
                0..=7 => 3,
                8..=15 => 4,
                16..=23 => 5,
                _ => 6,
            };
            assert_eq!(*d, Some(want), "cell {}", tasks[i].cell);
        }
    }

    #[test]
    fn reason_no_working_day() {
        let tasks = vec![task("A", 1, 2, 1), task("B", 0, 3, 0)];
        let cap = unlimited(vec![1, 0, 0, 0]);
        let out = level(&tasks, &cap, W13).expect("valid input");
        assert_eq!(out.day, vec![None, Some(0)]);
        assert_eq!(out.unplaced, vec![(0, Unplaced::NoWorkingDayInWindow)]);
    }

    #[test]
    fn reason_no_anodes() {
        // 70 anodes: one change of 50 fits, the second does not.
        let tasks = vec![task("A", 0, 1, 0), task("B", 0, 1, 0)];
        let cap = Capacity { crew: vec![2, 2], anode_stock: 70, anodes_per_day: vec![0, 0] };
        let out = level(&tasks, &cap, W13).expect("valid input");
        assert_eq!(out.day, vec![Some(0), None]);
        assert_eq!(out.unplaced, vec![(1, Unplaced::NoAnodes)]);
    }

    #[test]
    fn reason_no_crew_capacity() {
        let tasks = vec![task("A", 0, 1, 0), task("B", 0, 1, 0), task("C", 0, 1, 0)];
        let cap = unlimited(vec![1, 1]);
        let out = level(&tasks, &cap, W13).expect("valid input");
        assert_eq!(out.day, vec![Some(0), Some(1), None]);
        assert_eq!(out.unplaced, vec![(2, Unplaced::NoCrewCapacity)]);
    }

    #[test]
    fn reason_anodes_when_crew_needs_rearranging() {
        // B only fits on day 0, which A holds; A could move to day 1, but
        // the 50 anodes in stock cover one change only: supply is the cause.
        let tasks = vec![task("A", 0, 1, 0), task("B", 0, 0, 0)];
        let cap = Capacity { crew: vec![1, 1], anode_stock: 50, anodes_per_day: vec![0, 0] };
        let out = level(&tasks, &cap, W13).expect("valid input");
        assert_eq!(out.day, vec![Some(0), None]);
        assert_eq!(out.unplaced, vec![(1, Unplaced::NoAnodes)]);
    }

    #[test]
    fn reason_outside_horizon() {
        let tasks = vec![task("A", 5, 9, 5), task("B", 1, 9, 8)];
        let cap = unlimited(vec![1, 1, 1]);
        let out = level(&tasks, &cap, W13).expect("valid input");
        assert_eq!(out.unplaced, vec![(0, Unplaced::WindowOutsideHorizon)]);
        // B's window runs past the plan: placed on the last day in it, and
        // charged against its ideal 8 (early by 6 days).
        assert_eq!(out.day[1], Some(2));
        assert_eq!(out.cost, 6.0);
    }

    #[test]
    fn shuffling_keeps_days_per_cell() {
        let base: Vec<Task> = (0..12)
            .map(|i| Task {
                anodes: 30 + 10 * (i % 3) as u32,
                group: (i % 4 == 0).then_some(1),
                ..task(&format!("S{i:02}"), i % 3, i % 3 + 3, 2)
            })
            .collect();
        let cap = Capacity { crew: vec![3, 2, 0, 3, 2, 2], anode_stock: 120, anodes_per_day: vec![40, 40, 0, 60, 60, 60] };
        let reference = level(&base, &cap, W13).expect("valid input");
        let by_cell = |tasks: &[Task], out: &Levelled| {
            let mut v: Vec<(String, Option<usize>)> = tasks.iter().zip(&out.day).map(|(t, d)| (t.cell.clone(), *d)).collect();
            v.sort();
            v
        };
        let want = by_cell(&base, &reference);
        let mut tasks = base.clone();
        for round in 0..20usize {
            // Deterministic pseudo-random permutation.
            for i in (1..tasks.len()).rev() {
                tasks.swap(i, (i * 7 + round * 13 + 5) % (i + 1));
            }
            let out = level(&tasks, &cap, W13).expect("valid input");
            assert_eq!(by_cell(&tasks, &out), want);
            assert_eq!(out.cost, reference.cost);
        }
        tasks.reverse();
        let out = level(&tasks, &cap, W13).expect("valid input");
        assert_eq!(by_cell(&tasks, &out), want);
    }

    #[test]
    fn overdue_task_goes_on_day_zero() {
        let out = level(&[task("A", 0, 0, 0)], &unlimited(vec![1, 1]), W13).expect("valid input");
        assert_eq!(out.day, vec![Some(0)]);
        assert_eq!(out.cost, 0.0);
        assert!(out.unplaced.is_empty());
    }

    #[test]
    fn overdue_ideal_before_window_is_clamped() {
        let out = level(&[task("A", 2, 4, 0)], &unlimited(vec![1; 5]), W13).expect("valid input");
        assert_eq!(out.day, vec![Some(2)]);
        assert_eq!(out.cost, 0.0);
    }

    #[test]
    fn unlimited_supply_does_not_overflow() {
        let mut tasks: Vec<Task> = (0..6).map(|i| task(&format!("U{i}"), 0, 3, 1)).collect();
        tasks[0].anodes = u32::MAX;
        tasks[1].group = Some(4);
        tasks[2].group = Some(4);
        let out = level(&tasks, &unlimited(vec![3, 3, 3, 3]), W13).expect("valid input");
        assert!(out.unplaced.is_empty());
        assert_eq!(out.day[1], out.day[2]);
    }

    #[test]
    fn group_shares_one_day() {
        let mut tasks: Vec<Task> = (0..4).map(|i| task(&format!("G{i}"), 0, 3, 2)).collect();
        for t in &mut tasks[..3] {
            t.group = Some(1);
        }
        // Only days 0 and 3 have room for three at once; two days early each
        // (6) beats one day late each (9). The fourth cell takes its ideal.
        let cap = unlimited(vec![3, 2, 2, 3]);
        let out = level(&tasks, &cap, W13).expect("valid input");
        assert!(out.exact);
        assert_eq!(out.day[..3], [Some(0), Some(0), Some(0)]);
        assert_eq!(out.day[3], Some(2));
        assert_eq!(out.cost, 6.0);
    }

    #[test]
    fn group_too_big_for_any_day() {
        let mut tasks: Vec<Task> = (0..3).map(|i| task(&format!("G{i}"), 0, 1, 0)).collect();
        for t in &mut tasks {
            t.group = Some(2);
        }
        let out = level(&tasks, &unlimited(vec![2, 2]), W13).expect("valid input");
        assert_eq!(out.day, vec![None; 3]);
        assert!(out.unplaced.iter().all(|u| u.1 == Unplaced::NoCrewCapacity));
    }

    #[test]
    fn bad_input_is_an_error() {
        let cap = unlimited(vec![1, 1]);
        let mismatched = Capacity { anodes_per_day: vec![0], ..cap.clone() };
        assert!(matches!(level(&[], &mismatched, W13), Err(LevelError::HorizonMismatch { .. })));
        for (early, late) in [(0.0, 1.0), (1.0, -1.0), (f64::NAN, 1.0), (1.0, f64::INFINITY)] {
            assert!(matches!(level(&[], &cap, Weights { early, late }), Err(LevelError::BadWeights { .. })));
        }
        assert!(matches!(level(&[task("A", 2, 1, 1)], &cap, W13), Err(LevelError::EmptyWindow { .. })));
        assert!(matches!(level(&[task("A", 0, 1, 0), task("A", 0, 1, 1)], &cap, W13), Err(LevelError::DuplicateCell { .. })));
        let far = Task { latest: usize::MAX, ideal: usize::MAX, ..task("A", 0, 0, 0) };
        let odd = Weights { early: 0.1, late: 0.3 };
        // About 2^64 days from the ideal at about 2^54 per day, over a long
        // horizon: beyond the checked i128 headroom.
        assert_eq!(level(&[far], &unlimited(vec![1; 100]), odd), Err(LevelError::TooLarge));
        let message = LevelError::DuplicateCell { cell: "A".into() }.to_string();
        assert!(message.contains('A'));
    }

    #[test]
    fn large_grouped_instance_uses_repair() {
        // 60 cells, four sections of five sharing a window each: 44 units,
        // more than the exact search takes, so the repaired relaxation answers.
        let tasks: Vec<Task> = (0..60)
            .map(|i| {
                let earliest = if i < 20 { (i / 5) * 2 } else { i % 7 };
                Task {
                    anodes: 40 + (i % 4) as u32 * 5,
                    group: (i < 20).then_some((i / 5) as u32),
                    ..task(&format!("R{i:02}"), earliest, earliest + 3, earliest + 1)
                }
            })
            .collect();
        let cap = Capacity { crew: vec![6, 6, 0, 6, 6, 6, 6, 6, 0, 6, 6], anode_stock: 600, anodes_per_day: vec![200; 11] };
        let out = level(&tasks, &cap, W13).expect("valid input");
        assert!(!out.exact);
        assert_eq!(check_plan(&tasks, &cap, W13, &out), Ok(()));
        // Every section has a day with room. No window reaches day 10, so
        // 8 working days x 6 = 48 slots serve 60 cells: 12 must stay out,
        // and the repair reaches that bound.
        assert!(out.day[..20].iter().all(Option::is_some), "{:?}", out.day);
        assert_eq!(out.unplaced.len(), 12, "{:?}", out.unplaced);
    }

    #[test]
    fn exhausted_search_still_returns_a_valid_plan() {
        // 25 cells of 30..69 anodes, 24 crew slots and anodes for about 20:
        // choosing which cells to leave out is a knapsack the search cannot
        // finish within its budget.
        let tasks: Vec<Task> = (0..25usize)
            .map(|i| Task { anodes: 30 + (i as u32 * 17) % 40, ..task(&format!("B{i:02}"), i % 4, i % 4 + 5, i % 4 + 2) })
            .collect();
        let cap = Capacity { crew: vec![3; 8], anode_stock: 200, anodes_per_day: vec![100; 8] };
        let out = level(&tasks, &cap, W13).expect("valid input");
        assert!(!out.exact);
        assert_eq!(check_plan(&tasks, &cap, W13, &out), Ok(()));
        // By anodes at least 4 stay out: the 22 smallest consumers already
        // need 1046 of the 1000 anodes there are by the last day.
        assert!(out.unplaced.len() >= 4);
        assert!(out.unplaced.iter().all(|u| u.1 == Unplaced::NoAnodes || u.1 == Unplaced::NoCrewCapacity));
    }

    #[test]
    fn empty_inputs() {
        let out = level(&[], &unlimited(vec![]), W13).expect("valid input");
        assert!(out.day.is_empty() && out.exact && out.cost == 0.0);
        let out = level(&[task("A", 0, 3, 1)], &unlimited(vec![]), W13).expect("valid input");
        assert_eq!(out.unplaced, vec![(0, Unplaced::WindowOutsideHorizon)]);
    }

    #[test]
    fn weight_ratios_are_exact_when_representable() {
        assert_eq!(exact_weights(W13), Some((1, 3)));
        let (a, b) = exact_weights(Weights { early: 0.1, late: 0.3 }).expect("representable");
        assert!(a > 0 && b > 0);
        assert_eq!(a as f64 / b as f64, 0.1 / 0.3);
        let wild = Weights { early: 1e-30, late: 3.7e30 };
        assert_eq!(exact_weights(wild), None);
        let (a, b) = rounded_weights(wild);
        assert_eq!((a, b), (1, 1 << 61));
        // The rounded ratio still gives a valid plan, without a claim.
        let out = level(&[task("A", 0, 2, 1)], &unlimited(vec![1; 3]), wild).expect("valid");
        assert_eq!(out.day, vec![Some(1)]);
        assert!(!out.exact);
    }
}
