//! Drafts: an entry typed in the screens but not confirmed when the terminal
//! went away is kept here and offered back at the next start.
//!
//! A draft is not an entry: it changes nothing about the plant, is not in the
//! event log, and saving one must stay quick and quiet (the terminal may be
//! dying), so it never starts a backup or any other follow-up work.

use super::{Plant, Result};
use crate::domain::charge::Time;
pub use crate::store::DraftRow as Draft;

impl Plant {
    /// Keeps a form as typed: which form, its fields, who was logging, when and why.
    pub fn save_draft(&mut self, form: &str, fields: &[(String, String)], by: Option<&str>, at: Time, reason: &str) -> Result<i64> {
        self.store.write(|db| Ok(db.insert_draft(form, fields, by, at, reason)?))
    }

    /// The kept drafts, oldest first.
    pub fn drafts(&self) -> Result<Vec<Draft>> {
        Ok(self.store.db().drafts()?)
    }

    /// Removes a draft once it is taken up again or thrown away.
    pub fn drop_draft(&mut self, id: i64) -> Result<bool> {
        self.store.write(|db| Ok(db.delete_draft(id)?))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_draft_is_kept_until_dropped_and_changes_no_entry() {
        let dir = tempfile::tempdir().unwrap();
        let mut p = Plant::open(&dir.path().join("p.db")).unwrap();
        let at = chrono::DateTime::from_timestamp(1_795_000_000, 0).unwrap();
        let fields = vec![("cells".to_string(), "A01-A03".to_string()), ("total_kg".to_string(), "650, 64".to_string())];
        let events = p.store.db().event_count().unwrap();
        let id = p.save_draft("harvest", &fields, Some("AK"), at, "the terminal closed").unwrap();
        let d = p.drafts().unwrap();
        assert_eq!(d.len(), 1);
        assert_eq!(
            (d[0].id, d[0].form.as_str(), &d[0].fields, d[0].by.as_deref(), d[0].saved_at),
            (id, "harvest", &fields, Some("AK"), at)
        );
        assert_eq!(p.store.db().event_count().unwrap(), events, "a draft is not an entry");
        assert!(p.drop_draft(id).unwrap());
        assert!(p.drafts().unwrap().is_empty());
        assert!(!p.drop_draft(id).unwrap());
    }
}
