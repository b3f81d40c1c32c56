//! What changed since the last approved plan: each cell's jobs matched between
//! the approved plan and today's, reported as moved, added or dropped.
//!
//! The approved plan is kept as what was planned for each day (a job is a
//! kind, a cell and a date). A cell's jobs of one kind are matched in date
//! order (an alignment, so a job is never matched across another of the same
//! cell), minimising the days they moved plus [`UNMATCHED_DAYS`] for each job
//! left unmatched where the other plan should have had it. Approved jobs
//! dated before today's plan begins were due before it (done, or now overdue
//! on an early day): unmatched, they are neither dropped nor reported. Only
//! the days both plans cover are compared for jobs left over: jobs of today's
//! plan after the approved plan's last day were not in it, and approved jobs
//! after today's plan's last day are not in it; unmatched, neither is reported.
//! So a plan shorter than the approved one cannot tell a job moved past its
//! last day from one dropped near it: compare plans of the same length.

use chrono::NaiveDate;
use serde::Serialize;
use std::collections::BTreeMap;

use super::charge::Time;
use super::plan::{JobKind, Plan};

/// The price of leaving a job unmatched, in days moved: a job that moved more
/// than twice this is reported as dropped and added rather than as moved.
pub const UNMATCHED_DAYS: i64 = 3;

/// A job as planned for a day.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord, Serialize)]
pub struct PlannedJob {
    pub date: NaiveDate,
    /// `anode_change` or `harvest`.
    pub kind: JobKind,
    pub cell: String,
}

/// A plan as approved.
#[derive(Debug, Clone, PartialEq)]
pub struct ApprovedPlan {
    pub id: i64,
    pub approved_at: Time,
    pub by: String,
    pub from: NaiveDate,
    pub to: NaiveDate,
    pub jobs: Vec<PlannedJob>,
}

/// A job that the current plan does on another day than the approved one.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct MovedJob {
    pub cell: String,
    pub kind: JobKind,
    pub from: NaiveDate,
    pub to: NaiveDate,
}

/// The differences between the last approved plan and the current one.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlanDiff {
    /// The approved plan's record.
    pub approved: i64,
    pub approved_at: Time,
    pub by: String,
    pub approved_from: NaiveDate,
    pub approved_to: NaiveDate,
    pub moved: Vec<MovedJob>,
    pub added: Vec<PlannedJob>,
    pub dropped: Vec<PlannedJob>,
}

impl PlanDiff {
    pub fn is_empty(&self) -> bool {
        self.moved.is_empty() && self.added.is_empty() && self.dropped.is_empty()
    }
}

/// Every job a plan places, by day (jobs levelled after its last day are not in it).
pub fn planned_jobs(plan: &Plan) -> Vec<PlannedJob> {
    let mut out = Vec::new();
    for d in &plan.days {
        out.extend(d.anode_changes.iter().map(|c| PlannedJob { date: d.date, kind: JobKind::AnodeChange, cell: c.cell.clone() }));
        out.extend(d.harvests.iter().map(|h| PlannedJob { date: d.date, kind: JobKind::Harvest, cell: h.cell.clone() }));
    }
    out
}

/// One step of the alignment of a cell's approved and current dates.
#[derive(Clone, Copy)]
enum Step {
    Match,
    Dropped,
    Added,
}

/// Compares the current plan's jobs (over `from..=to`) with the approved plan.
pub fn diff(approved: &ApprovedPlan, current: &[PlannedJob], from: NaiveDate, to: NaiveDate) -> PlanDiff {
    type Key = (JobKind, String);
    let mut a: BTreeMap<Key, Vec<NaiveDate>> = BTreeMap::new();
    let mut c: BTreeMap<Key, Vec<NaiveDate>> = BTreeMap::new();
    for j in &approved.jobs {
        a.entry((j.kind, j.cell.clone())).or_default().push(j.date);
    }
    for j in current {
        c.entry((j.kind, j.cell.clone())).or_default().push(j.date);
    }
    let mut keys: Vec<Key> = a.keys().chain(c.keys()).cloned().collect();
    keys.sort();
    keys.dedup();
    let (mut moved, mut added, mut dropped) = (Vec::new(), Vec::new(), Vec::new());
    for key in keys {
        let mut xs = a.remove(&key).unwrap_or_default();
        let mut ys = c.remove(&key).unwrap_or_default();
        xs.sort();
        ys.sort();
        let outside = |x: NaiveDate| x < from || x > to;
        let drop_cost = |x: NaiveDate| if outside(x) { 0 } else { UNMATCHED_DAYS };
        let add_cost = |y: NaiveDate| if y > approved.to { 0 } else { UNMATCHED_DAYS };
        // cost[i][j]: least cost of aligning xs[i..] with ys[j..]
        let (n, m) = (xs.len(), ys.len());
        let mut cost = vec![vec![0i64; m + 1]; n + 1];
        let mut step = vec![vec![Step::Match; m + 1]; n + 1];
        for i in (0..=n).rev() {
            for j in (0..=m).rev() {
                if i == n && j == m {
                    continue;
                }
                let mut best = (i64::MAX, Step::Match);
                if i < n && j < m {
                    best = (cost[i + 1][j + 1] + (ys[j] - xs[i]).num_days().abs(), Step::Match);
                }
                if i < n && cost[i + 1][j] + drop_cost(xs[i]) < best.0 {
                    best = (cost[i + 1][j] + drop_cost(xs[i]), Step::Dropped);
                }
                if j < m && cost[i][j + 1] + add_cost(ys[j]) < best.0 {
                    best = (cost[i][j + 1] + add_cost(ys[j]), Step::Added);
                }
                cost[i][j] = best.0;
                step[i][j] = best.1;
            }
        }
        let (mut i, mut j) = (0, 0);
        let (kind, cell) = key;
        while i < n || j < m {
            match step[i][j] {
                Step::Match => {
                    if xs[i] != ys[j] {
                        moved.push(MovedJob { cell: cell.clone(), kind, from: xs[i], to: ys[j] });
                    }
                    i += 1;
                    j += 1;
                }
                Step::Dropped => {
                    if !outside(xs[i]) {
                        dropped.push(PlannedJob { date: xs[i], kind, cell: cell.clone() });
                    }
                    i += 1;
                }
                Step::Added => {
                    if ys[j] <= approved.to {
                        added.push(PlannedJob { date: ys[j], kind, cell: cell.clone() });
                    }
                    j += 1;
                }
            }
        }
    }
    moved.sort_by(|x, y| (x.to, x.kind, &x.cell).cmp(&(y.to, y.kind, &y.cell)));
    added.sort();
    dropped.sort();
    PlanDiff {
        approved: approved.id,
        approved_at: approved.approved_at,
        by: approved.by.clone(),
        approved_from: approved.from,
        approved_to: approved.to,
        moved,
        added,
        dropped,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::{TimeZone, Utc};

    fn d(day: u32) -> NaiveDate {
        NaiveDate::from_ymd_opt(2026, 3, day).unwrap()
    }
    fn job(day: u32, kind: &'static str, cell: &str) -> PlannedJob {
        PlannedJob { date: d(day), kind: JobKind::from_name(kind).unwrap(), cell: cell.to_string() }
    }
    fn approved(jobs: Vec<PlannedJob>) -> ApprovedPlan {
        ApprovedPlan {
            id: 7,
            approved_at: Utc.with_ymd_and_hms(2026, 3, 1, 6, 0, 0).unwrap(),
            by: "JD".into(),
            from: d(1),
            to: d(14),
            jobs,
        }
    }

    #[test]
    fn moved_added_and_dropped() {
        let a = approved(vec![
            job(1, "harvest", "A01"),      // due before today's plan: done, not reported
            job(8, "harvest", "A01"),      // still on day 8
            job(5, "anode_change", "A02"), // moved to day 6
            job(9, "anode_change", "A03"), // gone
        ]);
        let now = vec![
            job(8, "harvest", "A01"),
            job(15, "harvest", "A01"), // after the approved plan: not added
            job(6, "anode_change", "A02"),
            job(4, "anode_change", "A04"), // new
        ];
        let x = diff(&a, &now, d(2), d(15));
        assert_eq!(x.moved, vec![MovedJob { cell: "A02".into(), kind: JobKind::AnodeChange, from: d(5), to: d(6) }]);
        assert_eq!(x.added, vec![job(4, "anode_change", "A04")]);
        assert_eq!(x.dropped, vec![job(9, "anode_change", "A03")]);
        assert!(!x.is_empty());
        // the same plan against itself: nothing changed
        let same = approved(now.clone());
        assert!(diff(&same, &now, d(2), d(15)).is_empty());
        // a shorter plan today (to day 7): the approved jobs after it are not dropped
        let x = diff(&a, &[job(6, "anode_change", "A02")], d(2), d(7));
        assert!(x.dropped.is_empty() && x.added.is_empty(), "{x:?}");
        assert_eq!(x.moved.len(), 1);
    }

    #[test]
    fn a_cells_jobs_are_not_matched_across_each_other() {
        // Approved harvests on days 3 and 10; now a new one on day 5 between them: the two keep
        // their days and day 5 is added (matching 3→5 and 10→3 would cost more, and cross).
        let a = approved(vec![job(3, "harvest", "B1"), job(10, "harvest", "B1")]);
        let x = diff(&a, &[job(3, "harvest", "B1"), job(5, "harvest", "B1"), job(10, "harvest", "B1")], d(2), d(15));
        assert!(x.moved.is_empty());
        assert_eq!(x.added, vec![job(5, "harvest", "B1")]);
        // moved far (10 → 3, more than twice UNMATCHED_DAYS): dropped and added
        let x = diff(&approved(vec![job(10, "anode_change", "B1")]), &[job(3, "anode_change", "B1")], d(2), d(15));
        assert_eq!((x.added.len(), x.dropped.len(), x.moved.len()), (1, 1, 0));
    }
}
