//! Memory model of a solve, so `describe` can say beforehand what `estimate` will need and the
//! solver can refuse before allocating.
//!
//! Counted per fluid node: 19 f32 populations (76 B), grid coordinates (6 B), and the output
//! velocity and density (16 B) that coexist with the populations at the end. Per voxel of the
//! solver grid: the u32 node map (4 B). Per sample voxel: the pore mask kept by the caller and the
//! percolating mask built for the solve (1 B each).

use super::domain::{BYTES_PER_FLUID_NODE, BYTES_PER_VOXEL};

/// Output arrays (f32 velocity vector and density) per fluid node.
pub const OUTPUT_BYTES_PER_NODE: u64 = 16;

/// Peak bytes of one solve on a grid of `grid_voxels` with `fluid_nodes` fluid nodes, for a
/// sample of `sample_voxels`.
pub fn solve_peak_bytes(sample_voxels: u64, grid_voxels: u64, fluid_nodes: u64) -> u64 {
    let per_node = BYTES_PER_FLUID_NODE + OUTPUT_BYTES_PER_NODE;
    sample_voxels
        .saturating_mul(2)
        .saturating_add(grid_voxels.saturating_mul(BYTES_PER_VOXEL))
        .saturating_add(fluid_nodes.saturating_mul(per_node))
}

/// Peak bytes while reading: the voxel values (`bytes_per_sample` each) and the mask built from
/// them.
pub fn load_peak_bytes(voxels: u64, bytes_per_sample: u64) -> u64 {
    voxels.saturating_mul(bytes_per_sample + 1)
}
