//! `voxperm describe`: geometry only — porosity, connectivity per axis, specific surface,
//! Kozeny–Carman estimate and the memory a solve will need. No flow is solved.

use super::args::{BoundaryArgs, InputArgs, check_json_output};
use clap::Args;
use serde_json::json;
use std::fmt::Write as _;
use std::path::PathBuf;
use voxperm::analysis::units::{lattice_to_m2, m2_to_md};
use voxperm::geometry::describe::summarize;
use voxperm::lbm::SolverSettings;
use voxperm::lbm::memory::{bytes_per_sample, load_peak_bytes};
use voxperm::lbm::warm::solve_stage_bytes;
use voxperm::lbm::{BoundaryMode, Domain, Ends, Sides};
use voxperm::volume::sample::{SampleSpec, load_sample};
use voxperm::volume::{ReadLimits, write_atomically};
use voxperm::{Error, Result};

/// Options of `voxperm describe`.
#[derive(Args, Debug)]
pub struct DescribeArgs {
    /// Segmented image: multi-page TIFF, a folder of TIFF slices, or a raw file (with --raw-shape).
    pub sample: PathBuf,
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub boundary: BoundaryArgs,
    /// Also write the figures to this JSON file (- for standard output).
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Give the solve memory of `estimate --cold-start` (no coarse flow kept while the full
    /// grid starts).
    #[arg(long)]
    pub cold_start: bool,
    /// Print nothing but errors and warnings (with --json, for scripts).
    #[arg(long, short)]
    pub quiet: bool,
}

fn gib(b: u64) -> f64 {
    b as f64 / (1024.0 * 1024.0 * 1024.0)
}

/// Runs the command.
pub fn run(a: DescribeArgs) -> Result<i32> {
    let plan = a.input.plan()?;
    let mode = a.boundary.mode(BoundaryMode::SCAN)?;
    if let Some(p) = &a.json {
        check_json_output(p, "--json")?;
        super::args::check_json_name(p)?;
        super::args::check_not_input(p, &a.sample, "--json")?;
    }
    let spec = SampleSpec {
        path: a.sample.clone(),
        raw: plan.raw,
        segmentation: plan.segmentation.clone(),
        crop: plan.crop.clone(),
        voxel_size_m: plan.voxel_size_m,
        default_segmentation: plan.default_segmentation,
    };
    let sample = load_sample(&spec, &ReadLimits::new(plan.max_memory))?;
    let mask = &sample.mask;
    if mask.is_empty() {
        return Err(Error::bad_input(&a.sample, "the volume has no voxels"));
    }
    let sides_periodic = mode.sides == Sides::Periodic;
    let ends_periodic = mode.ends == Ends::Periodic;
    let g = summarize(mask, sides_periodic, ends_periodic)?;
    let dx = sample.voxel_size.as_ref().map(|v| v.metres);
    let voxels = mask.len() as u64;
    let bytes_per_sample = bytes_per_sample(&sample.sample_type);

    let mut warnings = voxperm::analysis::run::sample_warnings(&sample, &a.sample);
    // What estimate would refuse, said where -q and --json - still show it.
    if g.pore_voxels as u64 == voxels {
        warnings.push("every voxel is pore: estimate refuses it (no solid phase, most likely a segmentation slip); check --pore-label or --threshold".into());
    } else if g.pore_voxels == 0 {
        warnings.push("no voxel is pore: estimate refuses it (all solid); check --pore-label, --threshold and --pore".into());
    }
    for ap in g.axes.iter().filter(|ap| ap.percolates) {
        warnings.extend(voxperm::analysis::run::edge_gap_warning(
            ap.axis,
            ap.connected_porosity,
            g.face_connected_porosity[ap.axis.index()],
        ));
    }
    warnings.iter().for_each(super::args::warn);
    let mut out = String::new();
    let [nx, ny, nz] = g.shape;
    let _ = writeln!(
        out,
        "sample      {}  ({nx}x{ny}x{nz} {}, {})",
        a.sample.display(),
        sample.sample_type,
        spec.segmentation
    );
    match &sample.voxel_size {
        Some(v) => {
            let _ = writeln!(out, "voxel size  {}", v.describe());
        }
        None => {
            let _ = writeln!(
                out,
                "voxel size  unknown (give --voxel-size for physical units)"
            );
        }
    }
    let _ = writeln!(out, "boundary    sides {}, ends {}", mode.sides, mode.ends);
    let _ = writeln!(
        out,
        "porosity    {:.4} total ({} pore voxels)",
        g.total_porosity, g.pore_voxels
    );
    let mut axes_json = Vec::new();
    for ap in &g.axes {
        let axis = ap.axis;
        let grid = Domain::grid_shape(g.shape, axis, mode);
        let fluid = Domain::grid_fluid_nodes(ap.connected_pore_voxels as u64, g.shape, axis, mode);
        // With the default settings, so the warm start's coarse flow counts where it will run
        // (unless --cold-start says it will not).
        let settings = SolverSettings {
            warm_start: !a.cold_start,
            ..SolverSettings::default()
        };
        let need = solve_stage_bytes(g.shape, grid, fluid, &settings)
            .max(load_peak_bytes(voxels, bytes_per_sample));
        let face = g.face_connected_porosity[axis.index()];
        let _ = writeln!(
            out,
            "axis {axis}      {}  connected porosity {:.4}  solve memory {:.3} GiB ({} fluid nodes on {}x{}x{})",
            if ap.percolates {
                "percolates        "
            } else {
                "no percolating path"
            },
            ap.connected_porosity,
            gib(need),
            fluid,
            grid[0],
            grid[1],
            grid[2],
        );
        axes_json.push(json!({
            "axis": axis,
            "percolates": ap.percolates,
            "connected_porosity": ap.connected_porosity,
            "face_connected_porosity": face,
            "solve_memory_bytes": need,
            "solve_memory_assumes_warm_start": settings.warm_start,
            "fluid_nodes": fluid,
            "grid_shape": grid,
        }));
    }
    let s = &g.surface;
    let _ = writeln!(
        out,
        "surface     {:.4e} per voxel corrected, {:.4e} raw voxel faces ({})",
        s.specific_surface, s.face_area_per_bulk, s.estimator
    );
    if let Some(dx) = dx {
        let _ = writeln!(out, "            {:.4e} per m", s.specific_surface / dx);
    }
    // Pore voxels on the box faces meet solid across the face only in a periodic cell; with
    // closed sides or mirrored ends those faces are not counted (as in `estimate`).
    let _ = writeln!(
        out,
        "            faces across the box boundary {}",
        if sides_periodic && ends_periodic {
            "counted (periodic cell)"
        } else {
            "not counted (boundary mode is not fully periodic)"
        }
    );
    match g.kc_estimate_voxel2 {
        Some(kc) => {
            let phys = dx.map_or(String::new(), |dx| {
                let m2 = lattice_to_m2(kc, dx);
                format!(" = {m2:.4e} m² = {:.4e} mD", m2_to_md(m2))
            });
            let _ = writeln!(
                out,
                "Kozeny–Carman k = φ³/(c_K S²), c_K = {}: {kc:.4e} voxel²{phys}",
                g.kozeny_constant
            );
        }
        None => {
            let _ = writeln!(out, "Kozeny–Carman: no pore–solid surface, no estimate");
        }
    }
    if let Some(p) = &a.json {
        let doc = json!({
            "version": voxperm::VERSION,
            "input": a.sample.display().to_string(),
            "voxel_size_m": dx,
            "boundary": mode,
            "geometry": g,
            "axes": axes_json,
            "warnings": warnings,
            "kozeny_carman_m2": g.kc_estimate_voxel2.zip(dx).map(|(k, dx)| lattice_to_m2(k, dx)),
        });
        write_atomically(p, |w| {
            use std::io::Write;
            let text =
                serde_json::to_string_pretty(&doc).map_err(|e| Error::Internal(e.to_string()))?;
            w.write_all(text.as_bytes())
                .map_err(|e| voxperm::volume::output_error(p, e))
        })?;
    }
    // JSON on standard output: the text would corrupt it.
    if !a.quiet
        && !a
            .json
            .as_deref()
            .is_some_and(voxperm::volume::is_standard_output)
    {
        super::args::print_out(&out)?;
    }
    Ok(voxperm::error::exit::OK)
}
