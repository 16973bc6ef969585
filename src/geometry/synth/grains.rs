//! Overlapping (Boolean) grains: spheres, or ellipsoids stretched along one axis for anisotropic
//! media, dropped at uniformly random centres until the voxel porosity reaches the target.
//!
//! For a Boolean model the porosity falls as exp(−n v̄) with the number density n of grains of
//! mean volume v̄ (Serra, Image Analysis and Mathematical Morphology, 1982, ch. XIII; Torquato,
//! Random Heterogeneous Materials, 2002, §3.1 [from memory]); the loop below does not rely on
//! it — it measures the voxel porosity after each grain and stops at the target.

use super::canvas::{Canvas, paint_until};
use super::random::{RadiusDist, point, rng};
use super::{
    Axis, Grain, GrainsInfo, Info, Synthetic, check_achieved, check_object_volume, check_porosity,
    check_range, check_shape,
};
use crate::Result;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

const KIND: &str = "boolean";

/// Stretch of spherical grains into ellipsoids of revolution.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Stretch {
    /// Axis of revolution.
    pub axis: Axis,
    /// Semi-axis along `axis` divided by the transverse radius (> 1 prolate, < 1 oblate).
    pub aspect: f64,
}

/// Parameters of a Boolean grain model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BooleanParams {
    /// Box size in voxels.
    pub shape: [usize; 3],
    /// Target porosity.
    pub porosity: f64,
    /// Grain radius distribution (the transverse semi-axis of stretched grains).
    pub radius: RadiusDist,
    /// Optional stretch into ellipsoids.
    #[serde(default)]
    pub stretch: Option<Stretch>,
}

/// Semi-axes of a grain of transverse radius 1.
fn semi_scale(stretch: Option<Stretch>) -> [f64; 3] {
    let mut s = [1.0; 3];
    if let Some(st) = stretch {
        s[st.axis.index()] = st.aspect;
    }
    s
}

/// Paints random grains on `canvas` until `target` voxels are painted (shared with the
/// inverted-sphere foam, which paints pore instead of solid).
pub(super) fn paint_grains(
    canvas: &mut Canvas,
    target: usize,
    shape: [usize; 3],
    dist: &RadiusDist,
    scale: [f64; 3],
    rng: &mut ChaCha8Rng,
) -> Result<Vec<Grain>> {
    let box_len = shape.map(|n| n as f64);
    let mean_volume = 4.0 / 3.0 * PI * dist.mean().powi(3) * scale.iter().product::<f64>();
    // Far more grains than a Boolean model needs for the target (−ln φ V / v̄ with φ ≥ 1e-3):
    // only a broken invariant could reach this cap.
    let cap = (20.0 * canvas.len() as f64 / mean_volume) as usize + 100_000;
    paint_until(canvas, target, cap, |cv| {
        let centre = point(rng, box_len);
        let r = dist.sample(rng);
        cv.stamp_ellipsoid(centre, scale.map(|s| s * r));
        Ok(Some(Grain { centre, radius: r }))
    })
}

/// Builds a Boolean grain structure.
pub fn boolean_grains(p: &BooleanParams, seed: u64) -> Result<Synthetic> {
    let voxels = check_shape(KIND, "shape", p.shape)?;
    check_porosity(KIND, "porosity", p.porosity)?;
    p.radius.validate(KIND, "radius")?;
    if let Some(st) = p.stretch {
        check_range(KIND, "stretch.aspect", st.aspect, 0.05, 20.0)?;
    }
    let scale = semi_scale(p.stretch);
    let (_, r_max) = p.radius.bounds();
    let v_max = 4.0 / 3.0 * PI * r_max.powi(3) * scale.iter().product::<f64>();
    check_object_volume(KIND, "radius", v_max, voxels)?;

    let mut rng = rng(seed);
    let mut canvas = Canvas::new(p.shape, false);
    let target = ((1.0 - p.porosity) * voxels as f64).round() as usize;
    let grains = paint_grains(&mut canvas, target, p.shape, &p.radius, scale, &mut rng)?;
    let out = Synthetic::new(
        canvas.into_mask(),
        Info::Grains(GrainsInfo {
            target_porosity: p.porosity,
            method: "boolean".into(),
            stretch: p.stretch,
            grains,
        }),
    );
    check_achieved(KIND, p.porosity, out.porosity)?;
    Ok(out)
}
