//! Shared helpers for the validation tests: small structures built in the test, and a one-call
//! periodic solve.
#![allow(dead_code)]

use voxperm::analysis::{AxisFlow, analyse};
use voxperm::geometry::{Axis, PoreMask};
use voxperm::lbm::{BoundaryMode, Domain, Silent, SolverSettings, hydraulic_diameter, solve};

/// Solves a mask with the given boundary mode and force direction and returns the Darcy summary.
pub fn solve_mask(mask: &PoreMask, axis: Axis, mode: BoundaryMode, s: &SolverSettings) -> AxisFlow {
    let domain = Domain::build(mask, axis, mode, u64::MAX).expect("domain");
    let field = solve(&domain, axis, s, &mut Silent).expect("solve");
    assert!(
        field.converged,
        "not converged after {} steps (residual {})",
        field.steps, field.residual
    );
    analyse(&domain, &field, axis, hydraulic_diameter(&domain))
}

/// Periodic solve with the default settings but a tight tolerance.
pub fn solve_periodic(mask: &PoreMask, axis: Axis) -> AxisFlow {
    solve_mask(mask, axis, BoundaryMode::PERIODIC, &tight())
}

/// Default settings with the tolerance used by the validation tests.
pub fn tight() -> SolverSettings {
    SolverSettings {
        tolerance: 1e-8,
        ..SolverSettings::default()
    }
}

/// A periodic slit: `gap` fluid layers and one solid layer, walls normal to `normal`; the other
/// two extents are `width`.
pub fn slit(normal: Axis, gap: usize, width: usize) -> PoreMask {
    let mut shape = [width; 3];
    shape[normal.index()] = gap + 1;
    PoreMask::from_fn(shape, |x, y, z| [x, y, z][normal.index()] < gap)
}

/// A voxelised sphere of radius `r` centred in a periodic cubic cell of side `l` (voxel centres at
/// i + ½, so the sphere keeps the cell's symmetry).
pub fn sphere_cell(l: usize, r: f64) -> PoreMask {
    let c = l as f64 / 2.0;
    PoreMask::from_fn([l; 3], |x, y, z| {
        let d2 = [x, y, z]
            .iter()
            .map(|&i| (i as f64 + 0.5 - c).powi(2))
            .sum::<f64>();
        d2 > r * r
    })
}

/// Relative error.
pub fn rel(got: f64, want: f64) -> f64 {
    (got - want).abs() / want.abs()
}
