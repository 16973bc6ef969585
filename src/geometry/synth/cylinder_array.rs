//! Parallel cylinders on square and hexagonal lattices, by solid fraction and cell size: the
//! geometry of Sangani & Acrivos (1982, Int. J. Multiphase Flow 8, 193) and Drummond & Tahir
//! (1984, Int. J. Multiphase Flow 10, 515). The same mask serves flow across and along the
//! cylinders; the flow axis is chosen when solving.
//!
//! The cross-section uses the plane (u, v) with u, v the two axes after the cylinder axis in
//! cyclic order (axis z → (x, y), x → (y, z), y → (z, x)). A hexagonal lattice needs a
//! rectangular cell of aspect √3; in voxels the long side is round(√3 a), so the lattice is
//! very slightly distorted and the report gives the cell actually used. Radius matching works
//! as for sphere arrays (`lattice.rs`).

use super::canvas::fill_parallel;
use super::lattice::{Threshold, closest_radius, count_below, wrap};
use super::{ArrayInfo, Axis, Info, Synthetic, check_range, check_shape, usage};
use crate::Result;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

const KIND: &str = "cylinder_array";

/// Lattice of the cylinder axes in the cross-section.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum CylinderPacking {
    /// Square cell a × a, one cylinder per cell.
    Square,
    /// Rectangular cell a × round(√3 a) with two cylinders (corner and centre).
    Hexagonal,
}

impl CylinderPacking {
    /// Close-packing solid fraction of the ideal lattice: π/4 (square), π/(2√3) (hexagonal)
    /// (Gebart 1992, J. Composite Materials 26, 1100 — from memory).
    pub fn max_solid_fraction(self) -> f64 {
        match self {
            CylinderPacking::Square => PI / 4.0,
            CylinderPacking::Hexagonal => PI / (2.0 * 3f64.sqrt()),
        }
    }
}

/// Parameters of a cylinder array.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CylinderArrayParams {
    /// Square or hexagonal.
    pub packing: CylinderPacking,
    /// Solid area fraction of the cross-section.
    pub solid_fraction: f64,
    /// Cylinder spacing a in voxels (the short side of the hexagonal cell).
    pub cell: usize,
    /// Direction of the cylinder axes.
    #[serde(default = "axis_z")]
    pub axis: Axis,
    /// Unit cells along u and v.
    #[serde(default = "one_cell")]
    pub cells: [usize; 2],
    /// Box length along the axis in voxels (default: `cell`).
    #[serde(default)]
    pub length: Option<usize>,
    /// Move the radius so the voxel solid fraction is closest to `solid_fraction`.
    #[serde(default = "yes")]
    pub match_voxels: bool,
}

fn axis_z() -> Axis {
    Axis::Z
}

fn one_cell() -> [usize; 2] {
    [1, 1]
}

fn yes() -> bool {
    true
}

/// Squared doubled distance from cross-section voxel (u, v) to the nearest axis.
fn q_at(sites: &[[i64; 2]], period: [i64; 2], u: usize, v: usize) -> u64 {
    let p = [2 * u as i64 + 1, 2 * v as i64 + 1];
    sites
        .iter()
        .map(|s| (wrap(p[0] - s[0], period[0]).pow(2) + wrap(p[1] - s[1], period[1]).pow(2)) as u64)
        .min()
        .unwrap_or(u64::MAX)
}

/// Builds a cylinder array.
pub fn cylinder_array(p: &CylinderArrayParams) -> Result<Synthetic> {
    let c_max = p.packing.max_solid_fraction();
    let c = p.solid_fraction;
    if !(c.is_finite() && c > 0.0 && c <= c_max * (1.0 + 1e-4)) {
        return Err(usage(
            KIND,
            format!(
                "solid_fraction must lie in (0, {c_max:.6}] (close packing of {:?}), got {c}",
                p.packing
            ),
        ));
    }
    check_range(KIND, "cell", p.cell as f64, 2.0, 1024.0)?;
    if p.cells.contains(&0) {
        return Err(usage(
            KIND,
            format!("cells must be positive, got {:?}", p.cells),
        ));
    }
    let length = p.length.unwrap_or(p.cell);
    let a = p.cell;
    let (b, sites): (usize, Vec<[i64; 2]>) = match p.packing {
        CylinderPacking::Square => (a, vec![[a as i64, a as i64]]),
        CylinderPacking::Hexagonal => {
            let b = (3f64.sqrt() * a as f64).round() as usize;
            (b, vec![[0, 0], [a as i64, b as i64]])
        }
    };
    let k = p.axis.index();
    let (u, v) = ((k + 1) % 3, (k + 2) % 3);
    let mut shape = [0usize; 3];
    shape[k] = length;
    shape[u] = a.saturating_mul(p.cells[0]);
    shape[v] = b.saturating_mul(p.cells[1]);
    check_shape(KIND, "box (cells × cell, length)", shape)?;

    let n = sites.len() as f64;
    let (af, bf) = (a as f64, b as f64);
    let analytic = (c * af * bf / (PI * n)).sqrt();
    let touching = match p.packing {
        CylinderPacking::Square => 0.5 * af,
        CylinderPacking::Hexagonal => 0.5 * af.min(bf).min(0.5 * af.hypot(bf)),
    };
    let period = [2 * a as i64, 2 * b as i64];
    let mut hist = vec![0u64; a * a + b * b + 1];
    for iv in 0..b {
        for iu in 0..a {
            hist[q_at(&sites, period, iu, iv) as usize] += 1;
        }
    }
    let cell_area = (a * b) as f64;
    let thr = if p.match_voxels {
        closest_radius(&hist, c * cell_area, touching)
    } else {
        Threshold::from_radius(analytic.min(touching))
    };

    // One cross-section, repeated along the axis.
    let (nu, nv) = (shape[u], shape[v]);
    let section: Vec<bool> = (0..nu * nv)
        .map(|i| q_at(&sites, period, i % nu, i / nu) >= thr.q)
        .collect();
    let mask = fill_parallel(shape, |x, y, z| {
        let idx = [x, y, z];
        section[idx[u] + nu * idx[v]]
    });

    let solid_cell = count_below(&hist, thr.q) as f64;
    let mut cell_shape = [0usize; 3];
    cell_shape[k] = length;
    cell_shape[u] = a;
    cell_shape[v] = b;
    let info = ArrayInfo {
        requested_solid_fraction: c,
        solid_fraction: solid_cell / cell_area,
        analytic_radius: analytic,
        radius: thr.radius,
        touching_radius: touching,
        equivalent_radius: (solid_cell / (PI * n)).sqrt(),
        objects: sites.len() * p.cells[0] * p.cells[1],
        cell_shape,
    };
    Ok(Synthetic::new(mask, Info::Array(info)))
}
