//! Random packs of non-overlapping spheres, monodisperse or polydisperse, at a target porosity.
//!
//! Two placement methods:
//! - random sequential addition (RSA): spheres at random positions, each kept only if it
//!   overlaps none placed before (cell-list test). For equal spheres it saturates at a solid
//!   fraction of about 0.384 and slows down sharply well before that: with the limit of
//!   20 000 tries per sphere it stalls near 0.34 (measured: 128³ box, radius 4).
//! - overlap relaxation (`relax.rs`): all spheres at once at random positions, pushed apart while
//!   their radii are inflated; reaches dense random packs (see [`RELAXATION_LIMIT`]). Spheres
//!   for 1 % more solid than the target are relaxed, then painted in random order until the
//!   target is met, so the surplus leaves at random.
//!
//! In both cases spheres are added until the voxel porosity reaches the target, and the sphere
//! whose addition lands closer to the target decides whether the last one stays.

use super::canvas::{Canvas, paint_until};
use super::cells::{CellGrid, dist2};
use super::random::{RadiusDist, point, rng};
use super::relax::{FINAL_TOLERANCE, relax, separation_factor};
use super::{
    Grain, GrainsInfo, Info, Synthetic, check_achieved, check_object_volume, check_porosity,
    check_shape, usage,
};
use crate::Result;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

const KIND: &str = "sphere_pack";

/// Saturation (jamming) solid fraction of RSA of equal spheres in 3D: 0.38413 (Zhang &
/// Torquato 2013, Phys. Rev. E 88, 053312 [from memory]).
pub const RSA_JAMMING_LIMIT: f64 = 0.38413;

/// Above this solid fraction `auto` switches from RSA to relaxation: RSA would need many
/// thousands of attempts per sphere near saturation.
pub const AUTO_RSA_LIMIT: f64 = 0.30;

/// Densest solid fraction offered by the relaxation; random close packing of equal spheres is
/// about 0.64 (Scott & Kilgour 1969, J. Phys. D 2, 863 [from memory]) and the simple relaxation
/// slows down sharply as it is approached.
pub const RELAXATION_LIMIT: f64 = 0.60;

/// Positions tried for one sphere before RSA gives up.
const RSA_TRIES: usize = 20_000;

/// How the spheres are placed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum PackMethod {
    /// RSA up to [`AUTO_RSA_LIMIT`] solid fraction, relaxation above.
    #[default]
    Auto,
    /// Random sequential addition only.
    Rsa,
    /// Overlap relaxation only.
    Relaxation,
}

/// Parameters of a random hard-sphere pack.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PackParams {
    /// Box size in voxels.
    pub shape: [usize; 3],
    /// Target porosity.
    pub porosity: f64,
    /// Sphere radius distribution.
    pub radius: RadiusDist,
    /// Placement method.
    #[serde(default)]
    pub method: PackMethod,
}

/// Builds a random hard-sphere pack.
pub fn sphere_pack(p: &PackParams, seed: u64) -> Result<Synthetic> {
    let voxels = check_shape(KIND, "shape", p.shape)?;
    check_porosity(KIND, "porosity", p.porosity)?;
    p.radius.validate(KIND, "radius")?;
    let (_, r_max) = p.radius.bounds();
    let l_min = p.shape.iter().copied().min().unwrap_or(0) as f64;
    // Overlap tests use the minimum image, which needs rᵢ + rⱼ < L/2.
    if 4.0 * r_max > l_min {
        return Err(usage(
            KIND,
            format!(
                "radius up to {r_max:.2} is too large for the box: the largest sphere must stay below \
                 a quarter of the shortest side ({:.2})",
                l_min / 4.0
            ),
        ));
    }
    check_object_volume(KIND, "radius", 4.0 / 3.0 * PI * r_max.powi(3), voxels)?;
    let solid = 1.0 - p.porosity;
    let method = match p.method {
        // The slack keeps porosity 0.7 (solid 0.30000000000000004) on the RSA side.
        PackMethod::Auto if solid <= AUTO_RSA_LIMIT + 1e-12 => PackMethod::Rsa,
        PackMethod::Auto => PackMethod::Relaxation,
        m => m,
    };
    if method == PackMethod::Rsa
        && matches!(p.radius, RadiusDist::Mono { .. })
        && solid >= RSA_JAMMING_LIMIT
    {
        return Err(usage(
            KIND,
            format!(
                "random sequential addition of equal spheres saturates at solid fraction \
                 {RSA_JAMMING_LIMIT}; porosity {} needs method \"relaxation\"",
                p.porosity
            ),
        ));
    }
    if solid > RELAXATION_LIMIT {
        return Err(usage(
            KIND,
            format!(
                "porosity {} is below {:.2}, denser than the packing methods reach",
                p.porosity,
                1.0 - RELAXATION_LIMIT
            ),
        ));
    }

    let box_len = p.shape.map(|n| n as f64);
    let mut rng = rng(seed);
    let mut canvas = Canvas::new(p.shape, false);
    let target = (solid * voxels as f64).round() as usize;
    let grains = match method {
        PackMethod::Rsa => rsa(&mut canvas, target, box_len, &p.radius, &mut rng)?,
        _ => relaxed(&mut canvas, target, box_len, &p.radius, &mut rng)?,
    };
    let out = Synthetic::new(
        canvas.into_mask(),
        Info::Grains(GrainsInfo {
            target_porosity: p.porosity,
            method: if method == PackMethod::Rsa {
                "rsa"
            } else {
                "relaxation"
            }
            .into(),
            stretch: None,
            grains,
        }),
    );
    check_achieved(KIND, p.porosity, out.porosity)?;
    Ok(out)
}

fn rsa(
    canvas: &mut Canvas,
    target: usize,
    box_len: [f64; 3],
    dist: &RadiusDist,
    rng: &mut ChaCha8Rng,
) -> Result<Vec<Grain>> {
    let (_, r_max) = dist.bounds();
    let mut grid = CellGrid::new(box_len, 2.0 * r_max);
    let mut grains: Vec<Grain> = Vec::new();
    let cap = canvas.len();
    let kept = paint_until(canvas, target, cap, |cv| {
        let r = dist.sample(rng);
        for _ in 0..RSA_TRIES {
            let c = point(rng, box_len);
            let mut free = true;
            grid.for_each_near(c, |id| {
                let g = &grains[id as usize];
                free &= dist2(c, g.centre, box_len) >= (r + g.radius).powi(2);
            });
            if free {
                grid.insert(c, grains.len() as u32);
                grains.push(Grain {
                    centre: c,
                    radius: r,
                });
                cv.stamp_ellipsoid(c, [r; 3]);
                return Ok(Some(()));
            }
        }
        let placed: f64 = grains.iter().map(|g| g.radius.powi(3)).sum::<f64>() * 4.0 / 3.0 * PI;
        Err(usage(
            KIND,
            format!(
                "random sequential addition stalled at solid fraction {:.3}: no free place for \
                 sphere {} in {RSA_TRIES} random tries; use method \"relaxation\"",
                placed / box_len.iter().product::<f64>(),
                grains.len() + 1
            ),
        ))
    })?;
    grains.truncate(kept.len());
    Ok(grains)
}

fn relaxed(
    canvas: &mut Canvas,
    target: usize,
    box_len: [f64; 3],
    dist: &RadiusDist,
    rng: &mut ChaCha8Rng,
) -> Result<Vec<Grain>> {
    let volume: f64 = box_len.iter().product();
    let (_, r_max) = dist.bounds();
    // 1 % surplus (plus one sphere) covers voxelisation scatter and the final shrink.
    let surplus = 0.01 + 4.0 / 3.0 * PI * r_max.powi(3) / volume;
    let want = target as f64 / canvas.len() as f64 + surplus;
    let mut radii = Vec::new();
    let mut solid = 0.0;
    while solid < want * volume {
        let r = dist.sample(rng);
        solid += 4.0 / 3.0 * PI * r.powi(3);
        radii.push(r);
    }
    let mut centres: Vec<[f64; 3]> = radii.iter().map(|_| point(rng, box_len)).collect();
    relax(&mut centres, &radii, box_len, solid / volume)?;
    // The tiny extra margin keeps touching pairs apart after rounding of r·f.
    let f = separation_factor(&centres, &radii, box_len) * (1.0 - 1e-12);
    debug_assert!(f >= 1.0 - 1.5 * FINAL_TOLERANCE);
    let grains: Vec<Grain> = centres
        .iter()
        .zip(&radii)
        .map(|(&centre, &r)| Grain {
            centre,
            radius: r * f,
        })
        .collect();
    let mut it = grains.iter();
    let kept = paint_until(canvas, target, grains.len(), |cv| {
        Ok(it.next().map(|g| {
            cv.stamp_ellipsoid(g.centre, [g.radius; 3]);
            *g
        }))
    })?;
    Ok(kept)
}
