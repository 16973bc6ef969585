//! Results must not depend on the number of worker threads: reductions are summed over fixed node
//! chunks in a fixed order, and every node's update is independent of scheduling.
mod common;
use common::*;
use voxperm::geometry::Axis;
use voxperm::lbm::{BoundaryMode, Domain, Silent, SolverSettings, solve};

#[test]
fn bit_identical_for_any_thread_count() {
    // Large enough for several reduction chunks (4096 nodes each).
    let mask = sphere_cell(28, 10.0);
    let domain = Domain::build(&mask, Axis::Y, BoundaryMode::PERIODIC, u64::MAX).unwrap();
    assert!(domain.fluid_nodes() > 3 * voxperm::lbm::kernel::CHUNK);
    let settings = SolverSettings {
        max_steps: 300,
        tolerance: 1e-30,
        ..SolverSettings::default()
    };
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| solve(&domain, Axis::Y, &settings, &mut Silent).unwrap())
    };
    let one = run(1);
    for threads in [2, 3, 5] {
        let other = run(threads);
        assert_eq!(one.steps, other.steps);
        assert_eq!(
            one.velocity, other.velocity,
            "velocity differs with {threads} threads"
        );
        assert_eq!(one.density, other.density);
        let h1: Vec<[f64; 3]> = one.history.iter().map(|c| c.mean_velocity).collect();
        let h2: Vec<[f64; 3]> = other.history.iter().map(|c| c.mean_velocity).collect();
        assert_eq!(
            h1, h2,
            "mean-velocity history differs with {threads} threads"
        );
    }
}
