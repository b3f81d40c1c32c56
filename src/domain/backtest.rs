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

use serde::Serialize;

use super::anode::AnodeLoad;
use super::charge::Time;
use super::electrochem::copper_kg;
use super::learn::{Estimate, Source};

/// One weighed crop.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CropRow {
    pub cell: String,
    pub circuit: String,
    pub section: String,
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
    pub cell: String,
    pub circuit: String,
    pub section: String,
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
    pub cell: &'a str,
    pub circuit: &'a str,
    pub section: &'a str,
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
        cell: c.cell.to_string(),
        circuit: c.circuit.to_string(),
        section: c.section.to_string(),
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
    pub cell: &'a str,
    pub circuit: &'a str,
    pub section: &'a str,
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
        cell: s.cell.to_string(),
        circuit: s.circuit.to_string(),
        section: s.section.to_string(),
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

fn mean(v: impl Iterator<Item = f64>) -> Option<f64> {
    let (n, s) = v.fold((0usize, 0.0), |(n, s), x| (n + 1, s + x));
    (n > 0).then(|| s / n as f64)
}

/// The summary of the rows.
pub fn summarise(crops: &[CropRow], scrap: &[ScrapRow]) -> Summary {
    Summary {
        crops: crops.len(),
        mass_mape_pct: mean(crops.iter().map(|r| r.error_pct.abs())),
        fixed_mass_mape_pct: mean(crops.iter().map(|r| r.fixed_error_pct.abs())),
        mass_bias_pct: mean(crops.iter().map(|r| r.error_pct)),
        harvest_time_mae_h: mean(crops.iter().filter_map(|r| r.harvest_time_error_h.map(f64::abs))),
        scrap: scrap.len(),
        scrap_mae_pp: mean(scrap.iter().map(|r| (r.predicted_fraction - r.weighed_fraction).abs() * 100.0)),
        fixed_scrap_mae_pp: mean(scrap.iter().map(|r| (r.fixed_fraction - r.weighed_fraction).abs() * 100.0)),
    }
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
            cell: "A01",
            circuit: "C1",
            section: "A",
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
}
