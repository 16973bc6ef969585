//! Unit conversions for permeability.

/// One darcy in m²: the permeability passing 1 cm³/s of a 1 cP fluid through 1 cm² under
/// 1 atm/cm, i.e. 10⁻⁷/101325 m² = 9.869233 × 10⁻¹³ m² (NIST SP 811, Appendix B.8, lists
/// 9.869233 E−13 m² — from memory; the defining quantities give the same value exactly).
pub const DARCY_M2: f64 = 1e-7 / 101_325.0;

/// One millidarcy in m².
pub const MILLIDARCY_M2: f64 = DARCY_M2 * 1e-3;

/// Converts a lattice permeability (voxel²) to m² for a voxel edge of `voxel_m` metres.
pub fn lattice_to_m2(k_lattice: f64, voxel_m: f64) -> f64 {
    k_lattice * voxel_m * voxel_m
}

/// Converts m² to millidarcy.
pub fn m2_to_md(k_m2: f64) -> f64 {
    k_m2 / MILLIDARCY_M2
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn darcy_matches_reference_value() {
        // NIST SP 811 Appendix B.8: 1 darcy = 9.869233 E-13 m² (from memory).
        assert!((DARCY_M2 / 9.869233e-13 - 1.0).abs() < 1e-7);
        // 1 voxel² at 1 µm is 1e-12 m² ≈ 1013.25 mD.
        let md = m2_to_md(lattice_to_m2(1.0, 1e-6));
        assert!((md - 1013.25).abs() < 1e-9, "{md}");
    }
}
