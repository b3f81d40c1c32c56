//! The plant layout file (TOML, tankbook's own format): circuits, sections,
//! cells and the parameters each section runs with, and the rules a layout must obey.

use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, BTreeSet};

use super::plant_time::{PlantZone, parse_day_start};

/// The voltage range an inert-anode (electrowinning, liberator) cell is
/// plausible in when its section does not set one: such cells run at about
/// 1.8–2.5 V (DOMAIN.md, from memory), the bounds leave a few tenths of a volt
/// either side for a healthy cell's scatter (common practice, no source). A
/// reading near the reversible floor of 0.89 V (E°(O₂/H₂O) − E°(Cu²⁺/Cu), CRC
/// Handbook) is a short or a bad reading, and is questioned.
pub const INERT_CELL_VOLTS: (f64, f64) = (1.6, 2.8);

/// Soluble (refining) or inert (electrowinning / liberator) anodes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum AnodeKind {
    Soluble,
    Inert,
}

/// Every parameter a cell runs with (a section's defaults merged with its overrides).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CellParams {
    pub anodes_per_cell: u32,
    pub cathodes_per_cell: u32,
    /// Set to accept a cathode count other than anodes + 1.
    pub cathodes_as_given: bool,
    pub face_area_m2: f64,
    pub new_anode_kg: f64,
    pub scrap_target: f64,
    pub scrap_upper: f64,
    pub scrap_lower: f64,
    pub cathode_target_kg: f64,
    pub crops_per_anode_cycle: Option<u32>,
    pub cathode_efficiency: f64,
    pub anode_efficiency: f64,
    pub anode_copper_fraction: f64,
    pub lug_kg: f64,
    pub thin_anode_mm: f64,
    pub low_efficiency_below: f64,
    pub anode_kind: AnodeKind,
    pub voltage_min: f64,
    pub voltage_max: f64,
    /// Mass of one copper starter sheet, kg: copper that goes into the cell with
    /// each fresh cathode (0 for permanent stainless-steel cathodes). Parameters
    /// stored before this key existed read as 0.
    #[serde(default)]
    pub starter_sheet_kg: f64,
}

impl Default for CellParams {
    /// Typical refinery figures (DOMAIN.md, from memory of industrial surveys).
    fn default() -> Self {
        CellParams {
            anodes_per_cell: 50,
            cathodes_per_cell: 51,
            cathodes_as_given: false,
            face_area_m2: 1.0,
            new_anode_kg: 380.0,
            scrap_target: 0.15,
            scrap_upper: 0.25,
            scrap_lower: 0.10,
            cathode_target_kg: 120.0,
            crops_per_anode_cycle: None,
            cathode_efficiency: 0.96,
            anode_efficiency: 1.0,
            anode_copper_fraction: 0.995,
            lug_kg: 20.0,
            thin_anode_mm: 3.0,
            low_efficiency_below: 0.90,
            anode_kind: AnodeKind::Soluble,
            // 0.25–0.35 V is normal (DOMAIN.md, from memory); wider bounds flag only the implausible.
            voltage_min: 0.10,
            voltage_max: 0.70,
            starter_sheet_kg: 0.0,
        }
    }
}

/// Optional overrides, as written under `[defaults]` or in a section.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ParamsPatch {
    pub anodes_per_cell: Option<u32>,
    pub cathodes_per_cell: Option<u32>,
    pub cathodes_as_given: Option<bool>,
    pub face_area_m2: Option<f64>,
    pub new_anode_kg: Option<f64>,
    pub scrap_target: Option<f64>,
    pub scrap_upper: Option<f64>,
    pub scrap_lower: Option<f64>,
    pub cathode_target_kg: Option<f64>,
    pub crops_per_anode_cycle: Option<u32>,
    pub cathode_efficiency: Option<f64>,
    pub anode_efficiency: Option<f64>,
    pub anode_copper_fraction: Option<f64>,
    pub lug_kg: Option<f64>,
    pub thin_anode_mm: Option<f64>,
    pub low_efficiency_below: Option<f64>,
    pub anode_kind: Option<AnodeKind>,
    pub voltage_min: Option<f64>,
    pub voltage_max: Option<f64>,
    pub starter_sheet_kg: Option<f64>,
}

macro_rules! apply {
    ($base:ident, $patch:ident, $($f:ident),*) => { $( if let Some(v) = $patch.$f { $base.$f = v; } )* };
}

impl CellParams {
    /// Copper a fresh set of cathodes brings into the cell as starter sheets, kg
    /// (0 with permanent cathodes): part of every weighed crop, never plated.
    pub fn starter_sheets_kg(&self) -> f64 {
        self.starter_sheet_kg * f64::from(self.cathodes_per_cell)
    }

    /// These parameters with `patch` laid over them.
    pub fn with(&self, patch: &ParamsPatch) -> CellParams {
        let mut p = self.clone();
        apply!(
            p,
            patch,
            anodes_per_cell,
            cathodes_per_cell,
            cathodes_as_given,
            face_area_m2,
            new_anode_kg,
            scrap_target,
            scrap_upper,
            scrap_lower,
            cathode_target_kg,
            cathode_efficiency,
            anode_efficiency,
            anode_copper_fraction,
            lug_kg,
            thin_anode_mm,
            low_efficiency_below,
            anode_kind,
            voltage_min,
            voltage_max,
            starter_sheet_kg
        );
        if patch.crops_per_anode_cycle.is_some() {
            p.crops_per_anode_cycle = patch.crops_per_anode_cycle;
        }
        if patch.anode_kind == Some(AnodeKind::Inert) && patch.voltage_min.is_none() {
            p.voltage_min = INERT_CELL_VOLTS.0;
        }
        if patch.anode_kind == Some(AnodeKind::Inert) && patch.voltage_max.is_none() {
            p.voltage_max = INERT_CELL_VOLTS.1;
        }
        p
    }

    /// The reasons these parameters cannot be right (empty when they can), each
    /// with the key it concerns.
    pub fn problems(&self) -> Vec<(&'static str, String)> {
        let mut v: Vec<(&'static str, String)> = Vec::new();
        if self.anodes_per_cell == 0 {
            v.push(("anodes_per_cell", "anodes_per_cell is 0: a cell needs anodes".into()));
        }
        if self.cathodes_per_cell == 0 {
            v.push(("cathodes_per_cell", "cathodes_per_cell is 0: a cell needs cathodes".into()));
        }
        if self.cathodes_per_cell != self.anodes_per_cell + 1 && !self.cathodes_as_given {
            let m = format!(
                "cathodes_per_cell is {} but anodes_per_cell + 1 is {}: fix it or set cathodes_as_given = true",
                self.cathodes_per_cell,
                self.anodes_per_cell + 1
            );
            v.push(("cathodes_per_cell", m));
        }
        // plating cannot beat Faraday: a cathode efficiency is at most 1. Anodes also
        // dissolve chemically (Cu + Cu²⁺ → 2 Cu⁺, oxygen in the electrolyte), so an
        // anode figure a little above 1 is real (common practice, no source for the 1.05).
        for (name, x, max) in [
            ("cathode_efficiency", self.cathode_efficiency, 1.0),
            ("anode_efficiency", self.anode_efficiency, 1.05),
            ("low_efficiency_below", self.low_efficiency_below, 1.0),
        ] {
            if !(x > 0.0 && x <= max) {
                v.push((name, format!("{name} is {x}: it must lie in (0, {max}]")));
            }
        }
        if !(self.anode_copper_fraction > 0.5 && self.anode_copper_fraction <= 1.0) {
            v.push(("anode_copper_fraction", format!("anode_copper_fraction is {}: it must lie in (0.5, 1]", self.anode_copper_fraction)));
        }
        for (name, x) in [
            ("face_area_m2", self.face_area_m2),
            ("new_anode_kg", self.new_anode_kg),
            ("cathode_target_kg", self.cathode_target_kg),
            ("thin_anode_mm", self.thin_anode_mm),
        ] {
            if !(x > 0.0 && x.is_finite()) {
                v.push((name, format!("{name} is {x}: it must be a positive number")));
            }
        }
        if !(self.starter_sheet_kg >= 0.0 && self.starter_sheet_kg.is_finite()) {
            v.push((
                "starter_sheet_kg",
                format!("starter_sheet_kg is {}: it must be zero (permanent cathodes) or more", self.starter_sheet_kg),
            ));
        }
        if !(self.lug_kg >= 0.0 && self.lug_kg.is_finite()) {
            v.push(("lug_kg", format!("lug_kg is {}: it must be zero or more", self.lug_kg)));
        }
        if !(0.0 < self.scrap_lower
            && self.scrap_lower < self.scrap_target
            && self.scrap_target < self.scrap_upper
            && self.scrap_upper < 1.0)
        {
            let m = format!(
                "scrap bounds out of order: need 0 < scrap_lower ({}) < scrap_target ({}) < scrap_upper ({}) < 1",
                self.scrap_lower, self.scrap_target, self.scrap_upper
            );
            v.push(("scrap_upper", m));
        }
        if self.anode_kind == AnodeKind::Soluble && self.scrap_lower * self.new_anode_kg <= self.lug_kg {
            let m = format!(
                "scrap_lower × new_anode_kg = {:.1} kg is at or below lug_kg = {} kg, the part that never dissolves",
                self.scrap_lower * self.new_anode_kg,
                self.lug_kg
            );
            v.push(("scrap_lower", m));
        }
        if self.crops_per_anode_cycle == Some(0) {
            v.push(("crops_per_anode_cycle", "crops_per_anode_cycle is 0: at least one crop per anode cycle".into()));
        }
        if self.voltage_min.partial_cmp(&self.voltage_max) != Some(std::cmp::Ordering::Less) {
            v.push(("voltage_min", format!("voltage_min ({}) must be below voltage_max ({})", self.voltage_min, self.voltage_max)));
        }
        v
    }
}

/// Section cells: a count (ids `A01`…) or an explicit list of ids.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum CellsSpec {
    Count(u32),
    List(Vec<String>),
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlantHeader {
    pub name: String,
    #[serde(default = "utc")]
    pub time_zone: String,
    #[serde(default = "midnight")]
    pub day_starts_at: String,
}

fn utc() -> String {
    "UTC".to_string()
}
fn midnight() -> String {
    "00:00".to_string()
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SectionFile {
    pub name: String,
    pub cells: CellsSpec,
    #[serde(flatten)]
    pub params: ParamsPatch,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CircuitFile {
    pub name: String,
    pub max_amps: f64,
    #[serde(default)]
    pub section: Vec<SectionFile>,
}

/// The planning keys (`[plan]`); each has a default and a command-line override.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct PlanKeys {
    pub crew_cells_per_day: u32,
    pub shifts_per_day: u32,
    pub harvest_cathodes_per_day: u32,
    pub early_weight: f64,
    pub late_weight: f64,
    pub anode_stock: Option<u64>,
    pub anodes_per_day: Option<u64>,
    pub no_anode_work: Vec<String>,
    pub whole_sections: bool,
    /// Per circuit: whether anode work on a day its circuit is down for an
    /// outage is forbidden (the default for a circuit not listed) or preferred.
    pub outage_anode_work: BTreeMap<String, OutageWork>,
    /// Crane lifts a shift can make (`None`: no limit).
    pub crane_lifts_per_shift: Option<u32>,
    /// Crane lifts an anode change takes (spent anodes out, new anodes in).
    pub lifts_per_anode_change: u32,
    /// Crane lifts a harvest takes (cathodes out, blanks back in).
    pub lifts_per_harvest: u32,
    /// A crop pulled with the anodes lighter than this fraction of
    /// `cathode_target_kg` is warned about on the plan.
    pub light_crop_fraction: f64,
}

/// Anode work on a circuit's outage days.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum OutageWork {
    /// No anode work in the circuit's cells while it is down (lock-out of a
    /// circuit being worked on, its crane taken up).
    #[default]
    Forbidden,
    /// The cells are out of circuit anyway: change anodes then, if the window allows.
    Preferred,
}

impl Default for PlanKeys {
    fn default() -> Self {
        // common practice, no source: one crew changes a handful of cells a day
        PlanKeys {
            crew_cells_per_day: 8,
            shifts_per_day: 1,
            harvest_cathodes_per_day: 2000,
            early_weight: 1.0,
            late_weight: 3.0,
            anode_stock: None,
            anodes_per_day: None,
            no_anode_work: Vec::new(),
            whole_sections: false,
            outage_anode_work: BTreeMap::new(),
            crane_lifts_per_shift: None,
            // common practice, no source: one lift takes the spent anodes out, one sets the new ones;
            // a harvest lifts the cathodes out and the stripped blanks back in
            lifts_per_anode_change: 2,
            lifts_per_harvest: 2,
            // the issue's default: a last crop under 60 % of the target is light (common practice, no source)
            light_crop_fraction: 0.6,
        }
    }
}

/// The storage keys (`[store]`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct StoreKeys {
    /// How many daily automatic backups to keep in the `backups/` folder.
    pub keep_backups: u32,
}

impl Default for StoreKeys {
    fn default() -> Self {
        // two weeks of days: common practice, no source
        StoreKeys { keep_backups: 14 }
    }
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LayoutFile {
    pub plant: PlantHeader,
    #[serde(default)]
    pub defaults: ParamsPatch,
    #[serde(default)]
    pub plan: PlanKeys,
    #[serde(default)]
    pub store: StoreKeys,
    #[serde(default)]
    pub circuit: Vec<CircuitFile>,
}

/// A layout ready to be stored: every cell with its circuit, section and parameters.
#[derive(Debug, Clone, PartialEq)]
pub struct Layout {
    pub header: PlantHeader,
    pub zone: PlantZone,
    pub plan: PlanKeys,
    pub store: StoreKeys,
    pub circuits: Vec<CircuitLayout>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct CircuitLayout {
    pub name: String,
    pub max_amps: f64,
    pub sections: Vec<SectionLayout>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct SectionLayout {
    pub name: String,
    pub params: CellParams,
    pub cells: Vec<String>,
}

/// A layout problem, with the line of the file it concerns where one is known.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{}{field}: {message}", line.map(|l| format!("line {l}, ")).unwrap_or_default())]
pub struct LayoutError {
    pub line: Option<usize>,
    pub field: String,
    pub message: String,
}

fn line_of(text: &str, offset: usize) -> usize {
    text[..offset.min(text.len())].matches('\n').count() + 1
}

/// The line on which the `n`th occurrence (0-based) of a table header starts.
fn header_line(text: &str, header: &str, n: usize) -> Option<usize> {
    text.lines().enumerate().filter(|(_, l)| l.trim_start().starts_with(header)).nth(n).map(|(i, _)| i + 1)
}

/// The line of `key = …` in the table that starts at `start` (1-based), or `start`.
fn key_line(text: &str, start: usize, key: &str) -> usize {
    for (i, l) in text.lines().enumerate().skip(start) {
        let l = l.trim_start();
        if l.starts_with('[') {
            break;
        }
        if l.strip_prefix(key).is_some_and(|rest| rest.trim_start().starts_with('=')) {
            return i + 1;
        }
    }
    start
}

/// Whether a section sets `key` itself (else it inherits it from `[defaults]`).
fn own_key(patch: &ParamsPatch, key: &str) -> bool {
    match toml::Value::try_from(patch) {
        Ok(toml::Value::Table(t)) => t.contains_key(key),
        _ => false,
    }
}

/// Section cell ids: `A` with 20 cells gives `A01` … `A20`.
pub fn cell_ids(section: &str, spec: &CellsSpec) -> Vec<String> {
    match spec {
        CellsSpec::Count(n) => {
            let width = n.to_string().len().max(2);
            (1..=*n).map(|i| format!("{section}{i:0width$}")).collect()
        }
        CellsSpec::List(v) => v.iter().map(|s| s.trim().to_string()).collect(),
    }
}

/// Serde's `flatten` cannot deny unknown keys, so a section's keys are checked here:
/// a mistyped parameter must not be silently ignored.
fn check_section_keys(text: &str) -> Result<(), LayoutError> {
    let Ok(table) = text.parse::<toml::Table>() else { return Ok(()) };
    let mut known: BTreeSet<String> = ["name", "cells", "crops_per_anode_cycle"].iter().map(|s| s.to_string()).collect();
    if let Ok(toml::Value::Table(t)) = toml::Value::try_from(CellParams::default()) {
        known.extend(t.keys().cloned());
    }
    let circuits = table.get("circuit").and_then(|c| c.as_array()).cloned().unwrap_or_default();
    let mut n = 0;
    for c in &circuits {
        let sections = c.get("section").and_then(|s| s.as_array()).cloned().unwrap_or_default();
        for s in &sections {
            if let Some(t) = s.as_table()
                && let Some(k) = t.keys().find(|k| !known.contains(*k))
            {
                return Err(LayoutError {
                    line: header_line(text, "[[circuit.section]]", n),
                    field: format!("section.{k}"),
                    message: format!("unknown key '{k}'"),
                });
            }
            n += 1;
        }
    }
    Ok(())
}

/// Parses and checks a layout file.
pub fn parse(text: &str) -> Result<Layout, LayoutError> {
    let file: LayoutFile = toml::from_str(text).map_err(|e| LayoutError {
        line: e.span().map(|s| line_of(text, s.start)),
        field: "toml".to_string(),
        message: e.message().to_string(),
    })?;
    let err = |line, field: String, message: String| LayoutError { line, field, message };
    check_section_keys(text)?;
    let zone = PlantZone::parse(&file.plant.time_zone)
        .map_err(|e| err(header_line(text, "time_zone", 0), "plant.time_zone".into(), e.to_string()))?;
    parse_day_start(&file.plant.day_starts_at)
        .map_err(|e| err(header_line(text, "day_starts_at", 0), "plant.day_starts_at".into(), e.to_string()))?;
    if file.plan.crew_cells_per_day == 0 && file.plan.shifts_per_day == 0 {
        return Err(err(header_line(text, "[plan]", 0), "plan".into(), "crew capacity is zero".into()));
    }
    for d in &file.plan.no_anode_work {
        chrono::NaiveDate::parse_from_str(d, "%Y-%m-%d").map_err(|_| {
            err(header_line(text, "no_anode_work", 0), "plan.no_anode_work".into(), format!("'{d}' is not a date (YYYY-MM-DD)"))
        })?;
    }
    let plan_err = |key: &str, message: String| err(header_line(text, key, 0), format!("plan.{key}"), message);
    if file.plan.crane_lifts_per_shift == Some(0) {
        return Err(plan_err("crane_lifts_per_shift", "0 lifts a shift leaves no crane for anode changes or harvests".into()));
    }
    for (key, v) in [("lifts_per_anode_change", file.plan.lifts_per_anode_change), ("lifts_per_harvest", file.plan.lifts_per_harvest)] {
        if v == 0 {
            return Err(plan_err(key, "a job takes at least one crane lift".into()));
        }
    }
    let f = file.plan.light_crop_fraction;
    if !(f > 0.0 && f <= 1.0) {
        return Err(plan_err("light_crop_fraction", format!("{f} is not a fraction of the target: give a number above 0, at most 1")));
    }
    if let Some(name) = file.plan.outage_anode_work.keys().find(|n| !file.circuit.iter().any(|c| &c.name == *n)) {
        return Err(plan_err("outage_anode_work", format!("unknown circuit {name}: it is not in the layout")));
    }
    if file.store.keep_backups == 0 {
        return Err(err(
            header_line(text, "keep_backups", 0),
            "store.keep_backups".into(),
            "0 would delete every automatic backup: keep at least 1".into(),
        ));
    }
    if file.circuit.is_empty() {
        return Err(err(None, "circuit".into(), "the layout has no [[circuit]]".into()));
    }
    let base = CellParams::default().with(&file.defaults);
    let defaults_line = header_line(text, "[defaults]", 0);
    // A default that is wrong for every section is reported once, at its own line.
    if let Some((key, p)) = base.problems().into_iter().next() {
        let line = defaults_line.map(|l| key_line(text, l, key));
        return Err(err(line, format!("defaults.{key}"), p));
    }
    let mut seen_cells = BTreeSet::new();
    let mut seen_circuits = BTreeSet::new();
    let mut circuits = Vec::new();
    let mut section_no = 0;
    for (ci, c) in file.circuit.iter().enumerate() {
        let cline = header_line(text, "[[circuit]]", ci);
        let cfield = format!("circuit '{}'", c.name);
        if c.name.trim().is_empty() {
            return Err(err(cline, "circuit.name".into(), "a circuit needs a name".into()));
        }
        if !seen_circuits.insert(c.name.clone()) {
            return Err(err(cline, cfield, "the circuit name is used twice".into()));
        }
        if !(c.max_amps > 0.0 && c.max_amps.is_finite()) {
            return Err(err(cline, format!("{cfield}.max_amps"), format!("{} is not a positive current", c.max_amps)));
        }
        let mut sections = Vec::new();
        for s in &c.section {
            let sline = header_line(text, "[[circuit.section]]", section_no);
            section_no += 1;
            let sfield = format!("{cfield} section '{}'", s.name);
            let params = base.with(&s.params);
            if let Some((key, p)) = params.problems().into_iter().next() {
                let line = if own_key(&s.params, key) {
                    sline.map(|l| key_line(text, l, key))
                } else {
                    defaults_line.map(|l| key_line(text, l, key))
                };
                return Err(err(line, format!("{sfield}.{key}"), p));
            }
            let cells = cell_ids(&s.name, &s.cells);
            if cells.is_empty() {
                return Err(err(sline, format!("{sfield}.cells"), "a section needs at least one cell".into()));
            }
            for id in &cells {
                if id.is_empty() || id.contains(char::is_whitespace) {
                    return Err(err(sline, format!("{sfield}.cells"), format!("'{id}' is not a usable cell id")));
                }
                if !seen_cells.insert(id.clone()) {
                    return Err(err(sline, format!("{sfield}.cells"), format!("cell id {id} is used twice in the plant")));
                }
            }
            sections.push(SectionLayout { name: s.name.clone(), params, cells });
        }
        circuits.push(CircuitLayout { name: c.name.clone(), max_amps: c.max_amps, sections });
    }
    Ok(Layout { header: file.plant, zone, plan: file.plan, store: file.store, circuits })
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"
[plant]
name = "Test"
time_zone = "+02:00"
[defaults]
anodes_per_cell = 40
cathodes_per_cell = 41
[[circuit]]
name = "C1"
max_amps = 40000
[[circuit.section]]
name = "A"
cells = 12
[[circuit.section]]
name = "L"
cells = ["L1", "L2"]
anode_kind = "inert"
"#;

    #[test]
    fn parses_sections_and_overrides() {
        let l = parse(GOOD).unwrap();
        let a = &l.circuits[0].sections[0];
        assert_eq!(a.cells.first().map(String::as_str), Some("A01"));
        assert_eq!(a.cells.len(), 12);
        assert_eq!(a.params.anodes_per_cell, 40);
        let lib = &l.circuits[0].sections[1];
        assert_eq!(lib.params.anode_kind, AnodeKind::Inert);
        assert_eq!((lib.params.voltage_min, lib.params.voltage_max), INERT_CELL_VOLTS);
        assert!(INERT_CELL_VOLTS.0 > crate::domain::electrochem::INERT_ANODE_MIN_VOLTS, "the range sits above the reversible floor");
    }

    #[test]
    fn rejects_what_cannot_be_right() {
        let cases = [
            ("anodes_per_cell = 40", "anodes_per_cell = 0", "anodes_per_cell is 0"),
            ("cathodes_per_cell = 41", "cathodes_per_cell = 45", "cathodes_as_given"),
            ("cells = 12", "cells = 12\nscrap_lower = 0.05", "lug_kg"),
            ("cells = 12", "cells = 12\nscrap_upper = 0.12", "out of order"),
            ("cells = 12", "cells = 12\ncathode_efficiency = 1.2", "(0, 1]"),
            ("cells = 12", "cells = 12\ncathode_efficiency = 1.02", "cathode_efficiency is 1.02"),
            ("cells = 12", "cells = 12\nanode_efficiency = 1.08", "(0, 1.05]"),
            ("cells = [\"L1\", \"L2\"]", "cells = [\"L1\", \"A03\"]", "used twice"),
            ("time_zone = \"+02:00\"", "time_zone = \"Nowhere/Land\"", "not a time zone"),
            ("cells = 12", "cells = 12\nbogus_key = 1", "bogus_key"),
        ];
        for (from, to, needle) in cases {
            let text = GOOD.replacen(from, to, 1);
            let e = parse(&text).expect_err(to);
            assert!(e.to_string().contains(needle), "{to}: {e}");
            assert!(e.line.is_some(), "{to}: {e}");
        }
    }

    #[test]
    fn parameters_stored_before_starter_sheets_read_as_permanent_cathodes() {
        let mut old = serde_json::to_value(CellParams::default()).unwrap();
        old.as_object_mut().unwrap().remove("starter_sheet_kg");
        let p: CellParams = serde_json::from_value(old).unwrap();
        assert_eq!(p.starter_sheet_kg, 0.0);
        assert_eq!(p.starter_sheets_kg(), 0.0);
        let sheets = CellParams { starter_sheet_kg: 6.0, ..CellParams::default() };
        assert_eq!(sheets.starter_sheets_kg(), 6.0 * 51.0);
    }

    #[test]
    fn an_anode_efficiency_a_little_above_one_is_allowed() {
        assert!(parse(&GOOD.replacen("cells = 12", "cells = 12\nanode_efficiency = 1.04", 1)).is_ok());
    }

    #[test]
    fn cathodes_as_given_allows_a_different_count() {
        let text = GOOD.replacen("cathodes_per_cell = 41", "cathodes_per_cell = 40\ncathodes_as_given = true", 1);
        assert!(parse(&text).is_ok());
    }

    #[test]
    fn store_keys_default_parse_and_refuse_zero() {
        assert_eq!(parse(GOOD).unwrap().store.keep_backups, 14);
        let three = GOOD.replace("[defaults]", "[store]\nkeep_backups = 3\n[defaults]");
        assert_eq!(parse(&three).unwrap().store.keep_backups, 3);
        let zero = GOOD.replace("[defaults]", "[store]\nkeep_backups = 0\n[defaults]");
        let e = parse(&zero).unwrap_err();
        assert_eq!((e.field.as_str(), e.line), ("store.keep_backups", Some(6)), "{e}");
        let typo = GOOD.replace("[defaults]", "[store]\nkeep_backup = 3\n[defaults]");
        assert!(parse(&typo).unwrap_err().message.contains("keep_backup"));
    }

    #[test]
    fn plan_keys_for_outages_crane_and_light_crops() {
        let l = parse(GOOD).unwrap();
        assert_eq!(l.plan.outage_anode_work.get("C1"), None);
        assert_eq!((l.plan.crane_lifts_per_shift, l.plan.lifts_per_anode_change, l.plan.lifts_per_harvest), (None, 2, 2));
        let keys = "[plan]\ncrane_lifts_per_shift = 30\nlifts_per_harvest = 3\nlight_crop_fraction = 0.5\n\
                    [plan.outage_anode_work]\nC1 = \"preferred\"\n[defaults]";
        let l = parse(&GOOD.replace("[defaults]", keys)).unwrap();
        assert_eq!(l.plan.outage_anode_work.get("C1"), Some(&OutageWork::Preferred));
        assert_eq!((l.plan.crane_lifts_per_shift, l.plan.lifts_per_harvest, l.plan.light_crop_fraction), (Some(30), 3, 0.5));
        for (bad, field) in [
            ("[plan.outage_anode_work]\nC9 = \"preferred\"", "plan.outage_anode_work"),
            ("[plan.outage_anode_work]\nC1 = \"sometimes\"", "toml"),
            ("[plan]\ncrane_lifts_per_shift = 0", "plan.crane_lifts_per_shift"),
            ("[plan]\nlifts_per_anode_change = 0", "plan.lifts_per_anode_change"),
            ("[plan]\nlight_crop_fraction = 1.5", "plan.light_crop_fraction"),
        ] {
            let e = parse(&GOOD.replace("[defaults]", &format!("{bad}\n[defaults]"))).unwrap_err();
            assert_eq!(e.field, field, "{bad}: {e}");
        }
    }
}
