//! One sample from file to result: load and segment, refuse unusable masks, measure the geometry,
//! solve, collect the warnings a user should read, and assemble the result record.
//!
//! `voxperm estimate` and every sample of `voxperm batch` go through [`run_sample`], so a single
//! run and a batch entry with the same settings give the same result file.

use super::kozeny::{KOZENY_CONSTANT, kozeny_carman_from_surface};
use super::units::{lattice_to_m2, m2_to_md};
use super::{Estimate, EstimateConfig, estimate};
use crate::geometry::surface::{Surface, measure_surface};
use crate::geometry::{Axis, PoreMask};
use crate::lbm::{BoundaryMode, Progress, SolverSettings};
use crate::report::json::{GeometryRecord, MemoryRecord};
use crate::report::result::SampleResult;
use crate::report::snapshot::FlowSnapshot;
use crate::report::vtk::write_vti_with_limit;
use crate::report::{EstimateReport, InputRecord, Settings};
use crate::volume::sample::{Sample, SampleSpec, input_sha256, load_sample};
use crate::volume::{CropSpec, ReadLimits};
use crate::{Error, Result};

/// Pore (hydraulic) diameter 4φ/S, in voxels, below which results carry a resolution warning:
/// about ten voxels across a pore for a few-% permeability error (common practice). Read with
/// the raw face count as S ([`under_resolved`]).
pub const MIN_PORE_DIAMETER_VOXELS: f64 = 10.0;

/// Whether a sample whose 4φ/S with the corrected surface is `dh` voxels gets the resolution
/// warning (and the report's caution): the raw face count, exact for flat walls along the
/// grid, reads the diameter 2/3 as large (geometry/surface.rs), and that reading must reach
/// [`MIN_PORE_DIAMETER_VOXELS`].
pub fn under_resolved(dh: f64) -> bool {
    dh * crate::geometry::surface::ISOTROPIC_FACE_FACTOR < MIN_PORE_DIAMETER_VOXELS
}

/// Voxel edges outside this range (metres) are unusual for 3D imaging of porous media, from
/// nano-CT to medical CT of large cores, and more likely a unit slip: they carry a warning
/// (common practice).
pub const USUAL_VOXEL_SIZE_M: (f64, f64) = (1e-9, 1e-2);

/// A sample shorter than this many pore diameters (4φ/S) along the flow, with ends that are
/// not periodic, carries a warning that it says little about the material: a representative
/// volume spans several pores (common practice). One, not several, because 4φ/S overstates the
/// pore size of very open media (the shipped foam's, cells of 26 voxels, is 42 voxels), and a
/// warning on every small foam would teach users to ignore it.
pub const MIN_LENGTH_PORE_DIAMETERS: f64 = 1.0;

/// Everything about a run that is not the sample itself.
#[derive(Debug, Clone)]
pub struct RunConfig {
    /// Flow axes; all three also give the tensor.
    pub axes: Vec<Axis>,
    pub mode: BoundaryMode,
    pub solver: SolverSettings,
    /// Memory the run may use (reading and solving), bytes.
    pub max_memory_bytes: u64,
    /// Worker threads of the pool the run builds for itself.
    pub threads: usize,
    /// Keep the first axis's flow field long enough to record a [`FlowSnapshot`].
    pub flow_snapshot: bool,
    /// Write the first axis's flow field as VTK image data.
    pub vtk: Option<VtkRequest>,
}

/// Where and how to write the flow field for a viewer.
#[derive(Debug, Clone)]
pub struct VtkRequest {
    pub path: std::path::PathBuf,
    /// Keep every `stride`-th voxel along each axis.
    pub stride: usize,
}

/// Pore space a solve cannot use is refused before solving, naming the file and the rule.
fn check_mask(mask: &PoreMask, spec: &SampleSpec) -> Result<()> {
    let seg = &spec.segmentation;
    let msg = match mask.pore_count() {
        0 => format!("no pore voxels ({seg}); check --pore-label or --threshold"),
        n if n == mask.len() => format!(
            "every voxel is pore ({seg}): no solid phase, most likely a segmentation slip; check --pore-label or --threshold, or --crop"
        ),
        _ => return Ok(()),
    };
    Err(Error::bad_input(&spec.path, msg))
}

/// Loads, checks, solves and reports one sample. Builds a pool of `cfg.threads` workers for
/// the whole run. Never prints: progress goes to `progress`, advice into the report's warnings.
pub fn run_sample(
    spec: &SampleSpec,
    cfg: &RunConfig,
    progress: &mut (dyn Progress + Send),
) -> Result<SampleResult> {
    let mut warnings = cfg.solver.validate()?;
    let threads = cfg.threads.max(1);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .map_err(|e| Error::Internal(format!("cannot start {threads} worker threads: {e}")))?;
    pool.install(|| {
        let per_sample = crate::lbm::memory::reset_peak_rss();
        let sample = load_sample(spec, &ReadLimits::new(cfg.max_memory_bytes))?;
        check_mask(&sample.mask, spec)?;
        let voxel_m = sample.voxel_size.as_ref().map(|v| v.metres);
        if voxel_m.is_none() {
            warnings.push("no voxel size given or found in the file: permeability in voxel² only (use --voxel-size)".into());
        }
        warnings.extend(sample_warnings(&sample, &spec.path));
        // Faces across the grid boundary count only for a fully periodic cell (as in `describe`).
        let surface = measure_surface(&sample.mask, [cfg.mode == BoundaryMode::PERIODIC; 3]);
        let porosity = sample.mask.porosity();
        let geometry = geometry_record(porosity, &surface, voxel_m);

        let est_cfg = EstimateConfig {
            axes: cfg.axes.clone(),
            mode: cfg.mode,
            solver: cfg.solver.clone(),
            max_memory_bytes: cfg.max_memory_bytes,
            voxel_size_m: voxel_m,
        };
        let fits = snapshot_fits(&sample.mask, cfg);
        if cfg.vtk.is_some() && !fits {
            return Err(Error::Usage("--vtk with several axes would keep the first flow field while the others solve, beyond --max-memory; solve one axis or raise --max-memory".into()));
        }
        let keep = (cfg.flow_snapshot || cfg.vtk.is_some()) && fits;
        if cfg.flow_snapshot && !keep {
            warnings.push("no flow snapshot: keeping the first flow field while the other axes solve would exceed --max-memory".into());
        }
        let (est, kept) =
            estimate(&sample.mask, &est_cfg, progress, keep).map_err(|e| e.in_sample(&spec.path))?;
        if let (Some(v), Some(k)) = (&cfg.vtk, &kept) {
            write_vti_with_limit(
                &v.path,
                k,
                voxel_m,
                v.stride,
                sample.crop_origin,
                cfg.max_memory_bytes,
            )?;
        }
        let flow_snapshot = kept
            .as_ref()
            .filter(|_| cfg.flow_snapshot)
            .map(FlowSnapshot::from_field);
        drop(kept);

        warnings.extend(solve_warnings(
            &est,
            porosity,
            &surface,
            sample.mask.shape(),
            cfg.mode,
        ));
        if cfg.solver.collision == crate::lbm::Collision::Bgk {
            // Measured in the README's τ table: BGK's k on a sphere array spans 21 % over
            // τ = 0.6–1.5, TRT's 1.4e-5.
            warnings.push(
                "BGK collision: its permeability depends on τ (the apparent wall position moves with the viscosity; 21 % over τ 0.6–1.5 on a sphere array, README); use the default TRT for results".into(),
            );
        }
        let mut report = EstimateReport::new(
            &est,
            input_record(spec, &sample)?,
            settings(cfg, threads),
            Some(geometry),
            voxel_m,
            warnings,
        );
        report.memory = Some(memory_record(&sample, &est, per_sample, cfg, keep));
        Ok(SampleResult {
            name: None,
            batch_key: None,
            report,
            flow_snapshot,
        })
    })
}

/// The memory model's peak for this sample (as `describe` prints it for one solve) beside the
/// measured one. Stages: reading the file; each solve (plus the coarse flow of a warm start, and
/// the first axis's field when it is kept through the later solves); writing the VTK file
/// beside the kept field.
fn memory_record(
    sample: &Sample,
    est: &Estimate,
    per_sample: bool,
    cfg: &RunConfig,
    kept_first: bool,
) -> MemoryRecord {
    use crate::lbm::memory::{BASE_BYTES, MASK, bytes_per_sample, load_peak_bytes, peak_rss_bytes};
    use crate::lbm::warm::solve_stage_bytes;
    let file_voxels = sample.file_shape.iter().map(|&n| n as u64).product::<u64>();
    let load = load_peak_bytes(file_voxels, bytes_per_sample(&sample.sample_type));
    let grid = |a: &super::AxisEstimate| a.grid_shape.iter().map(|&n| n as u64).product::<u64>();
    // The field kept is that of the first axis solved (an axis with no path has none).
    let kept_at = est.axes.iter().position(|a| a.percolates);
    let kept = kept_at.filter(|_| kept_first).map_or(0, |j| {
        let a = &est.axes[j];
        kept_field_bytes(grid(a), a.fluid_nodes as u64)
    });
    let solve = est
        .axes
        .iter()
        .enumerate()
        .map(|(i, a)| {
            // Includes the coarse flow of a warm start, alive until the fine lattice starts.
            let stage = solve_stage_bytes(
                sample.mask.shape(),
                a.grid_shape,
                a.fluid_nodes as u64,
                &cfg.solver,
            );
            let earlier = if kept_at.is_some_and(|j| i > j) {
                kept
            } else {
                0
            };
            stage + earlier
        })
        .max()
        .unwrap_or(0);
    let vtk = cfg.vtk.as_ref().map_or(0, |v| {
        let writer = crate::report::vtk::memory_estimate(sample.mask.shape(), v.stride);
        BASE_BYTES + MASK * sample.mask.len() as u64 + kept + writer.unwrap_or(0)
    });
    MemoryRecord {
        predicted_peak_bytes: load.max(solve).max(vtk),
        measured_peak_bytes: peak_rss_bytes(),
        measured_over: if per_sample { "sample" } else { "process" },
    }
}

/// Keeping the first field costs its node map, coordinates, velocity and density (4 B per grid
/// voxel, 22 B per fluid node) during the later solves; with one axis nothing is kept longer
/// than the solve itself. Bounds from the mask, before any domain exists.
fn snapshot_fits(mask: &PoreMask, cfg: &RunConfig) -> bool {
    if cfg.axes.len() <= 1 {
        return true;
    }
    let grid = crate::lbm::Domain::grid_shape(mask.shape(), cfg.axes[0], cfg.mode);
    let grid_voxels = grid.iter().map(|&n| n as u64).product::<u64>();
    // Bounds: every grid voxel a fluid node.
    let kept = kept_field_bytes(grid_voxels, grid_voxels);
    let solve = crate::lbm::warm::solve_stage_bytes(mask.shape(), grid, grid_voxels, &cfg.solver);
    kept.saturating_add(solve) <= cfg.max_memory_bytes
}

/// A kept flow field: its node map (4 B per grid voxel) and per node coordinates, density and
/// velocity (6 + 4 + 12 B).
fn kept_field_bytes(grid_voxels: u64, fluid_nodes: u64) -> u64 {
    grid_voxels
        .saturating_mul(4)
        .saturating_add(fluid_nodes.saturating_mul(22))
}

fn geometry_record(porosity: f64, s: &Surface, voxel_m: Option<f64>) -> GeometryRecord {
    let kc = kozeny_carman_from_surface(porosity, s.specific_surface, KOZENY_CONSTANT);
    let kc_m2 = kc.zip(voxel_m).map(|(k, dx)| lattice_to_m2(k, dx));
    GeometryRecord {
        specific_surface_per_voxel: s.specific_surface,
        specific_surface_per_m: voxel_m.map(|dx| s.specific_surface / dx),
        surface_estimator: s.estimator.to_string(),
        kozeny_carman_lattice: kc,
        kozeny_carman_m2: kc_m2,
        kozeny_carman_md: kc_m2.map(m2_to_md),
        kozeny_constant_assumed: KOZENY_CONSTANT,
    }
}

/// Advice about the loaded sample: a raw file whose values suggest a wrong `--raw-type`, a
/// voxel size given on the command line that replaces the file's own, voxels the file records
/// as not cubic, and a voxel size outside the usual range of 3D images. Shared by `estimate`
/// (and so `batch`) and `describe`.
pub fn sample_warnings(sample: &Sample, path: &std::path::Path) -> Vec<String> {
    let mut warnings = Vec::new();
    for doubt in &sample.doubts {
        warnings.push(format!("{}: {doubt}", path.display()));
    }
    if let (Some(file), Some(used)) = (&sample.overridden_voxel_size, &sample.voxel_size) {
        warnings.push(format!(
            "voxel size {} given by the user replaces the {} recorded in {}",
            crate::volume::format_length(used.metres),
            crate::volume::format_length(file.metres),
            path.display()
        ));
    }
    if let Some(v) = &sample.file_voxel_size
        && let Some((how, ratio)) = v.source.not_cubic(v.metres)
    {
        // One --voxel-size cannot make the image's voxels cubic, so it does not silence this.
        warnings.push(format!(
            "{} records voxels that are not cubic ({how}, ratio {ratio:.3}); the solver treats them as cubic with one edge length, so k is off by an amount that grows with that ratio: resample the image to cubic voxels (or correct the file's resolution if it is wrong)",
            path.display()
        ));
    }
    if let Some(v) = sample
        .voxel_size
        .as_ref()
        .filter(|v| !(USUAL_VOXEL_SIZE_M.0..=USUAL_VOXEL_SIZE_M.1).contains(&v.metres))
    {
        warnings.push(format!(
            "voxel size {} is outside the usual range of 3D images (1 nm to 1 cm): check --voxel-size or the file's resolution; permeability scales with its square",
            v.describe()
        ));
    }
    warnings
}

/// Share of the connected pore space reached only across voxel edges above which a warning is
/// given. Well-resolved images stay far below it (shipped samples: at most 0.2 %, a 256³ sphere
/// pack 0.06 %); a foam with one-voxel walls, 15 % of its windows open, had 13 % and k 44–115 %
/// above the same foam with its edge gaps filled (measured in a new-user trial, README).
pub const EDGE_ONLY_SHARE: f64 = 0.01;

/// Words every [`edge_gap_warning`] contains, by which the report finds them.
pub const EDGE_GAP_MARK: &str = "only across voxel edges";

/// The warning, if any, for an axis whose flow depends on voxel edges: every pore path crosses
/// a gap where two solid voxels meet along an edge (face-connected porosity 0), or more than
/// [`EDGE_ONLY_SHARE`] of the connected pore space is reached only across such gaps.
/// `estimate` and `describe` give it alike.
pub fn edge_gap_warning(axis: Axis, connected: f64, face_connected: f64) -> Option<String> {
    if connected <= 0.0 {
        None
    } else if face_connected == 0.0 {
        Some(format!(
            "axis {axis}: the pore space joins the faces only across voxel edges: every path passes a gap where two solid voxels meet along an edge, which the solver's edge links let flow through but the image does not resolve; such a wall is probably closed in the material and k may be far too high (make one-voxel walls face-connected in the segmentation, or run with --edge-gaps sealed, which treats such gaps as walls)"
        ))
    } else if face_connected < (1.0 - EDGE_ONLY_SHARE) * connected {
        Some(format!(
            "axis {axis}: {:.0}% of the connected pore space joins the flow only across voxel edges (face-connected porosity {face_connected:.4} against {connected:.4}): where that is one-voxel walls leaking through gaps at which two solid voxels meet along an edge, which the image does not resolve, k can be tens of % too high (README, Connectivity): make such walls face-connected in the segmentation, or compare with --edge-gaps sealed; where it is speckle noise or dead-end voxels hanging on by an edge, which carry little flow, k moves far less",
            100.0 * (1.0 - face_connected / connected)
        ))
    } else {
        None
    }
}

/// Advice that depends on the solve: flow regime, convergence, connectivity, resolution.
fn solve_warnings(
    est: &Estimate,
    porosity: f64,
    surface: &Surface,
    shape: [usize; 3],
    mode: BoundaryMode,
) -> Vec<String> {
    let mut warnings = Vec::new();
    let dh = 4.0 * porosity / (surface.specific_surface.max(f64::MIN_POSITIVE));
    if mode.ends != crate::lbm::Ends::Periodic {
        for ax in &est.axes {
            let length = shape[ax.axis.index()];
            let diameters = length as f64 / dh;
            if diameters < MIN_LENGTH_PORE_DIAMETERS {
                warnings.push(format!(
                    "axis {}: the sample is only {length} voxel(s) long along the flow, {diameters:.1} pore diameters (4φ/S); so short a sample says little about the material (image or crop a longer one), and its 4φ/S, from the few walls inside it, is no measure of the pore size or of the resolution",
                    ax.axis
                ));
            }
        }
    }
    for ax in &est.axes {
        if let Some(f) = ax.flow.as_ref().filter(|f| f.reynolds > 0.1) {
            warnings.push(format!(
                "axis {}: Reynolds number {:.2} is not small; Darcy's law assumes creeping flow (lower --force)",
                ax.axis, f.reynolds
            ));
        }
        if !ax.converged {
            warnings.push(format!(
                "axis {}: did not converge; the value is not final (raise --max-steps)",
                ax.axis
            ));
        }
        if ax.percolates {
            warnings.extend(edge_gap_warning(
                ax.axis,
                ax.connected_porosity,
                ax.face_connected_porosity,
            ));
        }
        if ax.percolates && ax.connected_porosity < 0.5 * porosity {
            warnings.push(format!(
                "axis {}: only {:.0}% of the pore space connects the faces; the sample may be near its percolation limit",
                ax.axis,
                100.0 * ax.connected_porosity / porosity
            ));
        }
    }
    if est.tensor.is_some() && mode.sides == crate::lbm::Sides::Sealed {
        // ∫u_j dV = ∮ x_j u·n dS for a divergence-free u: with no flow through the side walls
        // (and equal inlet and outlet faces) no net flow crosses the forced axis.
        warnings.push("the tensor's off-diagonal terms are set by the sealed sides, not by the material: walls along the flow let no net flow cross it, so they come out near zero (periodic ends) or as a boundary artefact (mirror or buffer ends), and so do the principal directions printed from them: take the grid axes as the principal directions and the diagonal as the principal values; for the full tensor use --sides periodic, on a sample many pores wide".into());
    }
    // The face count is exact for flat walls along the grid and 1.5× the area of curved ones
    // (geometry/surface.rs), so 4φ/S spans the two readings; the warning goes by the lower,
    // since a flat-walled channel of 8 voxels is as coarse as it reads (+3 % on a slit).
    let dh_flat = dh * crate::geometry::surface::ISOTROPIC_FACE_FACTOR;
    if under_resolved(dh) {
        warnings.push(format!(
            "pores are resolved by only about {dh_flat:.1} to {dh:.1} voxels (hydraulic diameter 4φ/S: the lower figure for flat walls along the grid, the higher for curved walls); expect a resolution error of several % near ten voxels and tens of % below five: image at a finer voxel size, or compare with the sample resampled coarser to see the trend"
        ));
    }
    warnings
}

fn settings(cfg: &RunConfig, threads: usize) -> Settings {
    Settings {
        lattice: "D3Q19",
        tau_minus: (!cfg.solver.auto_tau).then(|| cfg.solver.tau_minus()),
        viscosity_lattice: (!cfg.solver.auto_tau).then(|| cfg.solver.viscosity()),
        solver: cfg.solver.clone(),
        boundary: cfg.mode,
        sides: cfg.mode.sides.to_string(),
        ends: cfg.mode.ends.to_string(),
        threads,
        max_memory_bytes: cfg.max_memory_bytes,
        connectivity: if cfg.solver.seal_edge_gaps {
            "pore clusters along face links (edge gaps sealed, so these are the D3Q19 links the solver passes); only clusters that carry flow from inlet to outlet (with periodic ends: that wind round the flow axis) are solved"
        } else {
            "pore clusters along D3Q19 links (faces and edges); only clusters that carry flow from inlet to outlet (with periodic ends: that wind round the flow axis) are solved; a second labelling with face links only flags an axis whose every path crosses a voxel edge"
        },
    }
}

fn input_record(spec: &SampleSpec, s: &Sample) -> Result<InputRecord> {
    Ok(InputRecord {
        path: spec.path.display().to_string(),
        sha256: input_sha256(&spec.path)?,
        file_shape: s.file_shape,
        shape: s.mask.shape(),
        sample_type: s.sample_type.clone(),
        segmentation: spec.segmentation.to_string(),
        crop: spec.crop.as_ref().map(CropSpec::to_string),
        raw_layout: spec.raw.as_ref().map(|r| {
            let [x, y, z] = r.shape;
            format!("{x}x{y}x{z} {} {}-endian", r.kind, r.endian)
        }),
        voxel_size_source: s
            .voxel_size
            .as_ref()
            .map_or("none: give --voxel-size for physical units".into(), |v| {
                v.describe()
            }),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crop_text_round_trips() {
        for s in [":,10:50,:", "0:4,:8,3:"] {
            assert_eq!(CropSpec::parse(s).unwrap().to_string(), s);
        }
    }
}
