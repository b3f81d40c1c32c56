//! Importing rectifier current from CSV (`time,circuit,amps`): every row is
//! checked first, then all go in with one transaction, or none do.

use chrono::DateTime;
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};
use std::io::Read;
use std::path::Path;

use super::{Plant, PlantError, Result, refresh_crops};
use crate::domain::charge::{RawReading, Time};

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

impl Plant {
    /// Imports a current CSV file.
    pub fn import_current_file(&mut self, path: &Path, now: Time) -> Result<ImportSummary> {
        let f = std::fs::File::open(path).map_err(|e| PlantError::Read(path.to_path_buf(), e))?;
        self.import_current(f, &path.display().to_string(), now)
    }

    /// Imports current readings; `source` names the file in messages.
    pub fn import_current(&mut self, input: impl Read, source: &str, now: Time) -> Result<ImportSummary> {
        let bad = |line: u64, field: &str, message: String| PlantError::Input {
            file: source.to_string(),
            line,
            field: field.to_string(),
            message,
        };
        let circuits: HashMap<String, (i64, f64)> = self.store.db().circuits()?.into_iter().map(|c| (c.name, (c.id, c.max_amps))).collect();
        if circuits.is_empty() {
            return Err(PlantError::NoLayout);
        }
        let CurrentRows { rows, skipped } = parse_current_csv(input, source, &circuits)?;
        let mut sum = ImportSummary { skipped, ..Default::default() };
        let names: HashMap<i64, String> = circuits.iter().map(|(n, (id, _))| (*id, n.clone())).collect();
        self.store.write(|db| {
            for (cid, readings) in &rows {
                let mut fresh = Vec::new();
                for (t, (amps, line)) in readings {
                    match db.reading_at(*cid, *t)? {
                        Some(a) if a == *amps => sum.skipped += 1,
                        Some(a) => {
                            return Err(bad(
                                *line,
                                "amps",
                                format!("{amps} A conflicts with the stored {a} A for {} at {}", names[cid], t.to_rfc3339()),
                            ));
                        }
                        None => fresh.push(RawReading { t: *t, amps: *amps }),
                    }
                }
                let Some(first) = fresh.first().map(|r| r.t) else { continue };
                let last = fresh.last().map(|r| r.t);
                db.add_readings(*cid, &fresh)?;
                // A crop that ended after the previous last reading had an estimated part that is now measured.
                let curve_before = crate::store::StoreCurve::new(db, *cid, first - chrono::Duration::seconds(1))?;
                let from = curve_before.last_reading().map_or(first, |p| p.t.min(first));
                refresh_crops(db, *cid, from)?;
                sum.added += fresh.len();
                sum.circuits.push(names[cid].clone());
                sum.first = Some(sum.first.map_or(first, |f: Time| f.min(first)));
                sum.last = last.map(|l| sum.last.map_or(l, |x: Time| x.max(l)));
            }
            db.record_import(source, now, sum.added, sum.skipped)?;
            Ok(sum)
        })
    }
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
/// is an error naming `source`, its line and field.
pub fn parse_current_csv(input: impl Read, source: &str, circuits: &HashMap<String, (i64, f64)>) -> Result<CurrentRows> {
    let bad =
        |line: u64, field: &str, message: String| PlantError::Input { file: source.to_string(), line, field: field.to_string(), message };
    let mut rdr = csv::ReaderBuilder::new().trim(csv::Trim::All).from_reader(input);
    let header: Vec<String> = rdr.headers().map_err(|e| bad(1, "header", e.to_string()))?.iter().map(|h| h.to_ascii_lowercase()).collect();
    if header != ["time", "circuit", "amps"] {
        return Err(bad(1, "header", format!("expected 'time,circuit,amps', found '{}'", header.join(","))));
    }
    let mut rows: BTreeMap<i64, BTreeMap<Time, (f64, u64)>> = BTreeMap::new();
    let mut skipped = 0;
    for rec in rdr.records() {
        let rec = rec.map_err(|e| {
            let line = e.position().map_or(0, |p| p.line());
            let msg = match e.kind() {
                csv::ErrorKind::UnequalLengths { len, expected_len, .. } => format!("{len} fields where the header has {expected_len}"),
                _ => e.to_string(),
            };
            bad(line, "row", msg)
        })?;
        let line = rec.position().map_or(0, |p| p.line());
        let t = DateTime::parse_from_rfc3339(&rec[0])
            .map_err(|_| bad(line, "time", format!("'{}' is not an RFC 3339 time with an offset (e.g. 2026-03-01T06:00:00Z)", &rec[0])))?
            .to_utc();
        if crate::store::storable(t).is_err() {
            return Err(bad(line, "time", format!("'{}' is outside the years 0000 to 9999 once in UTC", &rec[0])));
        }
        let Some(&(cid, max)) = circuits.get(&rec[1]) else {
            return Err(bad(line, "circuit", format!("unknown circuit '{}'", &rec[1])));
        };
        let amps: f64 = rec[2].parse().map_err(|_| bad(line, "amps", format!("'{}' is not a number", &rec[2])))?;
        if !amps.is_finite() || amps < 0.0 {
            return Err(bad(line, "amps", format!("{} A is negative or not finite: amps are the net mean current, 0 to {max} A", &rec[2])));
        }
        if amps > max {
            return Err(bad(line, "amps", format!("{amps} A is above circuit {}'s max_amps of {max} A", &rec[1])));
        }
        let by_circuit = rows.entry(cid).or_default();
        match by_circuit.get(&t) {
            Some((a, _)) if *a == amps => skipped += 1,
            Some((a, l)) => {
                return Err(bad(line, "amps", format!("{amps} A conflicts with {a} A for the same time and circuit on line {l}")));
            }
            None => {
                by_circuit.insert(t, (amps, line));
            }
        }
    }
    Ok(CurrentRows { rows, skipped })
}
