//! The append-only event log (entries and their voids) and the per-cell
//! records derived from it by replay: anode loads, crops, cut-outs.

use rusqlite::{OptionalExtension, params};

use super::{Damage, Db, Result, StoreError, opt_time, secs, time};
use crate::domain::charge::{OpenSpan, Time};
use crate::domain::history::{CellHistory, Event, EventKind};

/// An event to append.
#[derive(Debug, Clone, PartialEq)]
pub struct NewEvent {
    pub kind: EventKind,
    pub cell: Option<String>,
    pub circuit_id: Option<i64>,
    pub at: Time,
    pub end: Option<Time>,
    pub count: Option<u32>,
    pub kg: Option<f64>,
    pub amps: Option<f64>,
    pub volts: Option<f64>,
    pub by: String,
    pub forced: bool,
    pub recorded_at: Time,
    pub voids: Option<i64>,
}

/// A closed crop's charge and measured efficiency, stored with it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CropFigures {
    pub charge_ah: f64,
    pub estimated_ah: f64,
    pub efficiency: Option<f64>,
}

/// A closed crop's identity: start, end, weighed kg.
pub type CropKey = (Time, Time, f64);

/// A cell-level reading from the log: (time, count, volts).
type CellReading = (Time, Option<u32>, Option<f64>);

/// An anode load as stored.
#[derive(Debug, Clone, PartialEq)]
pub struct LoadRow {
    pub set_at: Time,
    pub count: u32,
    pub mean_kg: f64,
    pub ended_at: Option<Time>,
    pub scrap_kg: Option<f64>,
}

pub(super) const EVENT_COLS: &str =
    "e.id, e.kind, e.cell_id, c.name, e.at, e.end_at, e.count, e.kg, e.amps, e.volts, e.logged_by, e.forced, e.recorded_at, e.voids,
     EXISTS (SELECT 1 FROM event v WHERE v.voids = e.id)";

/// One event row. A kind this version does not know, or a time that does not
/// decode, is [`Damage`] naming the entry: never replayed as something else.
pub(super) fn event(r: &rusqlite::Row<'_>) -> rusqlite::Result<Result<Event, Damage>> {
    let id: i64 = r.get(0)?;
    let kind: String = r.get(1)?;
    let Some(kind) = EventKind::from_name(&kind) else { return Ok(Err(Damage::UnknownKind { entry: id, kind })) };
    let when = |i: usize, column: &'static str| -> rusqlite::Result<Result<Option<Time>, Damage>> {
        let v: Option<i64> = r.get(i)?;
        Ok(match v.map(|v| (v, time(v))) {
            None => Ok(None),
            Some((_, Ok(t))) => Ok(Some(t)),
            Some((value, Err(_))) => Err(Damage::BadTime { entry: id, column, value }),
        })
    };
    let (at, end, recorded_at) = match (when(4, "time")?, when(5, "end time")?, when(12, "recording time")?) {
        (Ok(Some(at)), Ok(end), Ok(Some(rec))) => (at, end, rec),
        (Err(d), _, _) | (_, Err(d), _) | (_, _, Err(d)) => return Ok(Err(d)),
        // NOT NULL columns: SQLite has already refused a null
        _ => return Err(rusqlite::Error::InvalidColumnType(4, "at".into(), rusqlite::types::Type::Null)),
    };
    Ok(Ok(Event {
        id,
        kind,
        cell: r.get(2)?,
        circuit: r.get(3)?,
        at,
        end,
        count: r.get(6)?,
        kg: r.get(7)?,
        amps: r.get(8)?,
        volts: r.get(9)?,
        by: r.get(10)?,
        forced: r.get(11)?,
        recorded_at,
        voids: r.get(13)?,
        voided: r.get(14)?,
    }))
}

/// The rows' events, or the first damaged one's [`StoreError::Damaged`].
pub(super) fn decoded(rows: impl Iterator<Item = rusqlite::Result<Result<Event, Damage>>>) -> Result<Vec<Event>> {
    let mut out = Vec::new();
    for r in rows {
        out.push(r?.map_err(StoreError::Damaged)?);
    }
    Ok(out)
}

impl Db<'_> {
    /// Appends an event; returns its id.
    pub fn append_event(&self, e: &NewEvent) -> Result<i64> {
        let mut st = self.c.prepare_cached(
            "INSERT INTO event(kind, cell_id, circuit_id, at, end_at, count, kg, amps, volts, logged_by, forced, recorded_at, voids)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13)",
        )?;
        let end = match e.end {
            Some(t) => Some(super::storable(t)?),
            None => None,
        };
        st.execute(params![
            e.kind.name(),
            e.cell,
            e.circuit_id,
            super::storable(e.at)?,
            end,
            e.count,
            e.kg,
            e.amps,
            e.volts,
            e.by,
            e.forced,
            super::storable(e.recorded_at)?,
            e.voids
        ])?;
        Ok(self.c.last_insert_rowid())
    }

    pub fn event(&self, id: i64) -> Result<Option<Event>> {
        let sql = format!("SELECT {EVENT_COLS} FROM event e LEFT JOIN circuit c ON c.id = e.circuit_id WHERE e.id = ?1");
        match self.c.prepare_cached(&sql)?.query_row([id], event).optional()? {
            Some(e) => Ok(Some(e.map_err(StoreError::Damaged)?)),
            None => Ok(None),
        }
    }

    /// The newest events first (voids included), optionally of one cell.
    pub fn recent_events(&self, cell: Option<&str>, limit: usize) -> Result<Vec<Event>> {
        let sql = format!(
            "SELECT {EVENT_COLS} FROM event e LEFT JOIN circuit c ON c.id = e.circuit_id
             WHERE (?1 IS NULL OR e.cell_id = ?1 OR e.voids IN (SELECT id FROM event WHERE cell_id = ?1)) ORDER BY e.id DESC LIMIT ?2"
        );
        let mut st = self.c.prepare_cached(&sql)?;
        decoded(st.query_map(params![cell, limit as i64], event)?)
    }

    /// [`Db::recent_events`] one at a time, each handed to `f` as it is read,
    /// so a long listing holds one entry, not all of them.
    pub fn each_recent_event<E: From<StoreError>>(
        &self,
        cell: Option<&str>,
        limit: usize,
        mut f: impl FnMut(Event) -> std::result::Result<(), E>,
    ) -> std::result::Result<(), E> {
        let sql = format!(
            "SELECT {EVENT_COLS} FROM event e LEFT JOIN circuit c ON c.id = e.circuit_id
             WHERE (?1 IS NULL OR e.cell_id = ?1 OR e.voids IN (SELECT id FROM event WHERE cell_id = ?1)) ORDER BY e.id DESC LIMIT ?2"
        );
        let mut st = self.c.prepare_cached(&sql).map_err(StoreError::from)?;
        for r in st.query_map(params![cell, limit as i64], event).map_err(StoreError::from)? {
            f(r.map_err(StoreError::from)?.map_err(StoreError::Damaged)?)?;
        }
        Ok(())
    }

    /// Every event of a cell, in entry order.
    pub fn cell_events(&self, cell: &str) -> Result<Vec<Event>> {
        let sql = format!("SELECT {EVENT_COLS} FROM event e LEFT JOIN circuit c ON c.id = e.circuit_id WHERE e.cell_id = ?1 ORDER BY e.id");
        let mut st = self.c.prepare_cached(&sql)?;
        decoded(st.query_map([cell], event)?)
    }

    /// Replaces a cell's derived records with those its replayed history implies.
    pub fn write_history(&self, cell: &str, h: &CellHistory, crops: &[Option<CropFigures>]) -> Result<()> {
        self.c.execute("DELETE FROM anode_load WHERE cell_id = ?1", [cell])?;
        self.c.execute("DELETE FROM crop WHERE cell_id = ?1", [cell])?;
        self.c.execute("DELETE FROM cutout WHERE cell_id = ?1", [cell])?;
        self.insert_history(cell, h, crops)
    }

    /// The stored figures of a cell's closed crops, by (start, end, weighed kg).
    pub fn crop_figures(&self, cell: &str) -> Result<Vec<(CropKey, CropFigures)>> {
        let mut st = self.c.prepare_cached(
            "SELECT started_at, ended_at, harvest_kg, charge_ah, estimated_ah, efficiency FROM crop
             WHERE cell_id = ?1 AND ended_at IS NOT NULL AND harvest_kg IS NOT NULL AND charge_ah IS NOT NULL",
        )?;
        let v = st.query_map([cell], |r| {
            let key = (time(r.get(0)?)?, time(r.get(1)?)?, r.get::<_, f64>(2)?);
            Ok((key, CropFigures { charge_ah: r.get(3)?, estimated_ah: r.get::<_, Option<f64>>(4)?.unwrap_or(0.0), efficiency: r.get(5)? }))
        })?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// Closed crops on a circuit that ended at or after `t` (their charge changes with a back-fill).
    pub fn crops_ended_since(&self, circuit_id: i64, t: Time) -> Result<Vec<(String, Time, Time, f64)>> {
        let mut st = self.c.prepare_cached(
            "SELECT crop.cell_id, crop.started_at, crop.ended_at, crop.harvest_kg FROM crop
             JOIN cell ON cell.id = crop.cell_id JOIN section ON section.id = cell.section_id
             WHERE section.circuit_id = ?1 AND crop.ended_at >= ?2 AND crop.harvest_kg IS NOT NULL",
        )?;
        let v = st.query_map(params![circuit_id, secs(t)], |r| Ok((r.get(0)?, time(r.get(1)?)?, time(r.get(2)?)?, r.get(3)?)))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// Cells on a circuit with anodes pulled and their scrap weighed at or after `t`.
    pub fn cells_scrapped_since(&self, circuit_id: i64, t: Time) -> Result<Vec<String>> {
        let mut st = self.c.prepare_cached(
            "SELECT DISTINCT l.cell_id FROM anode_load l JOIN cell ON cell.id = l.cell_id JOIN section ON section.id = cell.section_id
             WHERE section.circuit_id = ?1 AND l.ended_at >= ?2 AND l.scrap_kg IS NOT NULL ORDER BY l.cell_id",
        )?;
        let v = st.query_map(params![circuit_id, secs(t)], |r| r.get(0))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    pub fn set_crop_figures(&self, cell: &str, started_at: Time, f: CropFigures) -> Result<()> {
        self.c.execute(
            "UPDATE crop SET charge_ah = ?3, estimated_ah = ?4, efficiency = ?5 WHERE cell_id = ?1 AND started_at = ?2",
            params![cell, secs(started_at), f.charge_ah, f.estimated_ah, f.efficiency],
        )?;
        Ok(())
    }

    /// The cell's cut-outs known at `as_of` (one closed after `as_of` counts as still open).
    pub fn cutouts(&self, cell: &str, as_of: Time) -> Result<Vec<OpenSpan>> {
        let mut st = self.c.prepare_cached("SELECT from_at, to_at FROM cutout WHERE cell_id = ?1 AND from_at <= ?2 ORDER BY from_at")?;
        let v = st.query_map(params![cell, secs(as_of)], |r| {
            let to: Option<i64> = r.get(1)?;
            Ok(OpenSpan { from: time(r.get(0)?)?, to: opt_time(to.filter(|&x| x <= secs(as_of)))? })
        })?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// The anode load in the cell at `as_of`: (set event, set time, count, mean kg).
    pub fn load_at(&self, cell: &str, as_of: Time) -> Result<Option<(i64, Time, u32, f64)>> {
        let mut st = self.c.prepare_cached(
            "SELECT set_event, set_at, count, mean_kg FROM anode_load WHERE cell_id = ?1 AND set_at <= ?2
             AND (ended_at IS NULL OR ended_at > ?2) ORDER BY set_at DESC LIMIT 1",
        )?;
        Ok(st.query_row(params![cell, secs(as_of)], |r| Ok((r.get(0)?, time(r.get(1)?)?, r.get(2)?, r.get(3)?))).optional()?)
    }

    /// When the crop growing at `as_of` began.
    pub fn crop_at(&self, cell: &str, as_of: Time) -> Result<Option<Time>> {
        let mut st = self.c.prepare_cached(
            "SELECT started_at FROM crop WHERE cell_id = ?1 AND started_at <= ?2 AND (ended_at IS NULL OR ended_at > ?2) ORDER BY started_at DESC LIMIT 1",
        )?;
        Ok(st.query_row(params![cell, secs(as_of)], |r| time(r.get(0)?)).optional()?)
    }

    /// Measured efficiencies of the cell's crops harvested by `as_of`, oldest first: (harvest time, efficiency, kg).
    pub fn crop_efficiencies(&self, cell: &str, as_of: Time) -> Result<Vec<(Time, f64, f64)>> {
        let mut st = self.c.prepare_cached(
            "SELECT ended_at, efficiency, harvest_kg FROM crop WHERE cell_id = ?1 AND ended_at <= ?2 AND efficiency IS NOT NULL ORDER BY ended_at",
        )?;
        let v = st.query_map(params![cell, secs(as_of)], |r| Ok((time(r.get(0)?)?, r.get(1)?, r.get(2)?)))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// The last crop efficiency measured by `as_of`.
    pub fn last_crop_efficiency(&self, cell: &str, as_of: Time) -> Result<Option<f64>> {
        let mut st = self.c.prepare_cached(
            "SELECT efficiency FROM crop WHERE cell_id = ?1 AND ended_at <= ?2 AND efficiency IS NOT NULL ORDER BY ended_at DESC LIMIT 1",
        )?;
        Ok(st.query_row(params![cell, secs(as_of)], |r| r.get(0)).optional()?)
    }

    /// The latest live reading of a cell-level kind by `as_of`: (time, count, volts).
    fn latest_cell_event(&self, cell: &str, kind: EventKind, as_of: Time) -> Result<Option<CellReading>> {
        let mut st = self.c.prepare_cached(
            "SELECT at, count, volts FROM event e WHERE cell_id = ?1 AND kind = ?2 AND at <= ?3
             AND NOT EXISTS (SELECT 1 FROM event v WHERE v.voids = e.id) ORDER BY at DESC, id DESC LIMIT 1",
        )?;
        Ok(st.query_row(params![cell, kind.name(), secs(as_of)], |r| Ok((time(r.get(0)?)?, r.get(1)?, r.get(2)?))).optional()?)
    }

    pub fn last_voltage(&self, cell: &str, as_of: Time) -> Result<Option<(Time, f64)>> {
        Ok(self.latest_cell_event(cell, EventKind::Voltage, as_of)?.and_then(|(t, _, v)| v.map(|v| (t, v))))
    }

    /// Shorts found in `[since, as_of]`: total count and the last time.
    pub fn shorts_since(&self, cell: &str, since: Time, as_of: Time) -> Result<Option<(u32, Time)>> {
        let mut st = self.c.prepare_cached(
            "SELECT sum(count), max(at) FROM event e WHERE cell_id = ?1 AND kind = ?2 AND at >= ?3 AND at <= ?4
             AND NOT EXISTS (SELECT 1 FROM event v WHERE v.voids = e.id)",
        )?;
        let (n, t): (Option<u32>, Option<i64>) =
            st.query_row(params![cell, EventKind::Shorts.name(), secs(since), secs(as_of)], |r| Ok((r.get(0)?, r.get(1)?)))?;
        Ok(n.zip(opt_time(t)?))
    }

    /// Every anode load of a cell, oldest first.
    pub fn loads(&self, cell: &str) -> Result<Vec<LoadRow>> {
        let mut st = self
            .c
            .prepare_cached("SELECT set_at, count, mean_kg, ended_at, scrap_kg FROM anode_load WHERE cell_id = ?1 ORDER BY set_at")?;
        let v = st.query_map([cell], |r| {
            Ok(LoadRow {
                set_at: time(r.get(0)?)?,
                count: r.get(1)?,
                mean_kg: r.get(2)?,
                ended_at: opt_time(r.get(3)?)?,
                scrap_kg: r.get(4)?,
            })
        })?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// Cells whose derived records disagree with a fresh replay are found by the
    /// plant; this lists the cells that have any events at all.
    pub fn cells_with_events(&self) -> Result<Vec<String>> {
        let mut st = self.c.prepare("SELECT DISTINCT cell_id FROM event WHERE cell_id IS NOT NULL ORDER BY cell_id")?;
        let v = st.query_map([], |r| r.get(0))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// The derived records as stored, for comparing with a fresh replay.
    pub fn stored_history_digest(&self, cell: &str) -> Result<String> {
        let mut out = String::new();
        for sql in [
            "SELECT set_event, set_at, count, mean_kg, ended_at, scrap_kg FROM anode_load WHERE cell_id = ?1 ORDER BY set_at",
            "SELECT started_at, ended_at, harvest_event, harvest_kg, printf('%.6e', charge_ah), printf('%.6e', efficiency) FROM crop WHERE cell_id = ?1 ORDER BY started_at",
            "SELECT event, from_at, to_at FROM cutout WHERE cell_id = ?1 ORDER BY from_at, event",
        ] {
            let mut st = self.c.prepare_cached(sql)?;
            let n = st.column_count();
            let mut rows = st.query([cell])?;
            while let Some(r) = rows.next()? {
                let cols: Vec<String> = (0..n).map(|i| r.get_ref(i).map(|v| format!("{v:?}")).unwrap_or_default()).collect();
                out.push_str(&cols.join("|"));
                out.push('\n');
            }
            out.push_str("--\n");
        }
        Ok(out)
    }

    /// Whether an event has already been voided.
    pub fn is_voided(&self, id: i64) -> Result<bool> {
        Ok(self.c.query_row("SELECT EXISTS (SELECT 1 FROM event WHERE voids = ?1)", [id], |r| r.get(0))?)
    }

    pub fn event_count(&self) -> Result<i64> {
        Ok(self.c.query_row("SELECT count(*) FROM event", [], |r| r.get(0))?)
    }

    /// Entries this version cannot read: kinds it does not know and times that
    /// do not decode, oldest first, at most `limit`. Index look-ups only
    /// (migration 004), so it is cheap enough to run on every open.
    pub fn damaged_entries(&self, limit: usize) -> Result<Vec<Damage>> {
        let mut found = Vec::new();
        let mut known: Vec<&str> = EventKind::ALL.iter().map(|k| k.name()).collect();
        known.sort_unstable();
        known.dedup();
        // the gaps between the known kinds, in index order; any TEXT sorts below a BLOB
        let mut gaps: Vec<(Option<&str>, rusqlite::types::Value)> = Vec::new();
        let mut below = None;
        for k in &known {
            gaps.push((below, rusqlite::types::Value::Text(k.to_string())));
            below = Some(*k);
        }
        gaps.push((below, rusqlite::types::Value::Blob(Vec::new())));
        for (above, below) in gaps {
            let rows: Vec<(i64, String)> = match above {
                None => {
                    let mut st = self.c.prepare_cached("SELECT id, kind FROM event INDEXED BY event_kind WHERE kind < ?1 LIMIT ?2")?;
                    st.query_map(params![below, limit as i64], |r| Ok((r.get(0)?, r.get(1)?)))?.collect::<rusqlite::Result<_>>()?
                }
                Some(above) => {
                    let mut st =
                        self.c.prepare_cached("SELECT id, kind FROM event INDEXED BY event_kind WHERE kind > ?1 AND kind < ?2 LIMIT ?3")?;
                    st.query_map(params![above, below, limit as i64], |r| Ok((r.get(0)?, r.get(1)?)))?.collect::<rusqlite::Result<_>>()?
                }
            };
            found.extend(rows.into_iter().map(|(entry, kind)| Damage::UnknownKind { entry, kind }));
        }
        let mut st = self.c.prepare_cached(
            "SELECT id, at, end_at, recorded_at FROM event INDEXED BY event_bad_time
             WHERE at NOT BETWEEN -62167219200 AND 253402300799
                OR recorded_at NOT BETWEEN -62167219200 AND 253402300799
                OR end_at NOT BETWEEN -62167219200 AND 253402300799
             ORDER BY id LIMIT ?1",
        )?;
        let rows = st.query_map([limit as i64], |r| {
            Ok((r.get::<_, i64>(0)?, r.get::<_, i64>(1)?, r.get::<_, Option<i64>>(2)?, r.get::<_, i64>(3)?))
        })?;
        for row in rows {
            let (entry, at, end, rec) = row?;
            let bad = |v: i64| time(v).is_err();
            let (column, value) = if bad(at) {
                ("time", at)
            } else if let Some(end) = end.filter(|&e| bad(e)) {
                ("end time", end)
            } else {
                ("recording time", rec)
            };
            found.push(Damage::BadTime { entry, column, value });
        }
        found.sort_by_key(|d| match d {
            Damage::UnknownKind { entry, .. } | Damage::BadTime { entry, .. } => *entry,
        });
        found.truncate(limit);
        Ok(found)
    }

    /// Readings whose time does not decode: (circuit name, stored value). A full
    /// scan, for `check` only.
    pub fn readings_with_bad_times(&self) -> Result<Vec<(String, i64)>> {
        let mut st = self.c.prepare(
            "SELECT circuit.name, reading.t FROM reading JOIN circuit ON circuit.id = reading.circuit_id
             WHERE reading.t NOT BETWEEN ?1 AND ?2 ORDER BY 1, 2",
        )?;
        let v = st.query_map(params![super::FIRST_SECS, super::LAST_SECS], |r| Ok((r.get(0)?, r.get(1)?)))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }

    /// Records a restore (in the restored database).
    pub fn record_restore(&self, at: Time, source: &str, kept_copy: &str, by: &str) -> Result<()> {
        self.c.execute(
            "INSERT INTO restore_log(restored_at, source, kept_copy, restored_by) VALUES (?1, ?2, ?3, ?4)",
            params![secs(at), source, kept_copy, by],
        )?;
        Ok(())
    }

    /// The restores recorded, oldest first: (time, source, kept copy, by).
    pub fn restores(&self) -> Result<Vec<(Time, String, String, String)>> {
        let mut st = self.c.prepare("SELECT restored_at, source, kept_copy, restored_by FROM restore_log ORDER BY id")?;
        let v = st.query_map([], |r| Ok((time(r.get(0)?)?, r.get(1)?, r.get(2)?, r.get(3)?)))?;
        Ok(v.collect::<rusqlite::Result<_>>()?)
    }
}
