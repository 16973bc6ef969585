//! A small record of a steady flow field for reports: the distribution of local speeds and a
//! downsampled speed map of the cross-section half-way along the flow axis. A few kilobytes in
//! the result JSON instead of the field itself, so `voxperm report` can plot without the solve.
//!
//! Speeds are divided by the mean speed ⟨|u|⟩ over the sample's fluid nodes, which makes them
//! independent of the body force and the viscosity (Stokes flow is linear in the force).

use crate::analysis::KeptField;
use crate::geometry::Axis;
use serde::{Deserialize, Serialize};

/// Bins of the speed histogram.
pub const HISTOGRAM_BINS: usize = 64;
/// Largest side of the speed map, in cells.
pub const MAP_MAX_SIDE: usize = 128;

/// Speeds of the sample's fluid nodes relative to their mean.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct SpeedHistogram {
    /// Bin n holds |u|/⟨|u|⟩ in [n·bin_width, (n+1)·bin_width); the top bin includes the maximum.
    pub bin_width: f64,
    /// Fluid nodes per bin.
    pub counts: Vec<u64>,
}

/// Mean |u|/⟨|u|⟩ over blocks of the cross-section normal to the flow axis at mid-length.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct SpeedMap {
    /// Axis along the map's columns and along its rows.
    pub horizontal: Axis,
    pub vertical: Axis,
    /// Voxel index of the plane along the flow axis (sample coordinates).
    pub plane_index: usize,
    /// Edge of the square block of voxels one cell averages over.
    pub block: usize,
    pub width: usize,
    pub height: usize,
    /// Speed of a level-1 cell; a cell's speed is `level × scale` in units of ⟨|u|⟩.
    pub scale: f64,
    /// Row-major from the lowest vertical index; `null` where the block holds no fluid.
    pub levels: Vec<Option<u8>>,
}

/// The flow record kept in a result file.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct FlowSnapshot {
    /// Flow axis of the field.
    pub axis: Axis,
    /// ⟨|u|⟩ over the sample's fluid nodes, lattice units.
    pub mean_speed_lattice: f64,
    pub fluid_nodes: usize,
    pub histogram: SpeedHistogram,
    pub mid_plane: SpeedMap,
}

impl FlowSnapshot {
    /// Summarises a kept field; cost is one pass over the nodes plus one plane.
    pub fn from_field(kept: &KeptField) -> FlowSnapshot {
        let (d, f) = (&kept.domain, &kept.field);
        let speed = |u: &[f32; 3]| f64::from(u[0] * u[0] + u[1] * u[1] + u[2] * u[2]).sqrt();
        let speeds: Vec<f64> = (0..d.fluid_nodes())
            .filter(|&k| d.in_sample(k))
            .map(|k| speed(&f.velocity[k]))
            .collect();
        let mean = speeds.iter().sum::<f64>() / speeds.len().max(1) as f64;
        let unit = if mean > 0.0 { mean } else { 1.0 };
        let top = speeds.iter().fold(0.0f64, |m, &s| m.max(s / unit));
        let bin_width = if top > 0.0 {
            top / HISTOGRAM_BINS as f64
        } else {
            1.0 / HISTOGRAM_BINS as f64
        };
        let mut counts = vec![0u64; HISTOGRAM_BINS];
        for s in &speeds {
            let bin = ((s / unit / bin_width) as usize).min(HISTOGRAM_BINS - 1);
            counts[bin] += 1;
        }
        let a = d.axis.index();
        let (h, v) = ((a + 1) % 3, (a + 2) % 3);
        let plane = d.sample_shape[a] / 2;
        let (nh, nv) = (d.sample_shape[h], d.sample_shape[v]);
        let block = nh.max(nv).div_ceil(MAP_MAX_SIDE).max(1);
        let (width, height) = (nh.div_ceil(block), nv.div_ceil(block));
        let mut means = Vec::with_capacity(width * height);
        for row in 0..height {
            for col in 0..width {
                let (mut sum, mut n) = (0.0, 0usize);
                for j in row * block..((row + 1) * block).min(nv) {
                    for i in col * block..((col + 1) * block).min(nh) {
                        let mut p = d.sample_origin;
                        p[a] += plane;
                        p[h] += i;
                        p[v] += j;
                        let voxel = p[0] + d.shape[0] * (p[1] + d.shape[1] * p[2]);
                        let node = d.node_of_voxel[voxel];
                        if node != crate::lbm::domain::SOLID {
                            sum += speed(&f.velocity[node as usize]) / unit;
                            n += 1;
                        }
                    }
                }
                means.push((n > 0).then(|| sum / n as f64));
            }
        }
        let peak = means.iter().flatten().fold(0.0f64, |m, &s| m.max(s));
        let scale = if peak > 0.0 { peak / 255.0 } else { 1.0 };
        let levels = means
            .iter()
            .map(|m| m.map(|s| (s / scale).round().clamp(0.0, 255.0) as u8))
            .collect();
        FlowSnapshot {
            axis: d.axis,
            mean_speed_lattice: mean,
            fluid_nodes: speeds.len(),
            histogram: SpeedHistogram { bin_width, counts },
            mid_plane: SpeedMap {
                horizontal: Axis::ALL[h],
                vertical: Axis::ALL[v],
                plane_index: plane,
                block,
                width,
                height,
                scale,
                levels,
            },
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::{EstimateConfig, estimate};
    use crate::geometry::PoreMask;
    use crate::lbm::{BoundaryMode, Silent, SolverSettings};

    /// A periodic slit along x: plane Poiseuille flow (REFERENCES.md, straight channels), and
    /// with TRT at Λ = 3/16 the nodal velocities are the exact parabola u ∝ y'(N − y') at the
    /// node centres y' = y + ½. For N = 6: 2.75, 6.75, 8.75, 8.75, 6.75, 2.75, mean 6.0833, so
    /// the map is constant along z, peaks at the two middle layers, and peak/mean = 1.4384.
    #[test]
    fn slit_snapshot_shows_the_parabola() {
        let mask = PoreMask::from_fn([4, 7, 3], |_, y, _| y < 6);
        let cfg = EstimateConfig {
            axes: vec![Axis::X],
            mode: BoundaryMode::PERIODIC,
            solver: SolverSettings {
                tolerance: 1e-7,
                ..SolverSettings::default()
            },
            max_memory_bytes: u64::MAX,
            voxel_size_m: None,
        };
        let (_, kept) = estimate(&mask, &cfg, &mut Silent, true).unwrap();
        let s = FlowSnapshot::from_field(&kept.unwrap());
        assert_eq!(s.fluid_nodes, 4 * 6 * 3);
        assert_eq!(s.histogram.counts.iter().sum::<u64>(), 72);
        let m = &s.mid_plane;
        assert_eq!(
            (m.horizontal, m.vertical, m.width, m.height),
            (Axis::Y, Axis::Z, 7, 3)
        );
        // Column y = 6 is solid in every row.
        assert!((0..3).all(|r| m.levels[r * 7 + 6].is_none()));
        let row: Vec<u8> = (0..6).map(|y| m.levels[y].unwrap()).collect();
        assert_eq!(row[2], 255, "{row:?}");
        assert_eq!(row[0], row[5]);
        assert!(row[0] < row[1] && row[1] < row[2]);
        assert_eq!(row[3], 255, "{row:?}");
        let peak = 255.0 * m.scale;
        assert!(
            (peak / (8.75 / 6.083_333) - 1.0).abs() < 1e-3,
            "peak/mean {peak}"
        );
    }
}
