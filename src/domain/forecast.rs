//! Every cell as of a given time: what is left of its anodes, what its cathodes
//! hold, when each is due, and what in its data deserves a second look.

use serde::Serialize;

use super::anode::{AnodeLoad, body_thickness_mm};
use super::cathode::Cathodes;
use super::charge::{Curve, OpenSpan, Time, cell_charge, cell_time_reaching};
use super::electrochem::{INERT_ANODE_MIN_VOLTS, specific_energy_kwh_per_kg};
use super::layout::{AnodeKind, CellParams};

/// A structured data warning: a code a script can match, a sentence a person can read.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Warning {
    pub code: &'static str,
    pub message: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cell: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub circuit: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub from: Option<Time>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub to: Option<Time>,
}

/// What the forecast needs to know of one cell as of `as_of`.
#[derive(Debug, Clone, PartialEq)]
pub struct CellInput {
    pub cell: String,
    pub circuit: String,
    pub section: String,
    pub params: CellParams,
    /// The running anode load: set time, count, mean mass at set.
    pub load: Option<(Time, u32, f64)>,
    /// When the running crop began.
    pub crop_started: Option<Time>,
    /// Cut-outs known at `as_of` (one still open at `as_of` has no end).
    pub cutouts: Vec<OpenSpan>,
    pub last_crop_efficiency: Option<f64>,
    pub last_voltage: Option<(Time, f64)>,
    /// Shorts found since the running crop began (count, last time).
    pub shorts: Option<(u32, Time)>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AnodeForecast {
    pub set_at: Time,
    pub count: u32,
    pub initial_kg: f64,
    pub remaining_kg: f64,
    pub remaining_fraction: f64,
    pub pull_due: Option<Time>,
    /// Body thickness of a soluble anode; `None` for inert anodes, which are
    /// not copper and are not consumed.
    pub thickness_mm: Option<f64>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CathodeForecast {
    pub started_at: Time,
    pub mass_kg: f64,
    pub inner_mass_kg: f64,
    pub charge_ah: f64,
    pub harvest_due: Option<Time>,
}

/// One cell's forecast.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CellForecast {
    pub cell: String,
    pub circuit: String,
    pub section: String,
    pub in_circuit: bool,
    /// Start of the cut-out the cell is in at `as_of` (the `--from` that closes it).
    pub cut_out_since: Option<Time>,
    pub anode_kind: AnodeKind,
    pub anode: Option<AnodeForecast>,
    pub cathode: Option<CathodeForecast>,
    pub cathode_efficiency: f64,
    pub last_crop_efficiency: Option<f64>,
    /// Charge since the anode set (since the crop began for inert cells), including `estimated_ah`.
    pub charge_ah: f64,
    /// The part of `charge_ah` estimated after the circuit's last reading.
    pub estimated_ah: f64,
    pub energy_kwh_per_t: Option<f64>,
    pub shorts: Option<u32>,
    pub warnings: Vec<Warning>,
}

/// Forecasts one cell on its circuit's curve.
pub fn forecast_cell<C: Curve>(input: &CellInput, curve: &C, as_of: Time) -> Result<CellForecast, C::Error> {
    let p = &input.params;
    let cut_out_since = input.cutouts.iter().find(|c| c.from <= as_of && c.to.is_none_or(|to| to > as_of)).map(|c| c.from);
    let in_circuit = cut_out_since.is_none();
    let mut warnings = Vec::new();
    let mut warn = |code, message: String| {
        warnings.push(Warning { code, message, cell: Some(input.cell.clone()), circuit: None, from: None, to: None });
    };
    let eta_c = p.cathode_efficiency;
    let mut charge = None;
    let mut anode = None;
    if let Some((set_at, count, initial_kg)) = input.load {
        let q = cell_charge(curve, &input.cutouts, set_at, as_of)?;
        charge = Some(q);
        let load =
            AnodeLoad { initial_kg, count, efficiency: p.anode_efficiency, copper_fraction: p.anode_copper_fraction, lug_kg: p.lug_kg };
        anode = Some(if p.anode_kind == AnodeKind::Inert {
            AnodeForecast {
                set_at,
                count,
                initial_kg,
                remaining_kg: initial_kg,
                remaining_fraction: 1.0,
                pull_due: None,
                thickness_mm: None,
            }
        } else {
            let remaining_kg = load.remaining_kg(q.total());
            let thickness_mm = Some(body_thickness_mm(remaining_kg, p.lug_kg, p.face_area_m2));
            let pull_due = match load.charge_to_fraction_ah(p.scrap_target) {
                Some(target) => cell_time_reaching(curve, &input.cutouts, set_at, target)?,
                None => None,
            };
            AnodeForecast {
                set_at,
                count,
                initial_kg,
                remaining_kg,
                remaining_fraction: load.remaining_fraction(q.total()),
                pull_due,
                thickness_mm,
            }
        });
    }
    if let Some(mm) = anode.as_ref().and_then(|a| a.thickness_mm)
        && p.anode_kind == AnodeKind::Soluble
        && mm < p.thin_anode_mm
    {
        warn(
            "thin_anode",
            format!("anodes about {mm:.1} mm thick, under the {} mm limit: risk of anodes dropping off their lugs", p.thin_anode_mm),
        );
    }
    let cathodes = Cathodes { count: p.cathodes_per_cell, anodes: p.anodes_per_cell, efficiency: eta_c };
    let mut cathode = None;
    if let Some(started_at) = input.crop_started {
        let q = cell_charge(curve, &input.cutouts, started_at, as_of)?;
        if p.anode_kind == AnodeKind::Inert || charge.is_none() {
            charge = Some(q);
        }
        let due = cell_time_reaching(curve, &input.cutouts, started_at, cathodes.charge_to_mean_ah(p.cathode_target_kg))?;
        cathode = Some(CathodeForecast {
            started_at,
            mass_kg: cathodes.mean_kg(q.total()),
            inner_mass_kg: cathodes.inner_kg(q.total()),
            charge_ah: q.total(),
            harvest_due: due,
        });
    }
    if let Some(eff) = input.last_crop_efficiency
        && eff < p.low_efficiency_below
    {
        warn(
            "low_efficiency",
            format!(
                "last crop plated at {:.1} % current efficiency, under {:.0} %: look for shorts or bad contacts",
                eff * 100.0,
                p.low_efficiency_below * 100.0
            ),
        );
    }
    if let Some((t, v)) = input.last_voltage
        && (v < p.voltage_min || v > p.voltage_max)
    {
        let why = if p.anode_kind == AnodeKind::Inert && v < p.voltage_min {
            format!(
                "below the {:.2} V an inert-anode cell runs at (its floor is {INERT_ANODE_MIN_VOLTS:.2} V, E°(O₂/H₂O) − E°(Cu²⁺/Cu)): a short or a bad reading",
                p.voltage_min
            )
        } else {
            format!("outside the plausible {}–{} V", p.voltage_min, p.voltage_max)
        };
        warnings.push(Warning {
            code: "voltage_range",
            message: format!("cell voltage {v} V {why}"),
            cell: Some(input.cell.clone()),
            circuit: None,
            from: Some(t),
            to: None,
        });
    }
    let charge = charge.unwrap_or_default();
    Ok(CellForecast {
        cell: input.cell.clone(),
        circuit: input.circuit.clone(),
        section: input.section.clone(),
        in_circuit,
        cut_out_since,
        anode_kind: p.anode_kind,
        anode,
        cathode,
        cathode_efficiency: eta_c,
        last_crop_efficiency: input.last_crop_efficiency,
        charge_ah: charge.total(),
        estimated_ah: charge.estimated,
        // only from a reading that passed the check: an implausible one gives no figure
        energy_kwh_per_t: input
            .last_voltage
            .filter(|(_, v)| *v >= p.voltage_min && *v <= p.voltage_max)
            .map(|(_, v)| specific_energy_kwh_per_kg(v, eta_c) * 1000.0),
        shorts: input.shorts.map(|(n, _)| n),
        warnings,
    })
}

/// The whole plant's forecast.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Forecast {
    pub schema: u32,
    pub as_of: Time,
    pub cells: Vec<CellForecast>,
    pub warnings: Vec<Warning>,
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::domain::charge::{MemoryCurve, RawReading};
    use chrono::{Duration, TimeZone, Utc};

    fn t0() -> Time {
        Utc.with_ymd_and_hms(2026, 3, 1, 0, 0, 0).unwrap()
    }

    /// DOMAIN.md plant check (derived): 50 × 380 kg anodes, 51 cathodes, 30 kA, η_c 0.96.
    #[test]
    fn plant_check_due_times() {
        let readings: Vec<RawReading> = (0..=24).map(|h| RawReading { t: t0() + Duration::hours(h), amps: 30_000.0 }).collect();
        let curve = MemoryCurve::build(&readings, &[], &[], t0() + Duration::hours(24));
        let input = CellInput {
            cell: "A01".into(),
            circuit: "C1".into(),
            section: "A".into(),
            params: CellParams::default(),
            load: Some((t0(), 50, 380.0)),
            crop_started: Some(t0()),
            cutouts: vec![],
            last_crop_efficiency: Some(0.85),
            last_voltage: Some((t0(), 0.30)),
            shorts: None,
        };
        let f = forecast_cell(&input, &curve, t0() + Duration::hours(24)).unwrap();
        let c = f.cathode.as_ref().unwrap();
        // 179.25 h to a 120 kg mean (DOMAIN.md, derived)
        let h = (c.harvest_due.unwrap() - t0()).num_seconds() as f64 / 3600.0;
        assert!((h - 179.25).abs() < 0.01, "{h}");
        // 15 % scrap after 451.8 h (DOMAIN.md, derived)
        let h = (f.anode.as_ref().unwrap().pull_due.unwrap() - t0()).num_seconds() as f64 / 3600.0;
        assert!((h - 451.8).abs() < 0.05, "{h}");
        // 819 kg/day of copper over 51 cathodes (DOMAIN.md, derived)
        assert!((c.mass_kg * 51.0 - 819.0).abs() < 0.5);
        // 0.30 V at 96 % → 263.6 kWh/t (DOMAIN.md, derived)
        assert!((f.energy_kwh_per_t.unwrap() - 263.6).abs() < 0.05);
        assert!(f.warnings.iter().any(|w| w.code == "low_efficiency"));
        assert!(f.in_circuit);
        assert!(f.anode.as_ref().unwrap().thickness_mm.is_some());
    }

    #[test]
    fn inert_anode_cells_have_no_thickness_and_no_energy_from_a_bad_reading() {
        let readings: Vec<RawReading> = (0..=24).map(|h| RawReading { t: t0() + Duration::hours(h), amps: 30_000.0 }).collect();
        let curve = MemoryCurve::build(&readings, &[], &[], t0() + Duration::hours(24));
        let mut params = CellParams { anode_kind: AnodeKind::Inert, ..CellParams::default() };
        params.voltage_min = crate::domain::layout::INERT_CELL_VOLTS.0;
        params.voltage_max = crate::domain::layout::INERT_CELL_VOLTS.1;
        let mut input = CellInput {
            cell: "L1".into(),
            circuit: "C1".into(),
            section: "L".into(),
            params,
            load: Some((t0(), 50, 90.0)),
            crop_started: Some(t0()),
            cutouts: vec![],
            last_crop_efficiency: None,
            last_voltage: Some((t0(), 0.95)),
            shorts: None,
        };
        let f = forecast_cell(&input, &curve, t0() + Duration::hours(24)).unwrap();
        assert_eq!(f.anode.as_ref().unwrap().thickness_mm, None, "a lead anode has no copper thickness");
        assert_eq!(f.energy_kwh_per_t, None, "0.95 V failed the check: no energy from it");
        assert!(f.warnings.iter().any(|w| w.code == "voltage_range"));
        input.last_voltage = Some((t0(), 2.0));
        let f = forecast_cell(&input, &curve, t0() + Duration::hours(24)).unwrap();
        // 2.0 V at 96 %: 2.0 / (1.18549 g/(A·h) × 0.96) = 1757.4 kWh/t (ECE from CODATA/IUPAC, DOMAIN.md)
        assert!((f.energy_kwh_per_t.unwrap() - 1757.4).abs() < 0.1, "{:?}", f.energy_kwh_per_t);
        assert!(!f.warnings.iter().any(|w| w.code == "voltage_range"));
    }
}
