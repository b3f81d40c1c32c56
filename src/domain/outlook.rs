//! What a forecast means for the shift: each cell's states (due, overdue, thin,
//! low efficiency, cut out, data warning) and the trajectory of its charge and anodes.

use serde::Serialize;

use super::anode::AnodeLoad;
use super::charge::{Curve, OpenSpan, Time, cell_charge};
use super::forecast::CellForecast;
use super::layout::{AnodeKind, CellParams};

/// The states a cell can be in at shift end, in the order they matter most.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CellState {
    /// Cut out of circuit.
    CutOut,
    /// Anodes thinner than the layout's limit: risk of anodes dropping.
    ThinAnode,
    /// Harvest due time already passed.
    HarvestOverdue,
    /// Anodes due (or overdue) for change by the end of this production day.
    AnodesDue,
    /// Harvest due by the end of this production day.
    HarvestDue,
    /// The patrol suspects a short: the voltage well below the section's, with its efficiency and shorts.
    SuspectedShort,
    /// The cell's learnt current efficiency was below the layout's floor.
    LowEfficiency,
    /// A data warning (voltage out of range and the like).
    DataWarning,
}

impl CellState {
    pub const ALL: [CellState; 8] = [
        CellState::CutOut,
        CellState::ThinAnode,
        CellState::HarvestOverdue,
        CellState::AnodesDue,
        CellState::HarvestDue,
        CellState::SuspectedShort,
        CellState::LowEfficiency,
        CellState::DataWarning,
    ];

    /// What the state means, for a legend.
    pub fn meaning(self) -> &'static str {
        match self {
            CellState::CutOut => "cut out of circuit",
            CellState::ThinAnode => "anodes thin: risk of drops",
            CellState::HarvestOverdue => "harvest overdue",
            CellState::AnodesDue => "new anodes due today",
            CellState::HarvestDue => "harvest due today",
            CellState::SuspectedShort => "suspected short: patrol it",
            CellState::LowEfficiency => "low current efficiency",
            CellState::DataWarning => "data warning",
        }
    }
}

/// The states of a cell as of `as_of`, most pressing first; `day_end` is the
/// end of the current production day.
pub fn states(c: &CellForecast, as_of: Time, day_end: Time) -> Vec<CellState> {
    let mut v = Vec::new();
    if !c.in_circuit {
        v.push(CellState::CutOut);
    }
    let has = |code: &str| c.warnings.iter().any(|w| w.code == code);
    if has("thin_anode") {
        v.push(CellState::ThinAnode);
    }
    let harvest = c.cathode.as_ref().and_then(|k| k.harvest_due);
    if harvest.is_some_and(|t| t <= as_of) {
        v.push(CellState::HarvestOverdue);
    }
    if c.anode.as_ref().and_then(|a| a.pull_due).is_some_and(|t| t < day_end) {
        v.push(CellState::AnodesDue);
    }
    if harvest.is_some_and(|t| t > as_of && t < day_end) {
        v.push(CellState::HarvestDue);
    }
    if has("suspected_short") {
        v.push(CellState::SuspectedShort);
    }
    if has("low_efficiency") {
        v.push(CellState::LowEfficiency);
    }
    if c.warnings.iter().any(|w| !matches!(w.code, "thin_anode" | "low_efficiency" | "suspected_short")) {
        v.push(CellState::DataWarning);
    }
    v
}

/// Samples of a cell's charge since its anode set (or crop start) and its
/// anodes' remaining mass, measured up to the last reading and projected beyond.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Trajectory {
    /// (time, cell charge in A·h since `from`)
    pub charge: Vec<(Time, f64)>,
    /// (time, remaining kg per anode); empty for inert cells or without anodes
    pub anode_kg: Vec<(Time, f64)>,
    pub from: Time,
    pub until: Time,
}

/// Samples the cell's trajectory from `from` to `until` in `steps` equal steps.
pub fn trajectory<C: Curve>(
    curve: &C,
    cutouts: &[OpenSpan],
    params: &CellParams,
    load: Option<(Time, u32, f64)>,
    from: Time,
    until: Time,
    steps: usize,
) -> Result<Trajectory, C::Error> {
    let steps = steps.max(1);
    let span = (until - from).num_seconds().max(1);
    let mut charge = Vec::with_capacity(steps + 1);
    let mut anode_kg = Vec::new();
    for i in 0..=steps {
        let t = from + chrono::Duration::seconds(span * i as i64 / steps as i64);
        let q = cell_charge(curve, cutouts, from, t)?.total();
        charge.push((t, q));
        if let (Some((set_at, count, kg)), AnodeKind::Soluble) = (load, params.anode_kind) {
            let a = AnodeLoad {
                initial_kg: kg,
                count,
                efficiency: params.anode_efficiency,
                copper_fraction: params.anode_copper_fraction,
                lug_kg: params.lug_kg,
            };
            let q_load = cell_charge(curve, cutouts, set_at, t)?.total();
            anode_kg.push((t, a.remaining_kg(q_load)));
        }
    }
    Ok(Trajectory { charge, anode_kg, from, until })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::domain::charge::{MemoryCurve, RawReading};
    use crate::domain::forecast::{CellInput, forecast_cell};
    use chrono::{Duration, TimeZone, Utc};

    fn t0() -> Time {
        Utc.with_ymd_and_hms(2026, 3, 1, 0, 0, 0).unwrap()
    }

    fn input(load_h: i64, crop_h: i64) -> (CellInput, MemoryCurve) {
        let rs: Vec<RawReading> = (0..=600).map(|h| RawReading { t: t0() + Duration::hours(h), amps: 30_000.0 }).collect();
        let curve = MemoryCurve::build(&rs, &[], &[], t0() + Duration::hours(600));
        let i = CellInput {
            cell: "A01".into(),
            circuit: "C1".into(),
            section: "A".into(),
            params: CellParams::default(),
            load: Some((t0() + Duration::hours(load_h), 50, 380.0)),
            crop_started: Some(t0() + Duration::hours(crop_h)),
            cutouts: vec![],
            last_crop_efficiency: None,
            last_voltage: None,
            shorts: None,
            learnt: crate::domain::learn::CellLearnt::layout(&CellParams::default()),
            left_out: Vec::new(),
        };
        (i, curve)
    }

    #[test]
    fn states_follow_the_due_times() {
        // plant check (DOMAIN.md, derived): 179.25 h to harvest, 451.8 h to 15 % scrap
        let (i, c) = input(0, 0);
        let as_of = t0() + Duration::hours(170);
        let f = forecast_cell(&i, &c, as_of).unwrap();
        assert_eq!(states(&f, as_of, as_of + Duration::hours(6)), vec![]);
        assert_eq!(states(&f, as_of, as_of + Duration::hours(10)), vec![CellState::HarvestDue]);
        let late = t0() + Duration::hours(452);
        let f = forecast_cell(&i, &c, late).unwrap();
        let s = states(&f, late, late + Duration::hours(1));
        assert!(s.contains(&CellState::HarvestOverdue) && s.contains(&CellState::AnodesDue), "{s:?}");
    }

    #[test]
    fn trajectory_reaches_the_scrap_target_at_the_pull_due_time() {
        let (i, c) = input(0, 0);
        let tr = trajectory(&c, &[], &i.params, i.load, t0(), t0() + Duration::minutes(27_108), 4).unwrap();
        // 451.8 h = 27 108 min to 15 % of 380 kg = 57 kg (DOMAIN.md, derived)
        let (_, last) = tr.anode_kg.last().copied().unwrap();
        assert!((last - 57.0).abs() < 0.1, "{last}");
        assert!(tr.charge.windows(2).all(|w| w[1].1 >= w[0].1));
    }
}
