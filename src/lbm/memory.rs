//! Memory model of a solve, so `describe` can say beforehand what `estimate` will need and the
//! solver can refuse before allocating; plus the allocator setting the model relies on and a
//! reading of the measured peak.
//!
//! An estimate goes through stages whose arrays coexist (bytes; "sample" = voxel of the loaded
//! sample, "grid" = voxel of the solver grid, which a mirror doubles, "node" = fluid node):
//!
//! | stage | what is resident | bytes |
//! | --- | --- | --- |
//! | connectivity | pore mask, u32 cluster labels, percolating mask | 6 / sample (never above the build, as grid ≥ sample), plus about 25 / provisional cluster, not modelled (README, Memory) |
//! | domain build | pore mask, percolating mask, u32 node map, u16 × 3 coordinates | 2 / sample + 4 / grid + 6 / node |
//! | solve | pore mask, node map, coordinates, 19 f32 populations | 1 / sample + 4 / grid + 82 / node |
//! | output | as solve but the populations shrunk to density and velocity (`into_macroscopic`) | 1 / sample + 4 / grid + 34 / node |
//!
//! plus about [`BASE_BYTES`] for the program itself. The solve stage is the peak for any sample
//! with more than a few % porosity. Measured with `/usr/bin/time -v` (maximum resident set) on
//! 256³ overlapping-sphere samples, 2 threads: porosity 0.30 periodic 501.5 MB against 500.8 MB
//! modelled, mirrored ends (512×256×256 grid) 981.3 MB against 980.4 MB; porosity 0.20
//! periodic 363.7 MB against 363.0 MB, mirrored 705.2 MB against 704.5 MB (README,
//! Performance). The loading stage (voxel values
//! plus mask) is [`load_peak_bytes`].

use super::domain::{BYTES_PER_FLUID_NODE, BYTES_PER_VOXEL};

/// Resident size of the program before it holds any volume (code, libraries, thread stacks),
/// measured: about 3.6 MB.
pub const BASE_BYTES: u64 = 4 << 20;

/// Bytes per sample voxel of the pore mask the caller keeps through all solves.
pub const MASK: u64 = 1;
/// Bytes per fluid node of the coordinates alone (the domain before populations exist).
const COORDS: u64 = 6;

/// Peak bytes of one solve on a grid of `grid_voxels` with `fluid_nodes` fluid nodes, for a
/// sample of `sample_voxels`: the largest of the stages in the module table, plus
/// [`BASE_BYTES`].
pub fn solve_peak_bytes(sample_voxels: u64, grid_voxels: u64, fluid_nodes: u64) -> u64 {
    let grid = grid_voxels.saturating_mul(BYTES_PER_VOXEL);
    let build = sample_voxels
        .saturating_mul(2 * MASK)
        .saturating_add(grid)
        .saturating_add(fluid_nodes.saturating_mul(COORDS));
    let solve = sample_voxels
        .saturating_mul(MASK)
        .saturating_add(grid)
        .saturating_add(fluid_nodes.saturating_mul(BYTES_PER_FLUID_NODE));
    build.max(solve).saturating_add(BASE_BYTES)
}

/// Peak bytes while reading: the voxel values (`bytes_per_sample` each) and the mask built from
/// them.
pub fn load_peak_bytes(voxels: u64, bytes_per_sample: u64) -> u64 {
    voxels
        .saturating_mul(bytes_per_sample + MASK)
        .saturating_add(BASE_BYTES)
}

/// Makes the allocator hand large blocks straight back to the system when they are freed.
///
/// glibc serves blocks above its mmap threshold with their own mapping, freed at once, but it
/// raises that threshold to the size of the largest block freed so far (up to 32 MiB). After
/// the loaded voxel values are freed, the percolating mask of the same size then comes from a
/// heap, and freeing it leaves its pages resident through the solve: measured 1 byte per voxel
/// of extra peak on a 256³ sample (and `malloc_trim` does not reach the heaps of worker
/// threads). Setting the threshold explicitly turns the adjustment off (glibc manual, "Memory
/// Allocation Tunables", M_MMAP_THRESHOLD; mallopt(3)). Elsewhere this does nothing.
pub fn return_large_blocks_promptly() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    {
        unsafe extern "C" {
            fn mallopt(param: i32, value: i32) -> i32;
        }
        /// M_MMAP_THRESHOLD in glibc's malloc.h.
        const M_MMAP_THRESHOLD: i32 = -3;
        // SAFETY: mallopt only changes the allocator's tuning; 1 MiB is a valid threshold.
        unsafe {
            mallopt(M_MMAP_THRESHOLD, 1 << 20);
        }
    }
}

/// Bytes of one voxel value of a sample type ("u8", "u16", "f32"): what [`load_peak_bytes`]
/// needs.
pub fn bytes_per_sample(sample_type: &str) -> u64 {
    match sample_type {
        "u8" => 1,
        "u16" => 2,
        _ => 4,
    }
}

/// Starts the peak resident counter ([`peak_rss_bytes`]) anew from the current resident size,
/// so a batch can measure each sample on its own: writing "5" to /proc/self/clear_refs (Linux
/// 4.0 and later, proc(5)). Returns false where that is not available.
pub fn reset_peak_rss() -> bool {
    std::fs::write("/proc/self/clear_refs", "5").is_ok()
}

/// Peak resident memory of this process so far (VmHWM of /proc/self/status), bytes; `None`
/// where the system does not report it.
pub fn peak_rss_bytes() -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    kb.checked_mul(1024)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// After a reset the counter restarts at the current size: a large block touched and
    /// freed before the reset no longer counts. (Margins of 64 MiB and more, so that other
    /// tests of this binary allocating meanwhile cannot decide the outcome.)
    #[test]
    fn reset_restarts_the_peak() {
        if !reset_peak_rss() {
            return; // not Linux, or /proc not writable: nothing to check here
        }
        let before = peak_rss_bytes().unwrap();
        {
            let block = vec![1u8; 256 << 20];
            assert!(
                std::hint::black_box(&block)
                    .iter()
                    .step_by(4096)
                    .all(|&b| b == 1)
            );
        }
        let high = peak_rss_bytes().unwrap();
        assert!(
            high >= before + (192 << 20),
            "256 MiB touched: {before} -> {high}"
        );
        assert!(reset_peak_rss());
        let after = peak_rss_bytes().unwrap();
        assert!(
            after + (128 << 20) < high,
            "reset left the peak at {after} (was {high})"
        );
    }

    /// The solve stage dominates a porous sample, the domain build a nearly solid one.
    #[test]
    fn peak_is_the_largest_stage() {
        let v = 1_000_000;
        let porous = solve_peak_bytes(v, v, 300_000);
        assert_eq!(porous, v + 4 * v + 82 * 300_000 + BASE_BYTES);
        let tight = solve_peak_bytes(v, v, 1000);
        assert_eq!(tight, 2 * v + 4 * v + 6 * 1000 + BASE_BYTES);
        // A mirror doubles grid and nodes, not the sample.
        let mirrored = solve_peak_bytes(v, 2 * v, 600_000);
        assert_eq!(mirrored, v + 8 * v + 82 * 600_000 + BASE_BYTES);
    }
}
