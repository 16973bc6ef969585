//! The TRT (or BGK) collision with Guo forcing, on the deviations d = f − w of one node
//! (reference form) and of [`LANES`] nodes at once (the form the kernel runs).
//!
//! Equilibrium f_eq = w ρ (1 + c·u/c_s² + (c·u)²/(2c_s⁴) − u²/(2c_s²)); the symmetric and
//! antisymmetric parts of each opposite pair relax with ω⁺ and ω⁻ (Ginzburg, Verhaeghe &
//! d'Humières 2008, Commun. Comput. Phys. 3, 427); the Guo source w[(c−u)/c_s² + (c·u)c/c_s⁴]·F
//! is split the same way, each part scaled by (1 − ω±/2) (the TRT form of Guo, Zheng & Shi
//! 2002, Phys. Rev. E 65, 046308, eq. 19). Velocity u = (Σ d c + F/2)/ρ with ρ = 1 + Σ d
//! (Guo et al. 2002, eq. 20).
//!
//! The lane form works on the pair sums d_i + d_ī and differences d_i − d_ī and spells every
//! c·u out per direction at compile time (const generics), so no multiplication by a zero
//! component is left for the compiler to keep (IEEE rules forbid it to drop x·0).

use super::d3q19::{C, CS2, PAIRS, Q, W};

/// Nodes collided together; the loops over lanes vectorise (8 f32 = one AVX2 register).
pub const LANES: usize = 8;

/// One value per lane.
pub type Lanes = [f32; LANES];

pub(crate) const CX: [f32; Q] = cf(0);
pub(crate) const CY: [f32; Q] = cf(1);
pub(crate) const CZ: [f32; Q] = cf(2);
pub(crate) const WF: [f32; Q] = wf();

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

/// Relaxation rates and force of a step, as the lanes use them.
#[derive(Debug, Clone, Copy)]
pub struct CollideConsts {
    pub g: [f32; 3],
    pub om_p: f32,
    pub om_m: f32,
}

/// Density deviation, density and velocity of one node (Guo et al. 2002, eq. 20).
#[inline(always)]
pub fn moments(d: &[f32; Q], g: [f32; 3]) -> (f32, f32, [f32; 3]) {
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

/// The one-node collision: the readable reference. A test checks the lane form against it.
#[cfg(test)]
pub fn collide(d: &mut [f32; Q], g: [f32; 3], om_p: f32, om_m: f32) -> [f32; 3] {
    let (rho_m1, rho, u) = moments(d, g);
    let usq = u[0] * u[0] + u[1] * u[1] + u[2] * u[2];
    let ug = u[0] * g[0] + u[1] * g[1] + u[2] * g[2];
    let fp = 1.0 - 0.5 * om_p;
    let fm = 1.0 - 0.5 * om_m;
    let k1 = (1.0 / CS2) as f32;

    let eq0 = WF[0] * (rho_m1 - 0.5 * k1 * rho * usq);
    d[0] += -om_p * (d[0] - eq0) + fp * WF[0] * (-k1 * ug);
    for i in 1..=PAIRS {
        let o = i + PAIRS;
        let w = WF[i];
        let cu = CX[i] * u[0] + CY[i] * u[1] + CZ[i] * u[2];
        let cg = CX[i] * g[0] + CY[i] * g[1] + CZ[i] * g[2];
        let eq_p = w * (rho_m1 + rho * (0.5 * k1 * k1 * cu * cu - 0.5 * k1 * usq));
        let eq_m = w * rho * k1 * cu;
        let src_p = fp * w * (k1 * k1 * cu * cg - k1 * ug);
        let src_m = fm * w * k1 * cg;
        let dp = 0.5 * (d[i] + d[o]);
        let dm = 0.5 * (d[i] - d[o]);
        let a = om_p * (dp - eq_p);
        let b = om_m * (dm - eq_m);
        d[i] += -a - b + src_p + src_m;
        d[o] += -a + b + src_p - src_m;
    }
    u
}

/// c_I · (x, y, z) with the zero components left out at compile time.
#[inline(always)]
fn cdot<const I: usize>(x: f32, y: f32, z: f32) -> f32 {
    // −0.0 is the exact additive identity (x + −0 = x for every x, −0 included), so the
    // compiler may drop it; +0.0 is not.
    let mut s = -0.0f32;
    if C[I][0] != 0 {
        s += C[I][0] as f32 * x;
    }
    if C[I][1] != 0 {
        s += C[I][1] as f32 * y;
    }
    if C[I][2] != 0 {
        s += C[I][2] as f32 * z;
    }
    s
}

/// Per-block values the pairs share; the `[_; 2]` ones are for the two weights of the moving
/// directions (1/18 faces, 1/36 edges).
struct BlockState {
    u: [Lanes; 3],
    /// w (ρ − 1).
    w_rho_m1: [Lanes; 2],
    /// w ρ.
    w_rho: [Lanes; 2],
    /// ω⁻ k1 w ρ (k1 = 1/c_s²): ω⁻ times the antisymmetric equilibrium per unit c·u.
    om_m_k1_w_rho: [Lanes; 2],
    /// ½ k1 u².
    half_k1_usq: Lanes,
    /// (1 − ω⁺/2) w k1 u·g: the velocity part of the symmetric source.
    fp_w_k1_ug: [Lanes; 2],
}

/// Index into the per-weight arrays of [`BlockState`].
const fn weight_class(i: usize) -> usize {
    if i <= 3 { 0 } else { 1 }
}

/// Relaxes pair `I` (direction I and its opposite I + 9) in all lanes:
/// f_I ← f_I + P + M, f_Ī ← f_Ī + P − M with
/// P = −ω⁺(d⁺ − e⁺) + s⁺ and M = −ω⁻(d⁻ − e⁻) + s⁻, d± = ½(f_I ± f_Ī), the same formulas as
/// [`collide`] with the products that do not depend on the direction hoisted out.
#[inline(always)]
fn relax_pair<const I: usize>(d: &mut [Lanes; Q], s: &BlockState, c: &CollideConsts) {
    let o = I + PAIRS;
    let wc = weight_class(I);
    let k1 = (1.0 / CS2) as f32;
    let w = WF[I];
    let fp = 1.0 - 0.5 * c.om_p;
    let fm = 1.0 - 0.5 * c.om_m;
    let cg = cdot::<I>(c.g[0], c.g[1], c.g[2]);
    let src_m = fm * w * k1 * cg;
    let half_k1k1 = 0.5 * k1 * k1;
    let fp_w_k1k1_cg = fp * w * k1 * k1 * cg;
    let half_om_p = 0.5 * c.om_p;
    let half_om_m = 0.5 * c.om_m;
    for l in 0..LANES {
        let cu = cdot::<I>(s.u[0][l], s.u[1][l], s.u[2][l]);
        let eq_p = s.w_rho_m1[wc][l] + s.w_rho[wc][l] * (half_k1k1 * cu * cu - s.half_k1_usq[l]);
        let src_p = fp_w_k1k1_cg * cu - s.fp_w_k1_ug[wc][l];
        let di = d[I][l];
        let dq = d[o][l];
        let p = c.om_p * eq_p - half_om_p * (di + dq) + src_p;
        let m = s.om_m_k1_w_rho[wc][l] * cu - half_om_m * (di - dq) + src_m;
        d[I][l] = di + (p + m);
        d[o][l] = dq + (p - m);
    }
}

/// [`collide`] over [`LANES`] nodes at once. Returns u per lane.
#[inline(always)]
pub fn collide_lanes(d: &mut [Lanes; Q], c: &CollideConsts) -> [Lanes; 3] {
    // Pair sums and differences: ρ − 1 = d₀ + Σ (d_i + d_ī), j = Σ c_i (d_i − d_ī).
    let mut rho_m1 = d[0];
    let mut j = [[0.0f32; LANES]; 3];
    let mut dm = [[0.0f32; LANES]; PAIRS + 1];
    for i in 1..=PAIRS {
        for l in 0..LANES {
            rho_m1[l] += d[i][l] + d[i + PAIRS][l];
            dm[i][l] = d[i][l] - d[i + PAIRS][l];
        }
    }
    for l in 0..LANES {
        // Directions 1..=9 (d3q19.rs): x, y, z, xy, x−y, xz, x−z, yz, y−z.
        j[0][l] = dm[1][l] + dm[4][l] + dm[5][l] + dm[6][l] + dm[7][l];
        j[1][l] = dm[2][l] + dm[4][l] - dm[5][l] + dm[8][l] + dm[9][l];
        j[2][l] = dm[3][l] + dm[6][l] - dm[7][l] + dm[8][l] - dm[9][l];
    }
    let k1 = (1.0 / CS2) as f32;
    let fp = 1.0 - 0.5 * c.om_p;
    let mut s = BlockState {
        u: [[0.0; LANES]; 3],
        w_rho_m1: [[0.0; LANES]; 2],
        w_rho: [[0.0; LANES]; 2],
        om_m_k1_w_rho: [[0.0; LANES]; 2],
        half_k1_usq: [0.0; LANES],
        fp_w_k1_ug: [[0.0; LANES]; 2],
    };
    let ws = [WF[1], WF[4]];
    for l in 0..LANES {
        let rho = 1.0 + rho_m1[l];
        let inv = 1.0 / rho;
        for a in 0..3 {
            s.u[a][l] = (j[a][l] + 0.5 * c.g[a]) * inv;
        }
        let usq = s.u[0][l] * s.u[0][l] + s.u[1][l] * s.u[1][l] + s.u[2][l] * s.u[2][l];
        let ug = s.u[0][l] * c.g[0] + s.u[1][l] * c.g[1] + s.u[2][l] * c.g[2];
        s.half_k1_usq[l] = 0.5 * k1 * usq;
        for (wc, &w) in ws.iter().enumerate() {
            s.w_rho_m1[wc][l] = w * rho_m1[l];
            s.w_rho[wc][l] = w * rho;
            s.om_m_k1_w_rho[wc][l] = c.om_m * k1 * w * rho;
            s.fp_w_k1_ug[wc][l] = fp * w * k1 * ug;
        }
        let eq0 = WF[0] * (rho_m1[l] - rho * s.half_k1_usq[l]);
        d[0][l] += -c.om_p * (d[0][l] - eq0) - fp * WF[0] * k1 * ug;
    }
    relax_pair::<1>(d, &s, c);
    relax_pair::<2>(d, &s, c);
    relax_pair::<3>(d, &s, c);
    relax_pair::<4>(d, &s, c);
    relax_pair::<5>(d, &s, c);
    relax_pair::<6>(d, &s, c);
    relax_pair::<7>(d, &s, c);
    relax_pair::<8>(d, &s, c);
    relax_pair::<9>(d, &s, c);
    s.u
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The lane collision must do what the one-node reference does (to f32 rounding: the two
    /// order their sums differently).
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
        let reference = lanes;
        let u_lanes = collide_lanes(&mut lanes, &CollideConsts { g, om_p, om_m });
        for l in 0..LANES {
            let mut one = [0.0f32; Q];
            for i in 0..Q {
                one[i] = reference[i][l];
            }
            let u = collide(&mut one, g, om_p, om_m);
            for i in 0..Q {
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
        let mut lanes = [[0.0f32; LANES]; Q];
        for i in 0..Q {
            lanes[i] = [1e-3 * ((i % 5) as f32 - 2.0) * WF[i]; LANES];
        }
        let c = CollideConsts {
            g: [0.0; 3],
            om_p: 1.0 / 0.8,
            om_m: 1.0 / 1.3,
        };
        collide_lanes(&mut lanes, &c);
        let mut one = [0.0f32; Q];
        for i in 0..Q {
            one[i] = lanes[i][3];
        }
        let after = moments4(&one);
        for m in 0..4 {
            assert!((before[m] - after[m]).abs() < 1e-9, "lanes, moment {m}");
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
