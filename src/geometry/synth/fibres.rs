//! Fibre mats: straight cylinders of one radius, free to overlap, added at random until the voxel
//! porosity reaches the target.
//!
//! Orientation is aligned with an axis, random in a plane normal to an axis (typical of
//! paper, felts and non-wovens), or isotropic. Every fibre is a capsule (cylinder with
//! hemispherical ends) around a segment through a uniformly random centre, wrapped periodically.
//! Aligned fibres get the box length along their axis, so each closes on itself into an
//! infinite periodic cylinder. Random orientations use finite segments, by default as long as
//! the shortest box side; the rounded ends are a small share of the volume for long fibres.

use super::canvas::{Canvas, paint_until};
use super::random::{isotropic_direction, planar_direction, point, rng};
use super::{
    Axis, FibresInfo, Info, Synthetic, check_achieved, check_object_volume, check_porosity,
    check_range, check_shape,
};
use crate::Result;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

const KIND: &str = "fibres";

/// Fibre orientation distribution.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Orientation {
    /// All fibres parallel to `axis` (infinite periodic cylinders).
    Aligned { axis: Axis },
    /// Directions uniform in the plane normal to `normal`.
    Planar { normal: Axis },
    /// Directions uniform on the sphere.
    Isotropic,
}

/// One fibre: the axis segment `centre ± t·direction`, |t| ≤ length/2.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Fibre {
    /// Midpoint in voxel units.
    pub centre: [f64; 3],
    /// Unit direction.
    pub direction: [f64; 3],
}

/// Parameters of a fibre mat.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FibreParams {
    /// Box size in voxels.
    pub shape: [usize; 3],
    /// Target porosity.
    pub porosity: f64,
    /// Fibre radius in voxels.
    pub radius: f64,
    /// Orientation distribution.
    pub orientation: Orientation,
    /// Segment length in voxels for random orientations (default: shortest box side); ignored
    /// for aligned fibres.
    #[serde(default)]
    pub length: Option<f64>,
}

/// Builds a fibre mat.
pub fn fibre_mat(p: &FibreParams, seed: u64) -> Result<Synthetic> {
    let voxels = check_shape(KIND, "shape", p.shape)?;
    check_porosity(KIND, "porosity", p.porosity)?;
    let l_min = p.shape.iter().copied().min().unwrap_or(0) as f64;
    let l_max = p.shape.iter().copied().max().unwrap_or(0) as f64;
    check_range(KIND, "radius", p.radius, 0.5, (l_min / 4.0).max(0.5))?;
    let length = match p.orientation {
        Orientation::Aligned { axis } => p.shape[axis.index()] as f64,
        _ => {
            let len = p.length.unwrap_or(l_min);
            check_range(KIND, "length", len, 1.0, 4.0 * l_max)?;
            len
        }
    };
    let r = p.radius;
    check_object_volume(
        KIND,
        "radius or length",
        PI * r * r * length + 4.0 / 3.0 * PI * r.powi(3),
        voxels,
    )?;

    let box_len = p.shape.map(|n| n as f64);
    let mut rng = rng(seed);
    let mut canvas = Canvas::new(p.shape, false);
    let target = ((1.0 - p.porosity) * voxels as f64).round() as usize;
    let cap = (20.0 * voxels as f64 / (PI * r * r * length)) as usize + 100_000;
    let fibres = paint_until(&mut canvas, target, cap, |cv| {
        let centre = point(&mut rng, box_len);
        let direction = match p.orientation {
            Orientation::Aligned { axis } => {
                let mut d = [0.0; 3];
                d[axis.index()] = 1.0;
                d
            }
            Orientation::Planar { normal } => planar_direction(&mut rng, normal.index()),
            Orientation::Isotropic => isotropic_direction(&mut rng),
        };
        cv.stamp_capsule(centre, direction, 0.5 * length, r);
        Ok(Some(Fibre { centre, direction }))
    })?;
    let out = Synthetic::new(
        canvas.into_mask(),
        Info::Fibres(FibresInfo {
            target_porosity: p.porosity,
            radius: r,
            length,
            fibres,
        }),
    );
    check_achieved(KIND, p.porosity, out.porosity)?;
    Ok(out)
}
