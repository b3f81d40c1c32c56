//! Drafts: forms typed in the screens and not yet confirmed when the terminal
//! went away. Stored as typed (the screens own their meaning); see `005_drafts.sql`.

use rusqlite::params;

use super::{Db, Result, StoreError, secs, time};
use crate::domain::charge::Time;

/// A kept draft.
#[derive(Debug, Clone, PartialEq)]
pub struct DraftRow {
    pub id: i64,
    pub form: String,
    pub fields: Vec<(String, String)>,
    pub by: Option<String>,
    pub saved_at: Time,
    pub reason: String,
}

impl Db<'_> {
    /// Keeps a draft; its id.
    pub fn insert_draft(&self, form: &str, fields: &[(String, String)], by: Option<&str>, at: Time, reason: &str) -> Result<i64> {
        let json = serde_json::to_string(fields).map_err(|e| StoreError::Corrupt(format!("draft fields: {e}")))?;
        self.c.execute(
            "INSERT INTO draft(form, fields, by, saved_at, reason) VALUES (?1, ?2, ?3, ?4, ?5)",
            params![form, json, by, secs(at), reason],
        )?;
        Ok(self.c.last_insert_rowid())
    }

    /// The drafts, oldest first.
    pub fn drafts(&self) -> Result<Vec<DraftRow>> {
        let mut st = self.c.prepare("SELECT id, form, fields, by, saved_at, reason FROM draft ORDER BY saved_at, id")?;
        let rows = st.query_map([], |r| {
            Ok((r.get::<_, i64>(0)?, r.get::<_, String>(1)?, r.get::<_, String>(2)?, r.get(3)?, r.get::<_, i64>(4)?, r.get(5)?))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (id, form, json, by, at, reason) = row?;
            let fields = serde_json::from_str(&json).map_err(|e| StoreError::Corrupt(format!("draft {id}: {e}")))?;
            out.push(DraftRow { id, form, fields, by, saved_at: time(at)?, reason });
        }
        Ok(out)
    }

    /// Removes a draft (taken up again or thrown away); whether it was there.
    pub fn delete_draft(&self, id: i64) -> Result<bool> {
        Ok(self.c.execute("DELETE FROM draft WHERE id = ?1", [id])? == 1)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::{MIGRATIONS, Store, migrate, schema_version};
    use rusqlite::Connection;

    #[test]
    fn a_database_from_before_drafts_upgrades_and_keeps_its_rows() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("old.db");
        let before = MIGRATIONS.iter().position(|(n, _)| *n == "005_drafts").unwrap();
        {
            let mut c = Connection::open(&path).unwrap();
            migrate(&mut c, before).unwrap();
            c.execute_batch("INSERT INTO circuit(id, name, max_amps, position) VALUES (1, 'C1', 40000, 0);").unwrap();
        }
        let mut store = Store::open(&path).unwrap();
        assert_eq!(schema_version(store.db().c).unwrap(), MIGRATIONS.len() as i64);
        let n: i64 = store.db().c.query_row("SELECT count(*) FROM circuit", [], |r| r.get(0)).unwrap();
        assert_eq!(n, 1, "the old rows are kept");
        let at = time(1_795_000_000).unwrap();
        let fields = vec![("amps".to_string(), "31 500".to_string())];
        let id = store.write(|db| db.insert_draft("reading", &fields, None, at, "SIGTERM")).unwrap();
        assert_eq!(
            store.db().drafts().unwrap(),
            vec![DraftRow { id, form: "reading".into(), fields, by: None, saved_at: at, reason: "SIGTERM".into() }]
        );
    }
}
