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

use super::d3q19::{C, CS2, PAIRS, Q, W, opposite};
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

/// Populations of every fluid node, structure of arrays: slot i of node k is `f[i * n + k]`.
pub struct Lattice {
    n: usize,
    f: Vec<f32>,
    partial: Vec<Sums>,
    /// Number of completed steps; even means the array holds plain populations.
    pub steps: usize,
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

const CX: [f32; Q] = cf(0);
const CY: [f32; Q] = cf(1);
const CZ: [f32; Q] = cf(2);
const WF: [f32; Q] = wf();

const fn cf(d: usize) -> [f32; Q] {
    let mut out = [0.0f32; Q];
    let mut i = 0;
    while i < Q {
        out[i] = C[i][d] as f32;
        i += 1;
    }
    out
}

const fn wf() -> [f32; Q] {
    let mut out = [0.0f32; Q];
    let mut i = 0;
    while i < Q {
        out[i] = W[i] as f32;
        i += 1;
    }
    out
}

/// Velocity at a node from its deviations d = f − w: ρ = 1 + Σ d, ρu = Σ d c + F/2
/// (Guo, Zheng & Shi 2002, Phys. Rev. E 65, 046308, eq. 20 — half the force enters the moment).
#[inline(always)]
fn moments(d: &[f32; Q], g: [f32; 3]) -> (f32, f32, [f32; 3]) {
    let mut rho_m1 = 0.0f32;
    let mut j = [0.0f32; 3];
    for i in 0..Q {
        rho_m1 += d[i];
        j[0] += d[i] * CX[i];
        j[1] += d[i] * CY[i];
        j[2] += d[i] * CZ[i];
    }
    let rho = 1.0 + rho_m1;
    let inv = 1.0 / rho;
    let u = [
        (j[0] + 0.5 * g[0]) * inv,
        (j[1] + 0.5 * g[1]) * inv,
        (j[2] + 0.5 * g[2]) * inv,
    ];
    (rho_m1, rho, u)
}

/// TRT collision with Guo forcing, in place on the deviations of one node. Returns u.
///
/// Equilibrium f_eq = w ρ (1 + c·u/c_s² + (c·u)²/(2c_s⁴) − u²/(2c_s²)); symmetric and
/// antisymmetric parts relax with ω⁺ and ω⁻ (Ginzburg, Verhaeghe & d'Humières 2008, Commun.
/// Comput. Phys. 3, 427); the Guo source w[(c−u)/c_s² + (c·u)c/c_s⁴]·F is split the same way, each
/// part scaled by (1 − ω±/2) (the TRT form of Guo et al. 2002, eq. 19).
///
/// The one-node form is the readable reference; the kernel runs [`collide_lanes`], and a test
/// checks the two agree.
#[cfg(test)]
fn collide(d: &mut [f32; Q], g: [f32; 3], om_p: f32, om_m: f32) -> [f32; 3] {
    let (rho_m1, rho, u) = moments(d, g);
    let usq = u[0] * u[0] + u[1] * u[1] + u[2] * u[2];
    let ug = u[0] * g[0] + u[1] * g[1] + u[2] * g[2];
    let fp = 1.0 - 0.5 * om_p;
    let fm = 1.0 - 0.5 * om_m;
    let inv_cs2 = (1.0 / CS2) as f32;

    let eq0 = WF[0] * (rho_m1 - 0.5 * inv_cs2 * rho * usq);
    d[0] += -om_p * (d[0] - eq0) + fp * WF[0] * (-inv_cs2 * ug);
    for i in 1..=PAIRS {
        let o = i + PAIRS;
        let w = WF[i];
        let cu = CX[i] * u[0] + CY[i] * u[1] + CZ[i] * u[2];
        let cg = CX[i] * g[0] + CY[i] * g[1] + CZ[i] * g[2];
        let eq_p = w * (rho_m1 + rho * (0.5 * inv_cs2 * inv_cs2 * cu * cu - 0.5 * inv_cs2 * usq));
        let eq_m = w * rho * inv_cs2 * cu;
        let src_p = fp * w * (inv_cs2 * inv_cs2 * cu * cg - inv_cs2 * ug);
        let src_m = fm * w * inv_cs2 * cg;
        let dp = 0.5 * (d[i] + d[o]);
        let dm = 0.5 * (d[i] - d[o]);
        let a = om_p * (dp - eq_p);
        let b = om_m * (dm - eq_m);
        d[i] += -a - b + src_p + src_m;
        d[o] += -a + b + src_p - src_m;
    }
    u
}

/// Nodes processed together: the collision is written over lanes so the compiler vectorises it
/// (SoA storage makes the even step's loads and stores contiguous).
const LANES: usize = 8;

/// Per-step constants shared by all blocks.
struct BlockConsts {
    g: [f32; 3],
    om_p: f32,
    om_m: f32,
    offsets: [isize; Q],
}

/// True when the AVX2+FMA build of the kernel can run here (x86-64 only).
fn simd_available() -> bool {
    #[cfg(target_arch = "x86_64")]
    {
        std::is_x86_feature_detected!("avx2") && std::is_x86_feature_detected!("fma")
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        false
    }
}

/// Dispatches one chunk to the even/odd kernel, wide (AVX2+FMA) or baseline.
///
/// # Safety
/// `base` points to Q·n populations; nodes `start..end` are owned by this call for the step;
/// `wide` only where [`simd_available`] said so.
#[allow(clippy::too_many_arguments)]
unsafe fn run_chunk(
    wide: bool,
    odd: bool,
    domain: &Domain,
    c: &BlockConsts,
    base: *mut f32,
    n: usize,
    start: usize,
    end: usize,
) -> Sums {
    #[cfg(target_arch = "x86_64")]
    if wide {
        return unsafe {
            if odd {
                chunk_avx2::<true>(domain, c, base, n, start, end)
            } else {
                chunk_avx2::<false>(domain, c, base, n, start, end)
            }
        };
    }
    let _ = wide;
    unsafe {
        if odd {
            chunk_body::<true>(domain, c, base, n, start, end)
        } else {
            chunk_body::<false>(domain, c, base, n, start, end)
        }
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn chunk_avx2<const ODD: bool>(
    domain: &Domain,
    c: &BlockConsts,
    base: *mut f32,
    n: usize,
    start: usize,
    end: usize,
) -> Sums {
    unsafe { chunk_body::<ODD>(domain, c, base, n, start, end) }
}

/// Collide-and-stream for nodes `start..end`, in blocks of [`LANES`]. A short last block repeats
/// its final node in the unused lanes: they compute and store identical values, and are left out
/// of the sums.
#[inline(always)]
unsafe fn chunk_body<const ODD: bool>(
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
        if ODD {
            let mut one = [0usize; Q];
            for l in 0..LANES {
                gather_table(domain, &c.offsets, k + l.min(used - 1), n, &mut one);
                for i in 0..Q {
                    at[i][l] = one[i];
                }
            }
            for i in 0..Q {
                for l in 0..LANES {
                    d[i][l] = unsafe { *base.add(at[i][l]) };
                }
            }
        } else {
            for i in 0..Q {
                for l in 0..LANES {
                    d[i][l] = unsafe { *base.add(i * n + k + l.min(used - 1)) };
                }
            }
        }
        let u = collide_lanes(&mut d, c.g, c.om_p, c.om_m);
        if ODD {
            for l in 0..LANES {
                unsafe {
                    *base.add(at[0][l]) = d[0][l];
                    for i in 1..=PAIRS {
                        *base.add(at[i + PAIRS][l]) = d[i][l];
                        *base.add(at[i][l]) = d[i + PAIRS][l];
                    }
                }
            }
        } else {
            for i in 0..Q {
                let o = opposite(i);
                for l in 0..LANES {
                    unsafe { *base.add(o * n + k + l.min(used - 1)) = d[i][l] };
                }
            }
        }
        for l in 0..used {
            s.u[0] += u[0][l] as f64;
            s.u[1] += u[1][l] as f64;
            s.u[2] += u[2][l] as f64;
            let u2 = (u[0][l] * u[0][l] + u[1][l] * u[1][l] + u[2][l] * u[2][l]) as f64;
            if u2 > s.u2_max || u2.is_nan() {
                s.u2_max = u2;
            }
        }
        k += used;
    }
    s
}

/// [`collide`] over [`LANES`] nodes at once (same formulas, one loop per lane so the compiler
/// vectorises them). Returns u per lane.
#[inline(always)]
fn collide_lanes(
    d: &mut [[f32; LANES]; Q],
    g: [f32; 3],
    om_p: f32,
    om_m: f32,
) -> [[f32; LANES]; 3] {
    let mut rho_m1 = [0.0f32; LANES];
    let mut j = [[0.0f32; LANES]; 3];
    for i in 0..Q {
        for l in 0..LANES {
            rho_m1[l] += d[i][l];
            j[0][l] += d[i][l] * CX[i];
            j[1][l] += d[i][l] * CY[i];
            j[2][l] += d[i][l] * CZ[i];
        }
    }
    let fp = 1.0 - 0.5 * om_p;
    let fm = 1.0 - 0.5 * om_m;
    let k1 = (1.0 / CS2) as f32;
    let mut u = [[0.0f32; LANES]; 3];
    let mut rho = [0.0f32; LANES];
    let mut usq = [0.0f32; LANES];
    let mut ug = [0.0f32; LANES];
    for l in 0..LANES {
        rho[l] = 1.0 + rho_m1[l];
        let inv = 1.0 / rho[l];
        for a in 0..3 {
            u[a][l] = (j[a][l] + 0.5 * g[a]) * inv;
        }
        usq[l] = u[0][l] * u[0][l] + u[1][l] * u[1][l] + u[2][l] * u[2][l];
        ug[l] = u[0][l] * g[0] + u[1][l] * g[1] + u[2][l] * g[2];
        let eq0 = WF[0] * (rho_m1[l] - 0.5 * k1 * rho[l] * usq[l]);
        d[0][l] += -om_p * (d[0][l] - eq0) + fp * WF[0] * (-k1 * ug[l]);
    }
    for i in 1..=PAIRS {
        let o = i + PAIRS;
        let w = WF[i];
        let cg = CX[i] * g[0] + CY[i] * g[1] + CZ[i] * g[2];
        let src_m = fm * w * k1 * cg;
        for l in 0..LANES {
            let cu = CX[i] * u[0][l] + CY[i] * u[1][l] + CZ[i] * u[2][l];
            let eq_p = w * (rho_m1[l] + rho[l] * (0.5 * k1 * k1 * cu * cu - 0.5 * k1 * usq[l]));
            let eq_m = w * rho[l] * k1 * cu;
            let src_p = fp * w * (k1 * k1 * cu * cg - k1 * ug[l]);
            let dp = 0.5 * (d[i][l] + d[o][l]);
            let dm = 0.5 * (d[i][l] - d[o][l]);
            let a = om_p * (dp - eq_p);
            let b = om_m * (dm - eq_m);
            d[i][l] += -a - b + src_p + src_m;
            d[o][l] += -a + b + src_p - src_m;
        }
    }
    u
}

impl Lattice {
    /// A lattice at rest (ρ = 1, u = 0 everywhere: all deviations zero).
    pub fn at_rest(domain: &Domain) -> Lattice {
        let n = domain.fluid_nodes();
        Lattice {
            n,
            f: vec![0.0; Q * n],
            partial: vec![Sums::default(); n.div_ceil(CHUNK)],
            steps: 0,
        }
    }

    /// Number of fluid nodes.
    pub fn nodes(&self) -> usize {
        self.n
    }

    /// One time step (collide + stream) over all nodes. Returns Σu and max|u|² of the
    /// pre-collision state, summed in a fixed order.
    pub fn step(&mut self, domain: &Domain, p: &KernelParams) -> Sums {
        let n = self.n;
        let odd = self.steps % 2 == 1;
        let slots = Slots(self.f.as_mut_ptr());
        let c = BlockConsts {
            g: [p.force[0] as f32, p.force[1] as f32, p.force[2] as f32],
            om_p: p.omega_plus as f32,
            om_m: p.omega_minus as f32,
            offsets: voxel_offsets(domain.shape),
        };
        let wide = simd_available();
        self.partial
            .par_iter_mut()
            .enumerate()
            .for_each(|(chunk, sums)| {
                let base = slots.ptr();
                let start = chunk * CHUNK;
                let end = (start + CHUNK).min(n);
                // SAFETY: every index the chunk touches is below Q * n, and the slots of a node
                // are touched by no other node in this step (AA pattern, module docs). The wide
                // path runs only where the CPU has the features it was compiled for.
                *sums = unsafe { run_chunk(wide, odd, domain, &c, base, n, start, end) };
            });
        self.steps += 1;
        let mut total = Sums::default();
        for s in &self.partial {
            total.add(s);
        }
        total
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
                    *di = self.f[i * n + k];
                }
                let (_, rho, u) = moments(&d, g);
                (rho, u)
            })
            .unzip()
    }
}

/// Slots an odd step reads for node k: slot ī of the upstream node at x − c_i, or — when that is
/// solid or outside a non-periodic face — slot i of node k itself (half-way bounce-back).
#[inline(always)]
fn gather_table(domain: &Domain, offsets: &[isize; Q], k: usize, n: usize, at: &mut [usize; Q]) {
    let c = domain.coords[k];
    at[0] = k;
    let interior = (0..3).all(|d| c[d] >= 1 && (c[d] as usize) + 1 < domain.shape[d]);
    if interior {
        // Away from the grid faces no step wraps: neighbours are fixed offsets in the voxel map.
        let v = c[0] as usize + domain.shape[0] * (c[1] as usize + domain.shape[1] * c[2] as usize);
        for i in 1..=PAIRS {
            let o = i + PAIRS;
            let up = domain.node_of_voxel[(v as isize + offsets[o]) as usize];
            let down = domain.node_of_voxel[(v as isize + offsets[i]) as usize];
            at[i] = if up != SOLID {
                o * n + up as usize
            } else {
                i * n + k
            };
            at[o] = if down != SOLID {
                i * n + down as usize
            } else {
                o * n + k
            };
        }
        return;
    }
    for i in 1..=PAIRS {
        let o = i + PAIRS;
        // Upstream of direction i is x − c_i = x + c_o, and vice versa.
        at[i] = match domain.neighbour(c, C[o]) {
            Some(m) => o * n + m as usize,
            None => i * n + k,
        };
        at[o] = match domain.neighbour(c, C[i]) {
            Some(m) => i * n + m as usize,
            None => o * n + k,
        };
    }
}

/// Linear voxel-map offset of each lattice direction.
fn voxel_offsets(shape: [usize; 3]) -> [isize; Q] {
    let (sx, sy) = (shape[0] as isize, (shape[0] * shape[1]) as isize);
    let mut off = [0isize; Q];
    for (i, c) in C.iter().enumerate() {
        off[i] = c[0] as isize + sx * c[1] as isize + sy * c[2] as isize;
    }
    off
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The vectorised collision must do exactly what the one-node reference does.
    #[test]
    fn lane_collision_matches_reference() {
        let mut lanes = [[0.0f32; LANES]; Q];
        for i in 0..Q {
            for l in 0..LANES {
                // Deterministic, varied deviations of realistic size (1e-3).
                lanes[i][l] = 1e-3 * (((i * 7 + l * 13) % 17) as f32 / 17.0 - 0.5) * WF[i];
            }
        }
        let g = [1e-5, -2e-6, 3e-6];
        let (om_p, om_m) = (1.0 / 0.9, 1.0 / 1.2);
        let mut reference = lanes;
        let u_lanes = collide_lanes(&mut lanes, g, om_p, om_m);
        for l in 0..LANES {
            let mut one = [0.0f32; Q];
            for i in 0..Q {
                one[i] = reference[i][l];
            }
            let u = collide(&mut one, g, om_p, om_m);
            for i in 0..Q {
                reference[i][l] = one[i];
                assert!((lanes[i][l] - one[i]).abs() <= 1e-9, "lane {l} slot {i}");
            }
            for a in 0..3 {
                assert!((u_lanes[a][l] - u[a]).abs() <= 1e-9);
            }
        }
    }

    /// Collision conserves mass and, without force, momentum (BGK and TRT alike).
    #[test]
    fn collision_conserves_mass_and_momentum() {
        let mut d = [0.0f32; Q];
        for i in 0..Q {
            d[i] = 1e-3 * ((i % 5) as f32 - 2.0) * WF[i];
        }
        let before: [f32; 4] = moments4(&d);
        collide(&mut d, [0.0; 3], 1.0 / 0.8, 1.0 / 1.3);
        let after = moments4(&d);
        for m in 0..4 {
            assert!(
                (before[m] - after[m]).abs() < 1e-9,
                "moment {m}: {before:?} vs {after:?}"
            );
        }
    }

    fn moments4(d: &[f32; Q]) -> [f32; 4] {
        let mut m = [0.0f32; 4];
        for i in 0..Q {
            m[0] += d[i];
            m[1] += d[i] * CX[i];
            m[2] += d[i] * CY[i];
            m[3] += d[i] * CZ[i];
        }
        m
    }
}
