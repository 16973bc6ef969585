//! The fluid-node domain of one solve: the (possibly extended) grid, which voxels are fluid, and
//! how each fluid node finds its neighbours.
//!
//! Only fluid nodes get populations. Each fluid node stores its grid coordinates (3 × u16) and the
//! grid stores a u32 node index per voxel (`SOLID` for solid), so a neighbour costs one lookup and
//! no per-link table is kept: 6 bytes per fluid node plus 4 per voxel instead of 72 per node.

use super::boundary::{BoundaryMode, Ends, Sides};
use crate::geometry::{Axis, PoreMask};
use crate::{Error, Result};

/// Marker in the voxel → node map for a solid voxel.
pub const SOLID: u32 = u32::MAX;

/// Bytes of solver state per fluid node: 19 f32 populations plus 3 u16 coordinates.
pub const BYTES_PER_FLUID_NODE: u64 = 19 * 4 + 6;
/// Bytes of solver state per voxel of the (extended) grid: the u32 node map.
pub const BYTES_PER_VOXEL: u64 = 4;

/// The grid the lattice-Boltzmann kernel runs on.
#[derive(Debug, Clone)]
pub struct Domain {
    /// Size of the solver grid (the sample, extended along the flow axis by mirror or buffer).
    pub shape: [usize; 3],
    /// Whether the grid wraps around along each axis; a link leaving a non-periodic face bounces back.
    pub periodic: [bool; 3],
    /// Flow axis the extension was built for.
    pub axis: Axis,
    /// Boundary mode used to build it.
    pub mode: BoundaryMode,
    /// Size of the original sample.
    pub sample_shape: [usize; 3],
    /// Offset of the original sample inside the grid (non-zero along the axis for buffers).
    pub sample_origin: [usize; 3],
    /// Grid coordinates of every fluid node, in memory order (x fastest).
    pub coords: Vec<[u16; 3]>,
    /// Node index of every voxel, or [`SOLID`].
    pub node_of_voxel: Vec<u32>,
    /// Per fluid node, bit j set when its D3Q19 link j is an edge gap treated as a wall
    /// ([`Domain::seal_edge_gaps`]); empty when edge gaps are open (the default).
    pub edge_gaps: Vec<u32>,
}

impl Domain {
    /// Bytes the solver will hold for a grid of `voxels` voxels with `fluid` fluid nodes.
    pub fn memory_estimate(voxels: u64, fluid: u64) -> u64 {
        voxels
            .saturating_mul(BYTES_PER_VOXEL)
            .saturating_add(fluid.saturating_mul(BYTES_PER_FLUID_NODE))
    }

    /// Fluid nodes of the solver grid for a sample of `shape` whose percolating clusters hold
    /// `connected` pore voxels: a mirror doubles them, buffer slices add free fluid.
    pub fn grid_fluid_nodes(
        connected: u64,
        shape: [usize; 3],
        axis: Axis,
        mode: BoundaryMode,
    ) -> u64 {
        let a = axis.index();
        let face = (shape[(a + 1) % 3] * shape[(a + 2) % 3]) as u64;
        match mode.ends {
            Ends::Periodic => connected,
            Ends::Mirror => connected.saturating_mul(2),
            Ends::Buffer(n) => {
                connected.saturating_add((n as u64).saturating_mul(2).saturating_mul(face))
            }
        }
    }

    /// The solver grid shape for a sample of `shape` flowing along `axis` under `mode`.
    pub fn grid_shape(shape: [usize; 3], axis: Axis, mode: BoundaryMode) -> [usize; 3] {
        let mut s = shape;
        let a = axis.index();
        s[a] = match mode.ends {
            Ends::Periodic => shape[a],
            // Saturating: a size beyond usize is refused as too long, not wrapped round.
            Ends::Mirror => shape[a].saturating_mul(2),
            Ends::Buffer(n) => shape[a].saturating_add(n.saturating_mul(2)),
        };
        s
    }

    /// Builds the domain for flow along `axis`. `max_bytes` caps the solver memory; the check runs
    /// before anything large is allocated.
    pub fn build(
        mask: &PoreMask,
        axis: Axis,
        mode: BoundaryMode,
        max_bytes: u64,
    ) -> Result<Domain> {
        let sample_shape = mask.shape();
        let shape = Self::grid_shape(sample_shape, axis, mode);
        if shape.iter().any(|&n| n == 0 || n > u16::MAX as usize + 1) {
            return Err(Error::BadVolume(format!(
                "solver grid {}x{}x{} is empty or exceeds 65536 voxels along an axis",
                shape[0], shape[1], shape[2]
            )));
        }
        let a = axis.index();
        let voxels = (shape[0] * shape[1] * shape[2]) as u64;
        let sample_pores = mask.pore_count() as u64;
        let fluid = match mode.ends {
            Ends::Periodic => sample_pores,
            Ends::Mirror => 2 * sample_pores,
            Ends::Buffer(n) => {
                sample_pores
                    + (2 * n * sample_shape[(a + 1) % 3] * sample_shape[(a + 2) % 3]) as u64
            }
        };
        if fluid >= SOLID as u64 {
            return Err(Error::BadVolume(format!(
                "{fluid} fluid nodes exceed the solver's limit of {} per solve; crop the volume",
                SOLID - 1
            )));
        }
        let need = Self::memory_estimate(voxels, fluid);
        if need > max_bytes {
            return Err(Error::TooLarge {
                what: format!(
                    "the flow solve on a {}x{}x{} grid with {fluid} fluid nodes",
                    shape[0], shape[1], shape[2]
                ),
                needed_bytes: need,
                limit_bytes: max_bytes,
            });
        }

        let sample_origin = {
            let mut o = [0usize; 3];
            if let Ends::Buffer(n) = mode.ends {
                o[a] = n;
            }
            o
        };
        let n_a = sample_shape[a];
        // Which sample voxel (if any) a grid voxel shows, along the flow axis.
        let source = |g: usize| -> Option<usize> {
            match mode.ends {
                Ends::Periodic => Some(g),
                Ends::Mirror => Some(if g < n_a { g } else { 2 * n_a - 1 - g }),
                Ends::Buffer(n) => (g >= n && g < n + n_a).then(|| g - n),
            }
        };

        let mut node_of_voxel = super::pages::filled(voxels as usize, SOLID);
        let mut coords = super::pages::with_capacity(fluid as usize);
        let mut v = 0usize;
        for z in 0..shape[2] {
            for y in 0..shape[1] {
                for x in 0..shape[0] {
                    let mut p = [x, y, z];
                    let is_fluid = match source(p[a]) {
                        Some(s) => {
                            p[a] = s;
                            mask.is_pore(p[0], p[1], p[2])
                        }
                        None => true,
                    };
                    if is_fluid {
                        node_of_voxel[v] = coords.len() as u32;
                        coords.push([x as u16, y as u16, z as u16]);
                    }
                    v += 1;
                }
            }
        }
        debug_assert_eq!(coords.len() as u64, fluid);
        let mut periodic = [mode.sides == Sides::Periodic; 3];
        periodic[a] = true;
        Ok(Domain {
            shape,
            periodic,
            axis,
            mode,
            sample_shape,
            sample_origin,
            coords,
            node_of_voxel,
            edge_gaps: Vec::new(),
        })
    }

    /// Marks every edge gap as a wall: a link along c_j = e_a ± e_b (an edge direction) from a
    /// fluid node to a fluid node whose two shared face neighbours, x + (c_j)_a e_a and
    /// x + (c_j)_b e_b, are both solid. The two voxels touch only along an edge, which a
    /// wall one voxel thick drawn as a diagonal staircase leaves open (README, Connectivity).
    /// The mark is symmetric (the link's other end sees the same two voxels), so the AA
    /// pattern keeps every node's slots to itself. Costs 4 B per fluid node. With every edge
    /// gap closed the solver's links join exactly the voxels face links join (a pore voxel
    /// shared with the target makes a face path), so percolation along face links matches.
    pub fn seal_edge_gaps(&mut self) {
        use super::d3q19::C;
        use rayon::prelude::*;
        let gaps: Vec<u32> = (0..self.fluid_nodes())
            .into_par_iter()
            .map(|k| {
                let c = self.coords[k];
                let mut bits = 0u32;
                for (j, cj) in C.iter().enumerate() {
                    if cj.iter().filter(|&&v| v != 0).count() != 2
                        || self.neighbour(c, *cj).is_none()
                    {
                        continue;
                    }
                    // The link's two components taken one at a time: both must be solid.
                    let closed = (0..3).filter(|&a| cj[a] != 0).all(|a| {
                        let mut d = [0i32; 3];
                        d[a] = cj[a];
                        self.neighbour(c, d).is_none()
                    });
                    if closed {
                        bits |= 1 << j;
                    }
                }
                bits
            })
            .collect();
        self.edge_gaps = if gaps.iter().any(|&b| b != 0) {
            gaps
        } else {
            Vec::new()
        };
    }

    /// True when link `j` of fluid node `node` reaches a fluid node (not solid, not past a
    /// closed face, not a sealed edge gap).
    pub fn link_open(&self, node: usize, j: usize) -> bool {
        self.neighbour(self.coords[node], super::d3q19::C[j])
            .is_some()
            && self.edge_gaps.get(node).is_none_or(|&b| b & (1 << j) == 0)
    }

    /// Number of fluid nodes.
    pub fn fluid_nodes(&self) -> usize {
        self.coords.len()
    }

    /// Number of voxels of the solver grid.
    pub fn voxels(&self) -> usize {
        self.node_of_voxel.len()
    }

    /// True when fluid node `node` lies inside the original sample (not in a buffer or the mirror).
    pub fn in_sample(&self, node: usize) -> bool {
        let c = self.coords[node];
        (0..3).all(|d| {
            let g = c[d] as usize;
            g >= self.sample_origin[d] && g < self.sample_origin[d] + self.sample_shape[d]
        })
    }

    /// The node reached from grid point `c` by the step `dc`, or `None` if that voxel is solid or the
    /// step leaves a non-periodic face.
    #[inline]
    pub fn neighbour(&self, c: [u16; 3], dc: [i32; 3]) -> Option<u32> {
        let mut p = [0usize; 3];
        for d in 0..3 {
            let n = self.shape[d] as i32;
            let mut q = c[d] as i32 + dc[d];
            if q < 0 || q >= n {
                if !self.periodic[d] {
                    return None;
                }
                q = q.rem_euclid(n);
            }
            p[d] = q as usize;
        }
        let m = self.node_of_voxel[p[0] + self.shape[0] * (p[1] + self.shape[1] * p[2])];
        (m != SOLID).then_some(m)
    }

    /// True when every link of fluid node `node` with a non-zero component along axis `a` ends
    /// in a wall (a pore voxel one voxel thick across `a`, walled on both sides: a crack or
    /// sheet). Its momentum along `a` then only bounces back, j ← −(j + F_a) each step, an
    /// undamped two-step oscillation about the mean −F_a/2, so its mean velocity along `a`
    /// (Guo et al. 2002, eq. 20: u = (j + F/2)/ρ) is exactly zero but a snapshot taken every
    /// second step sees one phase of it.
    pub fn sealed_along(&self, node: usize, a: usize) -> bool {
        (1..super::d3q19::Q)
            .filter(|&j| super::d3q19::C[j][a] != 0)
            .all(|j| !self.link_open(node, j))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn column() -> PoreMask {
        // 2x1x3 sample: a pore column at x = 0 with a solid voxel at z = 1.
        PoreMask::from_fn([2, 1, 3], |x, _, z| x == 0 && z != 1)
    }

    #[test]
    fn periodic_domain_keeps_only_fluid() {
        let d = Domain::build(&column(), Axis::Z, BoundaryMode::PERIODIC, u64::MAX).unwrap();
        assert_eq!(d.shape, [2, 1, 3]);
        assert_eq!(d.fluid_nodes(), 2);
        assert_eq!(d.coords, vec![[0, 0, 0], [0, 0, 2]]);
        // z wraps: from z=2 one step up lands on z=0.
        assert_eq!(d.neighbour([0, 0, 2], [0, 0, 1]), Some(0));
        assert_eq!(d.neighbour([0, 0, 0], [0, 0, 1]), None);
    }

    #[test]
    fn mirror_doubles_and_reflects() {
        let mode = BoundaryMode {
            sides: Sides::Sealed,
            ends: Ends::Mirror,
        };
        let d = Domain::build(&column(), Axis::Z, mode, u64::MAX).unwrap();
        assert_eq!(d.shape, [2, 1, 6]);
        let zs: Vec<u16> = d.coords.iter().map(|c| c[2]).collect();
        assert_eq!(zs, vec![0, 2, 3, 5]);
        // Sealed sides: x does not wrap.
        assert_eq!(d.neighbour([0, 0, 0], [-1, 0, 0]), None);
        assert!(d.in_sample(1) && !d.in_sample(2));
    }

    #[test]
    fn buffer_adds_free_fluid_slices() {
        let mode = BoundaryMode {
            sides: Sides::Periodic,
            ends: Ends::Buffer(2),
        };
        let d = Domain::build(&column(), Axis::Z, mode, u64::MAX).unwrap();
        assert_eq!(d.shape, [2, 1, 7]);
        assert_eq!(d.fluid_nodes(), 2 + 2 * 2 * 2);
        assert_eq!(d.sample_origin, [0, 0, 2]);
    }

    /// A buffer that a library caller makes wider than any grid (2N beyond 64 bits) is
    /// refused as too long, not wrapped round to a small grid.
    #[test]
    fn refuses_a_buffer_wider_than_an_axis() {
        for n in [40_000, (usize::MAX >> 1) + 1, usize::MAX] {
            let mode = BoundaryMode {
                sides: Sides::Periodic,
                ends: Ends::Buffer(n),
            };
            let err = Domain::build(&column(), Axis::Z, mode, u64::MAX).unwrap_err();
            assert!(err.to_string().contains("exceeds 65536"), "{n}: {err}");
        }
    }

    #[test]
    fn refuses_beyond_memory_limit() {
        let err = Domain::build(&column(), Axis::Z, BoundaryMode::PERIODIC, 10).unwrap_err();
        assert!(matches!(err, Error::TooLarge { .. }), "{err}");
    }
}
