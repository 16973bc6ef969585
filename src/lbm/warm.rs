//! Warm start from a coarser grid: the pore mask coarsened 2× along every axis is solved first
//! (an eighth of the nodes, and its slow modes settle in fewer steps), and its flow, rescaled
//! to the fine grid, becomes the fine solve's initial state instead of rest. The fine solve
//! then runs to the same convergence criterion as a cold one, so the answer is the fine grid's
//! own; only the number of fine steps changes. (Solving a coarsened problem to start a fine
//! one is nested iteration, the first stage of full multigrid; Brandt 1977, Math. Comp. 31,
//! 333.)
//!
//! Rescaling, for the same lattice viscosity ratio and body force ratio: the lattice
//! permeability of the coarse grid is a quarter of the fine one (the voxel edge doubles), so
//! u_fine ≈ 4 (g_f/g_c) (ν_c/ν_f) u_coarse (Darcy, u = k g/ν); a pressure difference over a
//! fixed physical length spans twice as many fine nodes at the fine force, so
//! δρ_fine ≈ 2 (g_f/g_c) δρ_coarse. Fine nodes take the values of the coarse cell that holds
//! them (piecewise constant); the pore-scale error this leaves near walls relaxes within a few
//! viscous times d_h²/ν, much faster than the modes the coarse solve removed.

use super::domain::{Domain, SOLID};
use super::kernel::Lattice;
use super::solver::{FlowField, Progress, SolverSettings, solve};
use super::{BoundaryMode, Ends};
use crate::geometry::{Axis, PoreMask};
use rayon::prelude::*;

/// Smallest coarse extent worth solving: below it the coarse grid says little about the fine
/// flow.
pub const MIN_COARSE_EXTENT: usize = 8;

/// Nodes per block of the mass sum.
const BLOCK: usize = 4096;

/// The coarse grid and its converged flow, kept until the fine lattice is initialised.
pub struct CoarseFlow {
    pub domain: Domain,
    pub field: FlowField,
}

/// Bytes a [`CoarseFlow`] keeps while the fine solve starts, for a fine sample of `voxels`
/// voxels and `fluid_nodes` fine fluid nodes: node map (4 B per coarse voxel), coordinates,
/// velocity and density (6 + 12 + 4 B per coarse node), coarse mask and counts rounded up.
pub fn kept_bytes(grid_voxels: u64, fluid_nodes: u64) -> u64 {
    (grid_voxels / 8) * 4 + (fluid_nodes / 8) * 22
}

/// The mask coarsened 2× along each axis: a coarse voxel is pore when at least half of the fine
/// voxels it covers are (a cell at an odd edge covers fewer).
pub fn coarsen(mask: &PoreMask) -> PoreMask {
    let [nx, ny, nz] = mask.shape();
    let shape = [nx.div_ceil(2), ny.div_ceil(2), nz.div_ceil(2)];
    PoreMask::from_fn(shape, |x, y, z| {
        let (mut pore, mut all) = (0, 0);
        for fz in 2 * z..(2 * z + 2).min(nz) {
            for fy in 2 * y..(2 * y + 2).min(ny) {
                for fx in 2 * x..(2 * x + 2).min(nx) {
                    all += 1;
                    pore += mask.is_pore(fx, fy, fz) as usize;
                }
            }
        }
        2 * pore >= all
    })
}

/// The boundary mode of the coarse grid: the same faces, buffer slices halved (rounded up).
fn coarse_mode(mode: BoundaryMode) -> BoundaryMode {
    BoundaryMode {
        sides: mode.sides,
        ends: match mode.ends {
            Ends::Buffer(n) => Ends::Buffer(n.div_ceil(2)),
            e => e,
        },
    }
}

/// Solves the coarsened mask, or says why not (`Err` carries the reason; the caller starts
/// cold). `Ok(None)`: the sample is too small for a coarse grid to help (no note needed). The coarse solve uses the same collision and τ rule, its own automatic force, and a
/// tolerance ten times looser: it only has to be close.
pub fn solve_coarse(
    mask: &PoreMask,
    axis: Axis,
    mode: BoundaryMode,
    settings: &SolverSettings,
    max_bytes: u64,
    progress: &mut dyn Progress,
) -> Result<Option<CoarseFlow>, String> {
    if mask.shape().iter().any(|&n| n < 2 * MIN_COARSE_EXTENT) {
        return Ok(None);
    }
    let coarse = coarsen(mask);
    let domain = Domain::build(&coarse, axis, coarse_mode(mode), max_bytes)
        .map_err(|e| format!("coarse grid: {e}"))?;
    drop(coarse);
    if domain.fluid_nodes() == 0 {
        return Err("the coarsened pore space is empty".into());
    }
    let s = SolverSettings {
        force: None,
        tolerance: settings.tolerance * 10.0,
        max_steps: settings.max_steps.div_ceil(2),
        ..settings.clone()
    };
    let field = solve(&domain, axis, &s, progress).map_err(|e| format!("coarse solve: {e}"))?;
    let mean: f64 = field.velocity.iter().map(|u| u[axis.index()] as f64).sum();
    if mean.is_nan() || mean <= 0.0 {
        return Err("no flow through the coarsened pore space".into());
    }
    Ok(Some(CoarseFlow { domain, field }))
}

/// The fine lattice's initial state from a coarse flow, for a fine solve with body force
/// `force` and viscosity `nu` (module docs: rescaling and mapping).
pub fn initial_lattice(fine: &Domain, coarse: &CoarseFlow, force: [f64; 3], nu: f64) -> Lattice {
    let c = &coarse.field;
    let axis = (0..3)
        .max_by(|&a, &b| c.force[a].abs().total_cmp(&c.force[b].abs()))
        .unwrap_or(0);
    let g_ratio = if c.force[axis] != 0.0 {
        force[axis] / c.force[axis]
    } else {
        0.0
    };
    let u_scale = (4.0 * g_ratio * c.viscosity / nu) as f32;
    let rho_scale = (2.0 * g_ratio) as f32;
    let cs = coarse.domain.shape;
    let coarse_node = |k: usize| {
        let p = fine.coords[k];
        let q = [0, 1, 2].map(|a| (p[a] as usize / 2).min(cs[a] - 1));
        let m = coarse.domain.node_of_voxel[q[0] + cs[0] * (q[1] + cs[1] * q[2])];
        (m != SOLID).then_some(m as usize)
    };
    // The mass of the fine grid is conserved from here on, and the steady velocity under a
    // body-force density scales with 1/ρ: the start must hold exactly the mass of a cold
    // start (mean density 1), or the answer moves (measured: 0.03 % on a 96³ pack).
    // Summed in fixed blocks added in order, so every thread count gives the same start.
    let n = fine.fluid_nodes();
    let blocks: Vec<f64> = (0..n.div_ceil(BLOCK))
        .into_par_iter()
        .map(|b| {
            (b * BLOCK..((b + 1) * BLOCK).min(n))
                .map(|k| coarse_node(k).map_or(0.0, |m| c.density[m] as f64 - 1.0))
                .sum::<f64>()
        })
        .collect();
    let excess = blocks.iter().sum::<f64>() * rho_scale as f64 / n.max(1) as f64;
    Lattice::from_state(fine, force, |k| match coarse_node(k) {
        None => ((1.0 - excess) as f32, [0.0; 3]),
        Some(m) => {
            let u = c.velocity[m];
            (
                (1.0 - excess + rho_scale as f64 * (c.density[m] as f64 - 1.0)) as f32,
                [u[0] * u_scale, u[1] * u_scale, u[2] * u_scale],
            )
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn coarsening_keeps_pore_majorities_and_odd_edges() {
        // x < 4 pore, else solid; 5×2×2 → 3×1×1: [pore, pore, solid]; the last coarse cell
        // covers one fine column (x = 4, solid).
        let m = PoreMask::from_fn([5, 2, 2], |x, _, _| x < 4);
        let c = coarsen(&m);
        assert_eq!(c.shape(), [3, 1, 1]);
        assert_eq!(c.as_slice(), &[true, true, false]);
        // Half pore counts as pore; fewer than half does not.
        let half = PoreMask::from_fn([2, 2, 2], |x, _, _| x == 0);
        assert!(coarsen(&half).is_pore(0, 0, 0));
        let quarter = PoreMask::from_fn([2, 2, 2], |x, y, _| x == 0 && y == 0);
        assert!(!coarsen(&quarter).is_pore(0, 0, 0));
    }
}
