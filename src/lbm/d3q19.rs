//! The D3Q19 velocity set: rest, 6 face and 12 edge neighbours.
//!
//! Ordering: direction 0 is rest; directions 1..=9 are one of each opposite pair and direction
//! `i + 9` is the opposite of `i`, so the pair loops of the kernel need no lookup table.
//! Weights 1/3, 1/18, 1/36 and c_s² = 1/3 (Qian, d'Humières & Lallemand 1992, Europhys. Lett. 17,
//! 479 — the DdQq family).

/// Number of discrete velocities.
pub const Q: usize = 19;

/// Number of opposite pairs (directions 1..=9 paired with 10..=18).
pub const PAIRS: usize = 9;

/// Lattice speed of sound squared.
pub const CS2: f64 = 1.0 / 3.0;

/// Discrete velocities c_i.
pub const C: [[i32; 3]; Q] = [
    [0, 0, 0],
    [1, 0, 0],
    [0, 1, 0],
    [0, 0, 1],
    [1, 1, 0],
    [1, -1, 0],
    [1, 0, 1],
    [1, 0, -1],
    [0, 1, 1],
    [0, 1, -1],
    [-1, 0, 0],
    [0, -1, 0],
    [0, 0, -1],
    [-1, -1, 0],
    [-1, 1, 0],
    [-1, 0, -1],
    [-1, 0, 1],
    [0, -1, -1],
    [0, -1, 1],
];

/// Lattice weights w_i.
pub const W: [f64; Q] = [
    1.0 / 3.0,
    1.0 / 18.0,
    1.0 / 18.0,
    1.0 / 18.0,
    1.0 / 36.0,
    1.0 / 36.0,
    1.0 / 36.0,
    1.0 / 36.0,
    1.0 / 36.0,
    1.0 / 36.0,
    1.0 / 18.0,
    1.0 / 18.0,
    1.0 / 18.0,
    1.0 / 36.0,
    1.0 / 36.0,
    1.0 / 36.0,
    1.0 / 36.0,
    1.0 / 36.0,
    1.0 / 36.0,
];

/// Index of the direction opposite to `i`.
#[inline]
pub const fn opposite(i: usize) -> usize {
    if i == 0 {
        0
    } else if i <= PAIRS {
        i + PAIRS
    } else {
        i - PAIRS
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn opposites_are_negated_velocities() {
        for i in 0..Q {
            let o = opposite(i);
            assert_eq!(opposite(o), i);
            for d in 0..3 {
                assert_eq!(C[i][d], -C[o][d]);
            }
            assert_eq!(W[i], W[o]);
        }
    }

    /// The isotropy conditions that make the lattice reproduce Navier–Stokes: Σw = 1, Σw c = 0,
    /// Σw c_a c_b = c_s² δ_ab (Qian et al. 1992).
    #[test]
    fn moments_are_isotropic() {
        let sum: f64 = W.iter().sum();
        assert!((sum - 1.0).abs() < 1e-15);
        for a in 0..3 {
            let m1: f64 = (0..Q).map(|i| W[i] * C[i][a] as f64).sum();
            assert!(m1.abs() < 1e-15);
            for b in 0..3 {
                let m2: f64 = (0..Q).map(|i| W[i] * (C[i][a] * C[i][b]) as f64).sum();
                let want = if a == b { CS2 } else { 0.0 };
                assert!((m2 - want).abs() < 1e-15);
            }
        }
        // All 18 moving directions are distinct unit face/edge vectors.
        for i in 1..Q {
            let n2: i32 = C[i].iter().map(|c| c * c).sum();
            assert!(n2 == 1 || n2 == 2);
            for j in 1..i {
                assert_ne!(C[i], C[j]);
            }
        }
    }
}
