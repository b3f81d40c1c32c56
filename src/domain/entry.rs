//! What a foreman records at shift end, and the checks an entry must pass:
//! a rejection (it cannot be right) or a question (it needs `--force`).

use serde::Serialize;

use super::charge::Time;
use super::electrochem::measured_efficiency;
use super::history::EventKind;
use super::layout::{AnodeKind, CellParams};

/// One shift-log entry.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Entry {
    Anodes { cell: String, at: Time, count: u32, mean_kg: f64 },
    Harvest { cell: String, at: Time, total_kg: f64 },
    Scrap { cell: String, at: Time, total_kg: f64 },
    Cutout { cell: String, from: Time, to: Option<Time> },
    Outage { circuit: String, from: Time, to: Time },
    Shorts { cell: String, at: Time, count: u32 },
    Setpoint { circuit: String, from: Time, amps: f64 },
    Voltage { cell: String, at: Time, volts: f64 },
}

/// Hard limits on a weighed anode, kg per anode (set masses run ~200–450 kg,
/// DOMAIN.md from memory; outside 100–600 kg it is a typing error).
pub const ANODE_KG_LIMITS: (f64, f64) = (100.0, 600.0);
/// Anode masses outside this range are questioned (DOMAIN.md, from memory).
pub const ANODE_KG_TYPICAL: (f64, f64) = (200.0, 450.0);
/// Hard limit on a harvest, kg per cathode (40–60 kg a side is typical, DOMAIN.md from memory).
pub const HARVEST_KG_PER_CATHODE_MAX: f64 = 300.0;
/// A harvest implying an efficiency outside this range is questioned
/// (above 1 is heavier than the charge allows; common practice, no source, for the floor).
pub const HARVEST_EFFICIENCY_PLAUSIBLE: (f64, f64) = (0.5, 1.0);
/// A scrap weighing this far (as a fraction of set mass) from the prediction is
/// questioned when no learnt spread is known (common practice, no source).
pub const SCRAP_FRACTION_TOLERANCE: f64 = 0.10;
/// With a learnt spread, a scrap weighing more than this many standard
/// deviations from the learnt prediction is questioned (common practice, no source)…
pub const SCRAP_QUESTION_SDS: f64 = 3.0;
/// …but never for less than this many points of set mass: scrap weighing itself
/// scatters by a point or two (common practice, no source).
pub const SCRAP_FRACTION_MIN_TOLERANCE: f64 = 0.02;

impl Entry {
    pub fn kind(&self) -> EventKind {
        match self {
            Entry::Anodes { .. } => EventKind::Anodes,
            Entry::Harvest { .. } => EventKind::Harvest,
            Entry::Scrap { .. } => EventKind::Scrap,
            Entry::Cutout { .. } => EventKind::Cutout,
            Entry::Outage { .. } => EventKind::Outage,
            Entry::Shorts { .. } => EventKind::Shorts,
            Entry::Setpoint { .. } => EventKind::Setpoint,
            Entry::Voltage { .. } => EventKind::Voltage,
        }
    }

    /// The cell the entry concerns, if it is a cell entry.
    pub fn cell(&self) -> Option<&str> {
        match self {
            Entry::Anodes { cell, .. }
            | Entry::Harvest { cell, .. }
            | Entry::Scrap { cell, .. }
            | Entry::Cutout { cell, .. }
            | Entry::Shorts { cell, .. }
            | Entry::Voltage { cell, .. } => Some(cell),
            Entry::Outage { .. } | Entry::Setpoint { .. } => None,
        }
    }

    /// The instant the entry happened (its start for intervals).
    pub fn at(&self) -> Time {
        match self {
            Entry::Anodes { at, .. }
            | Entry::Harvest { at, .. }
            | Entry::Scrap { at, .. }
            | Entry::Shorts { at, .. }
            | Entry::Voltage { at, .. } => *at,
            Entry::Cutout { from, .. } | Entry::Outage { from, .. } | Entry::Setpoint { from, .. } => *from,
        }
    }
}

/// Every field of a shift-log entry, and of an undo: what a rejection names.
/// The faces map it to what they show (the command line to `--total-kg`, the
/// screens to a form field), so no layer matches another layer's strings.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Field {
    Cell,
    Circuit,
    At,
    From,
    To,
    TotalKg,
    Count,
    MeanKg,
    Amps,
    Volts,
    /// Who recorded the entry (initials).
    By,
    /// The entry an undo names.
    Event,
}

impl Field {
    /// The field's name in plain words, for messages that name it.
    pub fn name(self) -> &'static str {
        match self {
            Field::Cell => "cell",
            Field::Circuit => "circuit",
            Field::At => "time",
            Field::From => "from",
            Field::To => "to",
            Field::TotalKg => "total kg",
            Field::Count => "count",
            Field::MeanKg => "mean kg",
            Field::Amps => "amps",
            Field::Volts => "volts",
            Field::By => "initials",
            Field::Event => "entry",
        }
    }
}

impl std::fmt::Display for Field {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// A rejected entry: the field and why.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{field}: {message}")]
pub struct Rejection {
    pub field: Field,
    pub message: String,
}

fn reject(field: Field, message: String) -> Result<Vec<String>, Rejection> {
    Err(Rejection { field, message })
}

/// What a cell knows when an entry is checked against it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CellContext<'a> {
    pub params: &'a CellParams,
    /// Charge through the cell since its running crop began (for a harvest).
    pub crop_charge_ah: Option<f64>,
    /// The running anode load's count and mean set mass (for a scrap).
    pub load: Option<(u32, f64)>,
    /// Predicted remaining fraction of the running load at the entry's time.
    pub predicted_fraction: Option<f64>,
    /// Standard deviation of that prediction, from the learnt anode factor and its scatter.
    pub predicted_spread: Option<f64>,
}

/// Checks a cell entry: `Err` if it cannot be right, else the questions that need `--force`.
pub fn check_cell_entry(entry: &Entry, cx: &CellContext) -> Result<Vec<String>, Rejection> {
    let p = cx.params;
    let mut q = Vec::new();
    match entry {
        Entry::Anodes { count, mean_kg, .. } => {
            if *count == 0 || *count > p.anodes_per_cell * 2 {
                return reject(
                    Field::Count,
                    format!("{count} anodes: the cell holds {} (1 to {} accepted)", p.anodes_per_cell, p.anodes_per_cell * 2),
                );
            }
            let (lo, hi) = ANODE_KG_LIMITS;
            if !(mean_kg.is_finite() && *mean_kg >= lo && *mean_kg <= hi) {
                return reject(Field::MeanKg, format!("{mean_kg} kg per anode is out of range: {lo}–{hi} kg"));
            }
            if p.anode_kind == AnodeKind::Soluble && p.scrap_lower * mean_kg <= p.lug_kg {
                return reject(
                    Field::MeanKg,
                    format!(
                        "{mean_kg} kg anodes would reach scrap_lower ({}) below the {} kg of lugs that never dissolve",
                        p.scrap_lower, p.lug_kg
                    ),
                );
            }
            if *count != p.anodes_per_cell {
                q.push(format!("{count} anodes where the layout says {} per cell", p.anodes_per_cell));
            }
            let (tlo, thi) = ANODE_KG_TYPICAL;
            if *mean_kg < tlo || *mean_kg > thi {
                q.push(format!("{mean_kg} kg per anode is outside the usual {tlo}–{thi} kg"));
            }
        }
        Entry::Harvest { total_kg, .. } => {
            let max = f64::from(p.cathodes_per_cell) * HARVEST_KG_PER_CATHODE_MAX;
            if !(total_kg.is_finite() && *total_kg > 0.0 && *total_kg <= max) {
                return reject(
                    Field::TotalKg,
                    format!("{total_kg} kg is out of range for {} cathodes: more than 0 and at most {max} kg", p.cathodes_per_cell),
                );
            }
            if let Some(eff) = cx.crop_charge_ah.and_then(|q| measured_efficiency(*total_kg - p.starter_sheets_kg(), q)) {
                let (lo, hi) = HARVEST_EFFICIENCY_PLAUSIBLE;
                if eff > hi {
                    q.push(format!("{total_kg} kg is heavier than the charge allows: it implies {:.1} % current efficiency", eff * 100.0));
                } else if eff < lo {
                    q.push(format!("{total_kg} kg implies only {:.1} % current efficiency", eff * 100.0));
                }
            }
        }
        Entry::Scrap { total_kg, .. } => {
            let Some((count, mean)) = cx.load else {
                return reject(Field::Cell, "no anodes are in the cell to scrap".to_string());
            };
            let max = f64::from(count) * mean;
            if !(total_kg.is_finite() && *total_kg > 0.0 && *total_kg <= max) {
                return reject(
                    Field::TotalKg,
                    format!("{total_kg} kg is out of range: more than 0 and at most {max} kg, what was set ({count} × {mean} kg)"),
                );
            }
            let lugs = f64::from(count) * p.lug_kg;
            if *total_kg < lugs {
                q.push(format!("{total_kg} kg is less than the lugs alone ({lugs} kg): anodes dropped in the cell?"));
            }
            if let Some(pred) = cx.predicted_fraction {
                let got = total_kg / max;
                let tolerance =
                    cx.predicted_spread.map_or(SCRAP_FRACTION_TOLERANCE, |sd| (SCRAP_QUESTION_SDS * sd).max(SCRAP_FRACTION_MIN_TOLERANCE));
                if (got - pred).abs() > tolerance {
                    q.push(format!(
                        "scrap is {:.1} % of set mass; the charge and the cell's learnt anode factor predict {:.1} % (± {:.1} points questioned)",
                        got * 100.0,
                        pred * 100.0,
                        tolerance * 100.0
                    ));
                }
            }
        }
        Entry::Cutout { from, to, .. } => {
            if let Some(to) = to
                && to <= from
            {
                return reject(Field::To, "the cut-out ends before it starts".to_string());
            }
        }
        Entry::Shorts { count, .. } => {
            if *count > p.cathodes_per_cell * 2 {
                return reject(
                    Field::Count,
                    format!("{count} shorts: at most {} in a cell of {} cathodes", p.cathodes_per_cell * 2, p.cathodes_per_cell),
                );
            }
        }
        Entry::Voltage { volts, .. } => {
            if !(volts.is_finite() && *volts >= 0.0 && *volts <= 10.0) {
                return reject(Field::Volts, format!("{volts} V is not a cell voltage: 0–10 V"));
            }
            if *volts < p.voltage_min || *volts > p.voltage_max {
                q.push(format!("{volts} V is outside {}–{} V for this cell", p.voltage_min, p.voltage_max));
            }
        }
        Entry::Outage { .. } | Entry::Setpoint { .. } => {}
    }
    Ok(q)
}

/// Checks a circuit entry against the circuit's rating.
pub fn check_circuit_entry(entry: &Entry, max_amps: f64) -> Result<Vec<String>, Rejection> {
    match entry {
        Entry::Outage { from, to, .. } if to <= from => reject(Field::To, "the outage ends before it starts".to_string()),
        Entry::Setpoint { amps, .. } if !(amps.is_finite() && *amps >= 0.0 && *amps <= max_amps) => {
            reject(Field::Amps, format!("{amps} A is out of range: 0–{max_amps} A (the circuit's max_amps)"))
        }
        _ => Ok(Vec::new()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::{TimeZone, Utc};

    fn at() -> Time {
        Utc.with_ymd_and_hms(2026, 3, 1, 6, 0, 0).unwrap()
    }

    #[test]
    fn harvest_heavier_than_the_charge_is_questioned() {
        let p = CellParams::default();
        // 100 000 A·h plates 118.5 kg at 100 % (ECE 1.18549 g/(A·h), CODATA/IUPAC)
        let cx = CellContext { params: &p, crop_charge_ah: Some(100_000.0), load: None, predicted_fraction: None, predicted_spread: None };
        let heavy = Entry::Harvest { cell: "A01".into(), at: at(), total_kg: 130.0 };
        assert_eq!(check_cell_entry(&heavy, &cx).unwrap().len(), 1);
        let fine = Entry::Harvest { cell: "A01".into(), at: at(), total_kg: 114.0 };
        assert!(check_cell_entry(&fine, &cx).unwrap().is_empty());
        let absurd = Entry::Harvest { cell: "A01".into(), at: at(), total_kg: 1e9 };
        assert!(check_cell_entry(&absurd, &cx).unwrap_err().message.contains("at most 15300"));
    }

    #[test]
    fn anode_mass_range_is_stated() {
        let p = CellParams::default();
        let cx = CellContext { params: &p, crop_charge_ah: None, load: None, predicted_fraction: None, predicted_spread: None };
        let e = Entry::Anodes { cell: "A01".into(), at: at(), count: 50, mean_kg: 38.0 };
        let r = check_cell_entry(&e, &cx).unwrap_err();
        assert_eq!(r.field, Field::MeanKg);
        assert!(r.message.contains("100–600"), "{r}");
    }

    #[test]
    fn scrap_is_checked_against_the_load() {
        let p = CellParams::default();
        let cx = CellContext {
            params: &p,
            crop_charge_ah: None,
            load: Some((50, 380.0)),
            predicted_fraction: Some(0.15),
            predicted_spread: None,
        };
        let ok = Entry::Scrap { cell: "A01".into(), at: at(), total_kg: 0.15 * 50.0 * 380.0 };
        assert!(check_cell_entry(&ok, &cx).unwrap().is_empty());
        let odd = Entry::Scrap { cell: "A01".into(), at: at(), total_kg: 0.40 * 50.0 * 380.0 };
        assert_eq!(check_cell_entry(&odd, &cx).unwrap().len(), 1);
        let too_much = Entry::Scrap { cell: "A01".into(), at: at(), total_kg: 20_000.0 };
        assert!(check_cell_entry(&too_much, &cx).is_err());
        // a learnt spread of 1 point questions 4 points off, and never less than 2 points
        let learnt = CellContext { predicted_spread: Some(0.01), ..cx };
        let off = Entry::Scrap { cell: "A01".into(), at: at(), total_kg: 0.19 * 50.0 * 380.0 };
        assert_eq!(check_cell_entry(&off, &learnt).unwrap().len(), 1);
        assert!(check_cell_entry(&off, &cx).unwrap().is_empty());
        let tight = CellContext { predicted_spread: Some(0.001), ..cx };
        let near = Entry::Scrap { cell: "A01".into(), at: at(), total_kg: 0.165 * 50.0 * 380.0 };
        assert!(check_cell_entry(&near, &tight).unwrap().is_empty());
    }
}
