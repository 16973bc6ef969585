//! `voxperm bench` as a library call: memory bandwidth and kernel throughput measured in one
//! run on the same machine, so the ratio of the two (the fraction of the bandwidth roofline the
//! kernel reaches) is meaningful even on a noisy shared machine.

mod bandwidth;
mod cases;
mod traffic;

pub use bandwidth::{Bandwidth, measure as measure_bandwidth};
pub use cases::{BenchStructure, FOAM_POROSITY, KernelCase, PACK_POROSITY, time_kernel};
pub use traffic::{Traffic, attainable_mlups, traffic};

use super::kernel::Isa;
use crate::{Error, Result};

/// What to measure.
#[derive(Debug, Clone, serde::Serialize)]
pub struct BenchConfig {
    /// Box edges of the structures, voxels.
    pub sizes: Vec<usize>,
    pub structures: Vec<BenchStructure>,
    /// Thread counts 1..=max_threads are measured.
    pub max_threads: usize,
    /// Bytes of each of the three bandwidth arrays.
    pub bandwidth_array_bytes: usize,
    /// Repetitions of every measurement (the best counts).
    pub reps: usize,
    /// Minimum duration of one kernel repetition, seconds.
    pub min_seconds: f64,
    /// Seed of the structure generators.
    pub seed: u64,
    /// Memory cap for one kernel case, bytes.
    pub max_bytes: u64,
    /// Kernel build to time (`None`: the best this CPU runs).
    pub isa: Option<Isa>,
}

impl BenchConfig {
    /// Full run: 64³, 128³ and 256³, 1 GiB bandwidth arrays (3 GiB in all).
    pub fn full(max_threads: usize) -> BenchConfig {
        BenchConfig {
            sizes: vec![64, 128, 256],
            structures: BenchStructure::ALL.to_vec(),
            max_threads,
            bandwidth_array_bytes: 1 << 30,
            reps: 5,
            min_seconds: 0.5,
            seed: 1,
            max_bytes: u64::MAX,
            isa: None,
        }
    }

    /// A quick run: 64³ and 128³, fewer repetitions; the bandwidth arrays stay far above the
    /// caches (3 × 768 MiB).
    pub fn quick(max_threads: usize) -> BenchConfig {
        BenchConfig {
            sizes: vec![64, 128],
            bandwidth_array_bytes: 768 << 20,
            reps: 3,
            min_seconds: 0.2,
            ..BenchConfig::full(max_threads)
        }
    }
}

/// Everything one run measured.
#[derive(Debug, Clone, serde::Serialize)]
pub struct BenchReport {
    pub config: BenchConfig,
    /// One entry per thread count.
    pub bandwidth: Vec<Bandwidth>,
    /// One entry per structure, size and thread count.
    pub cases: Vec<KernelCase>,
}

/// Runs the benchmark. `progress` receives one line per measurement as it starts.
pub fn run(cfg: &BenchConfig, progress: &mut dyn FnMut(&str)) -> Result<BenchReport> {
    if cfg.max_threads == 0 {
        return Err(Error::Usage("bench needs at least one thread".into()));
    }
    if cfg.sizes.is_empty() || cfg.structures.is_empty() {
        return Err(Error::Usage(
            "bench needs at least one size and structure".into(),
        ));
    }
    let pools = (1..=cfg.max_threads)
        .map(|t| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(t)
                .build()
                .map_err(|e| Error::Internal(format!("cannot start {t} worker threads: {e}")))
        })
        .collect::<Result<Vec<_>>>()?;
    // Bandwidth is measured before and after the kernel cases and the better figure kept: on a
    // shared machine a neighbour's job can depress either pass.
    let measure_all = |progress: &mut dyn FnMut(&str), pass: &str| -> Vec<Bandwidth> {
        pools
            .iter()
            .map(|pool| {
                progress(&format!(
                    "bandwidth ({pass}), {} thread(s), 3 arrays of {} MiB",
                    pool.current_num_threads(),
                    cfg.bandwidth_array_bytes >> 20
                ));
                measure_bandwidth(pool, cfg.bandwidth_array_bytes, cfg.reps)
            })
            .collect()
    };
    let mut bandwidth = measure_all(progress, "first pass");
    let mut cases = Vec::new();
    for &structure in &cfg.structures {
        for &n in &cfg.sizes {
            progress(&format!("generating {} {n}³", structure.name()));
            let mask = pools[pools.len() - 1].install(|| structure.generate(n, cfg.seed))?;
            for pool in &pools {
                progress(&format!(
                    "kernel on {} {n}³, {} thread(s)",
                    structure.name(),
                    pool.current_num_threads()
                ));
                cases.push(time_kernel(
                    structure,
                    &mask,
                    pool,
                    cfg.reps,
                    cfg.min_seconds,
                    cfg.max_bytes,
                    cfg.isa,
                )?);
            }
        }
    }
    let second = measure_all(progress, "second pass");
    for (b, s) in bandwidth.iter_mut().zip(&second) {
        b.copy_gb_s = b.copy_gb_s.max(s.copy_gb_s);
        b.triad_gb_s = b.triad_gb_s.max(s.triad_gb_s);
        b.update_gb_s = b.update_gb_s.max(s.update_gb_s);
    }
    for c in &mut cases {
        c.set_roofline(bandwidth[c.threads - 1].copy_gb_s);
    }
    Ok(BenchReport {
        config: cfg.clone(),
        bandwidth,
        cases,
    })
}
