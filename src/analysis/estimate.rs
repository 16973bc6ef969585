//! The main job as a library call: from a pore mask to permeability along one or more axes
//! (and the tensor), with the connectivity filter and boundary mode applied.

use super::flow::{AxisFlow, analyse};
use super::tensor::{TensorAnalysis, analyse_tensor};
use super::units::{lattice_to_m2, m2_to_md};
use crate::geometry::connectivity::{Links, face_connected_pore_voxels, percolating_by};
use crate::geometry::{Axis, PoreMask};
use crate::lbm::solver::CheckPoint;
use crate::lbm::warm::{solve_coarse, solve_stage_bytes};
use crate::lbm::{
    BoundaryMode, Domain, Ends, FlowField, Progress, Sides, Silent, SolverSettings, WarmStart,
    solve_from,
};
use crate::{Error, Result};

/// What to compute and how.
#[derive(Debug, Clone)]
pub struct EstimateConfig {
    /// Flow axes to solve; three axes also give the tensor.
    pub axes: Vec<Axis>,
    pub mode: BoundaryMode,
    pub solver: SolverSettings,
    /// Memory cap for one solve, bytes.
    pub max_memory_bytes: u64,
    /// Voxel edge in metres, if known.
    pub voxel_size_m: Option<f64>,
}

/// The answer along one flow axis.
#[derive(Debug, Clone, serde::Serialize)]
pub struct AxisEstimate {
    pub axis: Axis,
    /// Whether a pore cluster connects the two faces normal to this axis.
    pub percolates: bool,
    /// Pore voxels of percolating clusters per sample voxel.
    pub connected_porosity: f64,
    /// The same with voxels joined through faces only, not edges
    /// ([`face_connected_pore_voxels`]); 0 while `connected_porosity` is not means that every
    /// path the solver finds crosses a gap between solid voxels that meet along an edge.
    pub face_connected_porosity: f64,
    /// k along the axis in voxel² (0 when nothing percolates).
    pub permeability_lattice: f64,
    pub permeability_m2: Option<f64>,
    #[serde(rename = "permeability_mD")]
    pub permeability_md: Option<f64>,
    /// The Darcy quantities of the solve; absent when nothing percolates.
    pub flow: Option<AxisFlow>,
    pub steps: usize,
    pub converged: bool,
    pub residual: f64,
    pub wall_seconds: f64,
    pub mlups: f64,
    /// τ⁺ the solve ran with (differs from the settings' τ with automatic τ).
    pub tau: f64,
    /// Body-force magnitude, lattice units.
    pub body_force: f64,
    pub fluid_nodes: usize,
    pub grid_shape: [usize; 3],
    /// Convergence record: one entry per check window.
    pub history: Vec<CheckPoint>,
    /// The coarse solve this axis started from (`--warm-start`), if one ran.
    pub warm_start: Option<WarmStart>,
    /// Anything the user should know about this axis.
    pub note: Option<String>,
}

/// The answers along all requested axes.
#[derive(Debug, Clone, serde::Serialize)]
pub struct Estimate {
    pub porosity: f64,
    pub axes: Vec<AxisEstimate>,
    /// Present when all three axes were solved; lattice units (voxel²).
    pub tensor: Option<TensorAnalysis>,
}

impl Estimate {
    /// Total steps over all solves.
    pub fn steps(&self) -> usize {
        self.axes.iter().map(|a| a.steps).sum()
    }
    /// True when every solve that ran converged.
    pub fn converged(&self) -> bool {
        self.axes.iter().all(|a| a.converged)
    }
    /// Overall update rate: all node updates over all solve time.
    pub fn mlups(&self) -> f64 {
        let updates: f64 = self
            .axes
            .iter()
            .map(|a| a.fluid_nodes as f64 * a.steps as f64)
            .sum();
        let secs: f64 = self.axes.iter().map(|a| a.wall_seconds).sum();
        if secs > 0.0 {
            updates / secs / 1e6
        } else {
            0.0
        }
    }
}

/// A steady flow kept for output (VTK): the domain it lives on and the field.
pub struct KeptField {
    pub domain: Domain,
    pub field: FlowField,
}

/// Solves along one axis. With `keep_field` the domain and flow field are returned too.
pub fn estimate_axis(
    mask: &PoreMask,
    axis: Axis,
    cfg: &EstimateConfig,
    progress: &mut dyn Progress,
    keep_field: bool,
) -> Result<(AxisEstimate, Option<KeptField>)> {
    let sides_periodic = cfg.mode.sides == Sides::Periodic;
    let ends_periodic = cfg.mode.ends == Ends::Periodic;
    // With edge gaps sealed the solver's links join what face links join (Domain::seal_edge_gaps).
    let links = if cfg.solver.seal_edge_gaps {
        Links::Faces
    } else {
        Links::Lattice
    };
    let perc = percolating_by(mask, axis, sides_periodic, ends_periodic, links)?;
    let connected_porosity = perc.connected_pore_voxels as f64 / mask.len().max(1) as f64;
    if !perc.percolates {
        return Err(Error::NoPercolatingPath {
            axis: axis.letter(),
            periodic_ends: ends_periodic,
        });
    }
    // The whole solve stage against the limit, before anything is allocated: the same figure
    // `describe` prints and the result records (the domain build checks its own part again).
    let grid = Domain::grid_shape(mask.shape(), axis, cfg.mode);
    let fluid = Domain::grid_fluid_nodes(
        perc.connected_pore_voxels as u64,
        mask.shape(),
        axis,
        cfg.mode,
    );
    let need = solve_stage_bytes(mask.shape(), grid, fluid, &cfg.solver);
    if need > cfg.max_memory_bytes {
        return Err(Error::TooLarge {
            what: format!(
                "the flow solve along {axis} on a {}x{}x{} grid with {fluid} fluid nodes",
                grid[0], grid[1], grid[2]
            ),
            needed_bytes: need,
            limit_bytes: cfg.max_memory_bytes,
        });
    }
    // A face-connected path lies inside the connected clusters, so their mask suffices.
    let face_connected_porosity = if cfg.solver.seal_edge_gaps {
        connected_porosity
    } else {
        face_connected_pore_voxels(&perc.mask, axis, sides_periodic, ends_periodic)? as f64
            / mask.len().max(1) as f64
    };
    // The coarse flow is solved before the fine grid exists, so the two never hold
    // populations at the same time.
    let mut note = None;
    let coarse = if cfg.solver.warm_start {
        solve_coarse(
            &perc.mask,
            axis,
            cfg.mode,
            &cfg.solver,
            cfg.max_memory_bytes,
            &mut Silent,
        )
        .unwrap_or_else(|why| {
            note = Some(format!("started from rest: {why}"));
            None
        })
    } else {
        None
    };
    let mut domain = Domain::build(&perc.mask, axis, cfg.mode, cfg.max_memory_bytes)?;
    if cfg.solver.seal_edge_gaps {
        domain.seal_edge_gaps();
    }
    drop(perc);
    // A start the fine grid cannot hold (the coarsened image far more open than the fine
    // one, so the rescaled flow is too fast) diverges within the first checks: start again
    // from rest, which is what the answer must not depend on anyway.
    let warm = coarse.is_some();
    let field = match solve_from(&domain, axis, &cfg.solver, progress, coarse) {
        Err(Error::Diverged { step, reason }) if warm => {
            note = Some(format!(
                "started from rest: the warm start diverged at step {step} ({})",
                reason.split(';').next().unwrap_or_default()
            ));
            solve_from(&domain, axis, &cfg.solver, progress, None)?
        }
        other => other?,
    };
    let flow = analyse(&domain, &field, axis);
    let k = flow.permeability;
    let k_m2 = cfg.voxel_size_m.map(|dx| lattice_to_m2(k, dx));
    if !field.converged {
        note = Some(if field.residual.is_finite() {
            format!(
                "not converged: residual {:.2e} after {} steps (tolerance {:.1e}); raise --max-steps",
                field.residual, field.steps, cfg.solver.tolerance
            )
        } else {
            format!(
                "not converged: stopped after {} steps, before the first convergence check (every {} steps); raise --max-steps",
                field.steps, cfg.solver.check_every
            )
        });
    }
    let est = AxisEstimate {
        axis,
        percolates: true,
        connected_porosity,
        face_connected_porosity,
        permeability_lattice: k,
        permeability_m2: k_m2,
        permeability_md: k_m2.map(m2_to_md),
        steps: field.steps,
        converged: field.converged,
        residual: field.residual,
        wall_seconds: field.wall_seconds,
        mlups: field.mlups,
        tau: field.tau,
        body_force: field.force[axis.index()],
        fluid_nodes: domain.fluid_nodes(),
        grid_shape: domain.shape,
        history: field.history.clone(),
        warm_start: field.warm_start,
        note,
        flow: Some(flow),
    };
    let kept = keep_field.then_some(KeptField { domain, field });
    Ok((est, kept))
}

/// Solves along every requested axis. With one axis, no percolating path is an error; with
/// several, such an axis reports k = 0 and a note, and only a sample with no path at all fails.
/// The field of the first solved axis is kept when `keep_field` is set.
pub fn estimate(
    mask: &PoreMask,
    cfg: &EstimateConfig,
    progress: &mut dyn Progress,
    keep_field: bool,
) -> Result<(Estimate, Option<KeptField>)> {
    if cfg.axes.is_empty() {
        return Err(Error::Usage("no flow axis requested".into()));
    }
    let porosity = mask.porosity();
    if mask.pore_count() == 0 {
        return Err(Error::BadVolume(
            "the volume has no pore voxels (all solid)".into(),
        ));
    }
    let mut axes = Vec::new();
    let mut kept: Option<KeptField> = None;
    for &axis in &cfg.axes {
        match estimate_axis(mask, axis, cfg, progress, keep_field && kept.is_none()) {
            Ok((est, field)) => {
                if kept.is_none() {
                    kept = field;
                }
                axes.push(est);
            }
            Err(Error::NoPercolatingPath { .. }) if cfg.axes.len() > 1 => {
                axes.push(no_path(axis, cfg));
            }
            Err(e) => return Err(e),
        }
    }
    if axes.iter().all(|a| !a.percolates) {
        return Err(Error::NoPercolatingPath {
            axis: cfg.axes[0].letter(),
            periodic_ends: cfg.mode.ends == Ends::Periodic,
        });
    }
    let tensor =
        (cfg.axes.len() == 3 && Axis::ALL.iter().all(|a| cfg.axes.contains(a))).then(|| {
            let mut k = [[0.0; 3]; 3];
            for est in &axes {
                let j = est.axis.index();
                let col = est
                    .flow
                    .as_ref()
                    .map(|f| f.permeability_column)
                    .unwrap_or([0.0; 3]);
                for i in 0..3 {
                    k[i][j] = col[i];
                }
            }
            analyse_tensor(k)
        });
    Ok((
        Estimate {
            porosity,
            axes,
            tensor,
        },
        kept,
    ))
}

fn no_path(axis: Axis, cfg: &EstimateConfig) -> AxisEstimate {
    AxisEstimate {
        axis,
        percolates: false,
        connected_porosity: 0.0,
        face_connected_porosity: 0.0,
        permeability_lattice: 0.0,
        permeability_m2: cfg.voxel_size_m.map(|_| 0.0),
        permeability_md: cfg.voxel_size_m.map(|_| 0.0),
        flow: None,
        steps: 0,
        converged: true,
        residual: 0.0,
        wall_seconds: 0.0,
        mlups: 0.0,
        tau: cfg.solver.tau,
        body_force: 0.0,
        fluid_nodes: 0,
        grid_shape: [0; 3],
        history: Vec::new(),
        warm_start: None,
        note: Some(format!(
            "no percolating pore path along {axis}: k = 0 (no solve was run)"
        )),
    }
}
