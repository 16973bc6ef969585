//! Memory bandwidth measured the STREAM way (McCalpin 1995, "Memory bandwidth and machine
//! balance in current high performance computers", IEEE TCCA Newsletter): copy, triad and an
//! in-place update over f64 arrays far larger than the caches, best of several repetitions.
//!
//! Bytes are counted as the kernels name them (copy 16 B, triad 24 B, update 16 B per element),
//! without the write-allocate read a cached store may add; the lattice kernel's traffic model
//! counts the same way (its stores go to lines it has just read, so it has no write-allocate).

use super::super::pages;
use rayon::ThreadPool;
use rayon::prelude::*;
use std::hint::black_box;
use std::time::Instant;

/// Bandwidth figures at one thread count, GB/s (10⁹ bytes per second).
#[derive(Debug, Clone, Copy, serde::Serialize)]
pub struct Bandwidth {
    pub threads: usize,
    /// b = a: 8 B read + 8 B written per element.
    pub copy_gb_s: f64,
    /// a = b + s·c: 16 B read + 8 B written per element.
    pub triad_gb_s: f64,
    /// a = s·a in place: 8 B read + 8 B written to the same line (the AA kernel's access kind).
    pub update_gb_s: f64,
    /// Bytes of each of the three arrays.
    pub array_bytes: u64,
}

/// Measures copy, triad and update bandwidth on `pool` with three arrays of `array_bytes` each,
/// best of `reps` passes. Each thread works on one contiguous block and first touches it itself.
pub fn measure(pool: &ThreadPool, array_bytes: usize, reps: usize) -> Bandwidth {
    let threads = pool.current_num_threads();
    let n = (array_bytes / 8).max(threads * 8);
    let block = n.div_ceil(threads);
    pool.install(|| {
        // The solver's page policy, so the roofline compares like with like.
        let mut a: Vec<f64> = pages::zeros(n);
        let mut b: Vec<f64> = pages::zeros(n);
        let mut c: Vec<f64> = pages::zeros(n);
        // First touch by the thread that will use each block.
        a.par_chunks_mut(block)
            .zip(b.par_chunks_mut(block))
            .zip(c.par_chunks_mut(block))
            .for_each(|((a, b), c)| {
                a.fill(1.0);
                b.fill(2.0);
                c.fill(0.5);
            });
        let bytes = (n * 8) as f64;
        let mut copy = 0.0f64;
        let mut triad = 0.0f64;
        let mut update = 0.0f64;
        for rep in 0..reps.max(1) {
            let t = Instant::now();
            b.par_chunks_mut(block)
                .zip(a.par_chunks(block))
                .for_each(|(dst, src)| dst.copy_from_slice(src));
            copy = copy.max(2.0 * bytes / t.elapsed().as_secs_f64());

            let s = 3.0;
            let t = Instant::now();
            a.par_chunks_mut(block)
                .zip(b.par_chunks(block))
                .zip(c.par_chunks(block))
                .for_each(|((a, b), c)| {
                    for ((x, &y), &z) in a.iter_mut().zip(b).zip(c) {
                        *x = y + s * z;
                    }
                });
            triad = triad.max(3.0 * bytes / t.elapsed().as_secs_f64());

            // Alternate the factor so the values stay bounded over the repetitions.
            let s = if rep % 2 == 0 { 2.0 } else { 0.5 };
            let t = Instant::now();
            c.par_chunks_mut(block).for_each(|c| {
                for x in c.iter_mut() {
                    *x *= s;
                }
            });
            update = update.max(2.0 * bytes / t.elapsed().as_secs_f64());
        }
        black_box((a[n / 2], b[n / 3], c[n - 1]));
        Bandwidth {
            threads,
            copy_gb_s: copy / 1e9,
            triad_gb_s: triad / 1e9,
            update_gb_s: update / 1e9,
            array_bytes: (n * 8) as u64,
        }
    })
}
