//! Importing rectifier current from CSV (`time,circuit,amps`): every row is
//! checked as it streams in, inside one transaction: all go in, or none do.

use chrono::DateTime;
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};
use std::io::Read;
use std::path::Path;

use super::{Plant, PlantError, Result, refresh_crops};
use crate::domain::charge::{Point, RawReading, Span, Time};
use crate::store::Db;

/// What an import did.
#[derive(Debug, Clone, PartialEq, Default, Serialize)]
pub struct ImportSummary {
    pub added: usize,
    /// Rows identical to stored (or earlier) ones.
    pub skipped: usize,
    pub circuits: Vec<String>,
    pub first: Option<Time>,
    pub last: Option<Time>,
}

/// Readings appended per statement run: enough to keep SQLite busy, small enough for the memory cap.
const CHUNK: usize = 4096;

impl Plant {
    /// Imports a current CSV file.
    pub fn import_current_file(&mut self, path: &Path, now: Time) -> Result<ImportSummary> {
        self.import_current_file_with_progress(path, now, &mut |_, _| {})
    }

    /// Imports a current CSV file, telling `progress` the bytes read so far and the file's size.
    pub fn import_current_file_with_progress(
        &mut self,
        path: &Path,
        now: Time,
        progress: &mut dyn FnMut(u64, u64),
    ) -> Result<ImportSummary> {
        let f = std::fs::File::open(path).map_err(|e| PlantError::Read(path.to_path_buf(), e))?;
        let total = f.metadata().map_or(0, |m| m.len());
        self.import_current_with_progress(std::io::BufReader::with_capacity(1 << 16, f), &path.display().to_string(), now, total, progress)
    }

    /// Imports current readings; `source` names the file in messages.
    pub fn import_current(&mut self, input: impl Read, source: &str, now: Time) -> Result<ImportSummary> {
        self.import_current_with_progress(input, source, now, 0, &mut |_, _| {})
    }

    /// Imports current readings, telling `progress` the bytes read so far (of `total`, 0 when unknown).
    ///
    /// A circuit's rows that come in time order after its last stored reading
    /// (the usual meter export) are checked and appended as they stream, their
    /// cumulative charge computed on the way; rows of a circuit that go back in
    /// time (a back-fill, or a file out of order) are kept and go in at the end
    /// with the charge recomputed from the earliest of them.
    pub fn import_current_with_progress(
        &mut self,
        input: impl Read,
        source: &str,
        now: Time,
        total: u64,
        progress: &mut dyn FnMut(u64, u64),
    ) -> Result<ImportSummary> {
        let circuits: HashMap<String, (i64, f64)> = self.store.db().circuits()?.into_iter().map(|c| (c.name, (c.id, c.max_amps))).collect();
        if circuits.is_empty() {
            return Err(PlantError::NoLayout);
        }
        let names: HashMap<i64, String> = circuits.iter().map(|(n, (id, _))| (*id, n.clone())).collect();
        self.store.write(|db| {
            let mut rows = RowReader::new(input, source)?;
            let mut state: BTreeMap<i64, CircuitImport> = BTreeMap::new();
            let mut skipped = 0;
            let mut n = 0u64;
            while let Some(row) = rows.next(&circuits)? {
                n += 1;
                if n.is_multiple_of(CHUNK as u64) {
                    progress(rows.bytes(), total);
                }
                let c = match state.entry(row.cid) {
                    std::collections::btree_map::Entry::Occupied(o) => o.into_mut(),
                    std::collections::btree_map::Entry::Vacant(v) => v.insert(CircuitImport::new(db, row.cid)?),
                };
                skipped += c.take(db, row, source)?;
            }
            progress(rows.bytes(), total);
            let mut sum = ImportSummary { skipped, ..Default::default() };
            for (cid, c) in state {
                let Some((first, last, added, skipped)) = c.finish(db, &names[&cid], source)? else { continue };
                sum.skipped += skipped;
                // A crop that ended after the previous last reading had an estimated part that is now measured.
                let curve_before = crate::store::StoreCurve::new(db, cid, first - chrono::Duration::seconds(1))?;
                let from = curve_before.last_reading().map_or(first, |p| p.t.min(first));
                refresh_crops(db, cid, from)?;
                sum.added += added;
                sum.circuits.push(names[&cid].clone());
                sum.first = Some(sum.first.map_or(first, |f: Time| f.min(first)));
                sum.last = Some(sum.last.map_or(last, |x: Time| x.max(last)));
            }
            db.record_import(source, now, sum.added, sum.skipped)?;
            Ok(sum)
        })
    }
}

/// One circuit's part of an import in progress.
struct CircuitImport {
    cid: i64,
    outages: Vec<Span>,
    /// The latest stored reading's time before this import.
    stored_until: Option<Time>,
    /// Where the appended charge continues from.
    prev: Option<Point>,
    /// The last appended row (time, amps, line), appended or waiting in `pending`.
    tail: Option<(Time, f64, u64)>,
    pending: Vec<RawReading>,
    appended: usize,
    first: Option<Time>,
    /// Rows going back in time, by time, with their line: they go in at the end.
    back: BTreeMap<Time, (f64, u64)>,
}

impl CircuitImport {
    fn new(db: Db<'_>, cid: i64) -> Result<Self> {
        let stored_until = db.last_reading_time(cid)?;
        let prev = match stored_until {
            Some(t) => db.valid_reading_before(cid, t + chrono::Duration::seconds(1))?,
            None => None,
        };
        Ok(CircuitImport {
            cid,
            outages: db.outages(cid)?,
            stored_until,
            prev,
            tail: None,
            pending: Vec::with_capacity(CHUNK),
            appended: 0,
            first: None,
            back: BTreeMap::new(),
        })
    }

    fn flush(&mut self, db: Db<'_>) -> Result<()> {
        if !self.pending.is_empty() {
            self.prev = db.append_readings(self.cid, self.prev, &self.pending, &self.outages)?;
            self.appended += self.pending.len();
            self.pending.clear();
        }
        Ok(())
    }

    /// Takes one checked row; returns 1 when it repeats an earlier row of the file.
    fn take(&mut self, db: Db<'_>, row: Row, source: &str) -> Result<usize> {
        let bad = |message: String| PlantError::Input { file: source.to_string(), line: row.line, field: "amps".into(), message };
        let conflict = |a: f64, l: u64| bad(format!("{} A conflicts with {a} A for the same time and circuit on line {l}", row.amps));
        let after_stored = self.stored_until.is_none_or(|s| row.t > s);
        if self.back.is_empty() && after_stored {
            match self.tail {
                Some((t, a, l)) if t == row.t => {
                    return if a == row.amps { Ok(1) } else { Err(conflict(a, l)) };
                }
                Some((t, ..)) if row.t < t => {}
                _ => {
                    self.tail = Some((row.t, row.amps, row.line));
                    self.first.get_or_insert(row.t);
                    self.pending.push(RawReading { t: row.t, amps: row.amps });
                    if self.pending.len() >= CHUNK {
                        self.flush(db)?;
                    }
                    return Ok(0);
                }
            }
        }
        // Going back in time: this circuit's later rows wait for the end.
        self.flush(db)?;
        match self.back.get(&row.t) {
            Some((a, _)) if *a == row.amps => return Ok(1),
            Some((a, l)) => return Err(conflict(*a, *l)),
            None => {}
        }
        if after_stored && let Some(a) = db.reading_at(self.cid, row.t)? {
            // appended earlier in this file
            return if a == row.amps {
                Ok(1)
            } else {
                Err(bad(format!("{} A conflicts with {a} A for the same time and circuit earlier in the file", row.amps)))
            };
        }
        self.back.insert(row.t, (row.amps, row.line));
        Ok(0)
    }

    /// Puts in the rows that went back in time; returns (first, last, added, skipped) when anything was added.
    fn finish(mut self, db: Db<'_>, name: &str, source: &str) -> Result<Option<(Time, Time, usize, usize)>> {
        self.flush(db)?;
        let mut skipped = 0;
        let mut fresh = Vec::new();
        for (t, (amps, line)) in &self.back {
            match db.reading_at(self.cid, *t)? {
                Some(a) if a == *amps => skipped += 1,
                Some(a) => {
                    return Err(PlantError::Input {
                        file: source.to_string(),
                        line: *line,
                        field: "amps".into(),
                        message: format!("{amps} A conflicts with the stored {a} A for {name} at {}", t.to_rfc3339()),
                    });
                }
                None => fresh.push(RawReading { t: *t, amps: *amps }),
            }
        }
        db.add_readings(self.cid, &fresh)?;
        let added = self.appended + fresh.len();
        let first = [self.first, fresh.first().map(|r| r.t)].into_iter().flatten().min();
        let last = [self.tail.map(|t| t.0), fresh.last().map(|r| r.t)].into_iter().flatten().max();
        Ok(match (first, last) {
            (Some(f), Some(l)) if added > 0 => Some((f, l, added, skipped)),
            _ => None,
        })
    }
}

/// One checked row of a current CSV.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Row {
    t: Time,
    cid: i64,
    amps: f64,
    line: u64,
}

/// Reads and checks a current CSV row by row, without touching the database.
struct RowReader<'s, R: Read> {
    rdr: csv::Reader<R>,
    rec: csv::ByteRecord,
    source: &'s str,
}

impl<'s, R: Read> RowReader<'s, R> {
    fn new(input: R, source: &'s str) -> Result<Self> {
        // fields are trimmed as they are read (`next`): csv's own trim rebuilt every record, a tenth of an import
        let mut rdr = csv::ReaderBuilder::new().from_reader(input);
        let header: Vec<String> = rdr
            .headers()
            .map_err(|e| input_error(source, 1, "header", e.to_string()))?
            .iter()
            .map(|h| h.trim().to_ascii_lowercase())
            .collect();
        if header != ["time", "circuit", "amps"] {
            return Err(input_error(source, 1, "header", format!("expected 'time,circuit,amps', found '{}'", header.join(","))));
        }
        Ok(RowReader { rdr, rec: csv::ByteRecord::new(), source })
    }

    fn bytes(&self) -> u64 {
        self.rdr.position().byte()
    }

    /// The next row, checked against the circuits (name → (id, max amps)); `None` at the end.
    fn next(&mut self, circuits: &HashMap<String, (i64, f64)>) -> Result<Option<Row>> {
        let bad = |line: u64, field: &str, message: String| input_error(self.source, line, field, message);
        let more = self.rdr.read_byte_record(&mut self.rec).map_err(|e| {
            let line = e.position().map_or(0, |p| p.line());
            let msg = match e.kind() {
                csv::ErrorKind::UnequalLengths { len, expected_len, .. } => format!("{len} fields where the header has {expected_len}"),
                _ => e.to_string(),
            };
            bad(line, "row", msg)
        })?;
        if !more {
            return Ok(None);
        }
        let line = self.rec.position().map_or(0, |p| p.line());
        if self.rec.len() != 3 {
            return Err(bad(line, "row", format!("{} fields where the header has 3", self.rec.len())));
        }
        let field = |i: usize| {
            std::str::from_utf8(&self.rec[i]).map(str::trim).map_err(|_| bad(line, "row", format!("field {} is not valid UTF-8", i + 1)))
        };
        let (time, circuit, amps) = (field(0)?, field(1)?, field(2)?);
        let t = match utc_z_time(time.as_bytes()) {
            Some(t) => t,
            None => DateTime::parse_from_rfc3339(time)
                .map_err(|_| bad(line, "time", format!("'{time}' is not an RFC 3339 time with an offset (e.g. 2026-03-01T06:00:00Z)")))?
                .to_utc(),
        };
        if crate::store::storable(t).is_err() {
            return Err(bad(line, "time", format!("'{time}' is outside the years 0000 to 9999 once in UTC")));
        }
        let Some(&(cid, max)) = circuits.get(circuit) else {
            return Err(bad(line, "circuit", format!("unknown circuit '{circuit}'")));
        };
        let a: f64 = amps.parse().map_err(|_| bad(line, "amps", format!("'{amps}' is not a number")))?;
        if !a.is_finite() || a < 0.0 {
            return Err(bad(line, "amps", format!("{amps} A is negative or not finite: amps are the net mean current, 0 to {max} A")));
        }
        if a > max {
            return Err(bad(line, "amps", format!("{a} A is above circuit {circuit}'s max_amps of {max} A")));
        }
        // stored times are whole seconds: compare and accumulate them as stored
        let t = DateTime::from_timestamp(t.timestamp(), 0).unwrap_or(t);
        Ok(Some(Row { t, cid, amps: a, line }))
    }
}

fn input_error(source: &str, line: u64, field: &str, message: String) -> PlantError {
    PlantError::Input { file: source.to_string(), line, field: field.to_string(), message }
}

/// The fast path for the usual meter time, `YYYY-MM-DDTHH:MM:SSZ` exactly
/// (20 bytes, upper-case `T` and `Z`, no fraction, no leap second). Anything
/// else is `None` and goes to chrono's full RFC 3339 parser; what this accepts,
/// chrono reads as the same instant (the property test below).
pub fn utc_z_time(s: &[u8]) -> Option<Time> {
    if s.len() != 20 || s[4] != b'-' || s[7] != b'-' || s[10] != b'T' || s[13] != b':' || s[16] != b':' || s[19] != b'Z' {
        return None;
    }
    let digit = |i: usize| {
        let d = s[i].wrapping_sub(b'0');
        (d < 10).then_some(i64::from(d))
    };
    let two = |i: usize| Some(digit(i)? * 10 + digit(i + 1)?);
    let (year, month, day) = (two(0)? * 100 + two(2)?, two(5)?, two(8)?);
    let (hour, minute, second) = (two(11)?, two(14)?, two(17)?);
    let leap = year % 4 == 0 && (year % 100 != 0 || year % 400 == 0);
    let month_days = match month {
        1 | 3 | 5 | 7 | 8 | 10 | 12 => 31,
        4 | 6 | 9 | 11 => 30,
        2 if leap => 29,
        2 => 28,
        _ => return None,
    };
    if day < 1 || day > month_days || hour > 23 || minute > 59 || second > 59 {
        return None;
    }
    // days from 1970-01-01 to the civil date (the era arithmetic of the proleptic Gregorian calendar)
    let y = if month <= 2 { year - 1 } else { year };
    let era = y.div_euclid(400);
    let yoe = y - era * 400;
    let mp = (month + 9) % 12;
    let doy = (153 * mp + 2) / 5 + day - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    let days = era * 146_097 + doe - 719_468;
    DateTime::from_timestamp(days * 86_400 + hour * 3_600 + minute * 60 + second, 0)
}

/// A current CSV's rows, checked: readings by circuit id and time, with the
/// line each came from; `skipped` counts rows repeating an earlier one.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct CurrentRows {
    pub rows: BTreeMap<i64, BTreeMap<Time, (f64, u64)>>,
    pub skipped: usize,
}

/// Parses and checks a current CSV (`time,circuit,amps`) against the circuits
/// (name → (id, max amps)), without touching the database. The first bad row
/// is an error naming `source`, its line and field. The import checks rows with
/// the same reader as they stream.
pub fn parse_current_csv(input: impl Read, source: &str, circuits: &HashMap<String, (i64, f64)>) -> Result<CurrentRows> {
    let mut rdr = RowReader::new(input, source)?;
    let mut rows: BTreeMap<i64, BTreeMap<Time, (f64, u64)>> = BTreeMap::new();
    let mut skipped = 0;
    while let Some(r) = rdr.next(circuits)? {
        let by_circuit = rows.entry(r.cid).or_default();
        match by_circuit.get(&r.t) {
            Some((a, _)) if *a == r.amps => skipped += 1,
            Some((a, l)) => {
                return Err(input_error(
                    source,
                    r.line,
                    "amps",
                    format!("{} A conflicts with {a} A for the same time and circuit on line {l}", r.amps),
                ));
            }
            None => {
                by_circuit.insert(r.t, (r.amps, r.line));
            }
        }
    }
    Ok(CurrentRows { rows, skipped })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn chrono_utc(s: &str) -> Option<Time> {
        DateTime::parse_from_rfc3339(s).ok().map(|t| t.to_utc())
    }

    /// Strings shaped like the fast path's times, with every field allowed out of range.
    fn z_like() -> impl Strategy<Value = String> {
        (
            0u32..=9999,
            0u32..=13,
            0u32..=32,
            0u32..=25,
            0u32..=61,
            0u32..=61,
            prop_oneof![Just('T'), Just('t'), Just(' ')],
            prop_oneof![Just("Z"), Just("z"), Just("+00:00"), Just(".5Z")],
        )
            .prop_map(|(y, mo, d, h, mi, s, sep, z)| format!("{y:04}-{mo:02}-{d:02}{sep}{h:02}:{mi:02}:{s:02}{z}"))
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 20_000, ..ProptestConfig::default() })]

        #[test]
        fn fast_path_agrees_with_chrono(s in prop_oneof![z_like(), "[0-9TZ:+ -]{18,22}", any::<String>()]) {
            let fast = utc_z_time(s.as_bytes());
            let full = chrono_utc(&s);
            if let Some(t) = fast {
                prop_assert_eq!(Some(t), full, "{}", s);
            }
            if full.is_none() {
                prop_assert!(fast.is_none(), "{}", s);
            }
            // the fast path takes every plain `…Z` time chrono takes (seconds 00–59)
            let plain = s.len() == 20 && s.as_bytes()[10] == b'T' && s.ends_with('Z') && s.get(17..19).is_some_and(|x| x < "60");
            if plain && full.is_some() {
                prop_assert!(fast.is_some(), "{}", s);
            }
        }
    }

    #[test]
    fn fast_path_known_instants() {
        // 2000-03-01 is day 11 017 of the Unix epoch (POSIX time: 951 868 800 s)
        assert_eq!(utc_z_time(b"2000-03-01T00:00:00Z").map(|t| t.timestamp()), Some(951_868_800));
        // the first and last storable seconds (store::FIRST_SECS, LAST_SECS)
        assert_eq!(utc_z_time(b"0000-01-01T00:00:00Z").map(|t| t.timestamp()), Some(-62_167_219_200));
        assert_eq!(utc_z_time(b"9999-12-31T23:59:59Z").map(|t| t.timestamp()), Some(253_402_300_799));
        assert_eq!(utc_z_time(b"2026-02-29T00:00:00Z"), None);
        assert_eq!(utc_z_time(b"2024-02-29T00:00:00Z").map(|t| t.timestamp()), Some(1_709_164_800));
    }
}
