//! The one table of published reference values voxperm checks itself against (`voxperm check`,
//! `analysis::check`), each value or formula with its source beside it: a short form for tables
//! and the full citation. A value or formula recalled from memory rather than checked against
//! the paper's text is marked `from_memory`, and every table that prints it says so.
//!
//! Permeabilities are dimensionless: k over the square of a length of the geometry (slit gap,
//! duct side, tube radius, sphere or cylinder radius a). "Per open area" values are the mean
//! velocity over the fluid cross-section; multiply by the open fraction for the superficial
//! (Darcy) value.

use crate::geometry::synth::{CylinderPacking, Lattice};

/// Where a reference value comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub struct Source {
    /// Short form for tables, e.g. "Zick & Homsy 1982, Table 2".
    pub short: &'static str,
    /// Full citation.
    pub citation: &'static str,
    /// True when the value or formula was recalled from memory, not checked against the text.
    pub from_memory: bool,
}

impl Source {
    /// The short form, with "(from memory)" when that is the truth.
    pub fn label(&self) -> String {
        if self.from_memory {
            format!("{} (from memory)", self.short)
        } else {
            self.short.to_string()
        }
    }
}

// ---- straight channels -------------------------------------------------------------------------

/// Plane Poiseuille flow between walls a gap h apart: mean velocity h²G/(12μ), so k = h²/12 per
/// open area (White, Viscous Fluid Flow, plane Poiseuille flow). With half-way bounce-back h is
/// the number N of fluid nodes across, and the mean of the exact parabola over the N node
/// midpoints is N²/12 + 1/24 (mean of y(N − y) over y = ½, 3/2, …, N − ½).
pub const PLANE_POISEUILLE: Source = Source {
    short: "plane Poiseuille (analytic)",
    citation: "plane Poiseuille flow, k = h²/12 per open area (White, Viscous Fluid Flow)",
    from_memory: false,
};

/// k/h² per open area of plane Poiseuille flow (see [`PLANE_POISEUILLE`]).
pub const PLANE_POISEUILLE_PER_OPEN_AREA: f64 = 1.0 / 12.0;

/// Square duct of side s: k = 0.0351442537 s² per open area, from the series for the
/// rectangular duct (source below).
pub const SQUARE_DUCT_PER_OPEN_AREA: f64 = 0.0351442537;

/// Source of [`SQUARE_DUCT_PER_OPEN_AREA`].
pub const RECTANGULAR_DUCT_SERIES: Source = Source {
    short: "duct series (White)",
    citation: "White, F. M., Viscous Fluid Flow, rectangular-duct section; Shah & London 1978, \
               f·Re = 14.227 for the square duct",
    from_memory: false,
};

/// Hagen–Poiseuille flow in a tube of radius R: k = R²/8 per open area.
pub const HAGEN_POISEUILLE: Source = Source {
    short: "Hagen–Poiseuille (analytic)",
    citation: "Hagen–Poiseuille flow in a circular tube, k = R²/8 per open area",
    from_memory: false,
};

/// k/R² per open area of a circular tube (see [`HAGEN_POISEUILLE`]).
pub const TUBE_PER_OPEN_AREA: f64 = 1.0 / 8.0;

// ---- periodic sphere arrays --------------------------------------------------------------------

/// Zick & Homsy (1982), Table 2: the drag coefficient K = F / (6πμaU) of a simple cubic array at
/// solid fraction c, U the superficial velocity; then k = 2a²/(9cK).
pub const ZICK_HOMSY_1982: Source = Source {
    short: "Zick & Homsy 1982, Table 2",
    citation: "Zick, A. A. & Homsy, G. M. (1982) Stokes flow through periodic arrays of spheres. \
               J. Fluid Mech. 115, 13–26, Table 2",
    from_memory: false,
};

/// (c, K) pairs of [`ZICK_HOMSY_1982`], simple cubic. The last three K have three significant
/// figures only; the table's last c, 0.5236, is close packing π/6.
pub const ZICK_HOMSY_SC: [(f64, f64); 7] = [
    (0.027, 2.008),
    (0.064, 2.810),
    (0.125, 4.292),
    (0.216, 7.442),
    (0.343, 15.4),
    (0.45, 28.1),
    (std::f64::consts::FRAC_PI_6, 42.1),
];

/// K of [`ZICK_HOMSY_SC`] at solid fraction c, interpolated between table entries (see
/// [`loglog_interpolate`]); `None` outside the table.
pub fn zick_homsy_drag(c: f64) -> Option<f64> {
    loglog_interpolate(&ZICK_HOMSY_SC, c)
}

/// How far beyond the first or last entry [`loglog_interpolate`] extends a table (relative).
pub const TABLE_END_SLACK: f64 = 0.01;

/// Piecewise log-log interpolation in a table of (x, y) with x increasing: ln y linear in ln x
/// between the two entries around `x` (common practice for drag and permeability tables, whose
/// entries follow power laws locally). Used to move a tabulated value the fraction of a percent
/// from a nominal solid fraction to the one a voxel grid achieved. Within [`TABLE_END_SLACK`]
/// beyond the ends the end segment is extended; further out, `None`.
pub fn loglog_interpolate(table: &[(f64, f64)], x: f64) -> Option<f64> {
    let (first, last) = (table.first()?, table.last()?);
    if !(x.is_finite() && x > 0.0)
        || x < first.0 * (1.0 - TABLE_END_SLACK)
        || x > last.0 * (1.0 + TABLE_END_SLACK)
    {
        return None;
    }
    if let Some(&(_, y)) = table.iter().find(|(xt, _)| *xt == x) {
        return Some(y);
    }
    let i = table
        .windows(2)
        .position(|w| x < w[1].0)
        .unwrap_or(table.len().saturating_sub(2));
    let (x0, y0) = table[i];
    let (x1, y1) = *table.get(i + 1)?;
    let t = (x / x0).ln() / (x1 / x0).ln();
    Some(y0 * (y1 / y0).powf(t))
}

/// k/a² = 2/(9cK) of a cubic sphere array with drag coefficient K (ZICK_HOMSY_1982: the volume
/// per sphere (4/3)πa³/c times the pressure gradient balances the drag 6πμaKU).
pub fn sphere_array_k_over_a2(c: f64, drag: f64) -> f64 {
    2.0 / (9.0 * c * drag)
}

/// Dilute expansion for cubic arrays, 1/K = 1 − α c^{1/3} + c − 1.5593 c² (Hasimoto 1959;
/// Sangani & Acrivos 1982); the c and c² terms are from memory and the c² coefficient belongs to
/// the simple cubic lattice, so it is used here only at c ≲ 0.02, where the whole c² term is
/// about 0.1 % of 1/K and the next terms of the simple-cubic series about 0.02 %.
pub const DILUTE_SERIES: Source = Source {
    short: "Hasimoto 1959 series, α by lattice sum",
    citation: "Hasimoto, H. (1959) J. Fluid Mech. 5, 317; Sangani, A. S. & Acrivos, A. (1982) \
               Int. J. Multiphase Flow 8, 343: 1/K = 1 − α c^{1/3} + c − 1.5593 c²",
    from_memory: true,
};

/// α of the dilute series for the simple cubic lattice (Hasimoto 1959).
pub const ALPHA_SC: f64 = 1.7601;
/// α for the body-centred cubic lattice: computed by an Ewald lattice sum after Hasimoto (1959)
/// that reproduces his simple-cubic 1.7601 (a computed value, not a published one).
pub const ALPHA_BCC: f64 = 1.79186;
/// α for the face-centred cubic lattice, computed as [`ALPHA_BCC`].
pub const ALPHA_FCC: f64 = 1.79175;

/// α of the dilute series for a lattice.
pub fn dilute_alpha(lattice: Lattice) -> f64 {
    match lattice {
        Lattice::Sc => ALPHA_SC,
        Lattice::Bcc => ALPHA_BCC,
        Lattice::Fcc => ALPHA_FCC,
    }
}

/// K from the dilute series ([`DILUTE_SERIES`]) at solid fraction c.
pub fn dilute_drag(lattice: Lattice, c: f64) -> f64 {
    1.0 / (1.0 - dilute_alpha(lattice) * c.cbrt() + c - 1.5593 * c * c)
}

/// The simple-cubic series with two more terms, + 3.9799 c^{8/3} − 3.0734 c^{10/3}
/// (Sangani & Acrivos 1982, from memory); matches Zick & Homsy's Table 2 to 0.06 % up to
/// c = 0.125 (our project's reference notes; checked in the tests below).
pub const SC_SERIES: Source = Source {
    short: "Sangani & Acrivos 1982, SC series",
    citation: "Sangani, A. S. & Acrivos, A. (1982) Int. J. Multiphase Flow 8, 343: 1/K = 1 − \
               1.7601 c^{1/3} + c − 1.5593 c² + 3.9799 c^{8/3} − 3.0734 c^{10/3}",
    from_memory: true,
};

/// K from [`SC_SERIES`].
pub fn sc_series_drag(c: f64) -> f64 {
    let t = c.cbrt();
    1.0 / (1.0 - ALPHA_SC * t + c - 1.5593 * c * c + 3.9799 * c * c * t * t
        - 3.0734 * c.powi(3) * t)
}

// ---- arrays of parallel cylinders (k/a², a the cylinder radius, φ the solid fraction) ---------

/// Sangani & Acrivos (1982), Table 1: drag per unit length F/(μU) of a square array, flow across
/// the cylinders, U the superficial velocity; k/a² = π / (φ F/(μU)).
pub const SANGANI_ACRIVOS_1982: Source = Source {
    short: "Sangani & Acrivos 1982, Table 1",
    citation: "Sangani, A. S. & Acrivos, A. (1982) Slow flow past periodic arrays of cylinders \
               with application to heat transfer. Int. J. Multiphase Flow 8, 193–206, Table 1",
    from_memory: false,
};

/// (φ, F/(μU)) pairs of [`SANGANI_ACRIVOS_1982`], square array.
pub const SANGANI_ACRIVOS_SQUARE: [(f64, f64); 8] = [
    (0.05, 15.56),
    (0.10, 24.83),
    (0.20, 51.53),
    (0.30, 102.90),
    (0.40, 217.89),
    (0.50, 532.55),
    (0.60, 1763.0),
    (0.70, 13520.0),
];

/// F/(μU) of [`SANGANI_ACRIVOS_SQUARE`] at φ, interpolated between table entries (see
/// [`loglog_interpolate`]); `None` outside the table.
pub fn sangani_acrivos_drag(phi: f64) -> Option<f64> {
    loglog_interpolate(&SANGANI_ACRIVOS_SQUARE, phi)
}

/// k/a² = π / (φ F/(μU)) (SANGANI_ACRIVOS_1982: the area per cylinder πa²/φ times the pressure
/// gradient balances the drag per length).
pub fn cylinder_k_over_a2(phi: f64, drag_per_length: f64) -> f64 {
    std::f64::consts::PI / (phi * drag_per_length)
}

/// Drummond & Tahir (1984), fits for square and hexagonal arrays, across and along the
/// cylinders (all from memory).
pub const DRUMMOND_TAHIR_1984: Source = Source {
    short: "Drummond & Tahir 1984",
    citation: "Drummond, J. E. & Tahir, M. I. (1984) Laminar viscous flow through regular arrays \
               of parallel solid cylinders. Int. J. Multiphase Flow 10, 515–540",
    from_memory: true,
};

/// k/a² across the cylinders ([`DRUMMOND_TAHIR_1984`]): square
/// (1/8φ)[−ln φ − 1.476 + (2φ − 0.796φ²)/(1 + 0.489φ − 1.605φ²)], good for φ ≲ 0.25; hexagonal
/// (1/8φ)[−ln φ − 1.497 + 2φ − φ²/2 − 0.739φ⁴ + 2.534φ⁵/(1 + 1.2758φ)], good for φ ≲ 0.3.
pub fn drummond_tahir_across(packing: CylinderPacking, phi: f64) -> f64 {
    let bracket = match packing {
        CylinderPacking::Square => {
            -phi.ln() - 1.476
                + (2.0 * phi - 0.796 * phi * phi) / (1.0 + 0.489 * phi - 1.605 * phi * phi)
        }
        CylinderPacking::Hexagonal => {
            -phi.ln() - 1.497 + 2.0 * phi - 0.5 * phi * phi - 0.739 * phi.powi(4)
                + 2.534 * phi.powi(5) / (1.0 + 1.2758 * phi)
        }
    };
    bracket / (8.0 * phi)
}

/// k/a² along the cylinders ([`DRUMMOND_TAHIR_1984`]): square
/// (1/4φ)[−ln φ − 1.476 + 2φ − φ²/2 − 0.0508 φ⁴], hexagonal (1/4φ)[−ln φ − 1.4975 + 2φ − φ²/2],
/// good to about 0.5 % for φ ≲ 0.4.
pub fn drummond_tahir_along(packing: CylinderPacking, phi: f64) -> f64 {
    let bracket = match packing {
        CylinderPacking::Square => {
            -phi.ln() - 1.476 + 2.0 * phi - 0.5 * phi * phi - 0.0508 * phi.powi(4)
        }
        CylinderPacking::Hexagonal => -phi.ln() - 1.4975 + 2.0 * phi - 0.5 * phi * phi,
    };
    bracket / (4.0 * phi)
}

// ---- packed beds -------------------------------------------------------------------------------

/// Carman (1937): k = d²φ³/(180(1 − φ)²) for a bed of spheres of diameter d (computed by
/// `analysis::kozeny::kozeny_carman_spheres`). Random monodisperse packs at φ ≈ 0.36–0.45
/// scatter by roughly ±25 % around it (from memory), so only a wide band is a fair check.
pub const CARMAN_1937: Source = Source {
    short: "Carman 1937, ±25 % band",
    citation: "Carman, P. C. (1937) Fluid flow through granular beds. Trans. Inst. Chem. Eng. 15, \
               150–166; scatter of random packs about ±25 %",
    from_memory: true,
};

/// Relative scatter of random sphere packs around Kozeny–Carman ([`CARMAN_1937`], from memory).
pub const CARMAN_KOZENY_SCATTER: f64 = 0.25;

#[cfg(test)]
mod tests {
    use super::*;

    // Consistency of the tables with each other and with the derived columns of our project's
    // reference notes (k/a² next to each table entry); these are arithmetic checks of our
    // transcription, not of the solver.

    #[test]
    fn zick_homsy_k_over_a2_matches_the_derived_column() {
        // Derived column k/a² = 2/(9cK) next to Table 2: 4.09883 at c = 0.027, 0.0420700
        // at c = 0.343.
        let k = sphere_array_k_over_a2(0.027, zick_homsy_drag(0.027).unwrap());
        assert!((k / 4.09883 - 1.0).abs() < 1e-5, "{k}");
        let k = sphere_array_k_over_a2(0.343, zick_homsy_drag(0.343).unwrap());
        assert!((k / 0.0420700 - 1.0).abs() < 1e-5, "{k}");
        assert!(zick_homsy_drag(0.02).is_none());
        assert!(zick_homsy_drag(0.6).is_none());
    }

    #[test]
    fn loglog_interpolation_is_exact_for_power_laws_and_hits_the_entries() {
        let table = [
            (0.1, 2.0),
            (0.2, 2.0 * 2f64.powf(-1.5)),
            (0.4, 2.0 * 4f64.powf(-1.5)),
        ];
        for x in [0.1, 0.13, 0.2, 0.31, 0.4, 0.402] {
            let want = 2.0 * (x / 0.1f64).powf(-1.5);
            let got = loglog_interpolate(&table, x).unwrap();
            assert!((got / want - 1.0).abs() < 1e-12, "{x}: {got} vs {want}");
        }
        assert_eq!(loglog_interpolate(&table, 0.2), Some(table[1].1));
        assert!(loglog_interpolate(&table, 0.098).is_none());
        assert!(loglog_interpolate(&table, 0.41).is_none());
        // Within a fraction of a percent of an entry the move is small: Table 2 at c = 0.1251.
        let k = zick_homsy_drag(0.1251).unwrap();
        assert!(k > 4.292 && k < 4.292 * 1.002, "{k}");
    }

    #[test]
    fn sc_series_reproduces_table_2_in_the_dilute_range() {
        // The extended series matches Table 2 to 0.06 % up to c = 0.125 (from memory).
        for c in [0.027, 0.064, 0.125] {
            let k = sc_series_drag(c);
            let t = zick_homsy_drag(c).unwrap();
            assert!((k / t - 1.0).abs() < 6e-4, "c {c}: {k} vs {t}");
        }
        // The truncated series stays within 0.1 % of the extended one below c = 0.02.
        assert!((dilute_drag(Lattice::Sc, 0.02) / sc_series_drag(0.02) - 1.0).abs() < 1e-3);
    }

    #[test]
    fn drummond_tahir_square_agrees_with_sangani_acrivos_at_low_fractions() {
        // Two independent sources for the same flow (Sangani & Acrivos Table 1; Drummond &
        // Tahir's fit, from memory) agree to 0.1 % at φ ≤ 0.1.
        for phi in [0.05, 0.1] {
            let sa = cylinder_k_over_a2(phi, sangani_acrivos_drag(phi).unwrap());
            let dt = drummond_tahir_across(CylinderPacking::Square, phi);
            assert!((dt / sa - 1.0).abs() < 1e-3, "phi {phi}: {dt} vs {sa}");
        }
        // Derived column next to Table 1: k/a² = 0.304831 at φ = 0.2.
        let k = cylinder_k_over_a2(0.2, sangani_acrivos_drag(0.2).unwrap());
        assert!((k / 0.304831 - 1.0).abs() < 1e-5);
    }

    #[test]
    fn sources_say_from_memory_when_they_are() {
        assert!(DRUMMOND_TAHIR_1984.label().ends_with("(from memory)"));
        assert_eq!(ZICK_HOMSY_1982.label(), "Zick & Homsy 1982, Table 2");
    }
}
