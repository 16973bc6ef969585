//! Geometry-only summary of a pore mask (what `voxperm describe` prints): porosity, percolation
//! per axis, specific surface and a Kozeny–Carman estimate. No flow is solved.

use super::PoreMask;
use super::connectivity::{AxisPercolation, face_connected_by_axis, percolation_by_axis};
use super::surface::{Surface, measure_surface};
use crate::Result;
use crate::analysis::kozeny::{KOZENY_CONSTANT, kozeny_carman_from_surface};

/// Everything `describe` reports about a mask. Lengths are in voxels.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct GeometrySummary {
    /// Grid size `[nx, ny, nz]`.
    pub shape: [usize; 3],
    /// nx·ny·nz.
    pub voxels: usize,
    /// Pore voxels.
    pub pore_voxels: usize,
    /// Pore voxels over all voxels.
    pub total_porosity: f64,
    /// Whether the transverse sides were treated as periodic when testing percolation.
    pub sides_periodic: bool,
    /// Whether the ends along the flow axis were treated as periodic (see
    /// [`super::connectivity::percolating`]).
    pub ends_periodic: bool,
    /// Percolation along x, y and z.
    pub axes: [AxisPercolation; 3],
    /// Connected porosity along x, y and z with voxels joined through faces only
    /// ([`super::connectivity::face_connected_pore_voxels`]).
    pub face_connected_porosity: [f64; 3],
    /// Pore–solid surface. Faces across the grid boundary are counted only when sides and ends
    /// are both periodic (a periodic unit cell); otherwise the sample's outer faces are cuts.
    pub surface: Surface,
    /// The Kozeny constant used for `kc_estimate_voxel2`.
    pub kozeny_constant: f64,
    /// Kozeny–Carman k = φ³/(c_K S_v²) in voxel², from the total porosity and the corrected
    /// specific surface (Carman 1937). `None` when there is no surface.
    pub kc_estimate_voxel2: Option<f64>,
}

impl GeometrySummary {
    /// True when the pore space carries flow along at least one axis.
    pub fn percolates_anywhere(&self) -> bool {
        self.axes.iter().any(|a| a.percolates)
    }
}

/// Summarises `mask`. `sides_periodic`/`ends_periodic` have the meaning of
/// [`super::connectivity::percolating`]. Fails only when the grid is too large to label.
pub fn summarize(
    mask: &PoreMask,
    sides_periodic: bool,
    ends_periodic: bool,
) -> Result<GeometrySummary> {
    let wrap = sides_periodic && ends_periodic;
    // Surface counting is cheap and independent of labelling; let it run beside it.
    let (axes, surface) = rayon::join(
        || percolation_by_axis(mask, sides_periodic, ends_periodic),
        || measure_surface(mask, [wrap; 3]),
    );
    let axes = axes?;
    // After the D3Q19 labelling is freed, so the two label arrays never coexist.
    let face = face_connected_by_axis(mask, sides_periodic, ends_periodic)?;
    let face_connected_porosity = face.map(|v| v as f64 / mask.len().max(1) as f64);
    let total_porosity = mask.porosity();
    Ok(GeometrySummary {
        shape: mask.shape(),
        voxels: mask.len(),
        pore_voxels: mask.pore_count(),
        total_porosity,
        sides_periodic,
        ends_periodic,
        axes,
        face_connected_porosity,
        kozeny_constant: KOZENY_CONSTANT,
        kc_estimate_voxel2: kozeny_carman_from_surface(
            total_porosity,
            surface.specific_surface,
            KOZENY_CONSTANT,
        ),
        surface,
    })
}
