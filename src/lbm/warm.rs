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
use super::{BoundaryMode, Ends, Sides};
use crate::geometry::connectivity::percolating;
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

/// Bytes a [`CoarseFlow`] keeps while the fine solve starts, for a fine grid of shape `grid`
/// with `fluid_nodes` fluid nodes: the coarse node map (4 B per coarse voxel, ⌈n/2⌉ per axis)
/// and per coarse node its coordinates, velocity and density (6 + 12 + 4 B). Majority
/// coarsening can keep more than an eighth of the nodes (measured: 1.10 × on a 128³ pack), so
/// the node count is bounded by an eighth plus a quarter of that.
pub fn kept_bytes(grid: [usize; 3], fluid_nodes: u64) -> u64 {
    let coarse_voxels = grid.iter().map(|&n| n.div_ceil(2) as u64).product::<u64>();
    let coarse_nodes = fluid_nodes.div_ceil(8).saturating_mul(5).div_ceil(4);
    coarse_voxels
        .saturating_mul(4)
        .saturating_add(coarse_nodes.saturating_mul(22))
}

/// Peak bytes of one solve stage for a sample of `sample_shape` on a grid of shape `grid` with
/// `fluid_nodes` fluid nodes: [`solve_peak_bytes`](super::memory::solve_peak_bytes) plus the
/// coarse flow when a warm start is planned ([`applies`]). The one figure `describe` prints,
/// the result records and `--max-memory` is checked against.
pub fn solve_stage_bytes(
    sample_shape: [usize; 3],
    grid: [usize; 3],
    fluid_nodes: u64,
    settings: &SolverSettings,
) -> u64 {
    let sample_voxels = sample_shape.iter().map(|&n| n as u64).product::<u64>();
    let grid_voxels = grid.iter().map(|&n| n as u64).product::<u64>();
    let coarse = if applies(sample_shape, settings) {
        kept_bytes(grid, fluid_nodes)
    } else {
        0
    };
    // Sealed edge gaps keep a u32 of link marks per node (Domain::seal_edge_gaps).
    let gaps = if settings.seal_edge_gaps {
        fluid_nodes.saturating_mul(4)
    } else {
        0
    };
    super::memory::solve_peak_bytes(sample_voxels, grid_voxels, fluid_nodes)
        .saturating_add(coarse)
        .saturating_add(gaps)
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

/// The solver's check window (even, at least 2).
fn check_window(settings: &SolverSettings) -> usize {
    settings.check_every.max(2).div_ceil(2) * 2
}

/// Whether a solve of a sample of `shape` with `settings` starts from a coarse solve: the warm
/// start is on, the coarse grid is at least [`MIN_COARSE_EXTENT`] along every axis, and the
/// step cap leaves room for two coarse convergence checks. The memory model counts the coarse
/// flow exactly when this holds.
pub fn applies(shape: [usize; 3], settings: &SolverSettings) -> bool {
    settings.warm_start
        && shape.iter().all(|&n| n >= 2 * MIN_COARSE_EXTENT)
        && settings.max_steps >= 4 * check_window(settings)
}

/// Solves the coarsened mask, or says why not (`Err` carries the reason; the caller starts
/// cold with a note). `Ok(None)`: no coarse solve is planned ([`applies`] is false: the sample
/// or the step cap is too small; no note needed). The coarse solve uses the same collision and
/// τ rule, its own automatic force, a tolerance ten times looser (it only has to be close) and
/// half the step cap.
pub fn solve_coarse(
    mask: &PoreMask,
    axis: Axis,
    mode: BoundaryMode,
    settings: &SolverSettings,
    max_bytes: u64,
    progress: &mut dyn Progress,
) -> Result<Option<CoarseFlow>, String> {
    if !applies(mask.shape(), settings) {
        return Ok(None);
    }
    let window = check_window(settings);
    // Only clusters that still connect inlet and outlet after coarsening: throats narrower
    // than two voxels close, and a coarse grid without a path would only run to its cap.
    let cmode = coarse_mode(mode);
    let perc = percolating(
        &coarsen(mask),
        axis,
        cmode.sides == Sides::Periodic,
        cmode.ends == Ends::Periodic,
    )
    .map_err(|e| format!("coarse grid: {e}"))?;
    if !perc.percolates {
        return Err("no pore path survives coarsening 2× (throats under two voxels)".into());
    }
    let domain = Domain::build(&perc.mask, axis, cmode, max_bytes)
        .map_err(|e| format!("coarse grid: {e}"))?;
    drop(perc);
    let s = SolverSettings {
        force: None,
        tolerance: settings.tolerance * 10.0,
        max_steps: (settings.max_steps / 2).div_ceil(window) * window,
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
        let q = [0, 1, 2].map(|a| coarse_coordinate(fine, a, p[a] as usize).min(cs[a] - 1));
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

/// The coarse grid coordinate along axis `a` that covers fine grid coordinate `p`, through the
/// sample coordinate: along the flow axis a mirrored half or a buffer sits at a different place
/// on the coarse grid when the sample or buffer length is odd (coarse lengths are ⌈n/2⌉).
fn coarse_coordinate(fine: &Domain, a: usize, p: usize) -> usize {
    if a != fine.axis.index() {
        return p / 2;
    }
    let n = fine.sample_shape[a];
    let c = n.div_ceil(2);
    match fine.mode.ends {
        Ends::Periodic => p / 2,
        // Fine: sample 0..n, then its mirror image; coarse: the same with c cells.
        Ends::Mirror if p < n => p / 2,
        Ends::Mirror => 2 * c - 1 - (2 * n - 1 - p) / 2,
        // Fine: b free slices, the sample, b free slices; coarse: ⌈b/2⌉, c, ⌈b/2⌉.
        Ends::Buffer(b) => {
            let cb = b.div_ceil(2);
            if p < b {
                (p / 2).min(cb - 1)
            } else if p < b + n {
                cb + (p - b) / 2
            } else {
                cb + c + ((p - b - n) / 2).min(cb - 1)
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every fine node's coarse cell holds the coarsened image of the fine node's own sample
    /// voxel (or free fluid in a buffer), for odd and even lengths and every kind of end.
    #[test]
    fn fine_nodes_map_to_the_coarse_cell_of_their_sample_voxel() {
        use crate::lbm::{BoundaryMode, Sides};
        for n in [17usize, 18] {
            // Pore wherever x % 4 < 2 (pairs of pore slices), so a coarse cell is pore exactly
            // when its fine voxels are: the map is right iff pore maps to pore everywhere.
            let mask = PoreMask::from_fn([n, 6, 5], |x, y, _| x % 4 < 2 || y == 2);
            for ends in [
                Ends::Periodic,
                Ends::Mirror,
                Ends::Buffer(1),
                Ends::Buffer(3),
            ] {
                let mode = BoundaryMode {
                    sides: Sides::Periodic,
                    ends,
                };
                let fine = Domain::build(&mask, Axis::X, mode, u64::MAX).unwrap();
                let coarse_mask = coarsen(&mask);
                let coarse =
                    Domain::build(&coarse_mask, Axis::X, coarse_mode(mode), u64::MAX).unwrap();
                let cs = coarse.shape;
                for k in 0..fine.fluid_nodes() {
                    let p = fine.coords[k];
                    let q = [0, 1, 2].map(|a| coarse_coordinate(&fine, a, p[a] as usize));
                    assert!(q.iter().zip(cs).all(|(&q, c)| q < c), "{n} {ends:?} {p:?}");
                    let m = coarse.node_of_voxel[q[0] + cs[0] * (q[1] + cs[1] * q[2])];
                    assert_ne!(
                        m, SOLID,
                        "n {n}, {ends:?}: fine {p:?} -> coarse {q:?} is solid"
                    );
                }
            }
        }
    }

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
