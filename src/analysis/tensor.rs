//! The permeability tensor from three solves: symmetric part, principal values and directions,
//! anisotropy ratio.

/// Permeability tensor analysis. `k[i][j]` = ν⟨u_i⟩/g_j: column j comes from the solve forced
/// along axis j (Darcy's law in tensor form: Bear 1972, Dynamics of Fluids in Porous
/// Media, chapter 5, from memory).
#[derive(Debug, Clone, serde::Serialize)]
pub struct TensorAnalysis {
    /// The tensor as computed, row-major.
    pub tensor: [[f64; 3]; 3],
    /// (k + kᵀ)/2. Onsager reciprocity makes the exact Stokes permeability of a periodic
    /// medium symmetric, so with periodic sides the antisymmetric part measures numerical
    /// error; with sealed sides the off-diagonal terms are set by the walls (a warning says so).
    pub symmetric: [[f64; 3]; 3],
    /// Largest |k_ij − k_ji| relative to the largest diagonal entry.
    pub asymmetry: f64,
    /// Eigenvalues of the symmetric part, largest first.
    pub principal_values: [f64; 3],
    /// Unit eigenvectors, `principal_directions[n]` belongs to `principal_values[n]`.
    pub principal_directions: [[f64; 3]; 3],
    /// Largest over smallest principal value (infinite when the smallest is zero or negative).
    pub anisotropy_ratio: f64,
}

/// Analyses a permeability tensor.
pub fn analyse_tensor(k: [[f64; 3]; 3]) -> TensorAnalysis {
    let mut sym = [[0.0; 3]; 3];
    let mut asym: f64 = 0.0;
    for i in 0..3 {
        for j in 0..3 {
            sym[i][j] = 0.5 * (k[i][j] + k[j][i]);
            asym = asym.max((k[i][j] - k[j][i]).abs());
        }
    }
    let diag_max = (0..3).map(|i| k[i][i].abs()).fold(0.0, f64::max);
    let (values, vectors) = jacobi_eigen(sym);
    let mut order = [0usize, 1, 2];
    order.sort_by(|&a, &b| values[b].total_cmp(&values[a]));
    // Rotations leave round-off of order 1e-16 of the largest value where the tensor has a
    // zero direction (a blocked axis): such values are zero, not tiny negative permeabilities.
    let scale = values.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let principal_values = order.map(|n| {
        if values[n].abs() <= 1e-12 * scale {
            0.0
        } else {
            values[n]
        }
    });
    let principal_directions = order.map(|n| {
        let mut v = [vectors[0][n], vectors[1][n], vectors[2][n]];
        // Sign convention: largest component positive, so results are reproducible.
        let big = (0..3)
            .max_by(|&a, &b| v[a].abs().total_cmp(&v[b].abs()))
            .unwrap_or(0);
        if v[big] < 0.0 {
            v = v.map(|c| -c);
        }
        v
    });
    let smallest = principal_values[2];
    TensorAnalysis {
        tensor: k,
        symmetric: sym,
        asymmetry: if diag_max > 0.0 { asym / diag_max } else { 0.0 },
        principal_values,
        principal_directions,
        anisotropy_ratio: if smallest > 0.0 {
            principal_values[0] / smallest
        } else {
            f64::INFINITY
        },
    }
}

/// Eigen-decomposition of a symmetric 3×3 matrix by cyclic Jacobi rotations (Golub & Van Loan,
/// Matrix Computations, 4th ed., §8.5). Returns eigenvalues and the matrix whose columns are the
/// eigenvectors.
pub fn jacobi_eigen(mut a: [[f64; 3]; 3]) -> ([f64; 3], [[f64; 3]; 3]) {
    let mut v = [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]];
    for _sweep in 0..50 {
        let off = a[0][1].powi(2) + a[0][2].powi(2) + a[1][2].powi(2);
        let scale = a[0][0].powi(2) + a[1][1].powi(2) + a[2][2].powi(2);
        if off <= 1e-30 * scale.max(f64::MIN_POSITIVE) {
            break;
        }
        for (p, q) in [(0, 1), (0, 2), (1, 2)] {
            if a[p][q] == 0.0 {
                continue;
            }
            let theta = (a[q][q] - a[p][p]) / (2.0 * a[p][q]);
            let t = theta.signum() / (theta.abs() + (theta * theta + 1.0).sqrt());
            let t = if theta == 0.0 { 1.0 } else { t };
            let c = 1.0 / (t * t + 1.0).sqrt();
            let s = t * c;
            // A ← Jᵀ A J with the rotation J in the (p, q) plane.
            for row in a.iter_mut() {
                let (akp, akq) = (row[p], row[q]);
                row[p] = c * akp - s * akq;
                row[q] = s * akp + c * akq;
            }
            let (rp, rq) = (a[p], a[q]);
            for k in 0..3 {
                a[p][k] = c * rp[k] - s * rq[k];
                a[q][k] = s * rp[k] + c * rq[k];
            }
            for row in v.iter_mut() {
                let vp = row[p];
                let vq = row[q];
                row[p] = c * vp - s * vq;
                row[q] = s * vp + c * vq;
            }
        }
    }
    ([a[0][0], a[1][1], a[2][2]], v)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn diagonal_tensor_has_axis_directions() {
        let t = analyse_tensor([[1.0, 0.0, 0.0], [0.0, 3.0, 0.0], [0.0, 0.0, 2.0]]);
        assert_eq!(t.principal_values, [3.0, 2.0, 1.0]);
        assert_eq!(t.principal_directions[0], [0.0, 1.0, 0.0]);
        assert!((t.anisotropy_ratio - 3.0).abs() < 1e-15);
        // A blocked direction, not along an axis (rank-2 tensor diag(2, 1, 0) rotated by 30°
        // about x and 40° about z, so the rotations leave round-off in its zero value), gives
        // an exact zero and an unbounded ratio.
        let (a, b) = (30f64.to_radians(), 40f64.to_radians());
        let rx = [
            [1.0, 0.0, 0.0],
            [0.0, a.cos(), -a.sin()],
            [0.0, a.sin(), a.cos()],
        ];
        let rz = [
            [b.cos(), -b.sin(), 0.0],
            [b.sin(), b.cos(), 0.0],
            [0.0, 0.0, 1.0],
        ];
        let mul = |p: [[f64; 3]; 3], q: [[f64; 3]; 3]| {
            let mut m = [[0.0; 3]; 3];
            for i in 0..3 {
                for j in 0..3 {
                    m[i][j] = (0..3).map(|k| p[i][k] * q[k][j]).sum();
                }
            }
            m
        };
        let r = mul(rz, rx);
        let rt = [0, 1, 2].map(|i| [0, 1, 2].map(|j| r[j][i]));
        let k = mul(
            mul(r, [[2.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 0.0]]),
            rt,
        );
        let t = analyse_tensor(k);
        assert_eq!(t.principal_values[2], 0.0, "{:?}", t.principal_values);
        assert!((t.principal_values[0] - 2.0).abs() < 1e-12);
        assert!(t.anisotropy_ratio.is_infinite());
        assert_eq!(t.asymmetry, 0.0);
    }

    #[test]
    fn rotated_tensor_recovers_eigenpairs() {
        // R diag(5, 2, 1) Rᵀ with R a rotation by 30° about z.
        let (s, c) = (0.5f64, 3f64.sqrt() / 2.0);
        let r = [[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]];
        let d = [5.0, 2.0, 1.0];
        let mut k = [[0.0; 3]; 3];
        for i in 0..3 {
            for j in 0..3 {
                k[i][j] = (0..3).map(|n| r[i][n] * d[n] * r[j][n]).sum();
            }
        }
        let t = analyse_tensor(k);
        for n in 0..3 {
            assert!((t.principal_values[n] - d[n]).abs() < 1e-12);
            // Eigenvector n is column n of R, up to sign.
            let dot: f64 = (0..3).map(|i| t.principal_directions[n][i] * r[i][n]).sum();
            assert!((dot.abs() - 1.0).abs() < 1e-12, "n={n} dot={dot}");
        }
        assert!((t.anisotropy_ratio - 5.0).abs() < 1e-12);
    }
}
