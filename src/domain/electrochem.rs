//! Physical constants of copper electrolysis and the quantities derived from
//! them: the electrochemical equivalent, copper for a charge, specific energy.

/// Faraday constant, C/mol. CODATA 2018; exact since the 2019 SI (F = N_A·e).
pub const FARADAY_C_PER_MOL: f64 = 96_485.332_12;

/// Standard atomic weight of copper, g/mol (IUPAC CIAAW).
pub const COPPER_MOLAR_MASS_G_PER_MOL: f64 = 63.546;

/// Electrons transferred per copper atom (Cu²⁺ + 2e⁻ → Cu).
pub const COPPER_ELECTRONS: f64 = 2.0;

/// Density of copper, kg/m³ (8.96 g/cm³, CRC Handbook, physical constants of
/// the elements).
pub const COPPER_DENSITY_KG_PER_M3: f64 = 8_960.0;

/// Standard reduction potential of Cu²⁺/Cu, V (CRC Handbook, electrochemical series).
pub const E0_COPPER_V: f64 = 0.34;

/// Standard reduction potential of O₂/H₂O, V (CRC Handbook, electrochemical series).
pub const E0_OXYGEN_V: f64 = 1.23;

/// Electrochemical equivalent of copper, g/(A·h): 3600·M/(zF).
pub const ECE_G_PER_AH: f64 = 3600.0 * COPPER_MOLAR_MASS_G_PER_MOL / (COPPER_ELECTRONS * FARADAY_C_PER_MOL);

/// Electrochemical equivalent of copper, kg/(A·h).
pub const ECE_KG_PER_AH: f64 = ECE_G_PER_AH / 1000.0;

/// The lowest voltage an inert-anode (electrowinning) cell can run at: oxygen
/// evolves at the anode, so the cell needs at least E°(O₂/H₂O) − E°(Cu²⁺/Cu).
pub const INERT_ANODE_MIN_VOLTS: f64 = E0_OXYGEN_V - E0_COPPER_V;

/// Copper deposited, kg, by `charge_ah` ampere-hours at current efficiency `efficiency`.
pub fn copper_kg(charge_ah: f64, efficiency: f64) -> f64 {
    ECE_KG_PER_AH * charge_ah * efficiency
}

/// Charge, A·h, that deposits `kg` of copper at current efficiency `efficiency`.
pub fn charge_for_copper_ah(kg: f64, efficiency: f64) -> f64 {
    kg / (ECE_KG_PER_AH * efficiency)
}

/// Measured current efficiency: copper weighed over the copper the charge could plate.
/// `None` when no charge flowed (the ratio means nothing then).
pub fn measured_efficiency(weighed_kg: f64, charge_ah: f64) -> Option<f64> {
    (charge_ah > 0.0).then(|| weighed_kg / copper_kg(charge_ah, 1.0))
}

/// Specific electrical energy, kWh per kg of copper, at cell voltage `volts`
/// and cathode current efficiency `efficiency`: U / (ECE·η).
pub fn specific_energy_kwh_per_kg(volts: f64, efficiency: f64) -> f64 {
    // V / (g/(A·h)) = W·h/g = kWh/kg
    volts / (ECE_G_PER_AH * efficiency)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn ece_matches_codata_and_iupac() {
        // 1.18549 g/(A·h): derived from CODATA 2018 F and IUPAC M(Cu); handbook
        // tables give 1.186 (within their rounding of older constants).
        assert!(close(ECE_G_PER_AH, 1.18549, 5e-6), "{ECE_G_PER_AH}");
        assert!(close(ECE_G_PER_AH, 1.186, 1e-3));
    }

    #[test]
    fn atomic_weight_agrees_with_reference_crate() {
        // Cross-check against the `mendeleev` crate's standard atomic weight table.
        let reference: f64 = mendeleev::Element::Cu.atomic_weight().into();
        assert!(close(COPPER_MOLAR_MASS_G_PER_MOL, reference, 1e-9), "{reference}");
    }

    #[test]
    fn density_agrees_with_reference_crate() {
        // mendeleev lists 8.933 g/cm³; CRC gives 8.96 — agree to 0.5 %.
        let reference = mendeleev::Element::Cu.density().map(|d| d.0 * 1000.0);
        let reference = reference.expect("mendeleev has copper's density");
        assert!((COPPER_DENSITY_KG_PER_M3 - reference).abs() / reference < 0.005);
    }

    #[test]
    fn ten_amps_for_an_hour() {
        // 10 A · 1 h at 100 % → 11.855 g (DOMAIN.md worked check, derived from CODATA/IUPAC).
        assert!(close(copper_kg(10.0, 1.0) * 1000.0, 11.855, 5e-4));
    }

    #[test]
    fn twenty_amps_for_ten_hours() {
        // 20 A · 10 h → 237.1 g; a common textbook worked example rounds it to 237 g.
        let g = copper_kg(200.0, 1.0) * 1000.0;
        assert!(close(g, 237.1, 0.05), "{g}");
        assert_eq!(g.round(), 237.0);
    }

    #[test]
    fn specific_energy_at_030_volts() {
        // 0.30 V at 96 % → 0.2636 kWh/kg (DOMAIN.md, derived).
        assert!(close(specific_energy_kwh_per_kg(0.30, 0.96), 0.2636, 5e-5));
    }

    #[test]
    fn inert_anode_minimum() {
        // E°(O₂/H₂O) − E°(Cu²⁺/Cu) = 1.23 − 0.34 = 0.89 V (CRC Handbook).
        assert!(close(INERT_ANODE_MIN_VOLTS, 0.89, 1e-12));
    }

    #[test]
    fn efficiency_round_trip() {
        let q = 105_000.0;
        assert!(close(measured_efficiency(copper_kg(q, 0.96), q).unwrap(), 0.96, 1e-12));
        assert_eq!(measured_efficiency(1.0, 0.0), None);
    }
}
