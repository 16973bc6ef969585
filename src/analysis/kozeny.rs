//! Kozeny–Carman permeability estimates from porosity and specific surface, and the Kozeny
//! constant implied by a simulated permeability.
//!
//! All functions return `None` instead of NaN or infinity when the formula has no finite meaning
//! for the inputs (no surface, no grains, non-physical porosity), so a caller can print "n/a"
//! rather than propagate a NaN into a result file.

/// Kozeny constant c_K for packed beds of spheres: Carman, P. C. (1937) Fluid flow through
/// granular beds, Trans. Inst. Chem. Eng. 15, 150–166 (5 × 36 = 180 in the sphere form).
pub const KOZENY_CONSTANT: f64 = 5.0;

fn porosity_ok(phi: f64) -> bool {
    (0.0..=1.0).contains(&phi)
}

fn positive(v: f64) -> bool {
    v.is_finite() && v > 0.0
}

/// Kozeny–Carman in specific-surface form, k = φ³ / (c_K S_v²) (Carman 1937, as above), with S_v
/// the pore–solid surface per bulk volume. With S_v in 1/voxel the result is in voxel².
///
/// Returns `Some(0.0)` for φ = 0 (no pore space carries no flow), and `None` when S_v ≤ 0 (no
/// surface: the formula diverges), c_K ≤ 0, φ is outside [0, 1], or any input is not finite.
pub fn kozeny_carman_from_surface(porosity: f64, s_v: f64, c_k: f64) -> Option<f64> {
    if !porosity_ok(porosity) || !positive(s_v) || !positive(c_k) {
        return None;
    }
    Some(porosity.powi(3) / (c_k * s_v * s_v))
}

/// Kozeny–Carman for a bed of spheres of diameter d, k = d² φ³ / (180 (1 − φ)²) (Carman 1937,
/// as above). k has the units of d².
///
/// Returns `Some(0.0)` for φ = 0, and `None` for φ = 1 (no grains: the formula diverges), φ
/// outside [0, 1], d ≤ 0, or non-finite input.
pub fn kozeny_carman_spheres(porosity: f64, d: f64) -> Option<f64> {
    if !porosity_ok(porosity) || porosity >= 1.0 || !positive(d) {
        return None;
    }
    let solid = 1.0 - porosity;
    Some(d * d * porosity.powi(3) / (180.0 * solid * solid))
}

/// Specific surface of a bed of spheres of diameter d at porosity φ: S_v = 6(1 − φ)/d (surface
/// πd² over volume πd³/6 per grain, times the solid fraction; geometry). Units 1/d. `None` for
/// φ outside [0, 1], d ≤ 0 or non-finite input.
pub fn sphere_bed_specific_surface(porosity: f64, d: f64) -> Option<f64> {
    if !porosity_ok(porosity) || !positive(d) {
        return None;
    }
    Some(6.0 * (1.0 - porosity) / d)
}

/// The Kozeny constant that makes the specific-surface form reproduce a permeability k:
/// c_K = φ³ / (k S_v²) (the same equation solved for c_K).
///
/// Returns `None` when k ≤ 0 (no flow: no finite constant reproduces it), S_v ≤ 0, φ ≤ 0 or
/// φ > 1, or any input is not finite.
pub fn implied_kozeny_constant(k: f64, porosity: f64, s_v: f64) -> Option<f64> {
    if !positive(k) || !positive(s_v) || !porosity_ok(porosity) || porosity <= 0.0 {
        return None;
    }
    Some(porosity.powi(3) / (k * s_v * s_v))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn surface_form_equals_sphere_form_for_sphere_surface() {
        // Consistency identity, not an outside check: substituting S_v = 6(1 − φ)/d into
        // φ³/(5 S_v²) gives d²φ³/(180(1 − φ)²) because 5 × 36 = 180 (Carman 1937).
        for &(phi, d) in &[(0.36, 1.0), (0.4, 20.0), (0.476, 7.5), (0.9, 0.3)] {
            let s = sphere_bed_specific_surface(phi, d).unwrap();
            let a = kozeny_carman_from_surface(phi, s, KOZENY_CONSTANT).unwrap();
            let b = kozeny_carman_spheres(phi, d).unwrap();
            assert!((a - b).abs() <= 1e-12 * b, "phi {phi} d {d}: {a} vs {b}");
        }
    }

    #[test]
    fn sphere_form_matches_hand_computed_value() {
        // d = 1, φ = 0.4: 0.064 / (180 · 0.36) = 0.064 / 64.8 (arithmetic by hand).
        let k = kozeny_carman_spheres(0.4, 1.0).unwrap();
        assert!((k - 0.064 / 64.8).abs() < 1e-15);
        // k scales with d².
        let k10 = kozeny_carman_spheres(0.4, 10.0).unwrap();
        assert!((k10 / k - 100.0).abs() < 1e-10);
    }

    #[test]
    fn implied_constant_inverts_the_surface_form() {
        let (phi, s) = (0.3, 0.07);
        for c in [1.0, 5.0, 12.5] {
            let k = kozeny_carman_from_surface(phi, s, c).unwrap();
            let back = implied_kozeny_constant(k, phi, s).unwrap();
            assert!((back - c).abs() < 1e-12 * c);
        }
    }

    #[test]
    fn degenerate_inputs_give_zero_or_none_never_nan() {
        assert_eq!(kozeny_carman_from_surface(0.0, 0.1, 5.0), Some(0.0));
        assert_eq!(kozeny_carman_from_surface(0.3, 0.0, 5.0), None);
        assert_eq!(kozeny_carman_from_surface(0.3, 0.1, 0.0), None);
        assert_eq!(kozeny_carman_from_surface(1.2, 0.1, 5.0), None);
        assert_eq!(kozeny_carman_from_surface(f64::NAN, 0.1, 5.0), None);
        assert_eq!(kozeny_carman_spheres(0.0, 1.0), Some(0.0));
        assert_eq!(kozeny_carman_spheres(1.0, 1.0), None);
        assert_eq!(kozeny_carman_spheres(0.4, 0.0), None);
        assert_eq!(kozeny_carman_spheres(0.4, f64::INFINITY), None);
        assert_eq!(implied_kozeny_constant(0.0, 0.3, 0.1), None);
        assert_eq!(implied_kozeny_constant(1.0, 0.0, 0.1), None);
        assert_eq!(implied_kozeny_constant(1.0, 0.3, 0.0), None);
        assert_eq!(sphere_bed_specific_surface(-0.1, 1.0), None);
    }
}
