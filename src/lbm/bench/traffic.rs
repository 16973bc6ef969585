//! The kernel's memory-traffic model: bytes moved between memory and the cores per fluid-node
//! update, averaged over an even and an odd step of the AA pattern.
//!
//! Counted (derivation in README.md, "Performance"):
//! - populations: every step reads and writes all 19 f32 slots of every node once,
//!   2 × 19 × 4 = 152 B (Bailey et al. 2009 for the AA pattern; Wittmann et al. 2013, Comput.
//!   Math. Appl. 65, for the count). The stores hit lines the step has just read, so there is no
//!   write-allocate read.
//! - coordinates: the odd step reads the 3 × u16 grid position of each node, 6 B, so 3 B per
//!   update on average.
//! - node map: the odd step looks up the u32 node index of the 18 neighbour voxels. Nodes are
//!   in x-line order, so the lookups of consecutive nodes walk nine rows of the map side by side
//!   (y ± 1, z ± 1); three planes of the map stay in cache and each map entry comes from memory
//!   once per odd step. That is 4 B per voxel, i.e. 4/φ B per fluid node per odd step with φ the
//!   fluid fraction of the grid, 2/φ B per update on average (lower bound, used for the roofline).
//!   If no lookup ever hit the cache, each of the 18 would cost a 4 B read: 36 B per update
//!   (upper bound, reported beside it).

use super::super::d3q19::Q;

/// Bytes per fluid-node update, by array, averaged over one even and one odd step.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Traffic {
    /// Populations read and written: 2 × 19 × 4 B.
    pub populations: f64,
    /// Grid coordinates read on odd steps: 6 B / 2.
    pub coordinates: f64,
    /// Node-map reads on odd steps, one per voxel: (4 B / φ) / 2.
    pub node_map: f64,
    /// Sum of the three: the figure the roofline uses.
    pub total: f64,
    /// `total` with the node map counted as 18 uncached u32 reads per odd step instead.
    pub total_upper: f64,
}

/// Bytes of one f32 population slot.
const SLOT: f64 = 4.0;
/// Bytes of one node's grid coordinates (3 × u16).
const COORDS: f64 = 6.0;
/// Bytes of one node-map entry (u32).
const MAP_ENTRY: f64 = 4.0;

/// Traffic per update for a grid of `voxels` voxels holding `fluid_nodes` fluid nodes.
pub fn traffic(fluid_nodes: u64, voxels: u64) -> Traffic {
    let populations = 2.0 * Q as f64 * SLOT;
    let coordinates = COORDS / 2.0;
    let phi = fluid_nodes as f64 / voxels.max(1) as f64;
    let node_map = if phi > 0.0 {
        MAP_ENTRY / phi / 2.0
    } else {
        0.0
    };
    let upper_map = (Q - 1) as f64 * MAP_ENTRY / 2.0;
    Traffic {
        populations,
        coordinates,
        node_map,
        total: populations + coordinates + node_map,
        total_upper: populations + coordinates + upper_map,
    }
}

/// Attainable update rate (MLUPS) for a bandwidth in GB/s and a traffic in bytes per update:
/// the roofline of a bandwidth-bound kernel (Williams, Waterman & Patterson 2009, Commun. ACM
/// 52(4), 65).
pub fn attainable_mlups(gb_s: f64, bytes_per_update: f64) -> f64 {
    if bytes_per_update > 0.0 {
        gb_s * 1e9 / bytes_per_update / 1e6
    } else {
        0.0
    }
}
