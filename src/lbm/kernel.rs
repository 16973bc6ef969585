//! The collide-and-stream kernel: TRT (or BGK) collision with Guo forcing, half-way bounce-back,
//! in-place streaming with the AA access pattern, f32 populations stored as deviations f − w_i.
//!
//! AA pattern (Bailey, Myre, Walsh, Lilja & Saar 2009, ICPP, 550–557): one population array,
//! updated in place. On an *even* step each node reads its own 19 slots and writes the
//! post-collision values back into the opposite slots. On an *odd* step a node gathers f_i from
//! slot ī of the node at x − c_i and scatters the post-collision f_i to slot i of the node at
//! x + c_i. In both cases the set of slots a node writes is the set it read, so nodes never race
//! and no second lattice is needed. After an odd step the array holds the plain (streamed,
//! pre-collision) populations again.
//!
//! Half-way bounce-back: when x − c_i is solid (or outside a non-periodic face) the odd step reads
//! slot i of the node itself instead, which holds the node's own post-collision f_ī of the previous
//! step — the population that hit the wall half-way and came back. The slot index is resolved per
//! link into the same gather/scatter table, so the collision has no wall branches.
//!
//! Storing f − w_i keeps f32 accurate: the deviations are O(ρ − 1, u) ≈ 1e-3, so rounding acts on
//! the part of f that carries the flow (common practice; Skordos 1993, Phys. Rev. E 48, 4823).

use super::collide::{CollideConsts, LANES, Lanes, collide_lanes, moments};
use super::d3q19::{C, CS2, Q, W, opposite};
use super::domain::{Domain, SOLID};
use rayon::prelude::*;

/// Nodes per work unit. Fixed, so reductions add the same partial sums in the same order for
/// any thread count (bit-identical results).
pub const CHUNK: usize = 4096;

/// Relaxation rates and force of one solve, in lattice units.
#[derive(Debug, Clone, Copy)]
pub struct KernelParams {
    /// ω⁺ = 1/τ⁺: relaxes the symmetric (even) part and sets the viscosity.
    pub omega_plus: f64,
    /// ω⁻ = 1/τ⁻: relaxes the antisymmetric (odd) part. Equal to ω⁺ for BGK.
    pub omega_minus: f64,
    /// Body-force density (acceleration with ρ₀ = 1) in lattice units.
    pub force: [f64; 3],
}

/// Per-chunk sums gathered while colliding.
#[derive(Debug, Clone, Copy, Default)]
pub struct Sums {
    /// Σ u over fluid nodes.
    pub u: [f64; 3],
    /// max |u|² over fluid nodes.
    pub u2_max: f64,
}

impl Sums {
    fn add(&mut self, o: &Sums) {
        for d in 0..3 {
            self.u[d] += o.u[d];
        }
        self.u2_max = self.u2_max.max(o.u2_max);
    }
}

/// Distance between the slot arrays, in f32 values, for `n` nodes: n rounded up to a multiple
/// of 1024 and 16 more, so array j starts 64·j bytes after a 4 KiB boundary. With a stride
/// that is (close to) a multiple of 4 KiB the loads of one slot and the stores of another at
/// the same node alias in the low 12 address bits, which the CPU checks first when ordering
/// loads after stores ("4K aliasing", Intel 64 and IA-32 Architectures Optimization Reference
/// Manual): measured, the even step fell from 250 to 150 MLUPS on a 128³ pack with n padded to
/// a multiple of 1024. Costs at most 1040 values per slot.
pub fn slot_stride(n: usize) -> usize {
    n.div_ceil(1024) * 1024 + 16
}

/// Populations of every fluid node, structure of arrays: slot i of node k is
/// `f[i * stride + k]` with the stride of [`slot_stride`].
pub struct Lattice {
    n: usize,
    stride: usize,
    f: Vec<f32>,
    partial: Vec<Sums>,
    /// Number of completed steps; even means the array holds plain populations.
    pub steps: usize,
    /// Kernel build to use; `None` picks the best one the CPU runs.
    isa: Option<Isa>,
}

/// Raw pointer shared between rayon workers. Safe because the AA pattern gives every node a
/// disjoint set of slots (see the module docs).
#[derive(Clone, Copy)]
struct Slots(*mut f32);
unsafe impl Send for Slots {}
unsafe impl Sync for Slots {}

impl Slots {
    /// The pointer. A method (not a field access) so closures capture the whole `Slots`, which
    /// is `Send`, rather than the bare pointer, which is not.
    #[inline(always)]
    fn ptr(self) -> *mut f32 {
        self.0
    }
}

/// How the odd step finds neighbours without branches: the grid extents, strides and which
/// axes wrap.
#[derive(Clone, Copy)]
struct Grid {
    /// Last index along each axis (n − 1).
    last: [u32; 3],
    periodic: [bool; 3],
    /// Voxel-map strides of y and z.
    sy: usize,
    sz: usize,
}

/// Per-step constants shared by all blocks.
struct BlockConsts {
    col: CollideConsts,
    grid: Grid,
    #[cfg(target_arch = "x86_64")]
    simd: super::odd_x86::SimdGrid,
}

/// Which build of the kernel runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Isa {
    /// Plain Rust, whatever the compiler makes of it for the baseline target.
    Portable,
    /// AVX2+FMA: vectorised collision, hardware gathers on odd steps.
    Avx2,
    /// AVX2 plus AVX-512F/VL: as `Avx2`, with scatters for the odd step's stores.
    Avx512,
}

impl Isa {
    /// The best build this CPU runs, for a domain of `voxels` voxels and `nodes` fluid nodes
    /// (the gathers use signed 32-bit indices, so larger domains take the portable path).
    pub fn detect(voxels: usize, nodes: usize) -> Isa {
        if voxels > i32::MAX as usize || nodes > i32::MAX as usize {
            return Isa::Portable;
        }
        #[cfg(target_arch = "x86_64")]
        {
            let avx2 =
                std::is_x86_feature_detected!("avx2") && std::is_x86_feature_detected!("fma");
            let avx512 = std::is_x86_feature_detected!("avx512f")
                && std::is_x86_feature_detected!("avx512vl");
            if avx2 && avx512 {
                return Isa::Avx512;
            }
            if avx2 {
                return Isa::Avx2;
            }
        }
        Isa::Portable
    }
}

/// Dispatches one chunk to the even/odd kernel of the chosen build.
///
/// # Safety
/// `base` points to Q slot arrays `n` apart (the slot stride); nodes `start..end` are owned by this call for the step;
/// `isa` no better than [`Isa::detect`] said.
#[allow(clippy::too_many_arguments)]
unsafe fn run_chunk(
    isa: Isa,
    odd: bool,
    sums: bool,
    domain: &Domain,
    c: &BlockConsts,
    base: *mut f32,
    n: usize,
    start: usize,
    end: usize,
) -> Sums {
    macro_rules! pick {
        ($f:ident, $($g:tt)*) => {
            match (odd, sums) {
                (true, true) => $f::<true, true $($g)*>(domain, c, base, n, start, end),
                (true, false) => $f::<true, false $($g)*>(domain, c, base, n, start, end),
                (false, true) => $f::<false, true $($g)*>(domain, c, base, n, start, end),
                (false, false) => $f::<false, false $($g)*>(domain, c, base, n, start, end),
            }
        };
    }
    unsafe {
        match isa {
            #[cfg(target_arch = "x86_64")]
            Isa::Avx512 => pick!(chunk_avx512,),
            #[cfg(target_arch = "x86_64")]
            Isa::Avx2 => pick!(chunk_avx2,),
            _ => pick!(chunk_body, , 0),
        }
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn chunk_avx2<const ODD: bool, const SUMS: bool>(
    domain: &Domain,
    c: &BlockConsts,
    base: *mut f32,
    n: usize,
    start: usize,
    end: usize,
) -> Sums {
    unsafe { chunk_body::<ODD, SUMS, 1>(domain, c, base, n, start, end) }
}

/// The odd step with AVX-512 scatters. Built for AVX2 only: the scatters sit in their own
/// AVX-512 function, so the compiler keeps the AVX2 code for everything else (measured: letting
/// it use AVX-512 throughout made the collision slower on the development machine).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn chunk_avx512<const ODD: bool, const SUMS: bool>(
    domain: &Domain,
    c: &BlockConsts,
    base: *mut f32,
    n: usize,
    start: usize,
    end: usize,
) -> Sums {
    unsafe { chunk_body::<ODD, SUMS, 2>(domain, c, base, n, start, end) }
}

/// Collide-and-stream for nodes `start..end`, in blocks of [`LANES`]. A short last block repeats
/// its final node in the unused lanes: they compute and store identical values, and are left out
/// of the sums. `SIMD` is 0 (portable), 1 (AVX2 gathers) or 2 (AVX-512 scatters too) and only
/// changes how the odd step's full blocks move data.
#[inline(always)]
unsafe fn chunk_body<const ODD: bool, const SUMS: bool, const SIMD: u8>(
    domain: &Domain,
    c: &BlockConsts,
    base: *mut f32,
    n: usize,
    start: usize,
    end: usize,
) -> Sums {
    let mut s = Sums::default();
    let mut at = [[0usize; LANES]; Q];
    let mut d = [[0.0f32; LANES]; Q];
    let mut k = start;
    while k < end {
        let used = (end - k).min(LANES);
        let full = used == LANES;
        // A block with a sealed edge gap (Domain::seal_edge_gaps) takes the portable path,
        // which reads the gap marks; the vector path does not.
        #[cfg(target_arch = "x86_64")]
        if ODD
            && SIMD > 0
            && full
            && (domain.edge_gaps.is_empty()
                || domain.edge_gaps[k..k + LANES].iter().all(|&b| b == 0))
        {
            let u = unsafe {
                if SIMD == 2 {
                    super::odd_x86::odd_block::<true>(domain, &c.simd, &c.col, base, n, k)
                } else {
                    super::odd_x86::odd_block::<false>(domain, &c.simd, &c.col, base, n, k)
                }
            };
            if SUMS {
                add_sums(&mut s, &u, used);
            }
            k += used;
            continue;
        }
        if ODD {
            unsafe { odd_slots(domain, &c.grid, k, used, n, &mut at) };
            for i in 0..Q {
                let src = &at[opposite(i)];
                for l in 0..LANES {
                    d[i][l] = unsafe { *base.add(src[l]) };
                }
            }
        } else if full {
            for i in 0..Q {
                d[i] = unsafe { (base.add(i * n + k) as *const Lanes).read_unaligned() };
            }
        } else {
            for i in 0..Q {
                for l in 0..LANES {
                    d[i][l] = unsafe { *base.add(i * n + k + l.min(used - 1)) };
                }
            }
        }
        let u = collide_lanes(&mut d, &c.col);
        if ODD {
            for i in 0..Q {
                for l in 0..LANES {
                    unsafe { *base.add(at[i][l]) = d[i][l] };
                }
            }
        } else if full {
            for i in 0..Q {
                let o = opposite(i);
                unsafe { (base.add(o * n + k) as *mut Lanes).write_unaligned(d[i]) };
            }
        } else {
            for i in 0..Q {
                let o = opposite(i);
                for l in 0..LANES {
                    unsafe { *base.add(o * n + k + l.min(used - 1)) = d[i][l] };
                }
            }
        }
        if SUMS {
            add_sums(&mut s, &u, used);
        }
        k += used;
    }
    s
}

/// Adds the velocities of the first `used` lanes to the chunk's sums, in lane order.
#[inline(always)]
fn add_sums(s: &mut Sums, u: &[Lanes; 3], used: usize) {
    for l in 0..used {
        s.u[0] += u[0][l] as f64;
        s.u[1] += u[1][l] as f64;
        s.u[2] += u[2][l] as f64;
        let u2 = (u[0][l] * u[0][l] + u[1][l] * u[1][l] + u[2][l] * u[2][l]) as f64;
        if u2 > s.u2_max || u2.is_nan() {
            s.u2_max = u2;
        }
    }
}

/// The slot table of an odd step for the nodes `k..k + used` (lanes past `used` repeat the
/// last node). `at[j]` is slot j of the node at x + c_j when that voxel is fluid and the link
/// is not a sealed edge gap (`Domain::edge_gaps`), else slot j̄ of the node itself (half-way
/// bounce-back); `at[0]` is the node's rest slot. The node reads its
/// f_i from `at[ī]` and writes its post-collision f_i to `at[i]`: the same set of slots.
///
/// Branch-free: the neighbour coordinate along each axis is chosen with selects (wrapped on a
/// periodic axis, flagged as outside on a closed one) and a voxel outside a closed face counts
/// as solid, so interior and boundary nodes take the same path.
///
/// # Safety
/// `k + used` is at most the node count, `used >= 1`; `n` is the slot stride.
#[inline(always)]
unsafe fn odd_slots(
    domain: &Domain,
    g: &Grid,
    k: usize,
    used: usize,
    n: usize,
    at: &mut [[usize; LANES]; Q],
) {
    let coords = &domain.coords;
    let map = &domain.node_of_voxel;
    let gaps = &domain.edge_gaps;
    let mut node = [0usize; LANES];
    // Per axis, the coordinate one step down / same / up (as map offsets) and whether a step
    // down / up leaves a closed face.
    let mut off = [[[0usize; LANES]; 3]; 3];
    let mut outside = [[[false; LANES]; 2]; 3];
    let strides = [1usize, g.sy, g.sz];
    for l in 0..LANES {
        node[l] = k + l.min(used - 1);
        let p = unsafe { *coords.get_unchecked(node[l]) };
        for a in 0..3 {
            let x = p[a] as u32;
            let lo = x == 0;
            let hi = x == g.last[a];
            let down = if lo {
                if g.periodic[a] { g.last[a] } else { 0 }
            } else {
                x - 1
            };
            let up = if hi {
                if g.periodic[a] { 0 } else { x }
            } else {
                x + 1
            };
            off[a][0][l] = down as usize * strides[a];
            off[a][1][l] = x as usize * strides[a];
            off[a][2][l] = up as usize * strides[a];
            outside[a][0][l] = lo && !g.periodic[a];
            outside[a][1][l] = hi && !g.periodic[a];
        }
    }
    at[0] = node;
    for j in 1..Q {
        let cj = C[j];
        let o = opposite(j);
        for l in 0..LANES {
            let v = off[0][(cj[0] + 1) as usize][l]
                + off[1][(cj[1] + 1) as usize][l]
                + off[2][(cj[2] + 1) as usize][l];
            let mut out = false;
            for a in 0..3 {
                if cj[a] == -1 {
                    out |= outside[a][0][l];
                } else if cj[a] == 1 {
                    out |= outside[a][1][l];
                }
            }
            let m = unsafe { *map.get_unchecked(v) };
            let sealed = !gaps.is_empty() && gaps[node[l]] & (1 << j) != 0;
            let fluid = !out && m != SOLID && !sealed;
            at[j][l] = if fluid {
                j * n + m as usize
            } else {
                o * n + node[l]
            };
        }
    }
}

impl Lattice {
    /// A lattice at rest (ρ = 1, u = 0 everywhere: all deviations zero).
    pub fn at_rest(domain: &Domain) -> Lattice {
        let n = domain.fluid_nodes();
        let stride = slot_stride(n);
        Lattice {
            n,
            stride,
            f: super::pages::zeros(Q * stride),
            partial: vec![Sums::default(); n.div_ceil(CHUNK)],
            steps: 0,
            isa: None,
        }
    }

    /// A lattice at equilibrium with the density and velocity `state(k)` gives for node k, as
    /// a start closer to the steady flow than rest. The populations carry j = ρu − F/2, so that
    /// the velocity read back (Guo et al. 2002, eq. 20) is u.
    pub fn from_state(
        domain: &Domain,
        force: [f64; 3],
        state: impl Fn(usize) -> (f32, [f32; 3]) + Sync,
    ) -> Lattice {
        let mut lattice = Lattice::at_rest(domain);
        let (n, stride) = (lattice.n, lattice.stride);
        let slots = Slots(lattice.f.as_mut_ptr());
        (0..n.div_ceil(CHUNK)).into_par_iter().for_each(|chunk| {
            let base = slots.ptr();
            for k in chunk * CHUNK..((chunk + 1) * CHUNK).min(n) {
                let (rho, u) = state(k);
                let (rho, u) = (rho as f64, u.map(|v| v as f64));
                let ue = [0, 1, 2].map(|a| u[a] - 0.5 * force[a] / rho);
                let usq = ue[0] * ue[0] + ue[1] * ue[1] + ue[2] * ue[2];
                for i in 0..Q {
                    let cu = (0..3).map(|a| C[i][a] as f64 * ue[a]).sum::<f64>() / CS2;
                    let feq = W[i] * rho * (1.0 + cu + 0.5 * cu * cu - 0.5 * usq / CS2);
                    // SAFETY: slot i of node k, below Q·stride; each chunk writes its own nodes.
                    unsafe { *base.add(i * stride + k) = (feq - W[i]) as f32 };
                }
            }
        });
        lattice
    }

    /// Runs the kernel build `isa`, or the best this CPU has if that is less: asking for a build
    /// the CPU lacks cannot make it execute unsupported instructions.
    pub fn set_isa(&mut self, isa: Isa, domain: &Domain) {
        let best = Isa::detect(domain.voxels(), self.n);
        self.isa = Some(isa.min(best));
    }

    /// Number of fluid nodes.
    pub fn nodes(&self) -> usize {
        self.n
    }

    /// The population deviations f − w, slot i of node k at `i * stride() + k`. After an even
    /// number of steps they are the plain (streamed, pre-collision) populations.
    pub fn populations(&self) -> &[f32] {
        &self.f
    }

    /// Distance between slot arrays ([`slot_stride`]).
    pub fn stride(&self) -> usize {
        self.stride
    }

    /// One time step (collide + stream) over all nodes. Returns Σu and max|u|² of the
    /// pre-collision state, summed in a fixed order.
    pub fn step(&mut self, domain: &Domain, p: &KernelParams) -> Sums {
        self.run_step(domain, p, true);
        let mut total = Sums::default();
        for s in &self.partial {
            total.add(s);
        }
        total
    }

    /// One time step like [`Lattice::step`] without the sums: the solver needs them only on
    /// its check steps, and leaving them out saves a serial f64 reduction per node. Same
    /// populations as `step`, bit for bit.
    pub fn advance(&mut self, domain: &Domain, p: &KernelParams) {
        self.run_step(domain, p, false);
    }

    fn run_step(&mut self, domain: &Domain, p: &KernelParams, want_sums: bool) {
        let (n, stride) = (self.n, self.stride);
        let odd = self.steps % 2 == 1;
        let slots = Slots(self.f.as_mut_ptr());
        let c = BlockConsts {
            col: CollideConsts {
                g: [p.force[0] as f32, p.force[1] as f32, p.force[2] as f32],
                om_p: p.omega_plus as f32,
                om_m: p.omega_minus as f32,
            },
            grid: Grid {
                last: domain.shape.map(|s| (s - 1) as u32),
                periodic: domain.periodic,
                sy: domain.shape[0],
                sz: domain.shape[0] * domain.shape[1],
            },
            #[cfg(target_arch = "x86_64")]
            simd: super::odd_x86::SimdGrid {
                last: domain.shape.map(|s| (s - 1) as u32),
                periodic: domain.periodic,
                strides: [
                    1,
                    domain.shape[0] as u32,
                    (domain.shape[0] * domain.shape[1]) as u32,
                ],
            },
        };
        let isa = self.isa.unwrap_or_else(|| Isa::detect(domain.voxels(), n));
        self.partial
            .par_iter_mut()
            .enumerate()
            .for_each(|(chunk, sums)| {
                let base = slots.ptr();
                let start = chunk * CHUNK;
                let end = (start + CHUNK).min(n);
                // SAFETY: every index the chunk touches is below Q · stride, and the slots of a node
                // are touched by no other node in this step (AA pattern, module docs). The SIMD
                // path runs only where the CPU has the features it was compiled for.
                *sums =
                    unsafe { run_chunk(isa, odd, want_sums, domain, &c, base, stride, start, end) };
            });
        self.steps += 1;
    }

    /// Density and velocity of every node. Valid after an even number of steps (plain layout).
    pub fn macroscopic(&self, p: &KernelParams) -> (Vec<f32>, Vec<[f32; 3]>) {
        debug_assert!(self.steps.is_multiple_of(2));
        let n = self.n;
        let g = [p.force[0] as f32, p.force[1] as f32, p.force[2] as f32];
        (0..n)
            .into_par_iter()
            .map(|k| {
                let mut d = [0.0f32; Q];
                for (i, di) in d.iter_mut().enumerate() {
                    *di = self.f[i * self.stride + k];
                }
                let (_, rho, u) = moments(&d, g);
                (rho, u)
            })
            .unzip()
    }

    /// [`Lattice::macroscopic`], consuming the lattice so the outputs never coexist with all
    /// the populations: each node's density and velocity overwrite its own slots 0–3 (no other
    /// node reads them), the array is cut to those four slots and shrunk (the allocator hands
    /// the rest back), and the velocity vector is built from what is left. Peak: 16 + 12 bytes
    /// per node instead of 76 + 16.
    pub fn into_macroscopic(mut self, p: &KernelParams) -> (Vec<f32>, Vec<[f32; 3]>) {
        debug_assert!(self.steps.is_multiple_of(2));
        let (n, stride) = (self.n, self.stride);
        let g = [p.force[0] as f32, p.force[1] as f32, p.force[2] as f32];
        let slots = Slots(self.f.as_mut_ptr());
        (0..n.div_ceil(CHUNK)).into_par_iter().for_each(|chunk| {
            let base = slots.ptr();
            for k in chunk * CHUNK..((chunk + 1) * CHUNK).min(n) {
                let mut d = [0.0f32; Q];
                // SAFETY: node k reads and writes only its own slots (i * stride + k), all
                // below Q·stride.
                unsafe {
                    for (i, di) in d.iter_mut().enumerate() {
                        *di = *base.add(i * stride + k);
                    }
                    let (_, rho, u) = moments(&d, g);
                    *base.add(k) = rho;
                    *base.add(stride + k) = u[0];
                    *base.add(2 * stride + k) = u[1];
                    *base.add(3 * stride + k) = u[2];
                }
            }
        });
        let mut f = std::mem::take(&mut self.f);
        f.truncate(4 * stride);
        f.shrink_to_fit();
        let velocity: Vec<[f32; 3]> = (0..n)
            .into_par_iter()
            .map(|k| [f[stride + k], f[2 * stride + k], f[3 * stride + k]])
            .collect();
        f.truncate(n);
        f.shrink_to_fit();
        (f, velocity)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::{Axis, PoreMask};
    use crate::lbm::{BoundaryMode, Ends, Sides};

    /// Blocks the SIMD odd step moves with plain loads and stores: eight consecutive voxels of
    /// one row, away from the x faces, whose 18 neighbours are all fluid.
    fn interior_blocks(domain: &Domain) -> usize {
        let n = domain.fluid_nodes();
        (0..n / CHUNK + 1)
            .flat_map(|c| (c * CHUNK..((c + 1) * CHUNK).min(n)).step_by(LANES))
            .filter(|&k| k + LANES <= n.min((k / CHUNK + 1) * CHUNK))
            .filter(|&k| {
                let (a, b) = (domain.coords[k], domain.coords[k + LANES - 1]);
                a[1] == b[1]
                    && a[2] == b[2]
                    && b[0] as usize == a[0] as usize + LANES - 1
                    && a[0] >= 1
                    && (b[0] as usize) < domain.shape[0] - 1
                    && (k..k + LANES)
                        .all(|m| (1..Q).all(|j| domain.neighbour(domain.coords[m], C[j]).is_some()))
            })
            .count()
    }

    /// Every kernel build must move exactly the same values: the SIMD odd step (gathers,
    /// scatters, the contiguous-row shortcut, the all-fluid block) against the portable one,
    /// on grids with solid voxels, closed and periodic faces and a chunk that ends in a short
    /// block; and a step without sums must move the same values as one with them.
    #[test]
    fn every_build_gives_identical_populations() {
        // Irregular solid pattern with long fluid x-runs (so rows take the shortcut) and short
        // ones; and a mostly open grid where many blocks have no wall around them.
        let sparse = PoreMask::from_fn([37, 11, 9], |x, y, z| {
            let h = (x * 7 + y * 13 + z * 29) % 31;
            !(h < 2 || (y == 3 && x % 3 == 0) || (x > 20 && (y + z) % 5 == 0))
        });
        let open = PoreMask::from_fn([45, 12, 10], |x, y, z| {
            !((x % 19 == 4 && y % 6 == 1) || (z == 7 && y == 9 && x > 30))
        });
        let modes = [
            BoundaryMode::PERIODIC,
            BoundaryMode {
                sides: Sides::Sealed,
                ends: Ends::Mirror,
            },
            BoundaryMode {
                sides: Sides::Sealed,
                ends: Ends::Buffer(1),
            },
        ];
        let mut interior = 0;
        let mut gap_nodes = 0;
        for ((mask, mode), seal) in [&sparse, &open]
            .into_iter()
            .flat_map(|m| modes.map(|mode| (m, mode)))
            .flat_map(|c| [(c, false), (c, true)])
        {
            let mut domain = Domain::build(mask, Axis::X, mode, u64::MAX).unwrap();
            if seal {
                // Sealed edge gaps: blocks holding one take the portable path in every build.
                domain.seal_edge_gaps();
                gap_nodes += domain.edge_gaps.iter().filter(|&&b| b != 0).count();
            }
            interior += interior_blocks(&domain);
            if mode.ends != Ends::Mirror {
                assert!(
                    !domain.fluid_nodes().is_multiple_of(LANES),
                    "want a short last block"
                );
            }
            let p = KernelParams {
                omega_plus: 1.0 / 0.8,
                omega_minus: 1.0 / 1.1,
                force: [2e-4, -3e-5, 1e-5],
            };
            let run = |isa: Isa, every: usize| {
                let mut lat = Lattice::at_rest(&domain);
                lat.set_isa(isa, &domain);
                let mut sums = Vec::new();
                for t in 0..7 {
                    if t % every == every - 1 {
                        let s = lat.step(&domain, &p);
                        sums.push((s.u, s.u2_max));
                    } else {
                        lat.advance(&domain, &p);
                    }
                }
                (lat.f.clone(), sums)
            };
            let reference = run(Isa::Portable, 1);
            assert!(reference.0.iter().any(|&v| v != 0.0));
            for isa in [Isa::Avx2, Isa::Avx512] {
                let other = run(isa, 1);
                assert!(
                    reference.0 == other.0,
                    "{isa:?} populations differ ({mode:?})"
                );
                assert_eq!(reference.1, other.1, "{isa:?} sums differ ({mode:?})");
                let quiet = run(isa, 3);
                assert!(
                    reference.0 == quiet.0,
                    "{isa:?} steps without sums differ ({mode:?})"
                );
                assert_eq!(quiet.1, vec![reference.1[2], reference.1[5]]);
            }
        }
        assert!(interior > 50, "only {interior} all-fluid blocks");
        assert!(
            gap_nodes > 20,
            "only {gap_nodes} nodes with a sealed edge gap"
        );
    }

    /// A wall one voxel thick drawn as a staircase (x = 3 + y mod 2) has edge gaps at every
    /// step: open, flow crosses it; sealed, every link across it is a wall, the marks are
    /// symmetric (the AA pattern needs the other end to agree), and nothing crosses.
    #[test]
    fn sealed_edge_gaps_close_a_staircase_wall() {
        use super::super::d3q19::C;
        let stair = PoreMask::from_fn([8, 4, 3], |x, y, _| x != 3 + y % 2);
        let mut domain = Domain::build(&stair, Axis::X, BoundaryMode::PERIODIC, u64::MAX).unwrap();
        let crossing = |d: &Domain| {
            (0..d.fluid_nodes())
                .flat_map(|k| (1..Q).map(move |j| (k, j)))
                .filter(|&(k, j)| {
                    let x = d.coords[k][0] as i32;
                    let to = x + C[j][0];
                    d.link_open(k, j) && ((x <= 3 && to >= 4) || (x >= 4 && to <= 3))
                })
                .count()
        };
        assert!(crossing(&domain) > 0, "open gaps must pass the wall");
        domain.seal_edge_gaps();
        assert_eq!(crossing(&domain), 0);
        for k in 0..domain.fluid_nodes() {
            for j in 1..Q {
                if domain.edge_gaps[k] & (1 << j) != 0 {
                    let m = domain.neighbour(domain.coords[k], C[j]).unwrap() as usize;
                    assert!(domain.edge_gaps[m] & (1 << opposite(j)) != 0, "{k} {j}");
                }
            }
        }
    }

    /// An equilibrium start reads back as the density and velocity it was given (the F/2 of
    /// the velocity definition included).
    #[test]
    fn state_start_reads_back_its_density_and_velocity() {
        let mask = PoreMask::from_fn([10, 6, 5], |x, y, _| (x + y) % 4 != 0);
        let domain = Domain::build(&mask, Axis::X, BoundaryMode::PERIODIC, u64::MAX).unwrap();
        let p = KernelParams {
            omega_plus: 1.0,
            omega_minus: 1.0,
            force: [3e-4, 0.0, -1e-4],
        };
        let state = |k: usize| {
            let t = k as f32;
            (
                1.0 + 1e-3 * (t * 0.7).sin(),
                [2e-3 * (t * 0.3).cos(), -1e-3, 5e-4 * t.sin()],
            )
        };
        let lat = Lattice::from_state(&domain, p.force, state);
        let (rho, u) = lat.macroscopic(&p);
        for k in 0..domain.fluid_nodes() {
            let (r, v) = state(k);
            assert!((rho[k] - r).abs() < 1e-6, "node {k}: rho {} vs {r}", rho[k]);
            for a in 0..3 {
                assert!(
                    (u[k][a] - v[a]).abs() < 1e-7,
                    "node {k}: u {:?} vs {v:?}",
                    u[k]
                );
            }
        }
    }

    #[test]
    fn into_macroscopic_matches_macroscopic() {
        let mask = PoreMask::from_fn([19, 7, 6], |x, y, z| (x * 3 + y * 5 + z) % 7 != 0);
        let domain = Domain::build(&mask, Axis::Z, BoundaryMode::PERIODIC, u64::MAX).unwrap();
        let p = KernelParams {
            omega_plus: 1.0,
            omega_minus: 1.0 / 0.9,
            force: [1e-5, 2e-5, 3e-4],
        };
        let mut lat = Lattice::at_rest(&domain);
        for _ in 0..10 {
            lat.step(&domain, &p);
        }
        let (rho, u) = lat.macroscopic(&p);
        assert!(u.iter().any(|v| v[2] != 0.0));
        let (rho2, u2) = lat.into_macroscopic(&p);
        assert_eq!(rho, rho2);
        assert_eq!(u, u2);
    }

    /// Asking for a build the CPU lacks falls back to one it has.
    #[test]
    fn requested_build_is_capped_by_the_cpu() {
        let mask = PoreMask::from_fn([8, 8, 8], |x, _, _| x != 3);
        let domain = Domain::build(&mask, Axis::Y, BoundaryMode::PERIODIC, u64::MAX).unwrap();
        let mut lat = Lattice::at_rest(&domain);
        lat.set_isa(Isa::Avx512, &domain);
        assert!(lat.isa.unwrap() <= Isa::detect(domain.voxels(), domain.fluid_nodes()));
    }
}
