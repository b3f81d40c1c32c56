//! The plan's records: kept moves (event log entries of kind `kept_move`) and
//! approved plans with what each planned for each day (migration 006).

use chrono::NaiveDate;
use rusqlite::{OptionalExtension, params};

use super::{Db, Result, StoreError, secs, time};
use crate::domain::charge::Time;
use crate::domain::history::{Event, EventKind};
use crate::domain::plan::JobKind;
use crate::domain::plan_diff::{ApprovedPlan, PlannedJob};

fn day(s: &str) -> Result<NaiveDate> {
    NaiveDate::parse_from_str(s, "%Y-%m-%d").map_err(|_| StoreError::Corrupt(format!("'{s}' in an approved plan is not a date")))
}

fn kind(s: &str) -> Result<JobKind> {
    JobKind::from_name(s).ok_or_else(|| StoreError::Corrupt(format!("'{s}' in an approved plan is not a job kind")))
}

impl Db<'_> {
    /// The live (not undone) kept moves, oldest entry first.
    pub fn kept_moves(&self) -> Result<Vec<Event>> {
        let mut st = self.c.prepare_cached(
            "SELECT id FROM event e INDEXED BY event_kind WHERE kind = ?1 AND NOT EXISTS (SELECT 1 FROM event v WHERE v.voids = e.id) ORDER BY id",
        )?;
        let ids: Vec<i64> = st.query_map([EventKind::KeptMove.name()], |r| r.get(0))?.collect::<rusqlite::Result<_>>()?;
        let mut out = Vec::with_capacity(ids.len());
        for id in ids {
            out.extend(self.event(id)?);
        }
        Ok(out)
    }

    /// Records an approved plan and its jobs; returns its id.
    pub fn record_approved_plan(&self, at: Time, by: &str, from: NaiveDate, to: NaiveDate, jobs: &[PlannedJob]) -> Result<i64> {
        self.c.execute(
            "INSERT INTO approved_plan(approved_at, approved_by, from_day, to_day) VALUES (?1, ?2, ?3, ?4)",
            params![secs(at), by, from.to_string(), to.to_string()],
        )?;
        let id = self.c.last_insert_rowid();
        let mut st = self.c.prepare_cached("INSERT INTO approved_job(plan_id, day, kind, cell_id) VALUES (?1, ?2, ?3, ?4)")?;
        for j in jobs {
            st.execute(params![id, j.date.to_string(), j.kind.name(), j.cell])?;
        }
        Ok(id)
    }

    /// The approved plan recorded last, with its jobs.
    pub fn last_approved_plan(&self) -> Result<Option<ApprovedPlan>> {
        let row: Option<(i64, i64, String, String, String)> = self
            .c
            .query_row("SELECT id, approved_at, approved_by, from_day, to_day FROM approved_plan ORDER BY id DESC LIMIT 1", [], |r| {
                Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?))
            })
            .optional()?;
        let Some((id, at, by, from, to)) = row else { return Ok(None) };
        let mut st = self.c.prepare_cached("SELECT day, kind, cell_id FROM approved_job WHERE plan_id = ?1")?;
        let rows: Vec<(String, String, String)> =
            st.query_map([id], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))?.collect::<rusqlite::Result<_>>()?;
        let jobs =
            rows.iter().map(|(d, k, c)| Ok(PlannedJob { date: day(d)?, kind: kind(k)?, cell: c.clone() })).collect::<Result<Vec<_>>>()?;
        Ok(Some(ApprovedPlan { id, approved_at: time(at)?, by, from: day(&from)?, to: day(&to)?, jobs }))
    }
}
