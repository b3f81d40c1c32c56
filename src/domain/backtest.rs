//! The back-test: each weighed crop and scrap beside what would have been
//! predicted for it ex ante (learnt from the weighings before it began, on the
//! charge it actually got) and what the layout's fixed efficiency predicts.
//!
//! How to read it: `mass_mape_pct` is the mean of |predicted − weighed| / weighed
//! × 100 over the crops, `fixed_mass_mape_pct` the same for the layout's fixed
//! efficiency; `mass_bias_pct` the mean signed error (positive: predictions run
//! heavy). `harvest_time_mae_h` is the mean of |when the prediction reaches the
//! weighed mass − when the crop was harvested|. Scrap errors are in points of
//! the set mass (`scrap_mae_pp`). The charge is the crop's measured charge in
//! every row, so the errors are those of the efficiencies alone.

use std::fmt;
use std::ops::Deref;
use std::sync::Arc;

use serde::Serialize;

use super::anode::AnodeLoad;
use super::charge::Time;
use super::electrochem::copper_kg;
use super::learn::{Estimate, Source};

/// A cell's, circuit's or section's name as the rows carry it: shared by every
/// row that names it (a year of rows holds each name once), serialised and
/// shown as the plain string.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Name(Arc<str>);

impl Name {
    pub fn as_str(&self) -> &str {
        &self.0
    }
}

impl From<&str> for Name {
    fn from(s: &str) -> Name {
        Name(Arc::from(s))
    }
}

impl Deref for Name {
    type Target = str;
    fn deref(&self) -> &str {
        &self.0
    }
}

impl PartialEq<str> for Name {
    fn eq(&self, other: &str) -> bool {
        &*self.0 == other
    }
}

impl PartialEq<&str> for Name {
    fn eq(&self, other: &&str) -> bool {
        &*self.0 == *other
    }
}

impl fmt::Display for Name {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // str's own, so widths and alignment apply as to a String
        fmt::Display::fmt(&*self.0, f)
    }
}

impl Serialize for Name {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&self.0)
    }
}

/// One weighed crop.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CropRow {
    pub cell: Name,
    pub circuit: Name,
    pub section: Name,
    pub started_at: Time,
    pub harvested_at: Time,
    pub charge_ah: f64,
    /// Cell total, kg.
    pub weighed_kg: f64,
    /// At the efficiency learnt from the weighings before the crop began.
    pub predicted_kg: f64,
    /// At the layout's fixed efficiency.
    pub fixed_kg: f64,
    pub cathode_efficiency: f64,
    pub cathode_efficiency_source: Source,
    pub fixed_efficiency: f64,
    /// (predicted − weighed) / weighed × 100.
    pub error_pct: f64,
    pub fixed_error_pct: f64,
    /// When the prediction reaches the weighed mass (on the crop's charge).
    pub predicted_reach_at: Option<Time>,
    /// predicted_reach_at − harvested_at, hours (negative: the prediction got there first).
    pub harvest_time_error_h: Option<f64>,
}

/// One weighed scrap.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ScrapRow {
    pub cell: Name,
    pub circuit: Name,
    pub section: Name,
    pub set_at: Time,
    pub pulled_at: Time,
    pub count: u32,
    pub set_kg: f64,
    pub charge_ah: f64,
    /// Cell total, kg.
    pub weighed_kg: f64,
    pub predicted_kg: f64,
    pub fixed_kg: f64,
    pub anode_factor: f64,
    pub anode_factor_source: Source,
    pub fixed_factor: f64,
    /// Scrap as a fraction of the set mass: weighed, predicted, fixed.
    pub weighed_fraction: f64,
    pub predicted_fraction: f64,
    pub fixed_fraction: f64,
}

/// The back-test's figures over its rows (`None` without rows).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Summary {
    pub crops: usize,
    pub mass_mape_pct: Option<f64>,
    pub fixed_mass_mape_pct: Option<f64>,
    pub mass_bias_pct: Option<f64>,
    pub harvest_time_mae_h: Option<f64>,
    pub scrap: usize,
    pub scrap_mae_pp: Option<f64>,
    pub fixed_scrap_mae_pp: Option<f64>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Backtest {
    pub schema: u32,
    pub from: Time,
    pub to: Time,
    pub crops: Vec<CropRow>,
    pub scrap: Vec<ScrapRow>,
    pub summary: Summary,
}

/// What a crop is, for its row.
#[derive(Debug, Clone, PartialEq)]
pub struct Crop<'a> {
    pub cell: &'a Name,
    pub circuit: &'a Name,
    pub section: &'a Name,
    pub started_at: Time,
    pub harvested_at: Time,
    pub charge_ah: f64,
    pub weighed_kg: f64,
}

/// A crop's row: `learnt` ex ante, `fixed` the layout's efficiency, `reach_at`
/// when the learnt prediction reaches the weighed mass.
pub fn crop_row(c: &Crop<'_>, learnt: &Estimate, fixed: f64, reach_at: Option<Time>) -> CropRow {
    let predicted_kg = copper_kg(c.charge_ah, learnt.value);
    let fixed_kg = copper_kg(c.charge_ah, fixed);
    let pct = |p: f64| (p - c.weighed_kg) / c.weighed_kg * 100.0;
    CropRow {
        cell: c.cell.clone(),
        circuit: c.circuit.clone(),
        section: c.section.clone(),
        started_at: c.started_at,
        harvested_at: c.harvested_at,
        charge_ah: c.charge_ah,
        weighed_kg: c.weighed_kg,
        predicted_kg,
        fixed_kg,
        cathode_efficiency: learnt.value,
        cathode_efficiency_source: learnt.source,
        fixed_efficiency: fixed,
        error_pct: pct(predicted_kg),
        fixed_error_pct: pct(fixed_kg),
        predicted_reach_at: reach_at,
        harvest_time_error_h: reach_at.map(|t| (t - c.harvested_at).num_seconds() as f64 / 3600.0),
    }
}

/// What a scrap weighing is, for its row.
#[derive(Debug, Clone, PartialEq)]
pub struct Scrap<'a> {
    pub cell: &'a Name,
    pub circuit: &'a Name,
    pub section: &'a Name,
    pub set_at: Time,
    pub pulled_at: Time,
    pub charge_ah: f64,
    pub weighed_kg: f64,
    /// The load as set, dissolving at a factor of 1 (the factor is set per prediction).
    pub load: AnodeLoad,
}

/// A scrap weighing's row at the ex-ante `learnt` factor and the layout's `fixed` one.
pub fn scrap_row(s: &Scrap<'_>, learnt: &Estimate, fixed: f64) -> ScrapRow {
    let n = f64::from(s.load.count);
    let at = |eff: f64| AnodeLoad { efficiency: eff, ..s.load }.remaining_kg(s.charge_ah) * n;
    let set_total = s.load.initial_kg * n;
    let (predicted_kg, fixed_kg) = (at(learnt.value), at(fixed));
    ScrapRow {
        cell: s.cell.clone(),
        circuit: s.circuit.clone(),
        section: s.section.clone(),
        set_at: s.set_at,
        pulled_at: s.pulled_at,
        count: s.load.count,
        set_kg: s.load.initial_kg,
        charge_ah: s.charge_ah,
        weighed_kg: s.weighed_kg,
        predicted_kg,
        fixed_kg,
        anode_factor: learnt.value,
        anode_factor_source: learnt.source,
        fixed_factor: fixed,
        weighed_fraction: s.weighed_kg / set_total,
        predicted_fraction: predicted_kg / set_total,
        fixed_fraction: fixed_kg / set_total,
    }
}

/// A mean summed as the values come (in their order, from 0).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
struct Mean {
    n: usize,
    sum: f64,
}

impl Mean {
    fn add(&mut self, x: f64) {
        self.n += 1;
        self.sum += x;
    }

    fn get(&self) -> Option<f64> {
        (self.n > 0).then(|| self.sum / self.n as f64)
    }
}

/// The summary of rows as they come, one at a time (the only place its figures
/// are computed: [`summarise`] adds its rows to one, in their order).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct SummaryAcc {
    crops: usize,
    mape: Mean,
    fixed_mape: Mean,
    bias: Mean,
    time: Mean,
    scrap: usize,
    scrap_mae: Mean,
    fixed_scrap_mae: Mean,
}

impl SummaryAcc {
    pub fn crop(&mut self, r: &CropRow) {
        self.crops += 1;
        self.mape.add(r.error_pct.abs());
        self.fixed_mape.add(r.fixed_error_pct.abs());
        self.bias.add(r.error_pct);
        if let Some(h) = r.harvest_time_error_h {
            self.time.add(h.abs());
        }
    }

    pub fn scrap(&mut self, r: &ScrapRow) {
        self.scrap += 1;
        self.scrap_mae.add((r.predicted_fraction - r.weighed_fraction).abs() * 100.0);
        self.fixed_scrap_mae.add((r.fixed_fraction - r.weighed_fraction).abs() * 100.0);
    }

    pub fn summary(&self) -> Summary {
        Summary {
            crops: self.crops,
            mass_mape_pct: self.mape.get(),
            fixed_mass_mape_pct: self.fixed_mape.get(),
            mass_bias_pct: self.bias.get(),
            harvest_time_mae_h: self.time.get(),
            scrap: self.scrap,
            scrap_mae_pp: self.scrap_mae.get(),
            fixed_scrap_mae_pp: self.fixed_scrap_mae.get(),
        }
    }
}

/// The summary of the rows.
pub fn summarise(crops: &[CropRow], scrap: &[ScrapRow]) -> Summary {
    let mut acc = SummaryAcc::default();
    crops.iter().for_each(|r| acc.crop(r));
    scrap.iter().for_each(|r| acc.scrap(r));
    acc.summary()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::domain::learn::{CATHODE, Estimate};
    use chrono::{Duration, TimeZone, Utc};

    #[test]
    fn a_crop_row_and_its_summary() {
        let t0 = Utc.with_ymd_and_hms(2026, 3, 1, 0, 0, 0).unwrap();
        // 30 kA for 179.25 h at 96 % plates 6 120 kg (DOMAIN.md plant check, derived: 120 kg × 51 cathodes)
        let q = 30_000.0 * 179.25;
        let c = Crop {
            cell: &Name::from("A01"),
            circuit: &Name::from("C1"),
            section: &Name::from("A"),
            started_at: t0,
            harvested_at: t0 + Duration::hours(179),
            charge_ah: q,
            weighed_kg: 6_000.0,
        };
        let learnt = Estimate { value: 0.94, source: Source::Cell, learnt: 3, se: 0.004, sigma: 0.004 };
        let r = crop_row(&c, &learnt, 0.96, Some(t0 + Duration::hours(180)));
        assert!((r.fixed_kg - 6_120.0).abs() < 1.0, "{}", r.fixed_kg);
        assert!((r.predicted_kg - 6_120.0 * 0.94 / 0.96).abs() < 1.0);
        assert!((r.fixed_error_pct - 2.0).abs() < 0.02, "{}", r.fixed_error_pct);
        assert_eq!(r.harvest_time_error_h, Some(1.0));
        let other = crop_row(&c, &Estimate::layout(0.96, &CATHODE), 0.96, None);
        let s = summarise(&[r.clone(), other.clone()], &[]);
        assert_eq!(s.crops, 2);
        let mape = (r.error_pct.abs() + other.error_pct.abs()) / 2.0;
        assert!((s.mass_mape_pct.unwrap() - mape).abs() < 1e-12);
        assert_eq!(s.harvest_time_mae_h, Some(1.0));
        assert_eq!(s.scrap_mae_pp, None);
    }

    #[test]
    fn a_name_prints_and_serialises_as_its_string() {
        let n = Name::from("A01");
        assert_eq!(format!("[{n:<5}] [{n:>5}]"), "[A01  ] [  A01]");
        assert_eq!(serde_json::to_string(&n).unwrap(), serde_json::to_string("A01").unwrap());
        let later = Name::from("A02");
        assert!(n == "A01" && n.clone() == n && n < later);
    }
}
