//! A cathode crop: copper plated on each cathode for the charge since the crop
//! began, the heavier inner cathodes, and the charge at which the crop is due.

use super::electrochem::ECE_KG_PER_AH;

/// The figures of a cell's cathodes that plating depends on.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Cathodes {
    pub count: u32,
    /// Anodes in the cell: an inner cathode faces two anode faces and carries I/anodes.
    pub anodes: u32,
    /// Cathode current efficiency.
    pub efficiency: f64,
}

impl Cathodes {
    /// Copper on the whole crop, kg.
    pub fn crop_kg(&self, charge_ah: f64) -> f64 {
        ECE_KG_PER_AH * charge_ah * self.efficiency
    }

    /// Mean copper per cathode, kg.
    pub fn mean_kg(&self, charge_ah: f64) -> f64 {
        self.crop_kg(charge_ah) / f64::from(self.count.max(1))
    }

    /// Copper on one inner cathode (one between two anodes), kg.
    ///
    /// The current divides equally over the facing anode–cathode pairs
    /// (idealisation, from memory), and an inner cathode takes two of them. In a
    /// row of n anodes and m cathodes there are min(n + m − 1, 2·min(n, m))
    /// such pairs: 2n with the usual m = n + 1 (an inner cathode carries I/n, the
    /// two end ones I/(2n), DOMAIN.md), 2n − 1 with m = n (one end cathode), 2m
    /// with fewer cathodes than anodes (every cathode inner). So a layout with
    /// `cathodes_as_given` gets its inner cathode right too.
    pub fn inner_kg(&self, charge_ah: f64) -> f64 {
        let (n, m) = (self.anodes.max(1), self.count.max(1));
        let pairs = (n + m - 1).min(2 * n.min(m));
        self.crop_kg(charge_ah) * 2.0 / f64::from(pairs)
    }

    /// Cell charge at which the mean per cathode reaches `target_kg`.
    pub fn charge_to_mean_ah(&self, target_kg: f64) -> f64 {
        target_kg * f64::from(self.count.max(1)) / (ECE_KG_PER_AH * self.efficiency)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // DOMAIN.md plant check (derived): 51 cathodes, 50 anodes, 30 kA, η_c 0.96.
    const C: Cathodes = Cathodes { count: 51, anodes: 50, efficiency: 0.96 };

    #[test]
    fn daily_copper_and_gain_per_cathode() {
        // 819 kg Cu/day per cell and 0.669 kg/h per cathode (DOMAIN.md, derived)
        assert!((C.crop_kg(30_000.0 * 24.0) - 819.0).abs() < 0.5);
        assert!((C.mean_kg(30_000.0) - 0.669).abs() < 5e-4);
    }

    #[test]
    fn target_of_120_kg_after_179_25_hours() {
        // 120 kg mean after 179.25 h (7.47 d); 122.4 kg on an inner cathode (DOMAIN.md, derived)
        let q = C.charge_to_mean_ah(120.0);
        assert!((q / 30_000.0 - 179.25).abs() < 0.01, "{}", q / 30_000.0);
        assert!((C.inner_kg(q) - 122.4).abs() < 1e-9);
        assert!((C.mean_kg(q) - 120.0).abs() < 1e-9);
    }

    #[test]
    fn inner_cathode_with_cathodes_as_given() {
        // 1 000 kg on the crop in each case (charge chosen so)
        let q = |c: &Cathodes| 1000.0 / (ECE_KG_PER_AH * c.efficiency);
        // 40 anodes, 40 cathodes: 79 facing pairs, an inner cathode takes 2 → 25.32 kg (derived)
        let same = Cathodes { count: 40, anodes: 40, efficiency: 0.96 };
        assert!((same.inner_kg(q(&same)) - 2000.0 / 79.0).abs() < 1e-9);
        // 40 anodes, 36 cathodes: all cathodes inner, each 1/36 of the crop = the mean
        let fewer = Cathodes { count: 36, anodes: 40, efficiency: 0.96 };
        assert!((fewer.inner_kg(q(&fewer)) - fewer.mean_kg(q(&fewer))).abs() < 1e-9);
        // the usual 41 cathodes for 40 anodes: I/n, as before
        let usual = Cathodes { count: 41, anodes: 40, efficiency: 0.96 };
        assert!((usual.inner_kg(q(&usual)) - 25.0).abs() < 1e-9);
        // an inner cathode is never lighter than the mean
        for m in 1..=120 {
            let c = Cathodes { count: m, anodes: 50, efficiency: 0.96 };
            assert!(c.inner_kg(100_000.0) >= c.mean_kg(100_000.0) - 1e-9, "{m}");
        }
    }
}
