//! Efficiencies learnt from a section's own weighings: each cell's cathode
//! efficiency (from its crops) and anode factor (from its scrap), pooled toward its section.
//!
//! # The method
//!
//! Each weighing of cell *i* gives a measured value y_ik (crop: weighed / (ECE · Q);
//! scrap: (set − scrap per anode) / (ECE · Q / n / w_Cu)). The estimate is
//! parametric empirical Bayes, James–Stein type shrinkage (B. Efron and
//! C. Morris, "Data analysis using Stein's estimator and its generalizations",
//! JASA 1975; C. Morris, "Parametric empirical Bayes inference: theory and
//! applications", JASA 1983 — both references from memory, as DOMAIN.md says):
//!
//! 1. **Screening.** A weighing outside the rule's bounds is *impossible*
//!    (a crop heavier than the charge allows, η > 1). A weighing far out of line
//!    with the cell's own neighbouring weighings is an *outlier*: its residual
//!    from the median of up to [`NEIGHBOURS`] of the cell's other weighings on
//!    each side (a running median, the Hampel identifier's idea) is scaled by
//!    the section's robust spread, 1.4826 × the median absolute residual (the
//!    1.4826 makes a MAD a standard deviation for normal data), and a robust
//!    z beyond [`OUTLIER_Z`] (3.5, the cut-off Iglewicz and Hoaglin recommend for
//!    modified z-scores, from memory) is left out. A cell with fewer than
//!    [`MIN_OWN_FOR_OUTLIERS`] other weighings has no baseline of its own, so
//!    only the bounds apply to it (a shorted cell's low crops are real, and
//!    shrinkage limits how far one crop can move it). Left-out weighings stay
//!    in the log with their reason.
//! 2. **Cell means.** ȳ_i is the recency-weighted mean of the cell's learnt
//!    weighings, weight [`RECENCY`]^(age in crops) (the latest weighs 1; by crop
//!    order, so a value changes only when a weighing is entered or undone), with
//!    Kish's effective count n_i = (Σw)² / Σw².
//! 3. **Section figures.** σ² (within-cell scatter) is pooled from each cell's
//!    unweighted deviations, Σ(y − ū_i)² / Σ(n_i − 1); μ is the mean of the cell
//!    means; τ² (between-cell spread) is the method-of-moments estimate
//!    max(0, s²(ȳ) − mean(σ²/n_i)), floored at 0.
//! 4. **Shrinkage.** B_i = τ² / (τ² + σ²/n_i), η̂_i = μ + B_i (ȳ_i − μ), standard
//!    error sqrt(B_i σ²/n_i + (1 − B_i)² Var(μ̂)) with Var(μ̂) = s²(ȳ)/k (Morris's
//!    allowance for μ being estimated too). A cell with no learnt weighing takes
//!    μ with error sqrt(τ² + Var(μ̂)).
//!
//! A section with fewer than [`MIN_CELLS`] cells with learnt weighings, or fewer
//! than [`MIN_WITHIN_DF`] degrees of freedom for σ², has too few to pool: its
//! cells keep the layout's value.

use serde::Serialize;

use super::electrochem::ECE_KG_PER_AH;
use super::layout::CellParams;

/// The weight of a weighing one crop older than the next (common practice, no
/// source: half-weight after about three crops, so a cell's value follows real
/// changes — shorts come and go — without chasing one weighing).
pub const RECENCY: f64 = 0.8;
/// Robust z beyond which a weighing is left out (Iglewicz & Hoaglin's 3.5, from memory).
pub const OUTLIER_Z: f64 = 3.5;
/// The 1.4826 that makes a median absolute deviation a standard deviation for normal data.
pub const MAD_TO_SD: f64 = 1.4826;
/// Other weighings of the cell, each side, whose median is a weighing's baseline.
pub const NEIGHBOURS: usize = 3;
/// Other weighings a cell needs before its weighings are judged against its own.
pub const MIN_OWN_FOR_OUTLIERS: usize = 3;
/// Cells with learnt weighings a section needs to pool.
pub const MIN_CELLS: usize = 3;
/// Degrees of freedom σ² needs (Σ(n_i − 1)).
pub const MIN_WITHIN_DF: usize = 2;
/// Floor of the within-cell scatter and the outlier scale: weighing alone
/// scatters 0.3–0.5 % (DOMAIN.md, from memory), so nothing is known finer than 0.2 %.
pub const SCATTER_FLOOR: f64 = 0.002;
/// One-sided normal quantile of a 90 % two-sided interval (standard normal table).
pub const Z90: f64 = 1.644_853_6;

/// What a learnt value is, and what counts as impossible for it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Rule {
    /// Below this the weighing is impossible (or a lost load, not a short).
    pub min: f64,
    /// Above this the weighing is impossible.
    pub max: f64,
    /// Standard error of a layout value (nothing learnt).
    pub layout_se: f64,
}

/// Cathode current efficiency: above 1 is heavier than the charge allows; below
/// 0.5 is questioned at entry as a mis-weighing (common practice, no source);
/// a layout value is good to about ±1.5 points (93–98 % is the usual range,
/// DOMAIN.md from memory).
pub const CATHODE: Rule = Rule { min: 0.5, max: 1.0, layout_se: 0.015 };
/// Anode factor: a little above 1 is real (Cu₂O dissolves chemically; the
/// layout accepts up to 1.05), beyond 1.10 it is a weighing error; below 0.5
/// the anodes cannot have been shorted that much (common practice, no source).
pub const ANODE: Rule = Rule { min: 0.5, max: 1.10, layout_se: 0.02 };

/// Where a cell's value comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Source {
    /// Its own learnt weighings, pooled toward its section.
    Cell,
    /// No learnt weighing of its own: its section's value.
    Section,
    /// Its section has too few weighings: the layout's value.
    Layout,
}

impl Source {
    pub fn name(self) -> &'static str {
        match self {
            Source::Cell => "cell",
            Source::Section => "section",
            Source::Layout => "layout",
        }
    }

    pub fn from_name(s: &str) -> Option<Source> {
        match s {
            "cell" => Some(Source::Cell),
            "section" => Some(Source::Section),
            "layout" => Some(Source::Layout),
            _ => None,
        }
    }
}

/// One cell's value as used.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Estimate {
    pub value: f64,
    pub source: Source,
    /// Weighings learnt from (left-out ones not counted).
    pub learnt: u32,
    /// Standard error of `value`.
    pub se: f64,
    /// The section's within-cell scatter of one weighing (the layout error when not pooled).
    pub sigma: f64,
}

impl Estimate {
    /// The layout's value: nothing learnt.
    pub fn layout(value: f64, rule: &Rule) -> Estimate {
        Estimate { value, source: Source::Layout, learnt: 0, se: rule.layout_se, sigma: rule.layout_se }
    }

    /// Standard deviation of the next weighing around `value`: the estimate's
    /// error and one weighing's scatter together.
    pub fn predictive_sd(&self) -> f64 {
        (self.se * self.se + self.sigma * self.sigma).sqrt()
    }

    /// The 90 % interval of the next weighing, (low, high).
    pub fn interval90(&self) -> (f64, f64) {
        let h = Z90 * self.predictive_sd();
        (self.value - h, self.value + h)
    }
}

/// A cell's learnt values: cathode current efficiency and anode factor.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CellLearnt {
    pub cathode: Estimate,
    pub anode: Estimate,
}

impl CellLearnt {
    /// Nothing learnt: the layout's cathode and anode efficiencies.
    pub fn layout(params: &CellParams) -> CellLearnt {
        CellLearnt {
            cathode: Estimate::layout(params.cathode_efficiency, &CATHODE),
            anode: Estimate::layout(params.anode_efficiency, &ANODE),
        }
    }
}

/// The anode factor a scrap weighing measures: copper lost per anode over the
/// copper Faraday's law dissolves at η_a = 1, (set − scrap/n) / (ECE · Q / n / w_Cu).
/// `None` without charge or anodes.
pub fn anode_factor(set_kg: f64, scrap_total_kg: f64, count: u32, charge_ah: f64, copper_fraction: f64) -> Option<f64> {
    if count == 0 || charge_ah <= 0.0 || copper_fraction <= 0.0 {
        return None;
    }
    let n = f64::from(count);
    let faraday = ECE_KG_PER_AH * charge_ah / n / copper_fraction;
    Some((set_kg - scrap_total_kg / n) / faraday)
}

/// Why a weighing is not learnt from.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum LeftOut {
    /// Outside the rule's bounds.
    Impossible { value: f64 },
    /// Far out of line with the cell's other weighings.
    OutOfLine { value: f64, z: f64 },
}

impl LeftOut {
    /// A code to store and match.
    pub fn code(&self) -> &'static str {
        match self {
            LeftOut::Impossible { .. } => "impossible",
            LeftOut::OutOfLine { .. } => "out_of_line",
        }
    }

    /// A sentence a foreman can read.
    pub fn message(&self, what: &str) -> String {
        match self {
            LeftOut::Impossible { value } => format!("{what} {:.1} % is impossible: not learnt from", value * 100.0),
            LeftOut::OutOfLine { value, z } => {
                format!(
                    "{what} {:.1} % is far out of line with the cell's other weighings (robust z {z:.1}): not learnt from",
                    value * 100.0
                )
            }
        }
    }
}

/// The section's pooled figures.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Pooled {
    pub mu: f64,
    pub tau2: f64,
    pub sigma2: f64,
    /// Cells with learnt weighings.
    pub cells: usize,
}

/// What a section's weighings teach.
#[derive(Debug, Clone, PartialEq)]
pub struct SectionLearnt {
    /// Per cell, in input order; `None` when the section has too few to pool
    /// (the cell keeps its layout value: [`SectionLearnt::estimate`]).
    pub cells: Vec<Option<Estimate>>,
    /// Per cell: weighings learnt from.
    pub learnt: Vec<u32>,
    /// Per cell, per weighing: why it was left out (`None`: learnt from).
    pub left_out: Vec<Vec<Option<LeftOut>>>,
    /// `None` when the section has too few to pool.
    pub pooled: Option<Pooled>,
}

impl SectionLearnt {
    /// Cell `i`'s value, `layout` when nothing could be pooled.
    pub fn estimate(&self, i: usize, layout: f64, rule: &Rule) -> Estimate {
        match self.cells.get(i).copied().flatten() {
            Some(e) => e,
            None => Estimate { learnt: self.learnt.get(i).copied().unwrap_or(0), ..Estimate::layout(layout, rule) },
        }
    }
}

fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    Some(if n % 2 == 1 { v[n / 2] } else { (v[n / 2 - 1] + v[n / 2]) / 2.0 })
}

/// Median and robust standard deviation (1.4826 × MAD) of a set of values.
pub fn robust_centre(values: &[f64]) -> Option<(f64, f64)> {
    let mut v = values.to_vec();
    let m = median(&mut v)?;
    let mut dev: Vec<f64> = values.iter().map(|x| (x - m).abs()).collect();
    let mad = median(&mut dev)?;
    Some((m, MAD_TO_SD * mad))
}

/// The weighings of a cell that are possible, and the out-of-line screening.
fn screen(cells: &[Vec<f64>], rule: &Rule) -> Vec<Vec<Option<LeftOut>>> {
    let mut left: Vec<Vec<Option<LeftOut>>> = cells
        .iter()
        .map(|c| {
            c.iter().map(|&v| (!(v.is_finite() && v >= rule.min && v <= rule.max)).then_some(LeftOut::Impossible { value: v })).collect()
        })
        .collect();
    // residuals from the running median of the cell's other possible weighings
    let mut residuals: Vec<(usize, usize, f64)> = Vec::new();
    for (i, c) in cells.iter().enumerate() {
        let ok: Vec<usize> = (0..c.len()).filter(|&k| left[i][k].is_none()).collect();
        if ok.len() < MIN_OWN_FOR_OUTLIERS + 1 {
            continue;
        }
        for (pos, &k) in ok.iter().enumerate() {
            let lo = pos.saturating_sub(NEIGHBOURS);
            let hi = (pos + NEIGHBOURS + 1).min(ok.len());
            let mut around: Vec<f64> = (lo..hi).filter(|&p| p != pos).map(|p| c[ok[p]]).collect();
            if let Some(m) = median(&mut around) {
                residuals.push((i, k, c[k] - m));
            }
        }
    }
    let mut abs: Vec<f64> = residuals.iter().map(|r| r.2.abs()).collect();
    let Some(mad) = median(&mut abs) else { return left };
    let scale = (MAD_TO_SD * mad).max(SCATTER_FLOOR);
    for (i, k, r) in residuals {
        let z = r / scale;
        if z.abs() > OUTLIER_Z {
            left[i][k] = Some(LeftOut::OutOfLine { value: cells[i][k], z });
        }
    }
    left
}

/// Recency-weighted mean and Kish's effective count of values, oldest first.
pub fn recency_mean(values: &[f64]) -> Option<(f64, f64)> {
    let n = values.len();
    if n == 0 {
        return None;
    }
    let (mut sw, mut sw2, mut swy) = (0.0, 0.0, 0.0);
    for (k, y) in values.iter().enumerate() {
        let w = RECENCY.powi((n - 1 - k) as i32);
        sw += w;
        sw2 += w * w;
        swy += w * y;
    }
    Some((swy / sw, sw * sw / sw2))
}

/// Learns a section's cells from their weighings (per cell, oldest first) under `rule`.
pub fn learn_section(cells: &[Vec<f64>], rule: &Rule) -> SectionLearnt {
    let left_out = screen(cells, rule);
    let kept: Vec<Vec<f64>> =
        cells.iter().zip(&left_out).map(|(c, l)| c.iter().zip(l).filter(|(_, l)| l.is_none()).map(|(v, _)| *v).collect()).collect();
    let learnt: Vec<u32> = kept.iter().map(|k| k.len() as u32).collect();
    // σ²: pooled within-cell scatter about each cell's plain mean
    let (mut ss, mut df) = (0.0, 0usize);
    for k in kept.iter().filter(|k| k.len() >= 2) {
        let m = k.iter().sum::<f64>() / k.len() as f64;
        ss += k.iter().map(|y| (y - m) * (y - m)).sum::<f64>();
        df += k.len() - 1;
    }
    let means: Vec<Option<(f64, f64)>> = kept.iter().map(|k| recency_mean(k)).collect();
    let with: Vec<(f64, f64)> = means.iter().flatten().copied().collect();
    let k = with.len();
    if k < MIN_CELLS || df < MIN_WITHIN_DF {
        return SectionLearnt { cells: vec![None; cells.len()], learnt, left_out, pooled: None };
    }
    let sigma2 = (ss / df as f64).max(SCATTER_FLOOR * SCATTER_FLOOR);
    let mu = with.iter().map(|m| m.0).sum::<f64>() / k as f64;
    let s2 = with.iter().map(|m| (m.0 - mu) * (m.0 - mu)).sum::<f64>() / (k - 1) as f64;
    let mean_v = with.iter().map(|m| sigma2 / m.1).sum::<f64>() / k as f64;
    let tau2 = (s2 - mean_v).max(0.0);
    let var_mu = s2 / k as f64;
    let sigma = sigma2.sqrt();
    let out = means
        .iter()
        .zip(&kept)
        .map(|(m, kept)| match m {
            Some((ybar, n_eff)) => Some({
                let v = sigma2 / n_eff;
                let b = if tau2 + v > 0.0 { tau2 / (tau2 + v) } else { 0.0 };
                Estimate {
                    value: mu + b * (ybar - mu),
                    source: Source::Cell,
                    learnt: kept.len() as u32,
                    se: (b * v + (1.0 - b) * (1.0 - b) * var_mu).sqrt(),
                    sigma,
                }
            }),
            None => Some(Estimate { value: mu, source: Source::Section, learnt: 0, se: (tau2 + var_mu).sqrt(), sigma }),
        })
        .collect();
    SectionLearnt { cells: out, learnt, left_out, pooled: Some(Pooled { mu, tau2, sigma2, cells: k }) }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cw(values: &[f64]) -> Vec<f64> {
        values.to_vec()
    }

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    /// A hand calculation (the figures are invented for the check; the method is
    /// Efron & Morris 1975 / Morris 1983, from memory):
    ///
    /// cells  A: 0.95, 0.97   B: 0.90, 0.92   C: 0.96   D: none
    /// recency weights (λ = 0.8, latest 1): two crops → 0.8, 1.
    ///   ȳ_A = (0.8·0.95 + 0.97)/1.8 = 0.961111;  ȳ_B = (0.8·0.90 + 0.92)/1.8 = 0.911111;  ȳ_C = 0.96
    ///   n_A = n_B = 1.8²/(0.64 + 1) = 1.975610;  n_C = 1
    /// σ² = [(0.95−0.96)² + (0.97−0.96)² + (0.90−0.91)² + (0.92−0.91)²] / (1 + 1) = 0.0004/2 = 0.0002
    /// μ = (0.961111 + 0.911111 + 0.96)/3 = 0.944074
    /// s²(ȳ) = [(0.017037)² + (−0.032963)² + (0.015926)²]/2 = (0.00029026 + 0.00108656 + 0.00025363)/2 = 0.00081523
    /// mean σ²/n = (0.0002/1.975610 · 2 + 0.0002)/3 = (0.00010123·2 + 0.0002)/3 = 0.00013416
    /// τ² = 0.00081523 − 0.00013416 = 0.00068107
    /// B_A = 0.00068107/(0.00068107 + 0.00010123) = 0.870594
    /// η̂_A = 0.944074 + 0.870594 · 0.017037 = 0.958906
    /// B_C = 0.00068107/(0.00068107 + 0.0002) = 0.773003;  η̂_C = 0.944074 + 0.773003 · 0.015926 = 0.956385
    /// Var(μ̂) = 0.00081523/3 = 0.00027174
    /// se_A = sqrt(0.870594·0.00010123 + 0.129406²·0.00027174) = sqrt(0.000088130 + 0.0000045506) = 0.0096273
    /// D (no crops) takes μ = 0.944074, se = sqrt(0.00068107 + 0.00027174) = 0.030868
    #[test]
    fn pooled_values_match_the_hand_calculation() {
        let l = learn_section(&[cw(&[0.95, 0.97]), cw(&[0.90, 0.92]), cw(&[0.96]), cw(&[])], &CATHODE);
        let p = l.pooled.unwrap();
        assert!(close(p.sigma2, 0.0002, 1e-12), "{p:?}");
        assert!(close(p.mu, 0.944074, 1e-6), "{p:?}");
        assert!(close(p.tau2, 0.00068107, 1e-8), "{p:?}");
        let a = l.cells[0].unwrap();
        assert_eq!((a.source, a.learnt), (Source::Cell, 2));
        assert!(close(a.value, 0.958906, 1e-6), "{a:?}");
        assert!(close(a.se, 0.0096273, 1e-6), "{a:?}");
        assert!(close(l.cells[2].unwrap().value, 0.956385, 1e-6), "{:?}", l.cells[2]);
        let d = l.cells[3].unwrap();
        assert_eq!((d.source, d.learnt), (Source::Section, 0));
        assert!(close(d.value, 0.944074, 1e-6) && close(d.se, 0.030868, 1e-5), "{d:?}");
        // shrinkage: every learnt value lies between its own mean and the section's
        assert!(a.value < 0.961111 && a.value > p.mu);
    }

    #[test]
    fn an_impossible_weighing_is_not_learnt() {
        let plain = learn_section(&[cw(&[0.95, 0.97]), cw(&[0.90, 0.92]), cw(&[0.96])], &CATHODE);
        let with = learn_section(&[cw(&[0.95, 0.97, 1.08]), cw(&[0.90, 0.92]), cw(&[0.96])], &CATHODE);
        assert_eq!(with.left_out[0][2], Some(LeftOut::Impossible { value: 1.08 }));
        assert_eq!(with.learnt[0], 2);
        assert_eq!(with.cells[0], plain.cells[0]);
        assert!(with.left_out[0][2].unwrap().message("crop efficiency").contains("108.0 % is impossible"));
    }

    #[test]
    fn a_weighing_far_out_of_line_with_its_cell_is_left_out() {
        let cells = [cw(&[0.95, 0.951, 0.949, 0.95, 0.80, 0.952]), cw(&[0.96, 0.962, 0.958, 0.961]), cw(&[0.94, 0.941, 0.939, 0.94])];
        let l = learn_section(&cells, &CATHODE);
        assert!(matches!(l.left_out[0][4], Some(LeftOut::OutOfLine { z, .. }) if z < -OUTLIER_Z));
        assert_eq!(l.left_out.iter().flatten().filter(|x| x.is_some()).count(), 1);
        assert_eq!(l.learnt[0], 5);
        // a shorted cell's steady low level is not an outlier: its own weighings are its baseline
        let shorted = [cw(&[0.87, 0.875, 0.872, 0.869]), cw(&[0.96, 0.962, 0.958, 0.961]), cw(&[0.95, 0.951, 0.949, 0.95])];
        let l = learn_section(&shorted, &CATHODE);
        assert!(l.left_out.iter().flatten().all(Option::is_none));
        assert!(l.cells[0].unwrap().value < 0.88, "{:?}", l.cells[0]);
    }

    #[test]
    fn a_section_with_too_few_weighings_keeps_the_layout() {
        let l = learn_section(&[cw(&[0.90, 0.91]), cw(&[0.93]), cw(&[])], &CATHODE);
        assert!(l.pooled.is_none());
        assert!(l.cells.iter().all(Option::is_none));
        let e = l.estimate(0, 0.96, &CATHODE);
        assert_eq!((e.source, e.value, e.se, e.learnt), (Source::Layout, 0.96, CATHODE.layout_se, 2));
    }

    #[test]
    fn many_crops_stand_on_their_own_few_lean_on_the_section() {
        let many = vec![0.90; 12];
        let l = learn_section(&[cw(&many), cw(&[0.90]), cw(&[0.96, 0.962, 0.958]), cw(&[0.95, 0.952, 0.948])], &CATHODE);
        let (own, one) = (l.cells[0].unwrap(), l.cells[1].unwrap());
        assert!((own.value - 0.90).abs() < (one.value - 0.90).abs(), "{own:?} {one:?}");
        assert!(own.se < one.se);
    }

    #[test]
    fn the_anode_factor_inverts_the_consumption_model() {
        // DOMAIN.md plant check (derived): 50 × 380 kg at 30 kA reach 15 % after 451.8 h at η_a 1.00
        let q = 30_000.0 * 451.8;
        let f = anode_factor(380.0, 0.15 * 380.0 * 50.0, 50, q, 0.995).unwrap();
        assert!(close(f, 1.0, 2e-4), "{f}");
        assert_eq!(anode_factor(380.0, 1000.0, 0, q, 0.995), None);
    }

    #[test]
    fn the_latest_crops_weigh_most() {
        let (m, n) = recency_mean(&[0.90, 0.96]).unwrap();
        assert!(close(m, (0.8 * 0.90 + 0.96) / 1.8, 1e-12));
        assert!(close(n, 1.8 * 1.8 / 1.64, 1e-12));
    }

    #[test]
    fn robust_centre_uses_the_1_4826_factor() {
        // sorted 0.21, 0.29, 0.30, 0.31 → median 0.295 (arithmetic of the definition)
        let (m, s) = robust_centre(&[0.29, 0.30, 0.31, 0.21]).unwrap();
        assert!(close(m, 0.295, 1e-12), "{m}");
        // deviations from 0.295: 0.005, 0.005, 0.015, 0.085 → MAD 0.01
        assert!(close(s, 0.014826, 1e-9), "{s}");
    }
}
