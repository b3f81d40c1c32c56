//! Every cell as of a given time: what is left of its anodes, what its cathodes
//! hold, when each is due, and what in its data deserves a second look.

use serde::Serialize;
use std::cell::RefCell;

use super::anode::{AnodeLoad, body_thickness_mm};
use super::cathode::Cathodes;
use super::charge::{Cum, Curve, OpenSpan, Time, cell_charge, in_circuit};
use super::electrochem::{INERT_ANODE_MIN_VOLTS, specific_energy_kwh_per_kg};
use super::layout::{AnodeKind, CellParams};
use super::learn::{CellLearnt, Source};

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

/// One cell as of a time: what the forecast, the plan and the patrol all
/// start from (filled in one place, `plant`'s cell snapshot).
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
    /// The cathode efficiency and anode factor learnt from the cell's weighings
    /// (the layout's where nothing is learnt): what every figure below uses.
    pub learnt: CellLearnt,
    /// Recent weighings left out of learning, and why (sentences for the warnings).
    pub left_out: Vec<String>,
}

/// The first instant any charge of a cell is counted from, by the forecast and
/// the plan alike: the running load's set or the running crop's start, whichever
/// is earlier; for an inert-anode cell with a crop, the crop's start (its
/// load's charge is never counted). `None`: no charge is counted.
pub fn charges_from(load_set: Option<Time>, crop_started: Option<Time>, inert: bool) -> Option<Time> {
    match (load_set, crop_started) {
        (_, Some(c)) if inert => Some(c),
        (l, c) => l.into_iter().chain(c).min(),
    }
}

impl CellInput {
    /// [`charges_from`] for this cell.
    pub fn charges_from(&self) -> Option<Time> {
        charges_from(self.load.map(|l| l.0), self.crop_started, self.params.anode_kind == AnodeKind::Inert)
    }

    /// The cell's cathodes at its learnt efficiency.
    pub fn cathodes(&self) -> Cathodes {
        Cathodes { count: self.params.cathodes_per_cell, anodes: self.params.anodes_per_cell, efficiency: self.learnt.cathode.value }
    }

    /// A load of `count` anodes of `initial_kg` each in this cell, dissolving at its learnt anode factor.
    pub fn anode_load(&self, count: u32, initial_kg: f64) -> AnodeLoad {
        let p = &self.params;
        AnodeLoad { initial_kg, count, efficiency: self.learnt.anode.value, copper_fraction: p.anode_copper_fraction, lug_kg: p.lug_kg }
    }
}

/// The 90 % interval of a due time, from the learnt value's standard error and
/// one weighing's scatter (the crop or load being forecast scatters like the past ones).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DueWindow {
    pub early: Time,
    pub late: Time,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AnodeForecast {
    pub set_at: Time,
    pub count: u32,
    pub initial_kg: f64,
    pub remaining_kg: f64,
    pub remaining_fraction: f64,
    pub pull_due: Option<Time>,
    /// 90 % interval of `pull_due` (none for inert anodes or without a due time).
    pub pull_window: Option<DueWindow>,
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
    /// When the crop is due: the plan's crop time ([`crop_target`]), or the
    /// anodes' `pull_due` when it would be due only after they are pulled.
    pub harvest_due: Option<Time>,
    /// 90 % interval of `harvest_due` (of the learnt cathode efficiency at target
    /// mass, of the learnt anode factor for a part of the anode life).
    pub harvest_window: Option<DueWindow>,
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
    /// The cathode current efficiency used: learnt (see `cathode_efficiency_source`).
    pub cathode_efficiency: f64,
    pub cathode_efficiency_source: Source,
    pub cathode_efficiency_se: f64,
    /// Weighed crops the efficiency is learnt from.
    pub crops_learnt: u32,
    /// Anode consumption factor used (the anode current efficiency, learnt from scrap weighings).
    pub anode_factor: f64,
    pub anode_factor_source: Source,
    pub anode_factor_se: f64,
    /// Scrap weighings the factor is learnt from.
    pub scrap_learnt: u32,
    pub last_crop_efficiency: Option<f64>,
    /// Charge since the anode set (since the crop began for inert cells), including `estimated_ah`.
    pub charge_ah: f64,
    /// The part of `charge_ah` estimated after the circuit's last reading.
    pub estimated_ah: f64,
    /// Cell DC energy per tonne of cathode copper, at the last voltage and the learnt efficiency.
    pub energy_kwh_per_t: Option<f64>,
    pub shorts: Option<u32>,
    pub warnings: Vec<Warning>,
}

/// Forecasts one cell on its circuit's curve.
pub fn forecast_cell<C: Curve>(input: &CellInput, curve: &C, as_of: Time) -> Result<CellForecast, C::Error> {
    // the charges and due times below walk the same cut-out boundaries: look each up once
    let curve = &Memo { curve, seen: RefCell::new(Vec::new()) };
    let p = &input.params;
    let cut_out_since = input.cutouts.iter().find(|c| c.from <= as_of && c.to.is_none_or(|to| to > as_of)).map(|c| c.from);
    let in_circuit = cut_out_since.is_none();
    let mut warnings = Vec::new();
    let mut warn = |code, message: String| {
        warnings.push(Warning { code, message, cell: Some(input.cell.clone()), circuit: None, from: None, to: None });
    };
    let learnt = &input.learnt;
    let eta_c = learnt.cathode.value;
    let mut charge = None;
    let mut anode = None;
    if let Some((set_at, count, initial_kg)) = input.load {
        // an inert cell's charge is its crop's when it has one (below): its load's is not counted
        let q = if p.anode_kind == AnodeKind::Inert && input.crop_started.is_some() {
            Cum::default()
        } else {
            let q = cell_charge(curve, &input.cutouts, set_at, as_of)?;
            charge = Some(q);
            q
        };
        let load = input.anode_load(count, initial_kg);
        anode = Some(if p.anode_kind == AnodeKind::Inert {
            AnodeForecast {
                set_at,
                count,
                initial_kg,
                remaining_kg: initial_kg,
                remaining_fraction: 1.0,
                pull_due: None,
                pull_window: None,
                thickness_mm: None,
            }
        } else {
            let remaining_kg = load.remaining_kg(q.total());
            let thickness_mm = Some(body_thickness_mm(remaining_kg, p.lug_kg, p.face_area_m2));
            // the due time and its window's ends in one walk along the curve:
            // a faster-dissolving anode (the interval's high end) reaches the target first
            let (lo, hi) = learnt.anode.interval90();
            let to_target = |eff: f64| (AnodeLoad { efficiency: eff.max(0.05), ..load }).charge_to_fraction_ah(p.scrap_target);
            let [pull_due, early, late] = match load.charge_to_fraction_ah(p.scrap_target) {
                Some(target) => times_reaching(curve, &input.cutouts, set_at, [Some(target), to_target(hi), to_target(lo)])?,
                None => [None; 3],
            };
            let pull_window = pull_due.and(window(early, late));
            AnodeForecast {
                set_at,
                count,
                initial_kg,
                remaining_kg,
                remaining_fraction: load.remaining_fraction(q.total()),
                pull_due,
                pull_window,
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
    let cathodes = input.cathodes();
    let mut cathode = None;
    if let Some(started_at) = input.crop_started {
        let q = cell_charge(curve, &input.cutouts, started_at, as_of)?;
        if p.anode_kind == AnodeKind::Inert || charge.is_none() {
            charge = Some(q);
        }
        // the plan's crop time (one rule for both), its window's ends at the
        // ends of the learnt value it depends on: a higher efficiency (or a
        // faster-dissolving anode) reaches the target first
        let soluble = input.load.filter(|_| p.anode_kind == AnodeKind::Soluble).map(|(set_at, n, kg)| (set_at, input.anode_load(n, kg)));
        let target = crop_target(curve, input, soluble.as_ref().map(|(t, l)| (*t, l)), started_at, None)?;
        let ends = match target.due {
            CropDue::TargetMass { .. } => {
                let (lo, hi) = learnt.cathode.interval90();
                let at = |eff: f64| target.due.at(p, &Cathodes { efficiency: eff.clamp(0.05, 1.0), ..cathodes }, None);
                [at(hi), at(lo)]
            }
            CropDue::LifePart { .. } => {
                let (lo, hi) = learnt.anode.interval90();
                let at = |eff: f64| {
                    soluble.as_ref().and_then(|(_, l)| target.due.at(p, &cathodes, Some(&AnodeLoad { efficiency: eff.max(0.05), ..*l })))
                };
                [at(hi), at(lo)]
            }
        };
        let [mut due, early, late] = times_reaching(curve, &input.cutouts, target.from, [Some(target.due.ah()), ends[0], ends[1]])?;
        let mut harvest_window = due.and(window(early, late));
        // a crop due only after the anodes are pulled goes with them (as the plan pulls it)
        if let Some(a) = anode.as_ref()
            && let Some(pull) = a.pull_due
            && due.is_none_or(|t| t >= pull)
        {
            due = Some(pull);
            harvest_window = a.pull_window;
        }
        cathode = Some(CathodeForecast {
            started_at,
            mass_kg: cathodes.mean_kg(q.total()),
            inner_mass_kg: cathodes.inner_kg(q.total()),
            charge_ah: q.total(),
            harvest_due: due,
            harvest_window,
        });
    }
    if learnt.cathode.source == Source::Cell && learnt.cathode.value < p.low_efficiency_below {
        warn(
            "low_efficiency",
            format!(
                "current efficiency learnt at {:.1} % ± {:.1} from {} crops, under {:.0} %: look for shorts or bad contacts",
                learnt.cathode.value * 100.0,
                learnt.cathode.se * 100.0,
                learnt.cathode.learnt,
                p.low_efficiency_below * 100.0
            ),
        );
    } else if let Some(eff) = input.last_crop_efficiency
        && learnt.cathode.source != Source::Cell
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
    for why in &input.left_out {
        warn("weighing_not_learnt", why.clone());
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
        cathode_efficiency_source: learnt.cathode.source,
        cathode_efficiency_se: learnt.cathode.se,
        crops_learnt: learnt.cathode.learnt,
        anode_factor: learnt.anode.value,
        anode_factor_source: learnt.anode.source,
        anode_factor_se: learnt.anode.se,
        scrap_learnt: learnt.anode.learnt,
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

/// When a crop is due, as a charge on the cell's curve: the one rule the
/// forecast's `harvest_due` and the plan's crops share (see [`crop_target`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum CropDue {
    /// The mean cathode mass reaches `cathode_target_kg`: `ah` after the crop began.
    TargetMass { ah: f64 },
    /// The `i`-th of `k` equal parts of the anode life's charge (set to
    /// `scrap_target`), `ah` after the anode set; the `k`-th is the anode change itself.
    LifePart { i: u32, k: u32, ah: f64 },
}

impl CropDue {
    /// The charge, from [`CropTarget::from`], at which the crop is due.
    pub fn ah(&self) -> f64 {
        match *self {
            CropDue::TargetMass { ah } | CropDue::LifePart { ah, .. } => ah,
        }
    }

    /// The same crop's due charge with other cathodes or another anode load
    /// (the ends of its window: the same part of the life, at another anode factor).
    pub fn at(&self, p: &CellParams, cathodes: &Cathodes, load: Option<&AnodeLoad>) -> Option<f64> {
        match *self {
            CropDue::TargetMass { .. } => Some(cathodes.charge_to_mean_ah(p.cathode_target_kg)),
            CropDue::LifePart { i, k, .. } => load.and_then(|l| l.charge_to_fraction_ah(p.scrap_target)).map(|life| life_part(life, i, k)),
        }
    }
}

/// `i` of `k` equal parts of the life's charge (the `k`-th exactly the life's, so it
/// falls on the anode change's own crossing).
fn life_part(life: f64, i: u32, k: u32) -> f64 {
    if i >= k { life } else { life / f64::from(k) * f64::from(i) }
}

/// A crop's due charge and the instant it is counted from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CropTarget {
    pub due: CropDue,
    /// The crop's start (target mass) or the anode set (parts of the anode life).
    pub from: Time,
}

/// When the crop begun at `crop_from` is due, for the forecast and the plan
/// alike: with `crops_per_anode_cycle` = k set (and a soluble `load` set at its
/// time), at the first of the k equal parts of the anode life's charge at
/// least half a crop after the crop began (the k-th is the anode change);
/// otherwise when the mean cathode mass reaches `cathode_target_kg`.
/// `since_set`: the charge from the set to `crop_from`, when the caller knows it.
pub fn crop_target<C: Curve>(
    curve: &C,
    cell: &CellInput,
    load: Option<(Time, &AnodeLoad)>,
    crop_from: Time,
    since_set: Option<f64>,
) -> Result<CropTarget, C::Error> {
    let p = &cell.params;
    let split = match (p.crops_per_anode_cycle, load) {
        (Some(k), Some((set_at, l))) if k > 0 => l.charge_to_fraction_ah(p.scrap_target).map(|life| (k, life, set_at)),
        _ => None,
    };
    let Some((k, life, set_at)) = split else {
        let ah = cell.cathodes().charge_to_mean_ah(p.cathode_target_kg);
        return Ok(CropTarget { due: CropDue::TargetMass { ah }, from: crop_from });
    };
    let q0 = match since_set {
        Some(q) => q,
        None if crop_from >= set_at => cell_charge(curve, &cell.cutouts, set_at, crop_from)?.total(),
        None => -cell_charge(curve, &cell.cutouts, crop_from, set_at)?.total(),
    };
    let part = life / f64::from(k);
    let i = ((q0 / part + 0.5).ceil().max(1.0).min(f64::from(k))) as u32;
    Ok(CropTarget { due: CropDue::LifePart { i, k, ah: life_part(life, i, k) }, from: set_at })
}

/// A curve that remembers the instants it was asked about (one cell's forecast
/// asks for the same set, crop and cut-out times several times).
struct Memo<'c, C: Curve> {
    curve: &'c C,
    seen: RefCell<Vec<(Time, Cum)>>,
}

impl<C: Curve> Curve for Memo<'_, C> {
    type Error = C::Error;
    fn cum_at(&self, t: Time) -> Result<Cum, C::Error> {
        if let Some((_, c)) = self.seen.borrow().iter().find(|(x, _)| *x == t) {
            return Ok(*c);
        }
        let c = self.curve.cum_at(t)?;
        self.seen.borrow_mut().push((t, c));
        Ok(c)
    }
    fn time_at(&self, total: f64) -> Result<Option<Time>, C::Error> {
        self.curve.time_at(total)
    }
}

/// [`crate::domain::charge::cell_time_reaching`] for several targets (`None`: no target) in one walk
/// along the cell's in-circuit stretches, with the same arithmetic, so each
/// answer is the one `cell_time_reaching` gives (the forecast's hot path).
fn times_reaching<C: Curve, const N: usize>(
    curve: &C,
    cutouts: &[OpenSpan],
    a: Time,
    targets: [Option<f64>; N],
) -> Result<[Option<Time>; N], C::Error> {
    let mut out = [None; N];
    let mut left: Vec<usize> = Vec::with_capacity(N);
    for (i, t) in targets.iter().enumerate() {
        match t {
            Some(t) if *t <= 0.0 => out[i] = Some(a),
            Some(_) => left.push(i),
            None => {}
        }
    }
    let mut acc = 0.0;
    for (x, y) in in_circuit(a, None, cutouts) {
        if left.is_empty() {
            break;
        }
        let cx = curve.cum_at(x)?.total();
        let got = match y {
            Some(y) => curve.cum_at(y)?.total() - cx,
            None => f64::INFINITY,
        };
        let mut still = Vec::with_capacity(left.len());
        for i in left {
            let target = targets[i].unwrap_or(f64::INFINITY);
            if acc + got >= target {
                out[i] = curve.time_at(cx + (target - acc))?.map(|t| t.max(x));
            } else {
                still.push(i);
            }
        }
        left = still;
        acc += got;
    }
    Ok(out)
}

/// The window between two due times, if both are in sight (`None` otherwise).
fn window(early: Option<Time>, late: Option<Time>) -> Option<DueWindow> {
    match (early, late) {
        (Some(early), Some(late)) => Some(DueWindow { early: early.min(late), late: early.max(late) }),
        _ => None,
    }
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

    #[test]
    fn one_walk_gives_what_cell_time_reaching_gives() {
        use crate::domain::charge::cell_time_reaching;
        let readings: Vec<RawReading> =
            (0..=48).map(|h| RawReading { t: t0() + Duration::hours(h), amps: 1000.0 + 10.0 * h as f64 }).collect();
        let curve = MemoryCurve::build(&readings, &[], &[], t0() + Duration::hours(48));
        let cuts = [
            OpenSpan { from: t0() + Duration::hours(5), to: Some(t0() + Duration::hours(7)) },
            OpenSpan { from: t0() + Duration::hours(20), to: Some(t0() + Duration::minutes(1290)) },
        ];
        let targets = [Some(3_000.0), None, Some(0.0), Some(30_000.0), Some(1e12)];
        let got = times_reaching(&curve, &cuts, t0(), targets).unwrap();
        for (t, g) in targets.iter().zip(got) {
            let want = match t {
                Some(t) => cell_time_reaching(&curve, &cuts, t0(), *t).unwrap(),
                None => None,
            };
            assert_eq!(g, want, "{t:?}");
        }
        assert!(got[0].is_some() && got[3].is_some());
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
            learnt: CellLearnt::layout(&CellParams::default()),
            left_out: Vec::new(),
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
            params: params.clone(),
            load: Some((t0(), 50, 90.0)),
            crop_started: Some(t0()),
            cutouts: vec![],
            last_crop_efficiency: None,
            last_voltage: Some((t0(), 0.95)),
            shorts: None,
            learnt: CellLearnt::layout(&params),
            left_out: Vec::new(),
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
