//! Each cell's outlook before levelling: its anode cycles' change windows and
//! the crops due between them, found on its circuit's curve.

use crate::domain::anode::AnodeLoad;
use crate::domain::charge::{Curve, OpenSpan, Time, cell_time_reaching};
use crate::domain::forecast::{CellInput, CropDue, crop_target};
use crate::domain::layout::AnodeKind;

use super::calendar::{BEYOND_HORIZON_DAYS, Calendar};

/// When a change is due, on the days of the plan.
#[derive(Debug, Clone, PartialEq)]
pub struct ChangeDue {
    /// The remaining fraction reaches `scrap_upper` (the window opens).
    pub upper_at: Option<Time>,
    /// It reaches `scrap_target` (the ideal change).
    pub target_at: Time,
    /// It reaches `scrap_lower` (the window closes); `None`: not in sight.
    pub lower_at: Option<Time>,
    /// Day indices of the window as planned: an overdue change opens on day 0
    /// and prefers it; `latest` is clipped `BEYOND_HORIZON_DAYS` past the horizon.
    pub earliest: i64,
    pub ideal: i64,
    pub latest: i64,
    /// The ideal time had already passed when the plan begins.
    pub overdue: bool,
    /// Where the change is assumed done before it is levelled: the ideal
    /// time, or the start of the plan when overdue ([`outlook()`], and the
    /// cycles after a change the plan could not place).
    pub assumed_at: Time,
}

/// A crop due for harvest before the anode change that ends its cycle.
#[derive(Debug, Clone, PartialEq)]
pub struct HarvestDue {
    pub crop_from: Time,
    /// The forecast's `harvest_due` for the crop (the same crossing).
    pub due_at: Time,
    /// Day index of the due time (0 when due before the plan starts).
    pub day: i64,
    /// The due time has passed (as the forecast says).
    pub overdue: bool,
    /// Due before the plan starts (overdue, or the plan starts on a later day): planned from the first day.
    pub before_start: bool,
    /// Where the crop is assumed pulled (the next one starts then).
    pub assumed_at: Time,
}

/// One anode load of a cell in the plan's view (inert cells have one, with no load).
#[derive(Debug, Clone, PartialEq)]
pub struct Cycle {
    pub set_at: Time,
    pub load: Option<AnodeLoad>,
    pub change: Option<ChangeDue>,
    pub harvests: Vec<HarvestDue>,
    /// When the crop that the anode change pulls began (`None`: no crop).
    pub last_crop_from: Option<Time>,
}

/// A cell's cycles over the horizon.
#[derive(Debug, Clone, PartialEq)]
pub struct Outlook {
    pub cycles: Vec<Cycle>,
    /// The cell is in a cut-out with no end: nothing can be predicted for it.
    pub out_of_circuit: bool,
}

/// Time at which the cell's charge since `from` reaches the charge that takes
/// `load` down to `fraction`; `None` if never (or not in sight).
fn reaching<C: Curve>(curve: &C, cutouts: &[OpenSpan], from: Time, load: &AnodeLoad, fraction: f64) -> Result<Option<Time>, C::Error> {
    match load.charge_to_fraction_ah(fraction) {
        Some(q) => cell_time_reaching(curve, cutouts, from, q),
        None => Ok(None),
    }
}

pub(super) fn change_due<C: Curve>(
    curve: &C,
    cell: &CellInput,
    set_at: Time,
    load: &AnodeLoad,
    cal: &Calendar,
    now: Time,
) -> Result<Option<ChangeDue>, C::Error> {
    let p = &cell.params;
    let Some(target_at) = reaching(curve, &cell.cutouts, set_at, load, p.scrap_target)? else {
        return Ok(None);
    };
    let upper_at = reaching(curve, &cell.cutouts, set_at, load, p.scrap_upper)?;
    let lower_at = reaching(curve, &cell.cutouts, set_at, load, p.scrap_lower)?;
    let start = cal.start(0).max(now);
    let overdue = target_at < start;
    let far = cal.len() as i64 + BEYOND_HORIZON_DAYS;
    let (earliest, ideal) = if overdue { (0, 0) } else { (cal.index(upper_at.unwrap_or(target_at)).max(0), cal.index(target_at).min(far)) };
    let latest = lower_at.map_or(far, |t| cal.index(t)).clamp(ideal, far);
    Ok(Some(ChangeDue {
        upper_at,
        target_at,
        lower_at,
        earliest: earliest.min(ideal),
        ideal,
        latest,
        overdue,
        assumed_at: if overdue { start } else { target_at },
    }))
}

/// The crops due from `crop_from` until the cycle's change (a crop due at or
/// after the change's ideal time goes with it) or the end of the horizon, each
/// at the time [`crop_target`](crate::domain::forecast::crop_target) gives the forecast too; returns them and when the
/// crop that the change pulls begins.
#[allow(clippy::too_many_arguments)]
pub(super) fn crops<C: Curve>(
    curve: &C,
    cell: &CellInput,
    crop_from: Time,
    set_at: Time,
    load: Option<&AnodeLoad>,
    change: Option<&ChangeDue>,
    cal: &Calendar,
    now: Time,
) -> Result<(Vec<HarvestDue>, Time), C::Error> {
    let n = cal.len() as i64;
    let start = cal.start(0).max(now);
    let mut out = Vec::new();
    let mut from = crop_from;
    // the charge from the set to `from`, known when the crop before was pulled on its part of the life
    let mut since_set = None;
    // at most one crop a day: a bound on the loop whatever the current
    for _ in 0..=cal.len() {
        let target = crop_target(curve, cell, load.map(|l| (set_at, l)), from, since_set)?;
        if matches!(target.due, CropDue::LifePart { i, k, .. } if i >= k) {
            break; // the last part of the life is the anode change's own crop
        }
        let Some(due_at) = cell_time_reaching(curve, &cell.cutouts, target.from, target.due.ah())? else { break };
        if change.is_some_and(|c| due_at >= c.target_at) || cal.index(due_at) >= n {
            break;
        }
        let before_start = due_at < start;
        let assumed_at = if before_start { start } else { due_at };
        out.push(HarvestDue { crop_from: from, due_at, day: cal.index(due_at).max(0), overdue: due_at <= now, before_start, assumed_at });
        since_set = match target.due {
            CropDue::LifePart { ah, .. } if !before_start => Some(ah),
            _ => None,
        };
        from = assumed_at;
    }
    Ok((out, from))
}

/// One anode load's cycle from `set_at`: its change window and the crops before it.
pub(super) fn cycle<C: Curve>(
    curve: &C,
    cell: &CellInput,
    set_at: Time,
    load: AnodeLoad,
    crop: Option<Time>,
    cal: &Calendar,
    now: Time,
) -> Result<Cycle, C::Error> {
    let change = change_due(curve, cell, set_at, &load, cal, now)?;
    let (harvests, last_crop_from) = match crop {
        Some(c0) => {
            let (h, last) = crops(curve, cell, c0, set_at, Some(&load), change.as_ref(), cal, now)?;
            (h, Some(last))
        }
        None => (Vec::new(), None),
    };
    Ok(Cycle { set_at, load: Some(load), change, harvests, last_crop_from })
}

/// The cycle of the load that a change made at `at` sets: `anodes_per_cell`
/// new anodes of `new_anode_kg` each, its first crop starting then too.
pub(super) fn next_cycle<C: Curve>(curve: &C, cell: &CellInput, at: Time, cal: &Calendar, now: Time) -> Result<Cycle, C::Error> {
    let p = &cell.params;
    cycle(curve, cell, at, cell.anode_load(p.anodes_per_cell, p.new_anode_kg), Some(at), cal, now)
}

/// A cell's running cycle only (an inert cell's crops, with no change; nothing without anodes).
pub(super) fn first_cycle<C: Curve>(cell: &CellInput, curve: &C, cal: &Calendar, now: Time) -> Result<Outlook, C::Error> {
    let out_of_circuit = cell.cutouts.iter().any(|c| c.from <= now && c.to.is_none());
    let mut cycles = Vec::new();
    if cell.params.anode_kind == AnodeKind::Inert {
        if let Some(c0) = cell.crop_started {
            let (harvests, _) = crops(curve, cell, c0, c0, None, None, cal, now)?;
            cycles.push(Cycle { set_at: cell.load.map_or(c0, |l| l.0), load: None, change: None, harvests, last_crop_from: None });
        }
    } else if let Some((set_at, count, kg)) = cell.load {
        cycles.push(cycle(curve, cell, set_at, cell.anode_load(count, kg), cell.crop_started, cal, now)?);
    }
    Ok(Outlook { cycles, out_of_circuit })
}

/// A cell's anode cycles and crops over the calendar, on its circuit's curve
/// as of `now`, each change assumed made at [`ChangeDue::assumed_at`] (its
/// ideal time): the cell on its own, before levelling. [`plan`](super::plan) starts each
/// next cycle from the day its change is planned on instead.
pub fn outlook<C: Curve>(cell: &CellInput, curve: &C, cal: &Calendar, now: Time) -> Result<Outlook, C::Error> {
    let mut o = first_cycle(cell, curve, cal, now)?;
    let end = cal.start(cal.len());
    // at most one change a day: a bound on the loop whatever the current
    for _ in 0..=cal.len() {
        let Some(next) = o.cycles.last().and_then(|c| c.change.as_ref()).map(|c| c.assumed_at).filter(|t| *t < end) else { break };
        o.cycles.push(next_cycle(curve, cell, next, cal, now)?);
    }
    Ok(o)
}
