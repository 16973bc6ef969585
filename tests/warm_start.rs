//! Warm start from the 2× coarsened image (src/lbm/warm.rs): the fine solve starts from the
//! rescaled coarse flow and runs to the same convergence criterion, so it must reach the same
//! permeability as a cold start (within 0.1 %, the requirement in README.md, Performance) in
//! fewer fine steps; where the sample is too small for a coarse grid it must start from rest.
mod common;
use common::rel;
use voxperm::analysis::{Estimate, EstimateConfig, analyse, estimate};
use voxperm::geometry::synth::{PackMethod, PackParams, RadiusDist, sphere_pack};
use voxperm::geometry::{Axis, PoreMask};
use voxperm::lbm::warm::solve_coarse;
use voxperm::lbm::{BoundaryMode, Domain, Ends, Sides, Silent, SolverSettings, solve, solve_from};

#[test]
fn warm_start_keeps_k_in_fewer_fine_steps() {
    let pack = sphere_pack(
        &PackParams {
            shape: [64; 3],
            porosity: 0.42,
            radius: RadiusDist::Mono { radius: 7.0 },
            method: PackMethod::Relaxation,
        },
        5,
    )
    .unwrap();
    let modes = [
        BoundaryMode::PERIODIC,
        BoundaryMode {
            sides: Sides::Sealed,
            ends: Ends::Mirror,
        },
    ];
    for mode in modes {
        let s = SolverSettings::default();
        assert!(s.warm_start, "warm start is the default");
        let domain = Domain::build(&pack.mask, Axis::X, mode, u64::MAX).unwrap();
        let cold = solve(&domain, Axis::X, &s, &mut Silent).unwrap();
        let coarse = solve_coarse(&pack.mask, Axis::X, mode, &s, u64::MAX, &mut Silent)
            .unwrap()
            .expect("64³ is large enough for a coarse grid");
        let coarse_nodes = coarse.domain.fluid_nodes();
        let warm = solve_from(&domain, Axis::X, &s, &mut Silent, Some(coarse)).unwrap();
        assert!(cold.converged && warm.converged);
        let k_cold = analyse(&domain, &cold, Axis::X).permeability;
        let k_warm = analyse(&domain, &warm, Axis::X).permeability;
        let w = warm.warm_start.expect("warm start recorded");
        println!(
            "{mode:?}: cold {k_cold:.6} in {} steps, warm {k_warm:.6} in {} fine + {} coarse steps",
            cold.steps, warm.steps, w.coarse_steps
        );
        assert_eq!(w.coarse_nodes, coarse_nodes);
        assert!(
            coarse_nodes * 6 < domain.fluid_nodes(),
            "coarse grid not coarse"
        );
        assert!(rel(k_warm, k_cold) < 1e-3, "{k_warm} vs {k_cold}");
        assert!(warm.steps < cold.steps, "{} vs {}", warm.steps, cold.steps);
        assert!(cold.warm_start.is_none());
    }
}

/// The periodic x estimate of `mask` started from rest and with the warm start.
fn cold_and_warm(mask: &PoreMask) -> (Estimate, Estimate) {
    let run = |warm_start| {
        let cfg = EstimateConfig {
            axes: vec![Axis::X],
            mode: BoundaryMode::PERIODIC,
            solver: SolverSettings {
                warm_start,
                ..SolverSettings::default()
            },
            max_memory_bytes: u64::MAX,
            voxel_size_m: None,
        };
        estimate(mask, &cfg, &mut Silent, false).unwrap().0
    };
    (run(false), run(true))
}

#[test]
fn too_small_for_a_coarse_grid_starts_from_rest() {
    let mask = common::sphere_cell(12, 4.0);
    let (cold, warm) = cold_and_warm(&mask);
    let (c, w) = (&cold.axes[0], &warm.axes[0]);
    assert!(w.warm_start.is_none());
    assert!(w.note.is_none(), "{:?}", w.note);
    assert_eq!(c.permeability_lattice, w.permeability_lattice);
    assert_eq!(c.steps, w.steps);
}

#[test]
fn pores_too_thin_for_the_coarse_grid_start_from_rest_with_a_note() {
    // Tubes one voxel wide: every 2×2×2 cell of the coarse grid is at most a quarter pore, so
    // the coarsened image has no pore space and the solve must start cold, saying why.
    let mask = PoreMask::from_fn([32, 16, 16], |_, y, z| y % 4 == 1 && z % 4 == 1);
    let (cold, warm) = cold_and_warm(&mask);
    let (c, w) = (&cold.axes[0], &warm.axes[0]);
    assert!(w.warm_start.is_none());
    let note = w.note.as_deref().unwrap_or("");
    assert!(note.starts_with("started from rest: "), "note: {note}");
    assert_eq!(c.permeability_lattice, w.permeability_lattice);
}

#[test]
fn cavities_joined_by_thin_throats_start_from_rest_at_once() {
    // 12³ cavities joined along x by throats one voxel wide: the coarsened image keeps the
    // cavities but no path between them, so the coarse solve must be skipped (not run to its
    // step cap) and the solve must start from rest, saying why.
    let cell = |c: usize| (2..14).contains(&(c % 16));
    let mask = PoreMask::from_fn([64, 32, 32], |x, y, z| {
        (cell(x) && cell(y) && cell(z)) || (y % 16 == 8 && z % 16 == 8)
    });
    let (cold, warm) = cold_and_warm(&mask);
    let (c, w) = (&cold.axes[0], &warm.axes[0]);
    assert!(c.converged && c.permeability_lattice > 0.0);
    assert!(w.warm_start.is_none());
    let note = w.note.as_deref().unwrap_or("");
    assert!(note.contains("survives coarsening"), "note: {note}");
    assert_eq!(c.permeability_lattice, w.permeability_lattice);
    assert_eq!(c.steps, w.steps);
}
