//! `voxperm estimate`: the main job — flow through one sample, permeability and friends.

use super::args::{
    BoundaryArgs, InputArgs, SolverArgs, check_distinct_outputs, check_json_output,
    check_not_input, check_output_path, parse_axes,
};
use super::progress::Bar;
use clap::Args;
use std::path::PathBuf;
use voxperm::analysis::{RunConfig, VtkRequest, run_sample};
use voxperm::lbm::BoundaryMode;
use voxperm::report::summary;
use voxperm::volume::sample::SampleSpec;
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
    /// Write every figure, its unit and every setting to this JSON file (- for standard output).
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Write the steady flow of the first axis as VTK image data (.vti): velocity, speed,
    /// pressure (both scaled by the Darcy velocity) and the pore mask.
    #[arg(long, value_name = "FILE.vti")]
    pub vtk: Option<PathBuf>,
    /// Keep every N-th voxel along each axis in the VTK file (for large volumes).
    #[arg(long, default_value_t = 1, value_name = "N")]
    pub vtk_stride: usize,
    /// Print nothing but errors and warnings (no summary, no progress), as describe -q.
    #[arg(long, short)]
    pub quiet: bool,
}

/// Runs the command; returns the exit code on success.
pub fn run(a: EstimateArgs) -> Result<i32> {
    // Stage two of argument handling: everything is checked before the sample is read.
    let plan = a.input.plan()?;
    // The run repeats the solver check and records its warnings in the report.
    let (solver, _) = a.solver.settings()?;
    let mode = a.boundary.mode(BoundaryMode::SCAN)?;
    let cfg = RunConfig {
        axes: parse_axes(&a.axis)?,
        mode,
        solver,
        max_memory_bytes: plan.max_memory,
        threads: a.solver.thread_count(),
        flow_snapshot: true,
        vtk: vtk_request(&a)?,
    };
    if let Some(p) = &a.json {
        check_json_output(p, "--json")?;
        super::args::check_json_name(p)?;
        check_not_input(p, &a.sample, "--json")?;
    }
    if let (Some(j), Some(v)) = (&a.json, &a.vtk) {
        check_distinct_outputs(&[(j, "--json"), (v, "--vtk")])?;
    }
    // JSON on standard output: the summary would corrupt it, so it is not printed; its
    // warnings go to standard error instead.
    let json_on_stdout = a
        .json
        .as_deref()
        .is_some_and(voxperm::volume::is_standard_output);
    let spec = SampleSpec {
        path: a.sample.clone(),
        raw: plan.raw,
        segmentation: plan.segmentation,
        crop: plan.crop,
        voxel_size_m: plan.voxel_size_m,
        default_segmentation: plan.default_segmentation,
    };
    let mut bar = Bar::new(a.quiet);
    let result = run_sample(&spec, &cfg, &mut bar)?;
    drop(bar);
    if let Some(p) = &a.json {
        result.write(p)?;
    }
    // Without the summary (quiet, or the JSON on standard output) its warnings still reach
    // the user, on standard error: a script must not miss an unconverged solve.
    if a.quiet || json_on_stdout {
        result.report.warnings.iter().for_each(super::args::warn);
    } else {
        super::args::print_out(&summary::render(&result.report))?;
    }
    Ok(voxperm::error::exit::OK)
}

/// Checks the VTK options before anything is read: a .vti name in an existing folder, stride ≥ 1.
fn vtk_request(a: &EstimateArgs) -> Result<Option<VtkRequest>> {
    if a.vtk_stride == 0 {
        return Err(Error::Usage("--vtk-stride must be at least 1".into()));
    }
    let Some(p) = &a.vtk else { return Ok(None) };
    check_output_path(p, "--vtk")?;
    check_not_input(p, &a.sample, "--vtk")?;
    // The name rule is for files a viewer opens later; a pipe or device (/dev/null) has none.
    let vti = p
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("vti"));
    if !vti && !voxperm::volume::is_pipe_or_device(p) {
        return Err(Error::Usage(format!(
            "--vtk {}: the file name must end in .vti (VTK XML image data)",
            p.display()
        )));
    }
    Ok(Some(VtkRequest {
        path: p.clone(),
        stride: a.vtk_stride,
    }))
}
