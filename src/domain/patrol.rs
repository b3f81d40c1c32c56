//! Which cells to check for shorts now, most suspect first: each cell's latest
//! voltage against its section's robust median, its voltage trend, its learnt
//! efficiency and the shorts found this crop, made into one score.
//!
//! # The score (dimensionless, higher = more suspect)
//!
//! - **Voltage**: z = (V − median) / max(1.4826 · MAD, [`VOLT_SCALE_FLOOR`]) over the
//!   section's in-circuit cells with a reading in the last 24 h (DOMAIN.md,
//!   "Shorts from cell voltage"); a short lowers the voltage, so the term is
//!   max(0, −z).
//! - **Hard short**: a reading below [`HARD_SHORT_V`] (an inert-anode cell: below the
//!   0.89 V reversible floor) adds [`HARD_SHORT_SCORE`], whether or not the reading had to be forced.
//! - **Efficiency**: a cell with learnt crops scores [`EFFICIENCY_WEIGHT`] × its
//!   shortfall below the section's median learnt efficiency in robust standard
//!   deviations (scale floored at [`EFFICIENCY_SCALE_FLOOR`]).
//! - **Shorts found this crop**: [`SHORT_WEIGHT`] each, up to [`SHORTS_COUNTED`].
//! - **Trend**: a voltage falling over the crop (least-squares slope of its
//!   readings, at least [`TREND_MIN_READINGS`] over a day or more) scores 1 per
//!   [`TREND_MV_PER_DAY`] mV a day.
//!
//! The weights are our own (common practice, no source): the voltage is the sign
//! that comes first, the efficiency confirms a chronic cell, a short found and
//! cleared says the cell grows them.

use serde::Serialize;

use super::charge::Time;
use super::electrochem::INERT_ANODE_MIN_VOLTS;
use super::layout::AnodeKind;
use super::learn::{Source, robust_centre};

/// Only readings this recent count (DOMAIN: "latest voltage (last 24 h)").
pub const RECENT: chrono::Duration = chrono::Duration::hours(24);
/// Floor of the section's voltage scale, V: a meter reads to a few mV (common practice, no source).
pub const VOLT_SCALE_FLOOR: f64 = 0.005;
/// A refining cell under this voltage is shorted hard (healthy cells run 0.25–0.35 V, DOMAIN.md from memory).
pub const HARD_SHORT_V: f64 = 0.05;
pub const HARD_SHORT_SCORE: f64 = 10.0;
pub const EFFICIENCY_WEIGHT: f64 = 0.5;
/// Floor of the section's efficiency scale (half a point).
pub const EFFICIENCY_SCALE_FLOOR: f64 = 0.005;
pub const SHORT_WEIGHT: f64 = 0.5;
pub const SHORTS_COUNTED: u32 = 6;
pub const TREND_MIN_READINGS: usize = 3;
pub const TREND_MV_PER_DAY: f64 = 10.0;
/// A score from which a cell shows as a suspected short on the tiles: six
/// robust standard deviations below its section, or fewer with confirming
/// signs. One reading's scatter reaches three in one cell of a few dozen, so
/// three would flag healthy cells (common practice, no source).
pub const SUSPECT_SCORE: f64 = 6.0;

/// One cell as the patrol sees it.
#[derive(Debug, Clone, PartialEq)]
pub struct PatrolInput {
    pub cell: String,
    pub circuit: String,
    pub section: String,
    pub anode_kind: AnodeKind,
    /// The latest voltage reading (only cells with one in the last 24 h, in circuit, are ranked).
    pub voltage: (Time, f64),
    /// The crop's voltage readings, oldest first (for the trend; may be empty).
    pub crop_voltages: Vec<(Time, f64)>,
    pub cathode_efficiency: f64,
    pub efficiency_source: Source,
    pub shorts_this_crop: u32,
}

/// One cell on the patrol list.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PatrolCell {
    pub cell: String,
    pub circuit: String,
    pub section: String,
    pub score: f64,
    pub voltage: f64,
    pub voltage_at: Time,
    pub section_median_v: f64,
    /// Voltage − section median, mV (negative below it).
    pub deviation_mv: f64,
    pub cathode_efficiency: f64,
    pub shorts_this_crop: u32,
    pub reasons: Vec<String>,
}

/// The patrol list.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Patrol {
    pub schema: u32,
    pub as_of: Time,
    pub cells: Vec<PatrolCell>,
}

/// Least-squares slope of voltage over time, V per day.
pub fn slope_v_per_day(points: &[(Time, f64)]) -> Option<f64> {
    let t0 = points.first()?.0;
    let xs: Vec<f64> = points.iter().map(|(t, _)| (*t - t0).num_seconds() as f64 / 86_400.0).collect();
    let n = xs.len() as f64;
    let mx = xs.iter().sum::<f64>() / n;
    let my = points.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = xs.iter().map(|x| (x - mx) * (x - mx)).sum();
    if sxx <= 0.0 {
        return None;
    }
    let sxy: f64 = xs.iter().zip(points).map(|(x, p)| (x - mx) * (p.1 - my)).sum();
    Some(sxy / sxx)
}

fn hard_short(kind: AnodeKind, v: f64) -> bool {
    match kind {
        AnodeKind::Soluble => v < HARD_SHORT_V,
        AnodeKind::Inert => v < INERT_ANODE_MIN_VOLTS,
    }
}

/// Ranks the cells, most suspect first (ties by cell id). Sections are ranked
/// against their own median; inert-anode and refining cells never share one.
pub fn rank(cells: &[PatrolInput]) -> Vec<PatrolCell> {
    let mut out = Vec::with_capacity(cells.len());
    // one pass into the groups, in the groups' order (a filter per group was quadratic at 3 000 cells)
    let mut groups: std::collections::BTreeMap<(&str, &str, bool), Vec<&PatrolInput>> = std::collections::BTreeMap::new();
    for c in cells {
        groups.entry((c.circuit.as_str(), c.section.as_str(), c.anode_kind == AnodeKind::Inert)).or_default().push(c);
    }
    for members in groups.into_values() {
        let volts: Vec<f64> = members.iter().map(|c| c.voltage.1).collect();
        let Some((median, sd)) = robust_centre(&volts) else { continue };
        let scale = sd.max(VOLT_SCALE_FLOOR);
        let learnt: Vec<f64> = members.iter().filter(|c| c.efficiency_source == Source::Cell).map(|c| c.cathode_efficiency).collect();
        let eff_centre = robust_centre(&learnt).filter(|_| learnt.len() >= 3);
        for c in members {
            let v = c.voltage.1;
            let z = (v - median) / scale;
            let mut score = (-z).max(0.0);
            let mut reasons = Vec::new();
            if z < -1.0 {
                reasons.push(format!(
                    "voltage {:.0} mV below the section median of {:.3} V (robust z {z:.1})",
                    (median - v) * 1000.0,
                    median
                ));
            }
            if hard_short(c.anode_kind, v) {
                score += HARD_SHORT_SCORE;
                reasons.push(match c.anode_kind {
                    AnodeKind::Soluble => format!("reads {v:.3} V, near 0 V: a hard short"),
                    AnodeKind::Inert => format!(
                        "reads {v:.3} V, under the {INERT_ANODE_MIN_VOLTS:.2} V an inert-anode cell needs: a short or a bad reading"
                    ),
                });
            }
            if let (Some((m, s)), Source::Cell) = (eff_centre, c.efficiency_source) {
                let d = (m - c.cathode_efficiency) / s.max(EFFICIENCY_SCALE_FLOOR);
                if d > 0.0 {
                    score += EFFICIENCY_WEIGHT * d;
                }
                if d > 2.0 {
                    reasons.push(format!(
                        "learnt current efficiency {:.1} %, section median {:.1} %",
                        c.cathode_efficiency * 100.0,
                        m * 100.0
                    ));
                }
            }
            if c.shorts_this_crop > 0 {
                score += SHORT_WEIGHT * f64::from(c.shorts_this_crop.min(SHORTS_COUNTED));
                reasons.push(format!("{} shorts found this crop", c.shorts_this_crop));
            }
            let span_days =
                c.crop_voltages.first().zip(c.crop_voltages.last()).map_or(0.0, |(a, b)| (b.0 - a.0).num_seconds() as f64 / 86_400.0);
            if c.crop_voltages.len() >= TREND_MIN_READINGS
                && span_days >= 1.0
                && let Some(slope) = slope_v_per_day(&c.crop_voltages)
            {
                let falling_mv = -slope * 1000.0;
                if falling_mv > 0.0 {
                    score += falling_mv / TREND_MV_PER_DAY;
                }
                if falling_mv >= TREND_MV_PER_DAY / 2.0 {
                    reasons.push(format!("voltage falling {falling_mv:.0} mV a day this crop"));
                }
            }
            out.push(PatrolCell {
                cell: c.cell.clone(),
                circuit: c.circuit.clone(),
                section: c.section.clone(),
                score,
                voltage: v,
                voltage_at: c.voltage.0,
                section_median_v: median,
                deviation_mv: (v - median) * 1000.0,
                cathode_efficiency: c.cathode_efficiency,
                shorts_this_crop: c.shorts_this_crop,
                reasons,
            });
        }
    }
    out.sort_by(|a, b| b.score.total_cmp(&a.score).then_with(|| a.cell.cmp(&b.cell)));
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::{Duration, TimeZone, Utc};

    fn t0() -> Time {
        Utc.with_ymd_and_hms(2026, 3, 1, 6, 0, 0).unwrap()
    }

    fn cell(id: &str, v: f64, eff: f64, shorts: u32) -> PatrolInput {
        PatrolInput {
            cell: id.into(),
            circuit: "C1".into(),
            section: "A".into(),
            anode_kind: AnodeKind::Soluble,
            voltage: (t0(), v),
            crop_voltages: Vec::new(),
            cathode_efficiency: eff,
            efficiency_source: Source::Cell,
            shorts_this_crop: shorts,
        }
    }

    #[test]
    fn the_low_cell_ranks_first_with_its_deviation() {
        // voltages 0.29, 0.30, 0.30, 0.31, 0.22: median 0.30, MAD 0.01 → robust sd 0.014826 V
        let cells = vec![
            cell("A1", 0.29, 0.96, 0),
            cell("A2", 0.30, 0.96, 0),
            cell("A3", 0.30, 0.95, 0),
            cell("A4", 0.31, 0.96, 0),
            cell("A5", 0.22, 0.96, 0),
        ];
        let r = rank(&cells);
        assert_eq!(r[0].cell, "A5");
        assert!((r[0].deviation_mv + 80.0).abs() < 1e-9, "{}", r[0].deviation_mv);
        assert!((r[0].section_median_v - 0.30).abs() < 1e-12);
        // score: −z = 0.08 / 0.014826 = 5.396 (no other sign)
        assert!((r[0].score - 0.08 / 0.014826).abs() < 1e-3, "{}", r[0].score);
        assert!(r[0].reasons[0].contains("80 mV below"), "{:?}", r[0].reasons);
    }

    #[test]
    fn a_reading_near_zero_is_a_hard_short_and_signs_add_up() {
        let cells = vec![
            cell("A1", 0.30, 0.96, 0),
            cell("A2", 0.30, 0.96, 0),
            cell("A3", 0.30, 0.88, 3),
            cell("A4", 0.31, 0.96, 0),
            cell("A5", 0.01, 0.96, 0),
        ];
        let r = rank(&cells);
        assert_eq!(r[0].cell, "A5");
        assert!(r[0].score > HARD_SHORT_SCORE);
        assert_eq!(r[1].cell, "A3");
        assert!(r[1].reasons.iter().any(|s| s.contains("3 shorts")), "{:?}", r[1].reasons);
    }

    #[test]
    fn a_falling_voltage_scores() {
        let mut c = cell("A1", 0.30, 0.96, 0);
        c.crop_voltages = (0..5).map(|d| (t0() + Duration::days(d), 0.32 - 0.02 * d as f64)).collect();
        let s = slope_v_per_day(&c.crop_voltages).unwrap();
        assert!((s + 0.02).abs() < 1e-12, "{s}");
        let others: Vec<PatrolInput> = (2..6).map(|i| cell(&format!("A{i}"), 0.30, 0.96, 0)).collect();
        let mut all = others.clone();
        all.push(c);
        let r = rank(&all);
        assert_eq!(r[0].cell, "A1");
        assert!((r[0].score - 2.0).abs() < 1e-9, "{}", r[0].score);
    }
}
