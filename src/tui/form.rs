//! The shift-log forms: which fields each entry has, how each field is read
//! and checked as it is typed, and how a filled form becomes entries.

use crate::domain::charge::Time;
use crate::domain::entry::{Entry, Field as EntryField};
use crate::domain::history::EventKind;
use crate::domain::plant_time::PlantZone;

/// The kinds of entry a form records.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FormKind {
    Harvest,
    AnodeChange,
    Anodes,
    Scrap,
    Shorts,
    CutoutStart,
    CutoutEnd,
    Outage,
    Setpoint,
    Reading,
    Voltage,
}

/// The entry menu: key, form, label.
pub const MENU: &[(char, FormKind, &str)] = &[
    ('h', FormKind::Harvest, "harvest: crop pulled and weighed"),
    ('a', FormKind::AnodeChange, "anode change: scrap, crop and new anodes"),
    ('s', FormKind::Scrap, "scrap only: anodes pulled, scrap weighed"),
    ('e', FormKind::Anodes, "anodes into an empty cell"),
    ('t', FormKind::Shorts, "shorts found"),
    ('x', FormKind::CutoutStart, "cut-out: cell out of circuit"),
    ('c', FormKind::CutoutEnd, "cut-out ends: cell back in circuit"),
    ('o', FormKind::Outage, "outage: circuit down"),
    ('p', FormKind::Setpoint, "setpoint: planned current"),
    ('r', FormKind::Reading, "current reading from the rectifier"),
    ('v', FormKind::Voltage, "cell voltage"),
];

impl FormKind {
    pub const ALL: [FormKind; 11] = [
        FormKind::Harvest,
        FormKind::AnodeChange,
        FormKind::Anodes,
        FormKind::Scrap,
        FormKind::Shorts,
        FormKind::CutoutStart,
        FormKind::CutoutEnd,
        FormKind::Outage,
        FormKind::Setpoint,
        FormKind::Reading,
        FormKind::Voltage,
    ];

    /// The form's name in a stored draft (never changed once shipped).
    pub fn name(self) -> &'static str {
        match self {
            FormKind::Harvest => "harvest",
            FormKind::AnodeChange => "anode_change",
            FormKind::Anodes => "anodes",
            FormKind::Scrap => "scrap",
            FormKind::Shorts => "shorts",
            FormKind::CutoutStart => "cutout_start",
            FormKind::CutoutEnd => "cutout_end",
            FormKind::Outage => "outage",
            FormKind::Setpoint => "setpoint",
            FormKind::Reading => "reading",
            FormKind::Voltage => "voltage",
        }
    }

    pub fn from_name(s: &str) -> Option<FormKind> {
        FormKind::ALL.into_iter().find(|k| k.name() == s)
    }

    pub fn title(self) -> &'static str {
        match self {
            FormKind::Harvest => "Harvest",
            FormKind::AnodeChange => "Anode change",
            FormKind::Anodes => "Anode set",
            FormKind::Scrap => "Anode scrap",
            FormKind::Shorts => "Shorts found",
            FormKind::CutoutStart => "Cut-out starts",
            FormKind::CutoutEnd => "Cut-out ends",
            FormKind::Outage => "Circuit outage",
            FormKind::Setpoint => "Current setpoint",
            FormKind::Reading => "Current reading",
            FormKind::Voltage => "Cell voltage",
        }
    }
}

/// What a field holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FieldKey {
    Cells,
    /// The crop weighed at an anode change (may be left empty).
    CropKg,
    Circuit,
    At,
    From,
    To,
    TotalKg,
    Count,
    MeanKg,
    Amps,
    Volts,
}

impl FieldKey {
    /// The field's name in a stored draft (never changed once shipped).
    pub fn name(self) -> &'static str {
        match self {
            FieldKey::Cells => "cells",
            FieldKey::CropKg => "crop_kg",
            FieldKey::Circuit => "circuit",
            FieldKey::At => "at",
            FieldKey::From => "from",
            FieldKey::To => "to",
            FieldKey::TotalKg => "total_kg",
            FieldKey::Count => "count",
            FieldKey::MeanKg => "mean_kg",
            FieldKey::Amps => "amps",
            FieldKey::Volts => "volts",
        }
    }

    fn label(self, kind: FormKind) -> &'static str {
        match (self, kind) {
            (FieldKey::Cells, _) => "Cells",
            (FieldKey::CropKg, _) => "Copper kg per cell",
            (FieldKey::Circuit, _) => "Circuit",
            (FieldKey::At, _) => "Time",
            (FieldKey::From, _) => "From",
            (FieldKey::To, _) => "To",
            (FieldKey::TotalKg, FormKind::Harvest) => "Copper kg per cell",
            (FieldKey::TotalKg, _) => "Scrap kg per cell",
            (FieldKey::Count, FormKind::Shorts) => "Shorts",
            (FieldKey::Count, _) => "Anodes per cell",
            (FieldKey::MeanKg, _) => "Mean kg per anode",
            (FieldKey::Amps, _) => "Amps",
            (FieldKey::Volts, _) => "Volts",
        }
    }

    fn hint(self) -> &'static str {
        match self {
            FieldKey::Cells => "A01, A01-A12 or A01,A03",
            FieldKey::Circuit => "circuit name",
            FieldKey::At | FieldKey::From | FieldKey::To => "YYYY-MM-DD HH:MM, plant time",
            FieldKey::TotalKg => "one weight for all, or one per cell: 650,648",
            FieldKey::CropKg => "as above; empty if the crop stays in",
            FieldKey::Count => "a whole number",
            FieldKey::MeanKg => "kg",
            FieldKey::Amps => "A",
            FieldKey::Volts => "V",
        }
    }
}

/// The form field that typed an entry field: a form of `kind` made the rejected
/// entry (of `entry` kind) and the plant names `field`. An anode change's crop
/// is its harvest entry's weight, its scrap the scrap entry's weight.
pub fn form_field(kind: FormKind, entry: Option<EventKind>, field: EntryField) -> Option<FieldKey> {
    Some(match (kind, entry, field) {
        (_, _, EntryField::Cell) => FieldKey::Cells,
        (_, _, EntryField::Circuit) => FieldKey::Circuit,
        (FormKind::AnodeChange, Some(EventKind::Harvest), EntryField::TotalKg) => FieldKey::CropKg,
        (_, _, EntryField::TotalKg) => FieldKey::TotalKg,
        (_, _, EntryField::Count) => FieldKey::Count,
        (_, _, EntryField::MeanKg) => FieldKey::MeanKg,
        (_, _, EntryField::Amps) => FieldKey::Amps,
        (_, _, EntryField::Volts) => FieldKey::Volts,
        // a cut-out's start is its "at": the forms that type it call it From
        (FormKind::CutoutStart | FormKind::Outage | FormKind::Setpoint, _, EntryField::At | EntryField::From) => FieldKey::From,
        (FormKind::CutoutEnd, _, EntryField::At | EntryField::To) => FieldKey::To,
        (_, _, EntryField::At) => FieldKey::At,
        (_, _, EntryField::From) => FieldKey::From,
        (_, _, EntryField::To) => FieldKey::To,
        (_, _, EntryField::By | EntryField::Event) => return None,
    })
}

#[derive(Debug, Clone, PartialEq)]
pub struct Field {
    pub key: FieldKey,
    pub label: &'static str,
    pub hint: &'static str,
    pub value: String,
    pub error: Option<String>,
}

/// A form being filled in.
#[derive(Debug, Clone, PartialEq)]
pub struct Form {
    pub kind: FormKind,
    pub fields: Vec<Field>,
    pub focus: usize,
    /// A message from the plant about the whole entry (a rejection).
    pub message: Option<String>,
}

/// What the form checks against: the plant's cells and circuits and its clock face.
pub struct FormContext<'a> {
    pub cells: &'a [String],
    pub circuits: &'a [String],
    pub zone: PlantZone,
    /// Where each cut-out cell's open cut-out began.
    pub cut_out_since: &'a dyn Fn(&str) -> Option<Time>,
}

/// A filled form: entries to record, or a current reading to import.
#[derive(Debug, Clone, PartialEq)]
pub enum Submission {
    Entries(Vec<Entry>),
    Reading { circuit: String, at: Time, amps: f64 },
}

impl Form {
    /// A new form, prefilled with the selected cell (or circuit) and the time now.
    pub fn new(kind: FormKind, cell: &str, circuit: &str, now_text: &str, anodes: u32) -> Form {
        use FieldKey::*;
        let keys: &[FieldKey] = match kind {
            FormKind::Harvest => &[Cells, TotalKg, At],
            FormKind::AnodeChange => &[Cells, TotalKg, CropKg, Count, MeanKg, At],
            FormKind::Anodes => &[Cells, Count, MeanKg, At],
            FormKind::Scrap => &[Cells, TotalKg, At],
            FormKind::Shorts => &[Cells, Count, At],
            FormKind::CutoutStart => &[Cells, From],
            FormKind::CutoutEnd => &[Cells, To],
            FormKind::Outage => &[Circuit, From, To],
            FormKind::Setpoint => &[Circuit, From, Amps],
            FormKind::Reading => &[Circuit, At, Amps],
            FormKind::Voltage => &[Cells, At, Volts],
        };
        let fields = keys
            .iter()
            .map(|&key| {
                let value = match key {
                    Cells => cell.to_string(),
                    Circuit => circuit.to_string(),
                    At | From => now_text.to_string(),
                    To if kind == FormKind::CutoutEnd => now_text.to_string(),
                    Count if matches!(kind, FormKind::Anodes | FormKind::AnodeChange) => anodes.to_string(),
                    _ => String::new(),
                };
                Field { key, label: key.label(kind), hint: key.hint(), value, error: None }
            })
            .collect();
        let focus = keys.iter().position(|k| matches!(k, TotalKg | MeanKg | Count | Amps | Volts | To)).unwrap_or(0);
        Form { kind, fields, focus, message: None }
    }

    /// The fields as typed, by name: what a draft keeps.
    pub fn typed(&self) -> Vec<(String, String)> {
        self.fields.iter().map(|f| (f.key.name().to_string(), f.value.clone())).collect()
    }

    /// A form filled in again from a draft's fields (unknown names are ignored).
    pub fn from_typed(kind: FormKind, typed: &[(String, String)]) -> Form {
        let mut form = Form::new(kind, "", "", "", 0);
        for f in &mut form.fields {
            if let Some((_, v)) = typed.iter().find(|(k, _)| k == f.key.name()) {
                f.value = v.clone();
            }
        }
        form
    }

    pub fn field_mut(&mut self, key: FieldKey) -> Option<&mut Field> {
        self.fields.iter_mut().find(|f| f.key == key)
    }

    fn value(&self, key: FieldKey) -> &str {
        self.fields.iter().find(|f| f.key == key).map_or("", |f| f.value.trim())
    }

    /// Re-checks every field as typed; the errors are shown beside the fields.
    pub fn validate(&mut self, cx: &FormContext) {
        let n_cells = parse_cells(self.value(FieldKey::Cells), cx.cells).map(|v| v.len()).ok();
        let kind = self.kind;
        for i in 0..self.fields.len() {
            let f = &self.fields[i];
            let v = f.value.trim();
            let err = match f.key {
                FieldKey::Cells => parse_cells(v, cx.cells).err().or_else(|| {
                    let cells = parse_cells(v, cx.cells).unwrap_or_default();
                    if kind == FormKind::CutoutEnd {
                        cells.iter().find(|c| (cx.cut_out_since)(c).is_none()).map(|c| format!("{c} is not cut out"))
                    } else if kind == FormKind::Voltage && cells.len() > 1 {
                        Some("one cell at a time".into())
                    } else {
                        None
                    }
                }),
                FieldKey::Circuit => (!cx.circuits.iter().any(|c| c == v)).then(|| format!("no circuit '{v}': {}", cx.circuits.join(", "))),
                FieldKey::At | FieldKey::From | FieldKey::To => cx.zone.parse_time(v).err().map(|e| e.to_string()),
                FieldKey::TotalKg => parse_weights(v, n_cells.unwrap_or(1)).err(),
                FieldKey::CropKg if v.is_empty() => None,
                FieldKey::CropKg => parse_weights(v, n_cells.unwrap_or(1)).err(),
                FieldKey::Count => v.parse::<u32>().err().map(|_| "a whole number".to_string()),
                FieldKey::MeanKg | FieldKey::Amps | FieldKey::Volts => {
                    v.parse::<f64>().ok().filter(|x| x.is_finite() && *x >= 0.0).is_none().then(|| "a number, 0 or more".to_string())
                }
            };
            self.fields[i].error = err;
        }
        if let (Some(from), Some(to)) =
            (self.fields.iter().position(|f| f.key == FieldKey::From), self.fields.iter().position(|f| f.key == FieldKey::To))
            && let (Ok(a), Ok(b)) = (cx.zone.parse_time(&self.fields[from].value), cx.zone.parse_time(&self.fields[to].value))
            && b <= a
            && self.fields[to].error.is_none()
        {
            self.fields[to].error = Some("ends before it starts".into());
        }
    }

    pub fn is_valid(&self) -> bool {
        self.fields.iter().all(|f| f.error.is_none())
    }

    /// The entries the form describes (call after [`Form::validate`] found no error).
    pub fn submission(&self, cx: &FormContext) -> Result<Submission, String> {
        let cells = parse_cells(self.value(FieldKey::Cells), cx.cells);
        let time = |k: FieldKey| cx.zone.parse_time(self.value(k)).map_err(|e| e.to_string());
        let num = |k: FieldKey| self.value(k).parse::<f64>().map_err(|_| format!("{}: not a number", k.label(self.kind)));
        let count = || self.value(FieldKey::Count).parse::<u32>().map_err(|_| "not a whole number".to_string());
        let circuit = self.value(FieldKey::Circuit).to_string();
        let per_cell = |f: &dyn Fn(String) -> Result<Entry, String>| -> Result<Submission, String> {
            Ok(Submission::Entries(cells.clone()?.into_iter().map(f).collect::<Result<_, _>>()?))
        };
        match self.kind {
            FormKind::Harvest | FormKind::Scrap => {
                let cells = cells.clone()?;
                let kg = parse_weights(self.value(FieldKey::TotalKg), cells.len())?;
                let at = time(FieldKey::At)?;
                let harvest = self.kind == FormKind::Harvest;
                Ok(Submission::Entries(
                    cells
                        .into_iter()
                        .zip(kg)
                        .map(
                            |(cell, total_kg)| {
                                if harvest { Entry::Harvest { cell, at, total_kg } } else { Entry::Scrap { cell, at, total_kg } }
                            },
                        )
                        .collect(),
                ))
            }
            FormKind::AnodeChange => {
                // one confirmed change: scrap, then the crop, then the new anodes, at one instant
                let cells = cells.clone()?;
                let scrap = parse_weights(self.value(FieldKey::TotalKg), cells.len())?;
                let crop = match self.value(FieldKey::CropKg) {
                    "" => None,
                    v => Some(parse_weights(v, cells.len())?),
                };
                let (at, n, kg) = (time(FieldKey::At)?, count()?, num(FieldKey::MeanKg)?);
                let mut out = Vec::new();
                for (i, cell) in cells.into_iter().enumerate() {
                    out.push(Entry::Scrap { cell: cell.clone(), at, total_kg: scrap[i] });
                    if let Some(c) = &crop {
                        out.push(Entry::Harvest { cell: cell.clone(), at, total_kg: c[i] });
                    }
                    out.push(Entry::Anodes { cell, at, count: n, mean_kg: kg });
                }
                Ok(Submission::Entries(out))
            }
            FormKind::Anodes => {
                let (at, n, kg) = (time(FieldKey::At)?, count()?, num(FieldKey::MeanKg)?);
                per_cell(&|cell| Ok(Entry::Anodes { cell, at, count: n, mean_kg: kg }))
            }
            FormKind::Shorts => {
                let (at, n) = (time(FieldKey::At)?, count()?);
                per_cell(&|cell| Ok(Entry::Shorts { cell, at, count: n }))
            }
            FormKind::CutoutStart => {
                let from = time(FieldKey::From)?;
                per_cell(&|cell| Ok(Entry::Cutout { cell, from, to: None }))
            }
            FormKind::CutoutEnd => {
                let to = time(FieldKey::To)?;
                per_cell(&|cell| {
                    let from = (cx.cut_out_since)(&cell).ok_or_else(|| format!("{cell} is not cut out"))?;
                    Ok(Entry::Cutout { cell, from, to: Some(to) })
                })
            }
            FormKind::Voltage => {
                let (at, v) = (time(FieldKey::At)?, num(FieldKey::Volts)?);
                per_cell(&|cell| Ok(Entry::Voltage { cell, at, volts: v }))
            }
            FormKind::Outage => {
                Ok(Submission::Entries(vec![Entry::Outage { circuit, from: time(FieldKey::From)?, to: time(FieldKey::To)? }]))
            }
            FormKind::Setpoint => {
                Ok(Submission::Entries(vec![Entry::Setpoint { circuit, from: time(FieldKey::From)?, amps: num(FieldKey::Amps)? }]))
            }
            FormKind::Reading => Ok(Submission::Reading { circuit, at: time(FieldKey::At)?, amps: num(FieldKey::Amps)? }),
        }
    }
}

/// Cell ids from `A01`, `A01-A12` (in plant order) or `A01,A03`.
pub fn parse_cells(s: &str, all: &[String]) -> Result<Vec<String>, String> {
    let mut out: Vec<String> = Vec::new();
    let find = |id: &str| all.iter().position(|c| c.eq_ignore_ascii_case(id.trim())).ok_or_else(|| format!("no cell '{}'", id.trim()));
    for part in s.split(',').map(str::trim).filter(|p| !p.is_empty()) {
        match part.split_once('-') {
            Some((a, b)) => {
                let (i, j) = (find(a)?, find(b)?);
                if j < i {
                    return Err(format!("{a}-{b} runs backwards"));
                }
                out.extend(all[i..=j].iter().cloned());
            }
            None => out.push(all[find(part)?].clone()),
        }
    }
    if out.is_empty() {
        return Err("name at least one cell".into());
    }
    let mut seen = std::collections::HashSet::new();
    if let Some(d) = out.iter().find(|c| !seen.insert(c.as_str())) {
        return Err(format!("{d} is named twice"));
    }
    Ok(out)
}

/// One weight for every cell, or one per cell.
pub fn parse_weights(s: &str, cells: usize) -> Result<Vec<f64>, String> {
    let v: Vec<f64> = s
        .split(',')
        .map(str::trim)
        .filter(|p| !p.is_empty())
        .map(|p| p.parse::<f64>().map_err(|_| format!("'{p}' is not a weight in kg")))
        .collect::<Result<_, _>>()?;
    match v.len() {
        0 => Err("type the weight in kg".into()),
        1 => Ok(vec![v[0]; cells]),
        n if n == cells => Ok(v),
        n => Err(format!("{n} weights for {cells} cells: give one, or one per cell")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ids() -> Vec<String> {
        ["A01", "A02", "A03", "A04", "B01"].iter().map(|s| s.to_string()).collect()
    }

    #[test]
    fn cell_ranges_and_lists() {
        assert_eq!(parse_cells("A01-A03", &ids()).unwrap(), vec!["A01", "A02", "A03"]);
        assert_eq!(parse_cells("a04, B01", &ids()).unwrap(), vec!["A04", "B01"]);
        assert!(parse_cells("A03-A01", &ids()).unwrap_err().contains("backwards"));
        assert!(parse_cells("A09", &ids()).unwrap_err().contains("no cell"));
        assert!(parse_cells("A01,A01", &ids()).unwrap_err().contains("twice"));
    }

    #[test]
    fn a_rejection_lands_on_the_field_that_typed_it() {
        let crop = form_field(FormKind::AnodeChange, Some(EventKind::Harvest), EntryField::TotalKg);
        assert_eq!(crop, Some(FieldKey::CropKg));
        let scrap = form_field(FormKind::AnodeChange, Some(EventKind::Scrap), EntryField::TotalKg);
        assert_eq!(scrap, Some(FieldKey::TotalKg));
        assert_eq!(form_field(FormKind::CutoutStart, Some(EventKind::Cutout), EntryField::At), Some(FieldKey::From));
        assert_eq!(form_field(FormKind::Harvest, None, EntryField::By), None);
    }

    #[test]
    fn a_form_comes_back_from_its_draft_as_typed() {
        for kind in FormKind::ALL {
            assert_eq!(FormKind::from_name(kind.name()), Some(kind));
            let mut f = Form::new(kind, "A01-A03", "C1", "2026-03-01 12:00", 50);
            for (i, fl) in f.fields.iter_mut().enumerate() {
                fl.value = format!("{i} typed");
            }
            let back = Form::from_typed(kind, &f.typed());
            assert_eq!(back.fields.iter().map(|x| &x.value).collect::<Vec<_>>(), f.fields.iter().map(|x| &x.value).collect::<Vec<_>>());
        }
    }

    #[test]
    fn weights_common_or_per_cell() {
        assert_eq!(parse_weights("650", 3).unwrap(), vec![650.0; 3]);
        assert_eq!(parse_weights("650, 640", 2).unwrap(), vec![650.0, 640.0]);
        assert!(parse_weights("650,640", 3).is_err());
        assert!(parse_weights("heavy", 1).is_err());
    }

    #[test]
    fn a_harvest_form_becomes_one_entry_per_cell() {
        let zone = PlantZone::parse("UTC").unwrap();
        let none = |_: &str| None;
        let cx = FormContext { cells: &ids(), circuits: &["C1".to_string()], zone, cut_out_since: &none };
        let mut f = Form::new(FormKind::Harvest, "A01-A03", "C1", "2026-03-01 12:00", 50);
        f.validate(&cx);
        assert!(!f.is_valid(), "the weight is still empty");
        f.field_mut(FieldKey::TotalKg).unwrap().value = "650".into();
        f.validate(&cx);
        assert!(f.is_valid(), "{f:?}");
        let Submission::Entries(e) = f.submission(&cx).unwrap() else { panic!() };
        assert_eq!(e.len(), 3);
        assert!(matches!(&e[2], Entry::Harvest { cell, total_kg, .. } if cell == "A03" && *total_kg == 650.0));
    }
}
