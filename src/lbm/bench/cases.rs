//! Kernel throughput on generated structures: a dense random sphere pack and an open-cell
//! foam, timed step by step (even and odd steps of the AA pattern separately), best of several
//! repetitions, on a rayon pool of a given size.

use super::super::domain::Domain;
use super::super::kernel::{Isa, KernelParams, Lattice};
use super::super::solver::{SolverSettings, auto_force};
use super::traffic::{Traffic, attainable_mlups, traffic};
use crate::geometry::synth::{FoamMethod, FoamParams, PackMethod, PackParams, RadiusDist};
use crate::geometry::synth::{foam, sphere_pack};
use crate::geometry::{Axis, PoreMask};
use crate::lbm::BoundaryMode;
use crate::{Error, Result};
use rayon::ThreadPool;
use std::time::Instant;

/// The structures the benchmark runs on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum BenchStructure {
    /// Random pack of equal hard spheres, radius n/16, at porosity [`PACK_POROSITY`].
    SpherePack,
    /// Voronoi open-cell foam, cell size n/4, at porosity [`FOAM_POROSITY`].
    Foam,
}

/// Porosity of the sphere pack: the densest the pack generator offers (solid fraction 0.60).
pub const PACK_POROSITY: f64 = 0.40;
/// Porosity of the foam.
pub const FOAM_POROSITY: f64 = 0.80;

impl BenchStructure {
    pub const ALL: [BenchStructure; 2] = [BenchStructure::SpherePack, BenchStructure::Foam];

    pub fn name(self) -> &'static str {
        match self {
            BenchStructure::SpherePack => "sphere_pack",
            BenchStructure::Foam => "foam",
        }
    }

    /// The mask on an n³ periodic box (fixed seed: one size always gives one structure).
    pub fn generate(self, n: usize, seed: u64) -> Result<PoreMask> {
        let shape = [n; 3];
        let s = match self {
            BenchStructure::SpherePack => sphere_pack(
                &PackParams {
                    shape,
                    porosity: PACK_POROSITY,
                    radius: RadiusDist::Mono {
                        radius: (n as f64 / 16.0).max(3.0),
                    },
                    method: PackMethod::Relaxation,
                },
                seed,
            )?,
            BenchStructure::Foam => foam(
                &FoamParams {
                    shape,
                    porosity: FOAM_POROSITY,
                    cell_size: (n as f64 / 4.0).max(8.0),
                    method: FoamMethod::Voronoi,
                },
                seed,
            )?,
        };
        Ok(s.mask)
    }
}

/// Throughput of the kernel on one structure at one thread count.
#[derive(Debug, Clone, serde::Serialize)]
pub struct KernelCase {
    pub structure: BenchStructure,
    /// Edge of the cubic box, voxels.
    pub size: usize,
    /// Fluid fraction of the grid.
    pub porosity: f64,
    pub fluid_nodes: u64,
    pub threads: usize,
    /// Steps timed per repetition (even and odd alike).
    pub steps: usize,
    /// Million fluid-node updates per second over step pairs, best repetition.
    pub mlups: f64,
    /// Rate of the even (local) steps alone.
    pub even_mlups: f64,
    /// Rate of the odd (neighbour) steps alone.
    pub odd_mlups: f64,
    /// Bytes per update by the traffic model.
    pub traffic: Traffic,
    /// mlups × traffic.total, GB/s.
    pub achieved_gb_s: f64,
    /// Copy bandwidth measured at this thread count, GB/s.
    pub copy_gb_s: f64,
    /// copy_gb_s / traffic.total, MLUPS.
    pub attainable_mlups: f64,
    /// mlups / attainable_mlups.
    pub roofline_fraction: f64,
}

impl KernelCase {
    /// Fills the roofline figures from the copy bandwidth at this case's thread count.
    pub fn set_roofline(&mut self, copy_gb_s: f64) {
        self.copy_gb_s = copy_gb_s;
        self.attainable_mlups = attainable_mlups(copy_gb_s, self.traffic.total);
        self.roofline_fraction = if self.attainable_mlups > 0.0 {
            self.mlups / self.attainable_mlups
        } else {
            0.0
        };
    }
}

/// Times the kernel on `mask` (periodic, flow along x) on `pool`: `reps` repetitions of at least
/// `min_seconds` each, after two warm-up step pairs. The roofline figures are left at zero for
/// [`KernelCase::set_roofline`].
#[allow(clippy::too_many_arguments)]
pub fn time_kernel(
    structure: BenchStructure,
    mask: &PoreMask,
    pool: &ThreadPool,
    reps: usize,
    min_seconds: f64,
    max_bytes: u64,
    isa: Option<Isa>,
) -> Result<KernelCase> {
    let domain = Domain::build(mask, Axis::X, BoundaryMode::PERIODIC, max_bytes)?;
    let n = domain.fluid_nodes();
    if n == 0 {
        return Err(Error::BadVolume("benchmark structure has no fluid".into()));
    }
    let s = SolverSettings::default();
    let nu = s.viscosity();
    let params = KernelParams {
        omega_plus: 1.0 / s.tau,
        omega_minus: 1.0 / s.tau_minus(),
        force: [auto_force(&domain, nu, s.target_speed), 0.0, 0.0],
    };
    let (pairs, even_s, odd_s) = pool.install(|| {
        let mut lattice = Lattice::at_rest(&domain);
        if let Some(isa) = isa {
            lattice.set_isa(isa, &domain);
        }
        let pair = |lattice: &mut Lattice| {
            let t = Instant::now();
            lattice.advance(&domain, &params);
            let even = t.elapsed().as_secs_f64();
            let t = Instant::now();
            lattice.advance(&domain, &params);
            (even, t.elapsed().as_secs_f64())
        };
        let mut one = f64::INFINITY;
        for _ in 0..2 {
            let (e, o) = pair(&mut lattice);
            one = one.min(e + o);
        }
        let pairs = ((min_seconds / one.max(1e-9)).ceil() as usize).clamp(1, 10_000);
        let (mut best_even, mut best_odd) = (f64::INFINITY, f64::INFINITY);
        for _ in 0..reps.max(1) {
            let (mut e_sum, mut o_sum) = (0.0, 0.0);
            for _ in 0..pairs {
                let (e, o) = pair(&mut lattice);
                e_sum += e;
                o_sum += o;
            }
            if e_sum + o_sum < best_even + best_odd {
                best_even = e_sum;
                best_odd = o_sum;
            }
        }
        (pairs, best_even, best_odd)
    });
    let updates = (n * pairs) as f64;
    let mlups = 2.0 * updates / (even_s + odd_s) / 1e6;
    let t = traffic(n as u64, domain.voxels() as u64);
    Ok(KernelCase {
        structure,
        size: mask.shape()[0],
        porosity: n as f64 / domain.voxels() as f64,
        fluid_nodes: n as u64,
        threads: pool.current_num_threads(),
        steps: 2 * pairs,
        mlups,
        even_mlups: updates / even_s / 1e6,
        odd_mlups: updates / odd_s / 1e6,
        traffic: t,
        achieved_gb_s: mlups * 1e6 * t.total / 1e9,
        copy_gb_s: 0.0,
        attainable_mlups: 0.0,
        roofline_fraction: 0.0,
    })
}
