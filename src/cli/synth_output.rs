//! Output side of `voxperm synth`: writes the generated mask (TIFF or raw, pore = 0,
//! solid = 255), the optional JSON record, and the summary with the `estimate` command to run
//! next. Every file goes through `write_atomically`, so a failed run leaves nothing behind.

use serde_json::{Value, json};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use voxperm::geometry::Axis;
use voxperm::geometry::synth::{FoamMethod, Info, Structure, Synthetic};
use voxperm::volume::sample::input_sha256;
use voxperm::volume::{
    Endian, TiffCompression, Volume, format_length, output_error, write_atomically, write_raw,
    write_tiff_stack,
};
use voxperm::{Error, Result};

/// Grey value of pore voxels in written volumes (estimate's default `--pore-label 0`).
pub const PORE_VALUE: u8 = 0;
/// Grey value of solid voxels in written volumes.
pub const SOLID_VALUE: u8 = 255;

/// The command-line name of a structure family (the `synth` subcommand).
pub fn cli_kind(s: &Structure) -> &'static str {
    match s {
        Structure::SphereArray(_) => "sphere-array",
        Structure::CylinderArray(_) => "cylinder-array",
        Structure::SpherePack(_) => "sphere-pack",
        Structure::Boolean(_) => "overlapping-spheres",
        Structure::Fibres(_) => "fibres",
        Structure::Foam(_) => "foam",
        Structure::SlitStack(_) | Structure::Slit(_) => "slits",
        Structure::SquareDuct(_) => "duct",
        Structure::Tube(_) => "tube",
    }
}

/// Validated output options.
pub struct OutputPlan {
    pub path: PathBuf,
    pub raw: bool,
    pub voxel_size_m: Option<f64>,
    pub json: Option<PathBuf>,
    pub quiet: bool,
}

impl OutputPlan {
    /// Checks what can be checked before generating: the TIFF writer records voxel sizes from
    /// 0.1 nm to 1 m only.
    pub fn check(&self) -> Result<()> {
        if let Some(m) = self.voxel_size_m
            && !self.raw
            && !(1e-10..=1.0).contains(&m)
        {
            return Err(Error::Usage(format!(
                "--voxel-size {}: a TIFF can record 0.1 nm to 1 m",
                format_length(m)
            )));
        }
        Ok(())
    }

    fn format(&self) -> &'static str {
        if self.raw {
            "raw u8, x fastest"
        } else {
            "multi-page TIFF, Deflate"
        }
    }
}

/// Writes the volume (and JSON), then prints the summary unless quiet.
pub fn write_and_report(
    plan: &OutputPlan,
    structure: &Structure,
    seed: Option<u64>,
    built: &Synthetic,
) -> Result<()> {
    let vol = Volume::from_mask(&built.mask, PORE_VALUE, SOLID_VALUE);
    if plan.raw {
        write_raw(&plan.path, &vol, Endian::Little)?;
    } else {
        write_tiff_stack(
            &plan.path,
            &vol,
            TiffCompression::Deflate,
            plan.voxel_size_m,
        )?;
    }
    drop(vol);
    let hint = estimate_hint(plan, structure, built.mask.shape());
    if let Some(j) = &plan.json {
        let record = json_record(plan, structure, seed, built, &hint)?;
        write_atomically(j, |w| {
            use std::io::Write;
            let text = serde_json::to_string_pretty(&record)
                .map_err(|e| Error::Internal(format!("synth JSON: {e}")))?;
            w.write_all(text.as_bytes())
                .and_then(|_| w.write_all(b"\n"))
                .map_err(|e| output_error(j, e))
        })?;
    }
    if !plan.quiet {
        super::args::print_out(&summary(plan, structure, seed, built, &hint))?;
    }
    Ok(())
}

fn json_record(
    plan: &OutputPlan,
    structure: &Structure,
    seed: Option<u64>,
    built: &Synthetic,
    hint: &str,
) -> Result<Value> {
    Ok(json!({
        "version": voxperm::VERSION,
        "kind": cli_kind(structure),
        "parameters": structure,
        "seed": seed,
        "shape": built.mask.shape(),
        "porosity": built.porosity,
        "voxel_size_m": plan.voxel_size_m,
        "output": {
            "path": plan.path.display().to_string(),
            "format": plan.format(),
            "pore_value": PORE_VALUE,
            "solid_value": SOLID_VALUE,
            "sha256": input_sha256(&plan.path)?,
        },
        "info": built.info,
        "estimate_command": hint,
    }))
}

/// The `voxperm estimate` command for the written file, along an axis that carries flow.
fn estimate_hint(plan: &OutputPlan, structure: &Structure, shape: [usize; 3]) -> String {
    let axis = match structure {
        Structure::SquareDuct(p) => p.axis,
        Structure::Tube(p) => p.axis,
        // Slits block the flow along their normal; take the first axis in their plane.
        Structure::SlitStack(p) if p.normal == Axis::X => Axis::Y,
        _ => Axis::X,
    };
    let mut s = format!("voxperm estimate {}", shell_word(&plan.path));
    if plan.raw {
        let _ = write!(
            s,
            " --raw-shape {}x{}x{} --raw-type u8",
            shape[0], shape[1], shape[2]
        );
        if let Some(m) = plan.voxel_size_m {
            let _ = write!(s, " --voxel-size {}", compact_length(m));
        }
    }
    let _ = write!(s, " --axis {axis} --periodic");
    s
}

/// A length as the option syntax accepts it, e.g. "5um".
fn compact_length(m: f64) -> String {
    format_length(m).replace(' ', "").replace('µ', "u")
}

/// Quotes a path for a POSIX shell when it holds anything but plain characters.
fn shell_word(p: &Path) -> String {
    let s = p.display().to_string();
    if s.chars()
        .all(|c| c.is_ascii_alphanumeric() || "/._-+,:=@".contains(c))
    {
        s
    } else {
        format!("'{}'", s.replace('\'', r"'\''"))
    }
}

fn summary(
    plan: &OutputPlan,
    structure: &Structure,
    seed: Option<u64>,
    built: &Synthetic,
    hint: &str,
) -> String {
    let [nx, ny, nz] = built.mask.shape();
    let mut s = String::new();
    let seed_text = seed.map_or(String::new(), |v| format!(", seed {v}"));
    let _ = writeln!(
        s,
        "voxperm {} — synthetic {} {nx}x{ny}x{nz}{seed_text}",
        voxperm::VERSION,
        cli_kind(structure)
    );
    let _ = writeln!(
        s,
        "wrote       {} ({}; pore = {PORE_VALUE}, solid = {SOLID_VALUE})",
        plan.path.display(),
        plan.format()
    );
    match (plan.voxel_size_m, plan.raw) {
        (Some(m), false) => {
            let _ = writeln!(s, "voxel size  {} (recorded in the TIFF)", format_length(m));
        }
        (Some(m), true) => {
            let _ = writeln!(
                s,
                "voxel size  {} (not stored in a raw file)",
                format_length(m)
            );
        }
        (None, _) => {
            let _ = writeln!(s, "voxel size  none given: estimate reports k in voxel²");
        }
    }
    let target = match structure {
        Structure::SpherePack(p) => Some(p.porosity),
        Structure::Boolean(p) => Some(p.porosity),
        Structure::Fibres(p) => Some(p.porosity),
        Structure::Foam(p) => Some(p.porosity),
        _ => None,
    };
    let _ = writeln!(
        s,
        "porosity    {:.4}{}",
        built.porosity,
        target.map_or(String::new(), |t| format!(" (target {t})"))
    );
    for line in info_lines(&built.info) {
        let _ = writeln!(s, "            {line}");
    }
    let _ = writeln!(s, "next        {hint}");
    s
}

/// What the generator built, a few short lines.
fn info_lines(info: &Info) -> Vec<String> {
    match info {
        Info::Array(a) => vec![
            format!(
                "solid fraction {:.5} (asked {}), {} objects, cell {}x{}x{}",
                a.solid_fraction,
                a.requested_solid_fraction,
                a.objects,
                a.cell_shape[0],
                a.cell_shape[1],
                a.cell_shape[2]
            ),
            format!(
                "radius {:.3} voxels (from the fraction {:.3}, touching {:.3}); equivalent radius from the voxel count {:.3}",
                a.radius, a.analytic_radius, a.touching_radius, a.equivalent_radius
            ),
        ],
        Info::Grains(g) => {
            let n = g.grains.len();
            let radii = g.grains.iter().map(|g| g.radius);
            let mean = radii.clone().sum::<f64>() / n.max(1) as f64;
            let lo = radii.clone().fold(f64::INFINITY, f64::min);
            let hi = radii.fold(0.0, f64::max);
            let mut v = vec![format!(
                "{n} grains ({}), radius mean {mean:.3}, min {lo:.3}, max {hi:.3} voxels",
                g.method
            )];
            if let Some(st) = g.stretch {
                v.push(format!(
                    "stretched along {} by {} (semi-axis / transverse radius)",
                    st.axis, st.aspect
                ));
            }
            v
        }
        Info::Fibres(f) => vec![format!(
            "{} fibres, radius {} voxels, length {:.1} voxels",
            f.fibres.len(),
            f.radius,
            f.length
        )],
        Info::Foam(f) => {
            let method = match f.method {
                FoamMethod::Voronoi => "voronoi",
                FoamMethod::InvertedSpheres => "inverted-spheres",
            };
            let mut line = format!(
                "{} cells ({method}), cell size {} voxels",
                f.cells, f.cell_size
            );
            if let Some(h) = f.strut_half_thickness {
                let _ = write!(line, ", strut half-thickness {h:.3} voxels");
            }
            vec![line]
        }
        Info::Channel(c) => {
            let mut line = format!(
                "axis/normal {}, open area {} voxels per section",
                c.axis, c.open_area
            );
            if c.equivalent_radius > 0.0 {
                let _ = write!(line, ", equivalent radius {:.3}", c.equivalent_radius);
            }
            vec![line]
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lengths_and_paths_read_back_as_options() {
        assert_eq!(compact_length(5e-6), "5um");
        assert_eq!(compact_length(2.5e-3), "2.5mm");
        assert_eq!(
            shell_word(Path::new("samples/bead-pack.tif")),
            "samples/bead-pack.tif"
        );
        assert_eq!(shell_word(Path::new("my pack.tif")), "'my pack.tif'");
    }
}
