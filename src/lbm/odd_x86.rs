//! The odd (neighbour) step of the AA pattern for one full block of [`LANES`] nodes, written
//! with x86-64 vector intrinsics: the neighbour voxels are found with vector selects, the node
//! map and the populations are read with hardware gathers, and the post-collision values are
//! written with scatters (AVX-512VL) or with one scalar store per lane (AVX2).
//!
//! Same slots, same values as the portable `odd_slots` path in kernel.rs, which handles the
//! short last block of a chunk and CPUs without AVX2; a test runs both on one domain and
//! compares the populations bit for bit.

use super::collide::{CollideConsts, LANES, Lanes, collide_lanes};
use super::d3q19::{C, Q, opposite};
use super::domain::{Domain, SOLID};
use std::arch::x86_64::*;

/// Expands `$m!(j)` for the 18 moving directions, so each body sees its direction as a
/// constant (no table lookups or bounds checks in the block).
macro_rules! each_direction {
    ($m:ident) => {
        $m!(1);
        $m!(2);
        $m!(3);
        $m!(4);
        $m!(5);
        $m!(6);
        $m!(7);
        $m!(8);
        $m!(9);
        $m!(10);
        $m!(11);
        $m!(12);
        $m!(13);
        $m!(14);
        $m!(15);
        $m!(16);
        $m!(17);
        $m!(18);
    };
}

/// Grid facts the block needs (see `Grid` in kernel.rs).
#[derive(Clone, Copy)]
pub struct SimdGrid {
    pub last: [u32; 3],
    pub periodic: [bool; 3],
    pub strides: [u32; 3],
}

/// Gathers, collides and scatters nodes `k..k + LANES` of an odd step; returns u per lane.
///
/// # Safety
/// AVX2 (and with `SCATTER` AVX-512F+VL) must be available; `k + LANES` is at most the node count (`n` is the slot stride); the grid has at
/// most `i32::MAX` voxels and `n <= i32::MAX`, so every index fits a signed 32-bit lane.
#[inline(always)]
pub unsafe fn odd_block<const SCATTER: bool>(
    domain: &Domain,
    g: &SimdGrid,
    col: &CollideConsts,
    base: *mut f32,
    n: usize,
    k: usize,
) -> [Lanes; 3] {
    unsafe {
        let zero = _mm256_setzero_si256();
        let ones = _mm256_set1_epi32(-1);
        let solid = _mm256_set1_epi32(SOLID as i32);
        let first = *domain.coords.get_unchecked(k);
        let lastp = *domain.coords.get_unchecked(k + LANES - 1);
        // m[j]: node at x + c_j (SOLID where solid or outside); fluid[j]: all-ones where fluid.
        let mut m = [zero; Q];
        let run = lastp[1] == first[1]
            && lastp[2] == first[2]
            && lastp[0] as usize == first[0] as usize + LANES - 1
            && first[0] >= 1
            && (lastp[0] as u32) < g.last[0];
        if run {
            run_neighbours(domain, g, first, &mut m);
        } else {
            any_neighbours(domain, g, k, &mut m);
        }
        let mut fluid = [zero; Q];
        let mut walls = zero;
        for j in 1..Q {
            let wall = _mm256_cmpeq_epi32(m[j], solid);
            walls = _mm256_or_si256(walls, wall);
            fluid[j] = _mm256_andnot_si256(wall, ones);
        }
        // A block in one x-row whose 18 neighbouring stretches are all fluid: each stretch is
        // eight consecutive nodes (nodes are numbered in voxel order), so the gathers and
        // scatters become plain vector loads and stores.
        if run && _mm256_testz_si256(walls, walls) == 1 {
            return interior_block(base, n, k, &m, col);
        }

        // f_i comes from slot i of the node at x − c_i = x + c_ī, or (bounce-back) from slot ī
        // of the node itself.
        let mut d = [[0.0f32; LANES]; Q];
        _mm256_storeu_ps(d[0].as_mut_ptr(), _mm256_loadu_ps(base.add(k)));
        macro_rules! read {
            ($i:literal) => {{
                let o = opposite($i);
                let own = _mm256_loadu_ps(base.add($i * n + k));
                let v = _mm256_mask_i32gather_ps(
                    own,
                    base.add(o * n) as *const f32,
                    m[o],
                    _mm256_castsi256_ps(fluid[o]),
                    4,
                );
                _mm256_storeu_ps(d[$i].as_mut_ptr(), v);
            }};
        }
        each_direction!(read);
        let u = collide_lanes(&mut d, col);

        // Post-collision f_i goes to slot i of the node at x + c_i, or to slot ī of the node
        // itself (it bounces back there).
        _mm256_storeu_ps(base.add(k), _mm256_loadu_ps(d[0].as_ptr()));
        if SCATTER {
            scatter_block(base, n, k, &m, &d);
        } else {
            let mut mi = [[0u32; LANES]; Q];
            for j in 1..Q {
                _mm256_storeu_si256(mi[j].as_mut_ptr() as *mut __m256i, m[j]);
            }
            macro_rules! write {
                ($i:literal) => {{
                    let o = opposite($i);
                    let to_neighbour = base.add($i * n);
                    let to_self = base.add(o * n + k);
                    for l in 0..LANES {
                        let p = if mi[$i][l] != SOLID {
                            to_neighbour.add(mi[$i][l] as usize)
                        } else {
                            to_self.add(l)
                        };
                        *p = d[$i][l];
                    }
                }};
            }
            each_direction!(write);
        }
        u
    }
}

/// The odd step for a block whose neighbours in every direction are eight consecutive fluid
/// nodes starting at lane 0 of `m[j]`: same slots as the gather/scatter path, moved with
/// vector loads and stores.
#[inline(always)]
unsafe fn interior_block(
    base: *mut f32,
    n: usize,
    k: usize,
    m: &[__m256i; Q],
    col: &CollideConsts,
) -> [Lanes; 3] {
    unsafe {
        let mut at = [0usize; Q];
        for j in 1..Q {
            at[j] = _mm256_cvtsi256_si32(m[j]) as u32 as usize;
        }
        let mut d = [[0.0f32; LANES]; Q];
        _mm256_storeu_ps(d[0].as_mut_ptr(), _mm256_loadu_ps(base.add(k)));
        macro_rules! read {
            ($i:literal) => {{
                let o = opposite($i);
                let v = _mm256_loadu_ps(base.add(o * n + at[o]));
                _mm256_storeu_ps(d[$i].as_mut_ptr(), v);
            }};
        }
        each_direction!(read);
        let u = collide_lanes(&mut d, col);
        _mm256_storeu_ps(base.add(k), _mm256_loadu_ps(d[0].as_ptr()));
        macro_rules! write {
            ($i:literal) => {{
                _mm256_storeu_ps(base.add($i * n + at[$i]), _mm256_loadu_ps(d[$i].as_ptr()));
            }};
        }
        each_direction!(write);
        u
    }
}

/// The odd step's stores for one block with AVX-512 scatters: fluid lanes go to the
/// neighbours' slots, wall lanes (masked store) to the node's own opposite slot. Kept out of
/// line so only these instructions are built for AVX-512 and the rest keeps the AVX2 code.
///
/// # Safety
/// AVX-512F+VL available; the indices are those the block's neighbour search produced.
#[target_feature(enable = "avx2,avx512f,avx512vl")]
#[inline(never)]
unsafe fn scatter_block(base: *mut f32, n: usize, k: usize, m: &[__m256i; Q], d: &[Lanes; Q]) {
    unsafe {
        let solid = _mm256_set1_epi32(SOLID as i32);
        macro_rules! write {
            ($i:literal) => {{
                let o = opposite($i);
                let v = _mm256_loadu_ps(d[$i].as_ptr());
                let keep = _mm256_cmpneq_epi32_mask(m[$i], solid);
                _mm256_mask_i32scatter_ps(base.add($i * n), keep, m[$i], v, 4);
                _mm256_mask_storeu_ps(base.add(o * n + k), !keep, v);
            }};
        }
        each_direction!(write);
    }
}

/// Neighbour nodes of a block whose eight nodes are consecutive voxels of one x-row, away from
/// the x faces: each of the nine neighbouring rows is one contiguous stretch of the node map,
/// read with plain vector loads instead of gathers. A row beyond a closed face is all SOLID.
#[inline(always)]
unsafe fn run_neighbours(domain: &Domain, g: &SimdGrid, p: [u16; 3], m: &mut [__m256i; Q]) {
    unsafe {
        let map = domain.node_of_voxel.as_ptr();
        let solid = _mm256_set1_epi32(SOLID as i32);
        // Row start (voxel index of x = 0) one step down / same / up along y and z.
        let step = |a: usize, s: i32| -> Option<u32> {
            let x = p[a] as u32;
            match s {
                -1 if x == 0 => g.periodic[a].then_some(g.last[a]),
                -1 => Some(x - 1),
                1 if x == g.last[a] => g.periodic[a].then_some(0),
                1 => Some(x + 1),
                _ => Some(x),
            }
        };
        let x0 = p[0] as usize;
        // Row starts for y, z one step down / same / up (None beyond a closed face).
        let ys = [step(1, -1), step(1, 0), step(1, 1)];
        let zs = [step(2, -1), step(2, 0), step(2, 1)];
        macro_rules! row {
            ($j:literal) => {{
                const CJ: [i32; 3] = C[$j];
                m[$j] = match (ys[(CJ[1] + 1) as usize], zs[(CJ[2] + 1) as usize]) {
                    (Some(y), Some(z)) => {
                        let row =
                            y as usize * g.strides[1] as usize + z as usize * g.strides[2] as usize;
                        let at = (row + x0) as isize + CJ[0] as isize;
                        _mm256_loadu_si256(map.offset(at) as *const __m256i)
                    }
                    _ => solid,
                };
            }};
        }
        each_direction!(row);
    }
}

/// Neighbour nodes of any eight nodes: coordinates wrapped or flagged with vector selects, the
/// node map read with gathers.
#[inline(always)]
unsafe fn any_neighbours(domain: &Domain, g: &SimdGrid, k: usize, m: &mut [__m256i; Q]) {
    unsafe {
        // The eight nodes' (x, y, z) as u32 lanes, from the 48 bytes of their u16 triples: two
        // gathers of 32-bit words at byte offsets 6l (x | y << 16) and 6l + 2 (y | z << 16),
        // which stay inside the 48 bytes. (Filling lane arrays with scalar stores and reading
        // them back as vectors stalls on store forwarding.)
        let coords = domain.coords.as_ptr().add(k) as *const i32;
        let six = _mm256_setr_epi32(0, 6, 12, 18, 24, 30, 36, 42);
        let xy = _mm256_i32gather_epi32(coords, six, 1);
        let yz = _mm256_i32gather_epi32((coords as *const u8).add(2) as *const i32, six, 1);
        let low = _mm256_set1_epi32(0xffff);
        let pos = [
            _mm256_and_si256(xy, low),
            _mm256_and_si256(yz, low),
            _mm256_srli_epi32(yz, 16),
        ];
        let zero = _mm256_setzero_si256();
        let ones = _mm256_set1_epi32(-1);
        let one = _mm256_set1_epi32(1);
        // off[a][s]: map offset of the coordinate one step down (s = 0), same (1), up (2);
        // out[a][s]: lanes where that step leaves a closed face (s = 0 down, 1 up).
        let mut off = [[zero; 3]; 3];
        let mut out = [[zero; 2]; 3];
        for a in 0..3 {
            let p = pos[a];
            let last = _mm256_set1_epi32(g.last[a] as i32);
            let lo = _mm256_cmpeq_epi32(p, zero);
            let hi = _mm256_cmpeq_epi32(p, last);
            let (down_wrap, up_wrap) = if g.periodic[a] {
                (last, zero)
            } else {
                (zero, p)
            };
            let down = _mm256_blendv_epi8(_mm256_sub_epi32(p, one), down_wrap, lo);
            let up = _mm256_blendv_epi8(_mm256_add_epi32(p, one), up_wrap, hi);
            let stride = _mm256_set1_epi32(g.strides[a] as i32);
            off[a] = [
                _mm256_mullo_epi32(down, stride),
                _mm256_mullo_epi32(p, stride),
                _mm256_mullo_epi32(up, stride),
            ];
            if !g.periodic[a] {
                out[a] = [lo, hi];
            }
        }
        let solid = _mm256_set1_epi32(SOLID as i32);
        let map = domain.node_of_voxel.as_ptr() as *const i32;
        macro_rules! gather {
            ($j:literal) => {{
                const CJ: [i32; 3] = C[$j];
                let v = _mm256_add_epi32(
                    _mm256_add_epi32(off[0][(CJ[0] + 1) as usize], off[1][(CJ[1] + 1) as usize]),
                    off[2][(CJ[2] + 1) as usize],
                );
                let mut leaves = zero;
                for a in 0..3 {
                    if CJ[a] == -1 {
                        leaves = _mm256_or_si256(leaves, out[a][0]);
                    } else if CJ[a] == 1 {
                        leaves = _mm256_or_si256(leaves, out[a][1]);
                    }
                }
                let inside = _mm256_andnot_si256(leaves, ones);
                m[$j] = _mm256_mask_i32gather_epi32(solid, map, v, inside, 4);
            }};
        }
        each_direction!(gather);
    }
}
