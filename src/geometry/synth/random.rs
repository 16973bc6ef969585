//! Random draws shared by the stochastic generators: the seeded generator, grain-radius
//! distributions, uniform positions and directions.

use super::usage;
use crate::Result;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// The generator used everywhere, so one seed gives one structure on every platform.
pub(super) fn rng(seed: u64) -> ChaCha8Rng {
    ChaCha8Rng::seed_from_u64(seed)
}

/// Smallest radius ever drawn: below half a voxel a sphere may contain no voxel centre at all.
const MIN_DRAWN_RADIUS: f64 = 0.5;

/// Distribution of grain radii (voxels). `spread` is the relative standard deviation
/// (standard deviation / mean).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum RadiusDist {
    /// All grains have the same radius.
    Mono { radius: f64 },
    /// Uniform on `[mean (1 - √3 spread), mean (1 + √3 spread)]`, which has the given spread.
    Uniform { mean: f64, spread: f64 },
    /// Lognormal with the given mean and spread, truncated to ±3 standard deviations of the
    /// underlying normal (and to at least half a voxel); the truncation shifts the mean by well
    /// under 1 %.
    LogNormal { mean: f64, spread: f64 },
}

impl RadiusDist {
    /// The nominal mean radius.
    pub fn mean(&self) -> f64 {
        match *self {
            RadiusDist::Mono { radius } => radius,
            RadiusDist::Uniform { mean, .. } | RadiusDist::LogNormal { mean, .. } => mean,
        }
    }

    /// Checks the parameters; `name` is the field holding the distribution.
    pub(super) fn validate(&self, kind: &str, name: &str) -> Result<()> {
        let mean = self.mean();
        if !(mean.is_finite() && mean >= 1.0) {
            return Err(usage(
                kind,
                format!("{name} mean must be at least 1 voxel, got {mean}"),
            ));
        }
        match *self {
            RadiusDist::Mono { .. } => Ok(()),
            RadiusDist::Uniform { mean, spread } => {
                let max = (1.0 - MIN_DRAWN_RADIUS / mean) / 3f64.sqrt();
                if spread.is_finite() && (0.0..=max).contains(&spread) {
                    Ok(())
                } else {
                    Err(usage(
                        kind,
                        format!(
                            "{name}.spread must lie between 0 and {max:.3} so the smallest radius stays \
                             above {MIN_DRAWN_RADIUS} voxel, got {spread}"
                        ),
                    ))
                }
            }
            RadiusDist::LogNormal { spread, .. } => {
                if spread.is_finite() && (0.0..=2.0).contains(&spread) {
                    Ok(())
                } else {
                    Err(usage(
                        kind,
                        format!("{name}.spread must lie between 0 and 2, got {spread}"),
                    ))
                }
            }
        }
    }

    /// Underlying normal (mu, sigma) of the lognormal with this mean and relative spread:
    /// sigma² = ln(1 + s²), mu = ln(mean) − sigma²/2 (moments of the lognormal distribution,
    /// e.g. Johnson, Kotz & Balakrishnan, Continuous Univariate Distributions vol. 1, ch. 14).
    fn lognormal_mu_sigma(mean: f64, spread: f64) -> (f64, f64) {
        let s2 = (1.0 + spread * spread).ln();
        (mean.ln() - 0.5 * s2, s2.sqrt())
    }

    /// Smallest and largest radius a draw can return.
    pub fn bounds(&self) -> (f64, f64) {
        match *self {
            RadiusDist::Mono { radius } => (radius, radius),
            RadiusDist::Uniform { mean, spread } => {
                let h = 3f64.sqrt() * spread * mean;
                (mean - h, mean + h)
            }
            RadiusDist::LogNormal { mean, spread } => {
                let (mu, sigma) = Self::lognormal_mu_sigma(mean, spread);
                (
                    (mu - 3.0 * sigma).exp().max(MIN_DRAWN_RADIUS),
                    (mu + 3.0 * sigma).exp().max(MIN_DRAWN_RADIUS),
                )
            }
        }
    }

    /// One radius.
    pub(super) fn sample(&self, rng: &mut ChaCha8Rng) -> f64 {
        match *self {
            RadiusDist::Mono { radius } => radius,
            RadiusDist::Uniform { .. } => {
                let (lo, hi) = self.bounds();
                lo + (hi - lo) * rng.random::<f64>()
            }
            RadiusDist::LogNormal { mean, spread } => {
                let (mu, sigma) = Self::lognormal_mu_sigma(mean, spread);
                let (lo, hi) = self.bounds();
                // Rejection keeps the truncated shape; it accepts > 99 % of draws, and the
                // bounded loop with a clamp only guards against pathological parameters.
                for _ in 0..64 {
                    let r = (mu + sigma * normal(rng)).exp();
                    if (lo..=hi).contains(&r) {
                        return r;
                    }
                }
                mean.clamp(lo, hi)
            }
        }
    }
}

/// A standard normal deviate by the Box–Muller transform (Box & Muller 1958, Ann. Math. Stat.
/// 29, 610).
fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u1 = 1.0 - rng.random::<f64>(); // in (0, 1], so the log is finite
    let u2 = rng.random::<f64>();
    (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
}

/// A point uniformly distributed in the box `[0, n)³`.
pub(super) fn point(rng: &mut ChaCha8Rng, box_len: [f64; 3]) -> [f64; 3] {
    [
        box_len[0] * rng.random::<f64>(),
        box_len[1] * rng.random::<f64>(),
        box_len[2] * rng.random::<f64>(),
    ]
}

/// A unit vector uniformly distributed on the sphere (z uniform in [−1, 1] by Archimedes' hat-box
/// theorem, azimuth uniform).
pub(super) fn isotropic_direction(rng: &mut ChaCha8Rng) -> [f64; 3] {
    let z = 2.0 * rng.random::<f64>() - 1.0;
    let phi = std::f64::consts::TAU * rng.random::<f64>();
    let s = (1.0 - z * z).max(0.0).sqrt();
    [s * phi.cos(), s * phi.sin(), z]
}

/// A unit vector uniformly distributed in the plane normal to axis `normal`.
pub(super) fn planar_direction(rng: &mut ChaCha8Rng, normal: usize) -> [f64; 3] {
    let phi = std::f64::consts::PI * rng.random::<f64>();
    let (u, v) = ((normal + 1) % 3, (normal + 2) % 3);
    let mut d = [0.0; 3];
    d[u] = phi.cos();
    d[v] = phi.sin();
    d
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn distributions_have_the_requested_moments() {
        let mut rng = rng(7);
        for dist in [
            RadiusDist::Uniform {
                mean: 5.0,
                spread: 0.2,
            },
            RadiusDist::LogNormal {
                mean: 5.0,
                spread: 0.2,
            },
        ] {
            let n = 200_000;
            let xs: Vec<f64> = (0..n).map(|_| dist.sample(&mut rng)).collect();
            let m = xs.iter().sum::<f64>() / n as f64;
            let sd = (xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / n as f64).sqrt();
            // Sampling error of the mean is 1/√n·sd ≈ 0.002; truncation at ±3σ of the normal
            // moves the lognormal mean and spread by under 1 % (tail mass 0.27 %).
            assert!((m - 5.0).abs() < 0.02, "{dist:?}: mean {m}");
            assert!((sd / m - 0.2).abs() < 0.01, "{dist:?}: spread {}", sd / m);
            let (lo, hi) = dist.bounds();
            assert!(xs.iter().all(|&x| (lo..=hi).contains(&x)));
        }
    }
}
