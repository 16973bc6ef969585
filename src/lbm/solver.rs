//! The time loop: relaxation settings, body-force choice, convergence to steady state and the
//! stopping rules (NaN, Mach number, step cap).

use super::d3q19::CS2;
use super::domain::Domain;
use super::kernel::{KernelParams, Lattice};
use super::warm::{CoarseFlow, initial_lattice};
use crate::geometry::Axis;
use crate::{Error, Result};
use rayon::prelude::*;
use std::time::Instant;

/// Collision operator.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Collision {
    /// Two relaxation times with a fixed magic parameter Λ: permeability independent of τ.
    Trt,
    /// Single relaxation time (Bhatnagar, Gross & Krook 1954): the wall position, hence k,
    /// drifts with τ. Kept for comparison.
    Bgk,
}

impl std::fmt::Display for Collision {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Collision::Trt => "TRT",
            Collision::Bgk => "BGK",
        })
    }
}

impl std::str::FromStr for Collision {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s.to_ascii_lowercase().as_str() {
            "trt" => Ok(Collision::Trt),
            "bgk" => Ok(Collision::Bgk),
            _ => Err(format!("unknown collision '{s}' (expected trt or bgk)")),
        }
    }
}

/// Λ = 3/16 places half-way bounce-back walls exactly midway between nodes for Poiseuille flow
/// (Ginzburg, Verhaeghe & d'Humières 2008, Commun. Comput. Phys. 3, 427 — from memory).
pub const MAGIC_3_16: f64 = 3.0 / 16.0;

/// Everything that controls one solve.
#[derive(Debug, Clone, serde::Serialize)]
pub struct SolverSettings {
    pub collision: Collision,
    /// τ⁺ (TRT) or τ (BGK); sets ν = c_s²(τ − ½).
    pub tau: f64,
    /// TRT magic parameter Λ = (τ⁺ − ½)(τ⁻ − ½).
    pub magic: f64,
    /// Converged when the relative change of the mean velocity per step, measured over a window
    /// of `check_every` steps, stays below this for two windows in a row.
    pub tolerance: f64,
    /// Step cap; reaching it returns an unconverged result (flagged), not an error.
    pub max_steps: usize,
    /// Window length in steps (rounded up to even: the AA pattern works in step pairs).
    pub check_every: usize,
    /// Body-force magnitude in lattice units; `None` chooses it from the pore size (see
    /// [`auto_force`]).
    pub force: Option<f64>,
    /// Target peak speed used by the automatic force choice, lattice units.
    pub target_speed: f64,
    /// Stop with an error when the peak Mach number |u|/c_s exceeds this.
    pub max_mach: f64,
    /// Choose τ per solve from the geometry for the fewest steps ([`auto_tau`]); `tau` is then
    /// not used. TRT only (BGK's k depends on τ).
    pub auto_tau: bool,
    /// Start each solve from the flow on the 2× coarsened mask instead of rest (see
    /// `lbm::warm`); the convergence criterion is unchanged.
    pub warm_start: bool,
    /// Treat a D3Q19 edge link between two pore voxels whose two shared face neighbours are
    /// both solid (an "edge gap": the voxels touch only along an edge) as a wall, and label the
    /// pore space along face links only (`Domain::seal_edge_gaps`). Off: such links pass flow.
    pub seal_edge_gaps: bool,
}

impl Default for SolverSettings {
    fn default() -> Self {
        SolverSettings {
            collision: Collision::Trt,
            tau: 1.0,
            magic: MAGIC_3_16,
            tolerance: 1e-6,
            max_steps: 200_000,
            check_every: 100,
            force: None,
            target_speed: 2e-3,
            max_mach: 0.1,
            auto_tau: false,
            warm_start: true,
            seal_edge_gaps: false,
        }
    }
}

impl SolverSettings {
    /// Kinematic viscosity ν = c_s² (τ − ½), lattice units.
    pub fn viscosity(&self) -> f64 {
        CS2 * (self.tau - 0.5)
    }

    /// τ⁻ from Λ (TRT) or τ (BGK).
    pub fn tau_minus(&self) -> f64 {
        match self.collision {
            Collision::Trt => 0.5 + self.magic / (self.tau - 0.5),
            Collision::Bgk => self.tau,
        }
    }

    /// Checks the settings; τ ≤ ½ is refused (negative viscosity). Returns warnings for values
    /// that are allowed but unwise.
    pub fn validate(&self) -> Result<Vec<String>> {
        let mut warnings = Vec::new();
        if !(self.tau.is_finite() && self.tau > 0.5) {
            return Err(Error::Usage(format!(
                "--tau {} is not above 0.5: the viscosity c_s²(τ − ½) would not be positive",
                self.tau
            )));
        }
        if self.tau > 2.0 || self.tau < 0.51 {
            // Common practice: 0.5 < τ ≲ 2 for stability and accuracy.
            warnings.push(format!(
                "tau {} is outside 0.51–2.0 where the lattice-Boltzmann method is usually stable and accurate",
                self.tau
            ));
        }
        if !(self.magic.is_finite() && self.magic > 0.0) {
            return Err(Error::Usage(format!(
                "magic parameter {} must be positive",
                self.magic
            )));
        }
        if !(self.tolerance.is_finite() && self.tolerance > 0.0) {
            return Err(Error::Usage(format!(
                "--tolerance {} must be a positive number",
                self.tolerance
            )));
        }
        if self.auto_tau && self.collision == Collision::Bgk {
            return Err(Error::Usage(
                "automatic τ needs TRT: with BGK the permeability depends on τ".into(),
            ));
        }
        if self.check_every == 0 {
            return Err(Error::Usage("--check-every must be at least 1".into()));
        }
        if self.max_steps < 2 {
            return Err(Error::Usage("--max-steps must be at least 2".into()));
        }
        if let Some(f) = self.force.filter(|f| !(f.is_finite() && *f > 0.0)) {
            return Err(Error::Usage(format!(
                "body force {f} must be a positive number"
            )));
        }
        Ok(warnings)
    }
}

/// Chooses a body force that keeps the flow slow (Stokes regime, low Mach number):
/// g = 16 ν u* / d_h², the force that drives a peak speed u* in a tube of diameter d_h
/// (Hagen–Poiseuille, u_max = g d²/(16ν)), with d_h = 4φ/S the hydraulic diameter from the
/// porosity and the voxel-face surface per volume (common practice).
///
/// The force is lowered further if the same tube model predicts a Reynolds number
/// Re = u_mean d_h / ν = g d_h³ / (32 ν²) above [`TARGET_REYNOLDS`], so large pores stay in
/// creeping flow too.
pub fn auto_force(domain: &Domain, nu: f64, target_speed: f64) -> f64 {
    force_for_diameter(hydraulic_diameter(domain), nu, target_speed)
}

/// [`auto_force`] for a known hydraulic diameter `dh` (voxels).
fn force_for_diameter(dh: f64, nu: f64, target_speed: f64) -> f64 {
    let by_speed = 16.0 * nu * target_speed / (dh * dh);
    let by_reynolds = 32.0 * nu * nu * TARGET_REYNOLDS / (dh * dh * dh);
    by_speed.min(by_reynolds)
}

/// Lower and upper bounds of the automatic τ.
pub const AUTO_TAU_RANGE: (f64, f64) = (0.55, 1.0);

/// Constant of the automatic viscosity ν = C d_h² / L, fitted to step counts measured on
/// random sphere packs (README, Performance).
pub const AUTO_TAU_CONSTANT: f64 = 1.0 / 3.0;

/// The τ that reaches steady state in the fewest steps, from the geometry.
///
/// Two slow processes set the step count, and they move in opposite directions with ν:
/// momentum diffusing across a pore of hydraulic diameter d_h takes ~d_h²/ν steps, while the
/// density (pressure) field settles by Darcy diffusion, φ ∂ρ/∂t = (k c_s²/ν) ∇²ρ (Darcy's law
/// in the continuity equation), which over the grid length L takes ~L² φ ν/(k c_s²) steps.
/// With k ~ φ d_h²/32 (tube model) the two balance at ν ∝ d_h²/L; the constant
/// [`AUTO_TAU_CONSTANT`] is fitted to measured step counts (derivation and measurements in
/// README.md, Performance). The TRT steady state does not depend on ν at fixed Λ (Ginzburg,
/// Verhaeghe & d'Humières 2008, Commun. Comput. Phys. 3, 427), so this changes the step count,
/// not k (measured drift 0.06 % between τ = 0.6 and τ = 1 on a 128³ pack). Clamped to
/// [`AUTO_TAU_RANGE`].
pub fn auto_tau(domain: &Domain) -> f64 {
    tau_for_diameter(domain, hydraulic_diameter(domain))
}

/// [`auto_tau`] for a known hydraulic diameter `dh` (voxels).
fn tau_for_diameter(domain: &Domain, dh: f64) -> f64 {
    let l = *domain.shape.iter().max().unwrap_or(&1) as f64;
    let nu = AUTO_TAU_CONSTANT * dh * dh / l;
    (0.5 + nu / CS2).clamp(AUTO_TAU_RANGE.0, AUTO_TAU_RANGE.1)
}

/// Reynolds number the automatic force aims below (creeping flow: Re ≪ 1, common practice).
pub const TARGET_REYNOLDS: f64 = 0.01;

/// Hydraulic diameter d_h = 4 V_pore / A_wall in voxels, from voxel faces (common practice); the
/// smallest grid extent when there are no walls at all.
pub fn hydraulic_diameter(domain: &Domain) -> f64 {
    let faces = wall_faces(domain) as f64;
    if faces > 0.0 {
        4.0 * domain.fluid_nodes() as f64 / faces
    } else {
        *domain.shape.iter().min().unwrap_or(&1) as f64
    }
}

/// Number of fluid-node faces touching solid or a non-periodic boundary.
pub fn wall_faces(domain: &Domain) -> usize {
    const FACES: [[i32; 3]; 6] = [
        [1, 0, 0],
        [-1, 0, 0],
        [0, 1, 0],
        [0, -1, 0],
        [0, 0, 1],
        [0, 0, -1],
    ];
    domain
        .coords
        .iter()
        .map(|&c| {
            FACES
                .iter()
                .filter(|&&dc| domain.neighbour(c, dc).is_none())
                .count()
        })
        .sum()
}

/// What the solver reports while it runs.
pub trait Progress {
    /// Called when a solve starts (`label` names it, e.g. the flow axis).
    fn on_start(&mut self, _label: &str, _fluid_nodes: usize) {}
    /// Called after each convergence check.
    fn on_check(&mut self, _step: usize, _max_steps: usize, _residual: f64, _tolerance: f64) {}
    /// Called when a solve ends, converged or not.
    fn on_finish(&mut self) {}
}

/// A progress sink that ignores everything.
pub struct Silent;
impl Progress for Silent {}

/// One convergence check.
#[derive(Debug, Clone, Copy, serde::Serialize)]
pub struct CheckPoint {
    pub step: usize,
    /// Mean velocity over the solver grid (solid counted as zero), lattice units.
    pub mean_velocity: [f64; 3],
    /// Relative change of the mean velocity per step over the last window.
    pub residual: f64,
}

/// The steady flow and how it was reached.
#[derive(Debug, Clone)]
pub struct FlowField {
    /// Density of every fluid node (domain order).
    pub density: Vec<f32>,
    /// Velocity of every fluid node (domain order), lattice units.
    pub velocity: Vec<[f32; 3]>,
    /// Body force used (lattice units, vector).
    pub force: [f64; 3],
    /// τ⁺ the solve ran with (chosen by [`auto_tau`] when asked for).
    pub tau: f64,
    pub viscosity: f64,
    pub tau_minus: f64,
    /// Hydraulic diameter 4 V_pore / A_wall of the solver grid, voxels (see
    /// [`hydraulic_diameter`]).
    pub hydraulic_diameter: f64,
    pub steps: usize,
    pub converged: bool,
    pub residual: f64,
    pub history: Vec<CheckPoint>,
    /// Peak speed seen at the last check, lattice units.
    pub max_speed: f64,
    pub wall_seconds: f64,
    /// Million fluid-node updates per second.
    pub mlups: f64,
    /// The coarse solve this one started from, if any.
    pub warm_start: Option<WarmStart>,
}

/// What the coarse solve of a warm start cost (its time is included in the fine field's
/// `wall_seconds`).
#[derive(Debug, Clone, Copy, serde::Serialize)]
pub struct WarmStart {
    pub coarse_nodes: usize,
    pub coarse_steps: usize,
    pub coarse_seconds: f64,
}

/// Runs the solver to steady state with the force along `direction`, from rest.
pub fn solve(
    domain: &Domain,
    direction: Axis,
    settings: &SolverSettings,
    progress: &mut dyn Progress,
) -> Result<FlowField> {
    solve_from(domain, direction, settings, progress, None)
}

/// [`solve`] from the flow of a coarse grid (`lbm::warm`) when one is given; it is dropped
/// as soon as the fine lattice holds its state.
pub fn solve_from(
    domain: &Domain,
    direction: Axis,
    settings: &SolverSettings,
    progress: &mut dyn Progress,
    start: Option<CoarseFlow>,
) -> Result<FlowField> {
    settings.validate()?;
    if domain.fluid_nodes() == 0 {
        return Err(Error::BadVolume(
            "the solver grid has no fluid nodes".into(),
        ));
    }
    // One pass over the walls serves the automatic τ, the automatic force and the Reynolds
    // number reported afterwards.
    let dh = hydraulic_diameter(domain);
    let automatic_tau = settings.auto_tau;
    let resolved;
    let settings = if settings.auto_tau {
        resolved = SolverSettings {
            tau: tau_for_diameter(domain, dh),
            auto_tau: false,
            ..settings.clone()
        };
        &resolved
    } else {
        settings
    };
    let nu = settings.viscosity();
    let tau_m = settings.tau_minus();
    let g = settings
        .force
        .unwrap_or_else(|| force_for_diameter(dh, nu, settings.target_speed));
    let mut force = [0.0; 3];
    force[direction.index()] = g;
    let params = KernelParams {
        omega_plus: 1.0 / settings.tau,
        omega_minus: 1.0 / tau_m,
        force,
    };
    let window = settings.check_every.max(2).div_ceil(2) * 2;
    let max_steps = settings.max_steps.div_ceil(2) * 2;
    let voxels = domain.voxels() as f64;
    let cs = CS2.sqrt();

    progress.on_start(&direction.to_string(), domain.fluid_nodes());
    let started = Instant::now();
    let warm = start.as_ref().map(|c| WarmStart {
        coarse_nodes: c.domain.fluid_nodes(),
        coarse_steps: c.field.steps,
        coarse_seconds: c.field.wall_seconds,
    });
    let mut lattice = match start {
        Some(c) => initial_lattice(domain, &c, force, nu),
        None => Lattice::at_rest(domain),
    };
    let mut history: Vec<CheckPoint> = Vec::new();
    let mut prev: Option<[f64; 3]> = None;
    let mut below = 0;
    let mut converged = false;
    let mut residual = f64::INFINITY;
    let mut max_speed = 0.0;
    while lattice.steps < max_steps {
        if !(lattice.steps + 1).is_multiple_of(window) {
            lattice.advance(domain, &params);
            continue;
        }
        let sums = lattice.step(domain, &params);
        let step = lattice.steps;
        max_speed = sums.u2_max.sqrt();
        if !sums.u2_max.is_finite() || sums.u.iter().any(|v| !v.is_finite()) {
            return Err(Error::Diverged {
                step,
                reason: if settings.force.is_some() {
                    "the velocity became NaN or infinite; lower --force or leave it out (automatic)"
                        .into()
                } else {
                    "the velocity became NaN or infinite; try a larger --tau".into()
                },
            });
        }
        if max_speed / cs > settings.max_mach {
            return Err(Error::Diverged {
                step,
                reason: if settings.force.is_some() {
                    format!(
                        "peak Mach number {:.3} exceeds {}; the body force is too strong for this geometry (lower --force or leave it out)",
                        max_speed / cs,
                        settings.max_mach
                    )
                } else {
                    format!(
                        "peak Mach number {:.3} exceeds {} with the automatic force at τ = {}{}",
                        max_speed / cs,
                        settings.max_mach,
                        settings.tau,
                        if automatic_tau {
                            " (chosen by --auto-tau); try a fixed --tau of 1"
                        } else {
                            "; keep --tau between about 0.55 and 2"
                        }
                    )
                },
            });
        }
        let mean = sums.u.map(|v| v / voxels);
        if let Some(p) = prev {
            let change = norm([mean[0] - p[0], mean[1] - p[1], mean[2] - p[2]]);
            let size = norm(mean);
            residual = if size > 0.0 {
                change / (size * window as f64)
            } else {
                f64::INFINITY
            };
        }
        prev = Some(mean);
        history.push(CheckPoint {
            step,
            mean_velocity: mean,
            residual,
        });
        progress.on_check(step, max_steps, residual, settings.tolerance);
        if residual < settings.tolerance {
            below += 1;
            if below >= 2 {
                converged = true;
                break;
            }
        } else {
            below = 0;
        }
    }
    let fine_seconds = started.elapsed().as_secs_f64();
    let coarse_updates = warm.map_or(0.0, |w| (w.coarse_nodes * w.coarse_steps) as f64);
    let wall = fine_seconds + warm.map_or(0.0, |w| w.coarse_seconds);
    progress.on_finish();
    // The loop always stops after a completed step pair (window and cap are even).
    let steps = lattice.steps;
    let (density, mut velocity) = lattice.into_macroscopic(&params);
    // A node walled in across an axis oscillates along it with period two steps, and the
    // field above is one phase of that (Domain::sealed_along): its mean there is zero.
    // Before this a three-layer dead-end crack off an 8 × 8 duct raised k by 0.11 %
    // (tests/validation_channels.rs).
    velocity.par_iter_mut().enumerate().for_each(|(k, u)| {
        for (a, ua) in u.iter_mut().enumerate() {
            if domain.sealed_along(k, a) {
                *ua = 0.0;
            }
        }
    });
    if history.is_empty() {
        // Stopped before the first check (a step cap below the window): take the peak speed
        // from the final field so the Mach number is still reported.
        max_speed = velocity
            .iter()
            .map(|u| ((u[0] * u[0] + u[1] * u[1] + u[2] * u[2]) as f64).sqrt())
            .fold(0.0, f64::max);
    }
    Ok(FlowField {
        density,
        velocity,
        force,
        tau: settings.tau,
        viscosity: nu,
        tau_minus: tau_m,
        hydraulic_diameter: dh,
        steps,
        converged,
        residual,
        history,
        max_speed,
        wall_seconds: wall,
        mlups: if wall > 0.0 {
            (domain.fluid_nodes() as f64 * steps as f64 + coarse_updates) / wall / 1e6
        } else {
            0.0
        },
        warm_start: warm,
    })
}

fn norm(v: [f64; 3]) -> f64 {
    (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt()
}
