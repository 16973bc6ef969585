//! Straight channels with analytic permeabilities, for solver tests: a plane slit, a square duct
//! and a circular tube (White, Viscous Fluid Flow: plane Poiseuille, Hagen–Poiseuille and the rectangular duct). Each is periodic along its channel
//! axis and walled across it.

use super::super::PoreMask;
use super::canvas::fill_parallel;
use super::{Axis, ChannelInfo, Info, Synthetic, check_range, check_shape, usage};
use crate::Result;
use serde::{Deserialize, Serialize};

/// A slit of `gap` fluid layers normal to `normal`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SlitParams {
    /// Box size in voxels; the layers along `normal` not in the gap form the walls.
    pub shape: [usize; 3],
    /// Axis normal to the walls.
    pub normal: Axis,
    /// Fluid layers.
    pub gap: usize,
}

/// A square duct of `side` × `side` fluid voxels along `axis`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DuctParams {
    /// Channel axis.
    pub axis: Axis,
    /// Fluid voxels across.
    pub side: usize,
    /// Box length along the axis.
    pub length: usize,
    /// Wall thickness in voxels (at least 1).
    #[serde(default = "one")]
    pub wall: usize,
}

/// A circular tube of radius `radius` voxels along `axis`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TubeParams {
    /// Channel axis.
    pub axis: Axis,
    /// Tube radius in voxels.
    pub radius: f64,
    /// Box length along the axis.
    pub length: usize,
    /// Minimum wall thickness in voxels (at least 1).
    #[serde(default = "one")]
    pub wall: usize,
}

fn one() -> usize {
    1
}

/// The slit mask: fluid layers `[⌊w/2⌋, ⌊w/2⌋ + gap)` along `normal`, with w = shape[normal] − gap
/// wall layers split between the two walls (lower wall the thinner by at most one layer).
pub fn slit_mask(shape: [usize; 3], normal: Axis, gap: usize) -> Result<PoreMask> {
    check_shape("slit", "shape", shape)?;
    let k = normal.index();
    if gap == 0 || shape[k] < gap + 2 {
        return Err(usage(
            "slit",
            format!(
                "gap must be at least 1 and leave one wall layer on each side: shape along {normal} \
                 is {}, gap {gap}",
                shape[k]
            ),
        ));
    }
    let lo = (shape[k] - gap) / 2;
    Ok(fill_parallel(shape, |x, y, z| {
        let i = [x, y, z][k];
        i >= lo && i < lo + gap
    }))
}

/// Box shape for a channel along `axis` with the given cross-section size.
fn channel_shape(kind: &str, axis: Axis, across: usize, length: usize) -> Result<[usize; 3]> {
    let mut shape = [across; 3];
    shape[axis.index()] = length;
    check_shape(kind, "channel box", shape)?;
    Ok(shape)
}

/// The square-duct mask: cross-section (side + 2 wall)², fluid in the middle side × side.
pub fn square_duct_mask(axis: Axis, side: usize, length: usize, wall: usize) -> Result<PoreMask> {
    if side == 0 || wall == 0 {
        return Err(usage(
            "square_duct",
            format!("side and wall must be at least 1, got side {side}, wall {wall}"),
        ));
    }
    let n = side.saturating_add(wall.saturating_mul(2));
    let shape = channel_shape("square_duct", axis, n, length)?;
    let k = axis.index();
    let (u, v) = ((k + 1) % 3, (k + 2) % 3);
    let inside = |i: usize| i >= wall && i < wall + side;
    Ok(fill_parallel(shape, |x, y, z| {
        let p = [x, y, z];
        inside(p[u]) && inside(p[v])
    }))
}

/// The circular-tube mask: cross-section n × n with n = 2⌈radius⌉ + 2 wall, fluid where the
/// voxel centre lies within `radius` of the section centre.
pub fn tube_mask(axis: Axis, radius: f64, length: usize, wall: usize) -> Result<PoreMask> {
    check_range("tube", "radius", radius, 1.0, 4096.0)?;
    if wall == 0 {
        return Err(usage("tube", "wall must be at least 1"));
    }
    let n = 2 * radius.ceil() as usize + wall.saturating_mul(2);
    let shape = channel_shape("tube", axis, n, length)?;
    let k = axis.index();
    let (u, v) = ((k + 1) % 3, (k + 2) % 3);
    let c = 0.5 * n as f64;
    let r2 = radius * radius;
    Ok(fill_parallel(shape, |x, y, z| {
        let p = [x, y, z];
        (p[u] as f64 + 0.5 - c).powi(2) + (p[v] as f64 + 0.5 - c).powi(2) < r2
    }))
}

fn channel(mask: PoreMask, axis: Axis, open_area: usize, tube: bool) -> Synthetic {
    let equivalent_radius = if tube {
        (open_area as f64 / std::f64::consts::PI).sqrt()
    } else {
        0.0
    };
    Synthetic::new(
        mask,
        Info::Channel(ChannelInfo {
            axis,
            open_area,
            equivalent_radius,
        }),
    )
}

/// A slit (see [`slit_mask`]).
pub fn slit(p: &SlitParams) -> Result<Synthetic> {
    let mask = slit_mask(p.shape, p.normal, p.gap)?;
    Ok(channel(mask, p.normal, p.gap, false))
}

/// A square duct (see [`square_duct_mask`]).
pub fn square_duct(p: &DuctParams) -> Result<Synthetic> {
    let mask = square_duct_mask(p.axis, p.side, p.length, p.wall)?;
    Ok(channel(mask, p.axis, p.side * p.side, false))
}

/// A circular tube (see [`tube_mask`]).
pub fn circular_tube(p: &TubeParams) -> Result<Synthetic> {
    let mask = tube_mask(p.axis, p.radius, p.length, p.wall)?;
    let open = mask.pore_count() / p.length;
    Ok(channel(mask, p.axis, open, true))
}
