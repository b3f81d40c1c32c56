//! Numbered schema migrations under SQLite's `user_version`: each is a `.sql`
//! file that is never edited once shipped, only followed by a new one.

use rusqlite::{Connection, TransactionBehavior};

use super::Result;

/// The migrations in order; `user_version` counts how many have run.
pub const MIGRATIONS: &[(&str, &str)] = &[
    ("001_initial", include_str!("migrations/001_initial.sql")),
    ("002_charge_lookup", include_str!("migrations/002_charge_lookup.sql")),
    ("003_learnt", include_str!("migrations/003_learnt.sql")),
    ("004_damage_lookup", include_str!("migrations/004_damage_lookup.sql")),
    ("005_drafts", include_str!("migrations/005_drafts.sql")),
    ("006_approved_plan", include_str!("migrations/006_approved_plan.sql")),
    ("007_snapshot_lookup", include_str!("migrations/007_snapshot_lookup.sql")),
    ("008_open_records", include_str!("migrations/008_open_records.sql")),
    ("009_charge_by_time", include_str!("migrations/009_charge_by_time.sql")),
    ("010_recent_state", include_str!("migrations/010_recent_state.sql")),
];

/// How many migrations the database has had.
pub fn schema_version(c: &Connection) -> Result<i64> {
    Ok(c.query_row("PRAGMA user_version", [], |r| r.get(0))?)
}

/// Runs the migrations after the database's version, up to `upto`, each in its own transaction.
pub fn migrate(c: &mut Connection, upto: usize) -> Result<()> {
    let from = schema_version(c)?.max(0) as usize;
    for (i, (_, sql)) in MIGRATIONS.iter().enumerate().take(upto).skip(from) {
        let tx = c.transaction_with_behavior(TransactionBehavior::Immediate)?;
        tx.execute_batch(sql)?;
        tx.pragma_update(None, "user_version", (i + 1) as i64)?;
        tx.commit()?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_migration_applies_to_an_empty_database() {
        let mut c = Connection::open_in_memory().unwrap();
        migrate(&mut c, MIGRATIONS.len()).unwrap();
        assert_eq!(schema_version(&c).unwrap(), MIGRATIONS.len() as i64);
        let ok: String = c.query_row("PRAGMA integrity_check", [], |r| r.get(0)).unwrap();
        assert_eq!(ok, "ok");
        // running again is a no-op
        migrate(&mut c, MIGRATIONS.len()).unwrap();
    }

    #[test]
    fn a_first_migration_database_upgrades_and_keeps_its_rows() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("old.db");
        {
            let mut c = Connection::open(&path).unwrap();
            migrate(&mut c, 1).unwrap();
            c.execute_batch(
                "INSERT INTO circuit(id, name, max_amps, position) VALUES (1, 'C1', 40000, 0);
                 INSERT INTO reading VALUES (1, 1000, 30000, 0, 1, 0), (1, 4600, 30000, 30000, 1, 0);
                 INSERT INTO section VALUES (1, 1, 'A', 0);
                 INSERT INTO cell VALUES ('A01', 1, 0, 1);
                 INSERT INTO crop(cell_id, started_at) VALUES ('A01', 1000);",
            )
            .unwrap();
        }
        let store = crate::store::Store::open(&path).unwrap();
        let c = store.db().c;
        assert_eq!(schema_version(c).unwrap(), MIGRATIONS.len() as i64);
        let n: i64 = c.query_row("SELECT count(*) FROM reading", [], |r| r.get(0)).unwrap();
        assert_eq!(n, 2);
        let est: Option<f64> = c.query_row("SELECT estimated_ah FROM crop", [], |r| r.get(0)).unwrap();
        assert_eq!(est, None);
        let idx: i64 = c.query_row("SELECT count(*) FROM sqlite_master WHERE name = 'reading_cum'", [], |r| r.get(0)).unwrap();
        assert_eq!(idx, 0, "009 drops the charge index 002 made");
        // 004: the damage look-ups and the restore log
        for name in ["event_kind", "event_bad_time", "restore_log"] {
            let n: i64 = c.query_row("SELECT count(*) FROM sqlite_master WHERE name = ?1", [name], |r| r.get(0)).unwrap();
            assert_eq!(n, 1, "{name}");
        }
        assert!(store.db().damaged_entries(10).unwrap().is_empty());
        // 006: the approved-plan tables exist, empty, and take a plan of the old rows' cell
        let plans: i64 = c.query_row("SELECT count(*) FROM approved_plan", [], |r| r.get(0)).unwrap();
        assert_eq!(plans, 0);
        c.execute_batch(
            "INSERT INTO approved_plan VALUES (1, 5000, 'JD', '2026-03-01', '2026-03-14');
             INSERT INTO approved_job VALUES (1, '2026-03-03', 'harvest', 'A01');",
        )
        .unwrap();
        assert!(c.execute("INSERT INTO approved_job VALUES (1, '2026-03-03', 'repair', 'A01')", []).is_err());
        // 007: the snapshot look-ups exist and the old rows are still found through them
        for name in ["event_cell_kind", "cutout_end", "learn_weighing_left_out", "reading_flagged"] {
            let n: i64 = c.query_row("SELECT count(*) FROM sqlite_master WHERE name = ?1", [name], |r| r.get(0)).unwrap();
            assert_eq!(n, 1, "{name}");
        }
        let crops: i64 = c.query_row("SELECT count(*) FROM crop WHERE cell_id = 'A01'", [], |r| r.get(0)).unwrap();
        assert_eq!(crops, 1);
        // 008: the old open crop is found through its partial index
        for name in ["anode_load_open", "crop_open", "cutout_open"] {
            let n: i64 = c.query_row("SELECT count(*) FROM sqlite_master WHERE name = ?1", [name], |r| r.get(0)).unwrap();
            assert_eq!(n, 1, "{name}");
        }
        let open = store.db().open_records("A01").unwrap().unwrap();
        assert_eq!(open.crop.map(|c| c.started_at.timestamp()), Some(1000));
        assert!(open.load.is_none() && open.cutout.is_none());
        let plan: String = c
            .query_row("EXPLAIN QUERY PLAN SELECT started_at FROM crop WHERE cell_id = 'A01' AND ended_at IS NULL", [], |r| r.get(3))
            .unwrap();
        // an index on the cell either way: 008's partial one, or 007's covering
        // one when SQLite prefers it (both read only this cell's crops)
        assert!(plan.starts_with("SEARCH") && plan.contains("(cell_id=?)"), "{plan}");
        // 009: without the charge index the old rows' charge is still found, by time
        use crate::domain::charge::Curve;
        let curve = crate::store::readings::StoreCurve::new(store.db(), 1, crate::store::time(5000).unwrap()).unwrap();
        assert_eq!(curve.time_at(15000.0).unwrap().map(|t| t.timestamp()), Some(2800), "half-way between the two readings");
        assert_eq!(curve.time_at(30000.0).unwrap().map(|t| t.timestamp()), Some(4600));
        // 010: the recent-state ranges exist, and the old crop is found through its range by time
        for name in ["anode_load_recent", "crop_recent", "event_recent"] {
            let n: i64 = c.query_row("SELECT count(*) FROM sqlite_master WHERE name = ?1", [name], |r| r.get(0)).unwrap();
            assert_eq!(n, 1, "{name}");
        }
        let states = store.db().cell_states(crate::store::time(5000).unwrap(), None, |_| false).unwrap();
        assert_eq!(states["A01"].crop_started.map(|t| t.timestamp()), Some(1000));
    }

    #[test]
    fn a_newer_database_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("new.db");
        {
            let c = Connection::open(&path).unwrap();
            c.pragma_update(None, "user_version", 99).unwrap();
        }
        assert!(matches!(crate::store::Store::open(&path), Err(crate::store::StoreError::TooNew(..))));
    }
}
