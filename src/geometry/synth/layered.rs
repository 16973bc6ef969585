//! Layered media for anisotropy tests: a periodic stack of plane slits normal to one axis. Flow
//! along the layers sees plane Poiseuille channels (k = gap² / 12 per open area, White, Viscous
//! Fluid Flow, plane Poiseuille flow); flow across them sees none. Stretched grains, the other anisotropic
//! family, live with the Boolean model (`grains.rs`, [`super::Stretch`]).

use super::canvas::fill_parallel;
use super::{Axis, ChannelInfo, Info, Synthetic, check_shape, usage};
use crate::Result;
use serde::{Deserialize, Serialize};

const KIND: &str = "slit_stack";

/// Parameters of a slit stack.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SlitStackParams {
    /// Box size in voxels; the extent along `normal` must be a multiple of `period`.
    pub shape: [usize; 3],
    /// Axis normal to the slits.
    pub normal: Axis,
    /// Fluid layers per slit.
    pub gap: usize,
    /// Layers per period (slit plus wall).
    pub period: usize,
}

/// Builds a slit stack: in each period the `gap` fluid layers sit between walls of
/// ⌊(period − gap)/2⌋ and ⌈(period − gap)/2⌉ layers.
pub fn slit_stack(p: &SlitStackParams) -> Result<Synthetic> {
    check_shape(KIND, "shape", p.shape)?;
    let k = p.normal.index();
    let n = p.shape[k];
    if p.gap == 0 || p.period <= p.gap {
        return Err(usage(
            KIND,
            format!(
                "gap must be at least 1 and smaller than period, got gap {} and period {}",
                p.gap, p.period
            ),
        ));
    }
    if !n.is_multiple_of(p.period) {
        return Err(usage(
            KIND,
            format!(
                "shape along {} ({n}) must be a multiple of period {}",
                p.normal, p.period
            ),
        ));
    }
    let lo = (p.period - p.gap) / 2;
    let (gap, period) = (p.gap, p.period);
    let mask = fill_parallel(p.shape, |x, y, z| {
        let off = [x, y, z][k] % period;
        off >= lo && off < lo + gap
    });
    Ok(Synthetic::new(
        mask,
        Info::Channel(ChannelInfo {
            axis: p.normal,
            open_area: p.gap,
            equivalent_radius: 0.0,
        }),
    ))
}
