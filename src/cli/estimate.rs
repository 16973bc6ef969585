//! `voxperm estimate`: the main job — flow through one sample, permeability and friends.

use super::args::{BoundaryArgs, InputArgs, SolverArgs, check_output_path, parse_axes};
use super::progress::Bar;
use clap::Args;
use std::path::PathBuf;
use voxperm::analysis::kozeny::{KOZENY_CONSTANT, kozeny_carman_from_surface};
use voxperm::analysis::units::{lattice_to_m2, m2_to_md};
use voxperm::analysis::{EstimateConfig, estimate};
use voxperm::geometry::PoreMask;
use voxperm::geometry::surface::measure_surface;
use voxperm::lbm::BoundaryMode;
use voxperm::report::json::GeometryRecord;
use voxperm::report::vtk::write_vti_with_limit;
use voxperm::report::{EstimateReport, InputRecord, Settings, summary};
use voxperm::volume::sample::{Sample, SampleSpec, input_sha256, load_sample};
use voxperm::volume::{ReadLimits, write_atomically};
use voxperm::{Error, Result};

/// Options of `voxperm estimate`.
#[derive(Args, Debug)]
pub struct EstimateArgs {
    /// Segmented image: multi-page TIFF, a folder of TIFF slices, or a raw file (with --raw-shape).
    pub sample: PathBuf,
    /// Flow axis: x, y, z, or all (three solves and the permeability tensor).
    #[arg(long, default_value = "x")]
    pub axis: String,
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub solver: SolverArgs,
    #[command(flatten)]
    pub boundary: BoundaryArgs,
    /// Write every figure, its unit and every setting to this JSON file.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Write the steady flow of the first axis as VTK image data (.vti): velocity, speed,
    /// pressure (both scaled by the Darcy velocity) and the pore mask.
    #[arg(long, value_name = "FILE.vti")]
    pub vtk: Option<PathBuf>,
    /// Keep every N-th voxel along each axis in the VTK file (for large volumes).
    #[arg(long, default_value_t = 1, value_name = "N")]
    pub vtk_stride: usize,
    /// Print nothing but errors (no summary, no progress).
    #[arg(long, short)]
    pub quiet: bool,
}

/// Runs the command; returns the exit code on success.
pub fn run(a: EstimateArgs) -> Result<i32> {
    // Stage two of argument handling: everything is checked before the sample is read.
    let plan = a.input.plan()?;
    let (solver, mut warnings) = a.solver.settings()?;
    let mode = a.boundary.mode(BoundaryMode::SCAN)?;
    let axes = parse_axes(&a.axis)?;
    if let Some(p) = &a.json {
        check_output_path(p, "--json")?;
    }
    if let Some(p) = &a.vtk {
        check_output_path(p, "--vtk")?;
        if p.extension().and_then(|e| e.to_str()) != Some("vti") {
            return Err(Error::Usage(format!(
                "--vtk {}: the file name must end in .vti (VTK XML image data)",
                p.display()
            )));
        }
    }
    if a.vtk_stride == 0 {
        return Err(Error::Usage("--vtk-stride must be at least 1".into()));
    }
    let threads = a.solver.thread_count();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .map_err(|e| Error::Internal(format!("cannot start {threads} worker threads: {e}")))?;

    let spec = SampleSpec {
        path: a.sample.clone(),
        raw: plan.raw,
        segmentation: plan.segmentation.clone(),
        crop: plan.crop.clone(),
        voxel_size_m: plan.voxel_size_m,
    };
    let sample = pool.install(|| load_sample(&spec, &ReadLimits::new(plan.max_memory)))?;
    check_mask(&sample.mask, &spec)?;
    let voxel_m = sample.voxel_size.as_ref().map(|v| v.metres);
    if voxel_m.is_none() {
        warnings.push("no voxel size given or found in the file: permeability in voxel² only (use --voxel-size)".into());
    }

    // Faces across the grid boundary count only for a fully periodic cell (as in `describe`).
    let wrap = mode == BoundaryMode::PERIODIC;
    let surface = measure_surface(&sample.mask, [wrap; 3]);
    let porosity = sample.mask.porosity();
    let kc = kozeny_carman_from_surface(porosity, surface.specific_surface, KOZENY_CONSTANT);
    let geometry = GeometryRecord {
        specific_surface_per_voxel: surface.specific_surface,
        specific_surface_per_m: voxel_m.map(|dx| surface.specific_surface / dx),
        surface_estimator: surface.estimator.to_string(),
        kozeny_carman_lattice: kc,
        kozeny_carman_m2: kc.zip(voxel_m).map(|(k, dx)| lattice_to_m2(k, dx)),
        kozeny_carman_md: kc
            .zip(voxel_m)
            .map(|(k, dx)| m2_to_md(lattice_to_m2(k, dx))),
        kozeny_constant_assumed: KOZENY_CONSTANT,
    };

    let cfg = EstimateConfig {
        axes,
        mode,
        solver: solver.clone(),
        max_memory_bytes: plan.max_memory,
        voxel_size_m: voxel_m,
    };
    let mut bar = Bar::new(a.quiet);
    let (est, kept) = pool.install(|| estimate(&sample.mask, &cfg, &mut bar, a.vtk.is_some()))?;
    drop(bar);

    for ax in &est.axes {
        if let Some(f) = ax.flow.as_ref().filter(|f| f.reynolds > 0.1) {
            warnings.push(format!(
                "axis {}: Reynolds number {:.2} is not small; Darcy's law assumes creeping flow (lower --force)",
                ax.axis, f.reynolds
            ));
        }
        if !ax.converged {
            warnings.push(format!(
                "axis {}: did not converge; the value is not final",
                ax.axis
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
    let dh = 4.0 * porosity / (surface.face_area_per_bulk.max(f64::MIN_POSITIVE));
    if dh < 6.0 {
        // Common practice: about ten voxels across a pore for a few-% permeability error.
        warnings.push(format!(
            "pores are resolved by only about {dh:.1} voxels (hydraulic diameter); expect a resolution error of several % or more"
        ));
    }

    let input = input_record(&a, &spec, &sample)?;
    let settings = Settings {
        lattice: "D3Q19",
        tau_minus: solver.tau_minus(),
        viscosity_lattice: solver.viscosity(),
        solver,
        boundary: mode,
        sides: mode.sides.to_string(),
        ends: mode.ends.to_string(),
        threads,
        max_memory_bytes: plan.max_memory,
        connectivity: "pore clusters along D3Q19 links; only clusters spanning inlet to outlet are solved",
    };
    let report = EstimateReport::new(&est, input, settings, Some(geometry), voxel_m, warnings);
    if let (Some(p), Some(kept)) = (&a.vtk, &kept) {
        write_vti_with_limit(p, kept, voxel_m, a.vtk_stride, plan.max_memory)?;
    }
    drop(kept);
    if let Some(p) = &a.json {
        write_atomically(p, |w| {
            use std::io::Write;
            w.write_all(report.to_json().as_bytes())
                .map_err(|e| voxperm::volume::output_error(p, e))
        })?;
    }
    if !a.quiet {
        print!("{}", summary::render(&report));
    }
    Ok(voxperm::error::exit::OK)
}

/// Refuses masks no flow solve can use, naming the file and the segmentation rule.
fn check_mask(mask: &PoreMask, spec: &SampleSpec) -> Result<()> {
    let pores = mask.pore_count();
    if pores == 0 {
        return Err(Error::bad_input(
            &spec.path,
            format!(
                "no pore voxels ({}); check --pore-label or --threshold",
                spec.segmentation
            ),
        ));
    }
    if pores == mask.len() {
        return Err(Error::bad_input(
            &spec.path,
            format!(
                "every voxel is pore ({}), nothing to resist the flow; check --pore-label or --threshold",
                spec.segmentation
            ),
        ));
    }
    Ok(())
}

fn input_record(a: &EstimateArgs, spec: &SampleSpec, s: &Sample) -> Result<InputRecord> {
    Ok(InputRecord {
        path: a.sample.display().to_string(),
        sha256: input_sha256(&a.sample)?,
        file_shape: s.file_shape,
        shape: s.mask.shape(),
        sample_type: s.sample_type.clone(),
        segmentation: spec.segmentation.to_string(),
        crop: a.input.crop.clone(),
        voxel_size_source: s
            .voxel_size
            .as_ref()
            .map_or("none: give --voxel-size for physical units".into(), |v| {
                v.describe()
            }),
    })
}
