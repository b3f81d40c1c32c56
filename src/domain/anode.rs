//! An anode load: how much of each anode is left for the charge that has
//! passed, its mean body thickness, and the charge at which it is due to be pulled.

use super::electrochem::{COPPER_DENSITY_KG_PER_M3, ECE_KG_PER_AH};

/// The figures of one anode load that the consumption depends on.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AnodeLoad {
    /// Mean mass per anode when set, kg.
    pub initial_kg: f64,
    /// Anodes in the cell (they share the cell current equally).
    pub count: u32,
    /// Anode current efficiency (≈ 1.00; a little above when Cu₂O dissolves chemically).
    pub efficiency: f64,
    /// Copper mass fraction of the anode (≈ 0.995).
    pub copper_fraction: f64,
    /// Mass per anode that never dissolves (lugs and the head above the solution line), kg.
    pub lug_kg: f64,
}

impl AnodeLoad {
    /// Anode mass lost per anode for `charge_ah` through the cell, kg.
    pub fn loss_kg(&self, charge_ah: f64) -> f64 {
        ECE_KG_PER_AH * (charge_ah / f64::from(self.count.max(1))) * self.efficiency / self.copper_fraction
    }

    /// Remaining mass per anode, kg: never below the undissolved mass.
    pub fn remaining_kg(&self, charge_ah: f64) -> f64 {
        (self.initial_kg - self.loss_kg(charge_ah.max(0.0))).max(self.lug_kg.min(self.initial_kg))
    }

    /// Remaining mass as a fraction of the mass at set.
    pub fn remaining_fraction(&self, charge_ah: f64) -> f64 {
        if self.initial_kg <= 0.0 {
            return 0.0;
        }
        self.remaining_kg(charge_ah) / self.initial_kg
    }

    /// Cell charge at which the remaining fraction falls to `fraction`;
    /// `None` if that lies below the undissolved mass (it is never reached).
    pub fn charge_to_fraction_ah(&self, fraction: f64) -> Option<f64> {
        let target = fraction * self.initial_kg;
        if target < self.lug_kg || self.efficiency <= 0.0 {
            return None;
        }
        let loss = (self.initial_kg - target).max(0.0);
        Some(loss * self.copper_fraction * f64::from(self.count.max(1)) / (ECE_KG_PER_AH * self.efficiency))
    }
}

/// Mean thickness of the dissolving body of an anode, mm: the mass above the
/// lugs spread over the immersed face area at copper's density.
pub fn body_thickness_mm(remaining_kg: f64, lug_kg: f64, face_area_m2: f64) -> f64 {
    if face_area_m2 <= 0.0 {
        return 0.0;
    }
    ((remaining_kg - lug_kg).max(0.0) / (COPPER_DENSITY_KG_PER_M3 * face_area_m2)) * 1000.0
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    // DOMAIN.md plant check (derived from CODATA F and IUPAC M, not a plant's data):
    // 50 anodes × 380 kg at 30 kA, w_Cu 0.995, η_a 1.00.
    fn plant_check() -> AnodeLoad {
        AnodeLoad { initial_kg: 380.0, count: 50, efficiency: 1.0, copper_fraction: 0.995, lug_kg: 20.0 }
    }

    #[test]
    fn loss_rate_per_anode() {
        // 0.715 kg/h per anode at 30 kA (DOMAIN.md, derived)
        let per_hour = plant_check().loss_kg(30_000.0);
        assert!((per_hour - 0.715).abs() < 5e-4, "{per_hour}");
    }

    #[test]
    fn fifteen_percent_scrap_after_451_8_hours() {
        // 15 % scrap after 451.8 h (18.8 d) at 30 kA (DOMAIN.md, derived)
        let q = plant_check().charge_to_fraction_ah(0.15).unwrap();
        let h = q / 30_000.0;
        assert!((h - 451.8).abs() < 0.05, "{h}");
        assert!((plant_check().remaining_fraction(q) - 0.15).abs() < 1e-9);
    }

    #[test]
    fn thickness_from_40_to_4_mm() {
        // about 40 mm at set and about 4 mm at 15 % scrap (DOMAIN.md, derived)
        let a = plant_check();
        let at_set = body_thickness_mm(a.initial_kg, a.lug_kg, 1.0);
        assert!((at_set - 40.2).abs() < 0.1, "{at_set}");
        let at_pull = body_thickness_mm(0.15 * a.initial_kg, a.lug_kg, 1.0);
        assert!((at_pull - 4.1).abs() < 0.1, "{at_pull}");
    }

    #[test]
    fn target_below_lugs_is_never_reached() {
        assert_eq!(plant_check().charge_to_fraction_ah(0.04), None);
    }

    proptest! {
        #[test]
        fn remaining_never_below_undissolved(q in 0.0f64..1e9, kg in 150.0f64..500.0, lug in 5.0f64..40.0, n in 1u32..70) {
            let a = AnodeLoad { initial_kg: kg, count: n, efficiency: 1.02, copper_fraction: 0.995, lug_kg: lug };
            prop_assert!(a.remaining_kg(q) >= lug - 1e-12);
            prop_assert!(a.remaining_kg(q) <= kg);
            prop_assert!(a.remaining_kg(q + 1000.0) <= a.remaining_kg(q));
        }
    }
}
