//! The levelling's min-cost flow on a graph of days: a placed task is not a
//! node; moving it from its day to another one is an arc between the two days.
//!
//! The network is the one of [`super::level`]'s documentation: each task
//! sends one unit to one of its days (or to its unplaced arc, at a cost that
//! dominates every distance), each day takes at most its crew, and the supply
//! chain caps how many tasks fit through each day. In the residual graph a
//! task is only ever entered from where it is now (its day, or the sink when
//! unplaced) and left towards one of its other options, so a path through it
//! is a path between two days (or a day and the sink). The arc from day `d`
//! to day `e` therefore costs the least `c_j(e) - c_j(d)` over the tasks `j`
//! on `d` that may use `e`, and is kept in an ordered set per pair of days.
//! Shortest paths then run on `2h + 2` nodes (days, supply chain, the placed
//! node, the sink) instead of tasks × days, with Dijkstra on reduced costs.
//!
//! Why it is the same plan as the general graph's flow: the min-cost value
//! is unique, and so is the lexicographically smallest optimal assignment;
//! successive shortest paths from each task in turn give an optimal flow
//! (each augmentation along a shortest path of the residual graph keeps it
//! free of negative cycles, and a shortest path to the sink never leaves the
//! sink, so its out-arcs are not needed then), and the tie-break below is the
//! general graph's cycle search with every cycle read on the day graph
//! (every residual cycle through tasks maps to one of day arcs, and back).
//! The property tests check it against the general graph and a brute force.

use std::cmp::Reverse;
use std::collections::{BTreeMap, BTreeSet, BinaryHeap, VecDeque};

use super::{Cost, LevelError};

/// "No limit" for the supply chain's arcs; far above any task count.
const INF: i64 = i64::MAX / 4;

/// A residual arc of the day graph (days `d`, their supply nodes `S_d`, the
/// placed node `P`, the sink `T`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Arc {
    /// Day `d` to `S_d`: one task more on `d`.
    Work(usize),
    /// `S_d` to day `d`: one task fewer.
    Unwork(usize),
    /// `S_d` to `S_{d-1}`: anodes of an earlier day used.
    Down(usize),
    /// `S_{d-1}` to `S_d`: undoes a `Down(d)`.
    Up(usize),
    /// `S_d` to `P`: a change counted against day `d`'s fresh allowance.
    Out(usize),
    /// `P` to `S_d`: undoes an `Out(d)`.
    Back(usize),
    /// `P` to `T`.
    Place,
    /// `T` to `P`.
    Unplace,
    /// Task `j` from its day to day `e`.
    Move(usize, usize),
    /// Task `j` from its day to unplaced.
    Drop(usize),
    /// Unplaced task `j` to day `e`.
    Undrop(usize, usize),
}

struct DayFlow {
    options: Vec<Vec<(usize, i128)>>,
    h: usize,
    crew_cap: Vec<i64>,
    out_cap: Vec<i64>,
    most: i64,
    load: Vec<i64>,
    /// Flow on `S_d -> S_{d-1}` (index `d`, 0 unused).
    chain: Vec<i64>,
    out: Vec<i64>,
    placed: i64,
    /// `None`: not routed yet; `Some(None)`: unplaced; `Some(Some(d))`: on day `d`.
    at: Vec<Option<Option<usize>>>,
    /// `moves[d][e]`: (c_j(e) - c_j(d), j) for the movable tasks j on d.
    moves: Vec<BTreeMap<usize, BTreeSet<(i128, usize)>>>,
    /// `drops[d]`: (-c_j(d), j) for the movable tasks j on d.
    drops: Vec<BTreeSet<(i128, usize)>>,
    /// `undrops[e]`: (c_j(e), j) for the movable unplaced tasks j that may use e.
    undrops: Vec<BTreeSet<(i128, usize)>>,
    frozen: Vec<bool>,
}

impl DayFlow {
    fn nodes(&self) -> usize {
        2 * self.h + 2
    }
    fn supply(&self, d: usize) -> usize {
        self.h + d
    }
    fn p(&self) -> usize {
        2 * self.h
    }
    fn t(&self) -> usize {
        2 * self.h + 1
    }

    fn cost(&self, j: usize, d: usize) -> i128 {
        self.options[j].iter().find(|o| o.0 == d).map_or(0, |o| o.1)
    }

    /// Puts task `j`'s arcs into the sets, as it stands now.
    fn enter(&mut self, j: usize) {
        if self.frozen[j] {
            return;
        }
        match self.at[j] {
            Some(Some(d)) => {
                let cd = self.cost(j, d);
                for &(e, ce) in &self.options[j] {
                    if e != d {
                        self.moves[d].entry(e).or_default().insert((ce - cd, j));
                    }
                }
                self.drops[d].insert((-cd, j));
            }
            Some(None) => {
                for &(e, ce) in &self.options[j] {
                    self.undrops[e].insert((ce, j));
                }
            }
            None => {}
        }
    }

    /// Takes task `j`'s arcs out of the sets.
    fn leave(&mut self, j: usize) {
        match self.at[j] {
            Some(Some(d)) => {
                let cd = self.cost(j, d);
                for &(e, ce) in &self.options[j] {
                    if e != d
                        && let Some(set) = self.moves[d].get_mut(&e)
                    {
                        set.remove(&(ce - cd, j));
                        if set.is_empty() {
                            self.moves[d].remove(&e);
                        }
                    }
                }
                self.drops[d].remove(&(-cd, j));
            }
            Some(None) => {
                for &(e, ce) in &self.options[j] {
                    self.undrops[e].remove(&(ce, j));
                }
            }
            None => {}
        }
    }

    /// Calls `f(to, cost, arc)` for each residual arc out of node `u`.
    fn arcs_from(&self, u: usize, mut f: impl FnMut(usize, Cost, Arc)) {
        let h = self.h;
        if u < h {
            let d = u;
            if self.crew_cap[d] - self.load[d] > 0 {
                f(self.supply(d), Cost::ZERO, Arc::Work(d));
            }
            for (&e, set) in &self.moves[d] {
                if let Some(&(c, j)) = set.first() {
                    f(e, Cost::placed(c), Arc::Move(j, e));
                }
            }
            if let Some(&(c, j)) = self.drops[d].first() {
                f(self.t(), Cost { unplaced: 1, dist: c }, Arc::Drop(j));
            }
        } else if u < 2 * h {
            let d = u - h;
            if self.load[d] > 0 {
                f(d, Cost::ZERO, Arc::Unwork(d));
            }
            if d > 0 {
                f(self.supply(d - 1), Cost::ZERO, Arc::Down(d));
            }
            if d + 1 < h && self.chain[d + 1] > 0 {
                f(self.supply(d + 1), Cost::ZERO, Arc::Up(d + 1));
            }
            if self.out_cap[d] - self.out[d] > 0 {
                f(self.p(), Cost::ZERO, Arc::Out(d));
            }
        } else if u == self.p() {
            for d in 0..h {
                if self.out[d] > 0 {
                    f(self.supply(d), Cost::ZERO, Arc::Back(d));
                }
            }
            if self.most - self.placed > 0 {
                f(self.t(), Cost::ZERO, Arc::Place);
            }
        } else {
            if self.placed > 0 {
                f(self.p(), Cost::ZERO, Arc::Unplace);
            }
            for e in 0..h {
                if let Some(&(c, j)) = self.undrops[e].first() {
                    f(e, Cost { unplaced: -1, dist: c }, Arc::Undrop(j, e));
                }
            }
        }
    }

    fn apply(&mut self, arc: Arc) {
        match arc {
            Arc::Work(d) => self.load[d] += 1,
            Arc::Unwork(d) => self.load[d] -= 1,
            Arc::Down(d) => self.chain[d] += 1,
            Arc::Up(d) => self.chain[d] -= 1,
            Arc::Out(d) => self.out[d] += 1,
            Arc::Back(d) => self.out[d] -= 1,
            Arc::Place => self.placed += 1,
            Arc::Unplace => self.placed -= 1,
            Arc::Move(j, e) | Arc::Undrop(j, e) => self.relocate(j, Some(e)),
            Arc::Drop(j) => self.relocate(j, None),
        }
    }

    fn relocate(&mut self, j: usize, to: Option<usize>) {
        self.leave(j);
        self.at[j] = Some(to);
        self.enter(j);
    }

    /// Routes task `i` along a shortest path to the sink (Dijkstra on
    /// reduced costs, `pot` kept valid on every arc but the sink's own).
    fn route(&mut self, i: usize, pot: &mut [Cost]) -> Result<(), LevelError> {
        let v = self.nodes();
        let t = self.t();
        let mut key: Vec<Option<Cost>> = vec![None; v];
        // how each node was reached: (previous node or None for task i, arc or None for i's own)
        let mut pred: Vec<Option<(Option<usize>, Option<Arc>)>> = vec![None; v];
        let mut heap = BinaryHeap::new();
        for &(d, c) in &self.options[i] {
            let k = Cost::placed(c) - pot[d];
            if key[d].is_none_or(|old| k < old) {
                key[d] = Some(k);
                pred[d] = Some((None, None));
                heap.push(Reverse((k, d)));
            }
        }
        let k = Cost::dropped(1) - pot[t];
        if key[t].is_none_or(|old| k < old) {
            key[t] = Some(k);
            pred[t] = Some((None, None));
            heap.push(Reverse((k, t)));
        }
        let mut done = vec![false; v];
        while let Some(Reverse((k, u))) = heap.pop() {
            if done[u] || key[u] != Some(k) {
                continue;
            }
            done[u] = true;
            if u == t {
                continue;
            }
            let pu = pot[u];
            let mut relax: Vec<(usize, Cost, Arc)> = Vec::new();
            self.arcs_from(u, |to, c, arc| relax.push((to, c, arc)));
            for (to, c, arc) in relax {
                let nk = k + c + pu - pot[to];
                if !done[to] && key[to].is_none_or(|old| nk < old) {
                    key[to] = Some(nk);
                    pred[to] = Some((Some(u), Some(arc)));
                    heap.push(Reverse((nk, to)));
                }
            }
        }
        let far = key.iter().flatten().copied().max().unwrap_or(Cost::ZERO);
        for (p, k) in pot.iter_mut().zip(&key) {
            *p = *p + k.unwrap_or(far);
        }
        // The path, from the sink back to task i.
        let mut path = Vec::new();
        let mut node = t;
        let first = loop {
            match pred[node] {
                Some((Some(u), Some(arc))) => {
                    path.push(arc);
                    node = u;
                }
                Some((None, _)) => break node,
                _ => return Err(LevelError::Internal("broken shortest path")),
            }
            if path.len() > v {
                return Err(LevelError::Internal("broken shortest path"));
            }
        };
        for arc in path {
            self.apply(arc);
        }
        self.at[i] = Some((first != t).then_some(first));
        self.enter(i);
        Ok(())
    }

    /// Potentials valid on every residual arc (Bellman-Ford from every node at 0).
    fn potentials(&self) -> Result<Vec<Cost>, LevelError> {
        let v = self.nodes();
        let mut dist = vec![Cost::ZERO; v];
        let mut queued = vec![true; v];
        let mut rounds = vec![0usize; v];
        let mut queue: VecDeque<usize> = (0..v).collect();
        while let Some(u) = queue.pop_front() {
            queued[u] = false;
            let du = dist[u];
            let mut better = Vec::new();
            self.arcs_from(u, |to, c, _| {
                if du + c < dist[to] {
                    better.push((to, du + c));
                }
            });
            for (to, nd) in better {
                if nd < dist[to] {
                    dist[to] = nd;
                    if !queued[to] {
                        rounds[to] += 1;
                        if rounds[to] > v + 1 {
                            return Err(LevelError::Internal("negative cycle in residual graph"));
                        }
                        queued[to] = true;
                        queue.push_back(to);
                    }
                }
            }
        }
        Ok(dist)
    }

    /// Among the optimal flows, the one whose task days (in task order,
    /// unplaced last) are lexicographically smallest: task by task, it moves
    /// to its smallest earlier day that a zero-cost cycle avoiding the tasks
    /// already decided reaches, and is then frozen.
    fn lexmin(&mut self) -> Result<(), LevelError> {
        let pot = self.potentials()?;
        let t = self.t();
        let v = self.nodes();
        for i in 0..self.options.len() {
            self.leave(i);
            self.frozen[i] = true;
            let cur = self.at[i].flatten();
            let target = cur.unwrap_or(t);
            let cur_cost = cur.map_or(Cost::dropped(1), |d| Cost::placed(self.cost(i, d)));
            let level = cur_cost - pot[target];
            let candidates: Vec<usize> = self.options[i]
                .iter()
                .take_while(|&&(d, _)| Some(d) != cur)
                .filter(|&&(d, c)| Cost::placed(c) - pot[d] == level)
                .map(|&(d, _)| d)
                .collect();
            for start in candidates {
                // Breadth-first over zero-reduced-cost residual arcs from `start` to `target`.
                let mut pred: Vec<Option<(usize, Arc)>> = vec![None; v];
                let mut seen = vec![false; v];
                seen[start] = true;
                let mut queue = VecDeque::from([start]);
                let mut found = start == target;
                while let Some(x) = queue.pop_front() {
                    if found {
                        break;
                    }
                    let mut next = Vec::new();
                    self.arcs_from(x, |to, c, arc| {
                        if c + pot[x] - pot[to] == Cost::ZERO {
                            next.push((to, arc));
                        }
                    });
                    for (to, arc) in next {
                        if !seen[to] {
                            seen[to] = true;
                            pred[to] = Some((x, arc));
                            if to == target {
                                found = true;
                                break;
                            }
                            queue.push_back(to);
                        }
                    }
                }
                if !found {
                    continue;
                }
                let mut path = Vec::new();
                let mut node = target;
                while node != start {
                    let Some((u, arc)) = pred[node] else {
                        return Err(LevelError::Internal("broken tie-break cycle"));
                    };
                    path.push(arc);
                    node = u;
                    if path.len() > v {
                        return Err(LevelError::Internal("broken tie-break cycle"));
                    }
                }
                for arc in path {
                    self.apply(arc);
                }
                self.at[i] = Some(Some(start));
                break;
            }
        }
        Ok(())
    }
}

/// Assigns each task (given in cell-id order) to one of its `(day, cost)`
/// options or to nothing, minimising (unplaced, cost), with at most
/// `crew[d]` tasks on day `d`, at most `cum_units[d]` tasks on days `0..=d`
/// and at most `limit` tasks in all; ties go to the smallest days in task
/// order (the unique lexicographically smallest optimal assignment).
pub(super) fn assign(
    options: &[Vec<(usize, i128)>],
    crew: &[u32],
    cum_units: Option<&[u64]>,
    limit: Option<usize>,
) -> Result<Vec<Option<usize>>, LevelError> {
    let m = options.len();
    let h = crew.len();
    if m == 0 {
        return Ok(Vec::new());
    }
    let all = i64::try_from(m).map_err(|_| LevelError::TooLarge)?;
    let most = limit.map_or(all, |l| i64::try_from(l).unwrap_or(all).min(all));
    let crew_cap: Vec<i64> = crew.iter().map(|&c| i64::from(c).min(all)).collect();
    let mut out_cap = vec![0i64; h];
    match cum_units {
        None => {
            if h > 0 {
                out_cap[0] = INF;
            }
        }
        Some(units) => {
            // As in the general graph: changes through day d are changes
            // through every later day, so the suffix minimum binds.
            let mut allowed: Vec<u64> = units.iter().take(h).map(|&u| u.min(m as u64)).collect();
            for d in (0..allowed.len().saturating_sub(1)).rev() {
                allowed[d] = allowed[d].min(allowed[d + 1]);
            }
            let mut before = 0u64;
            for (d, &u) in allowed.iter().enumerate() {
                let fresh = u.saturating_sub(before);
                out_cap[d] = i64::try_from(fresh).map_err(|_| LevelError::TooLarge)?;
                before = before.max(u);
            }
        }
    }
    let options: Vec<Vec<(usize, i128)>> = options.iter().map(|o| o.iter().copied().filter(|&(d, _)| d < h).collect()).collect();
    let mut g = DayFlow {
        options,
        h,
        crew_cap,
        out_cap,
        most,
        load: vec![0; h],
        chain: vec![0; h],
        out: vec![0; h],
        placed: 0,
        at: vec![None; m],
        moves: vec![BTreeMap::new(); h],
        drops: vec![BTreeSet::new(); h],
        undrops: vec![BTreeSet::new(); h],
        frozen: vec![false; m],
    };
    let mut pot = vec![Cost::ZERO; g.nodes()];
    for i in 0..m {
        g.route(i, &mut pot)?;
    }
    g.lexmin()?;
    Ok(g.at.into_iter().map(Option::flatten).collect())
}
