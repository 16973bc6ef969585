//! `voxperm synth KIND`: builds a synthetic structure with the generator library
//! (`geometry::synth`) and writes it as an image `estimate` can read.
//!
//! One clap subcommand per kind, so `voxperm synth KIND --help` lists only the options that
//! apply. Options are plain values first; [`Kind::structure`] checks every rule across them and
//! builds the generator's parameter struct before anything is allocated. Writing and the
//! printed summary live in `synth_output.rs`.

use super::args::{check_distinct_outputs, check_extension, check_file_output, check_output_path};
use super::synth_output::{OutputPlan, write_and_report};
use clap::{Args, Subcommand};
use std::path::PathBuf;
use voxperm::geometry::Axis;
use voxperm::geometry::synth::{
    BooleanParams, CylinderArrayParams, CylinderPacking, DuctParams, FibreParams, FoamMethod,
    FoamParams, Lattice, Orientation, PackMethod, PackParams, RadiusDist, SlitStackParams,
    SphereArrayParams, Stretch, Structure, TubeParams, generate,
};
use voxperm::volume::parse_length;
use voxperm::{Error, Result};

/// Options of `voxperm synth`.
#[derive(Args, Debug)]
pub struct SynthArgs {
    #[command(subcommand)]
    pub kind: Kind,
}

/// The structure families.
#[derive(Subcommand, Debug)]
pub enum Kind {
    /// Spheres on a simple, body- or face-centred cubic lattice.
    #[command(allow_negative_numbers = true)]
    SphereArray(SphereArrayArgs),
    /// Parallel cylinders on a square or hexagonal lattice.
    #[command(allow_negative_numbers = true)]
    CylinderArray(CylinderArrayArgs),
    /// A random pack of non-overlapping spheres (a bead pack).
    #[command(allow_negative_numbers = true)]
    SpherePack(SpherePackArgs),
    /// Random overlapping spheres, optionally stretched into ellipsoids (sintered grains).
    #[command(allow_negative_numbers = true)]
    OverlappingSpheres(OverlappingArgs),
    /// A mat of random straight fibres.
    #[command(allow_negative_numbers = true)]
    Fibres(FibresArgs),
    /// An open-cell foam.
    #[command(allow_negative_numbers = true)]
    Foam(FoamArgs),
    /// A periodic stack of plane slits.
    #[command(allow_negative_numbers = true)]
    Slits(SlitsArgs),
    /// One straight square duct.
    #[command(allow_negative_numbers = true)]
    Duct(DuctArgs),
    /// One straight circular tube.
    #[command(allow_negative_numbers = true)]
    Tube(TubeArgs),
}

/// Where and how to write the volume (every kind).
#[derive(Args, Debug, Clone)]
pub struct OutputArgs {
    /// Output file: a Deflate-compressed multi-page TIFF (pore = 0, solid = 255), or raw with --raw.
    #[arg(long, value_name = "FILE")]
    pub out: PathBuf,
    /// Voxel edge length with a unit, e.g. 5um; recorded in the TIFF so `estimate` finds it.
    #[arg(long, value_name = "LENGTH")]
    pub voxel_size: Option<String>,
    /// Write headerless raw bytes (u8, x fastest) instead of a TIFF.
    #[arg(long)]
    pub raw: bool,
    /// Also write the parameters and what was built (porosity, objects) to this JSON file.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Print nothing but errors.
    #[arg(long, short)]
    pub quiet: bool,
}

/// Box, porosity target and seed of the random kinds.
#[derive(Args, Debug, Clone)]
pub struct RandomBoxArgs {
    /// Box size in voxels: N (a cube) or NXxNYxNZ.
    #[arg(long, value_name = "NX[xNYxNZ]")]
    pub size: String,
    /// Target porosity (pore fraction), strictly between 0 and 1.
    #[arg(long)]
    pub porosity: f64,
    /// Seed of the random generator: one seed always gives the same file.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
}

/// Grain radius and its distribution.
#[derive(Args, Debug, Clone)]
pub struct GrainArgs {
    /// Mean grain radius in voxels.
    #[arg(long)]
    pub radius: f64,
    /// Relative spread of the radius (standard deviation / mean); 0 = all equal.
    #[arg(long, default_value_t = 0.0, value_name = "S")]
    pub radius_spread: f64,
    /// Shape of the radius distribution when --radius-spread > 0.
    #[arg(long, value_name = "uniform|lognormal")]
    pub radius_dist: Option<String>,
}

/// Solid fraction and cell of the regular arrays.
#[derive(Args, Debug, Clone)]
pub struct ArrayArgs {
    /// Solid volume (or cross-section area) fraction.
    #[arg(long, value_name = "C")]
    pub solid_fraction: f64,
    /// Unit-cell edge in voxels (the lattice spacing).
    #[arg(long, value_name = "VOXELS")]
    pub cell: usize,
    /// Use the radius computed from the solid fraction instead of the radius whose voxel
    /// count comes closest to it.
    #[arg(long)]
    pub analytic_radius: bool,
}

#[derive(Args, Debug)]
pub struct SphereArrayArgs {
    /// Lattice: sc (simple), bcc (body-centred) or fcc (face-centred cubic).
    #[arg(long, default_value = "sc", value_name = "sc|bcc|fcc")]
    pub lattice: String,
    #[command(flatten)]
    pub array: ArrayArgs,
    /// Unit cells along x, y, z: N or NXxNYxNZ.
    #[arg(long, default_value = "1", value_name = "N[xNxN]")]
    pub cells: String,
    #[command(flatten)]
    pub output: OutputArgs,
}

#[derive(Args, Debug)]
pub struct CylinderArrayArgs {
    /// Lattice of the cylinder axes: square or hexagonal.
    #[arg(long, default_value = "square", value_name = "square|hexagonal")]
    pub packing: String,
    #[command(flatten)]
    pub array: ArrayArgs,
    /// Direction of the cylinder axes.
    #[arg(long, default_value = "z", value_name = "x|y|z")]
    pub axis: String,
    /// Unit cells across the cylinders: N or NUxNV (the two axes after --axis in x, y, z order).
    #[arg(long, default_value = "1", value_name = "N[xN]")]
    pub cells: String,
    /// Box length along the cylinders in voxels (default: --cell).
    #[arg(long, value_name = "VOXELS")]
    pub length: Option<usize>,
    #[command(flatten)]
    pub output: OutputArgs,
}

#[derive(Args, Debug)]
pub struct SpherePackArgs {
    #[command(flatten)]
    pub random: RandomBoxArgs,
    #[command(flatten)]
    pub grains: GrainArgs,
    /// Placement: rsa (random sequential addition), relaxation (overlap removal, dense packs) or
    /// auto (rsa up to solid fraction 0.3).
    #[arg(long, default_value = "auto", value_name = "auto|rsa|relaxation")]
    pub method: String,
    #[command(flatten)]
    pub output: OutputArgs,
}

#[derive(Args, Debug)]
pub struct OverlappingArgs {
    #[command(flatten)]
    pub random: RandomBoxArgs,
    #[command(flatten)]
    pub grains: GrainArgs,
    /// Stretch the grains into ellipsoids of revolution about this axis (use with --aspect).
    #[arg(long, value_name = "x|y|z", requires = "aspect")]
    pub stretch_axis: Option<String>,
    /// Semi-axis along --stretch-axis over the transverse radius (> 1 elongated, < 1 flattened).
    #[arg(long, requires = "stretch_axis")]
    pub aspect: Option<f64>,
    #[command(flatten)]
    pub output: OutputArgs,
}

#[derive(Args, Debug)]
pub struct FibresArgs {
    #[command(flatten)]
    pub random: RandomBoxArgs,
    /// Fibre radius in voxels.
    #[arg(long)]
    pub radius: f64,
    /// aligned (with --axis), planar (random in the plane normal to --normal) or isotropic.
    #[arg(
        long,
        default_value = "planar",
        value_name = "aligned|planar|isotropic"
    )]
    pub orientation: String,
    /// Fibre direction of an aligned mat (default z).
    #[arg(long, value_name = "x|y|z")]
    pub axis: Option<String>,
    /// Normal of the fibre plane of a planar mat (default z).
    #[arg(long, value_name = "x|y|z")]
    pub normal: Option<String>,
    /// Fibre length in voxels for planar and isotropic mats (default: the shortest box side).
    #[arg(long, value_name = "VOXELS")]
    pub length: Option<f64>,
    #[command(flatten)]
    pub output: OutputArgs,
}

#[derive(Args, Debug)]
pub struct FoamArgs {
    #[command(flatten)]
    pub random: RandomBoxArgs,
    /// Mean cell size in voxels (Voronoi), or the pore diameter (inverted spheres).
    #[arg(long, value_name = "VOXELS")]
    pub cell_size: f64,
    /// voronoi (struts on the edges of a Voronoi tessellation) or inverted-spheres (solid left
    /// between overlapping spherical pores).
    #[arg(
        long,
        default_value = "voronoi",
        value_name = "voronoi|inverted-spheres"
    )]
    pub method: String,
    #[command(flatten)]
    pub output: OutputArgs,
}

#[derive(Args, Debug)]
pub struct SlitsArgs {
    /// Box size in voxels: N or NXxNYxNZ; along --normal a multiple of --period.
    #[arg(long, value_name = "NX[xNYxNZ]")]
    pub size: String,
    /// Axis normal to the slits.
    #[arg(long, default_value = "z", value_name = "x|y|z")]
    pub normal: String,
    /// Fluid layers per slit.
    #[arg(long, value_name = "VOXELS")]
    pub gap: usize,
    /// Layers per period (slit plus wall).
    #[arg(long, value_name = "VOXELS")]
    pub period: usize,
    #[command(flatten)]
    pub output: OutputArgs,
}

/// Options of the straight channels.
#[derive(Args, Debug, Clone)]
pub struct ChannelArgs {
    /// Channel axis.
    #[arg(long, default_value = "x", value_name = "x|y|z")]
    pub axis: String,
    /// Box length along the channel in voxels.
    #[arg(long, default_value_t = 4, value_name = "VOXELS")]
    pub length: usize,
    /// Wall thickness in voxels (at least 1).
    #[arg(long, default_value_t = 1, value_name = "VOXELS")]
    pub wall: usize,
}

#[derive(Args, Debug)]
pub struct DuctArgs {
    /// Fluid voxels across the duct.
    #[arg(long, value_name = "VOXELS")]
    pub side: usize,
    #[command(flatten)]
    pub channel: ChannelArgs,
    #[command(flatten)]
    pub output: OutputArgs,
}

#[derive(Args, Debug)]
pub struct TubeArgs {
    /// Tube radius in voxels.
    #[arg(long)]
    pub radius: f64,
    #[command(flatten)]
    pub channel: ChannelArgs,
    #[command(flatten)]
    pub output: OutputArgs,
}

/// Parses `N` (a cube) or `NXxNYxNZ`.
pub fn parse_size(flag: &str, s: &str) -> Result<[usize; 3]> {
    let parts = parse_counts(flag, s)?;
    match parts[..] {
        [n] => Ok([n; 3]),
        [x, y, z] => Ok([x, y, z]),
        _ => Err(Error::Usage(format!(
            "{flag} '{s}': expected N or NXxNYxNZ, e.g. 64 or 64x64x32"
        ))),
    }
}

fn parse_cells2(s: &str) -> Result<[usize; 2]> {
    match parse_counts("--cells", s)?[..] {
        [n] => Ok([n; 2]),
        [u, v] => Ok([u, v]),
        _ => Err(Error::Usage(format!(
            "--cells '{s}': expected N or NUxNV for a cylinder array"
        ))),
    }
}

fn parse_counts(flag: &str, s: &str) -> Result<Vec<usize>> {
    s.trim()
        .split(['x', 'X'])
        .map(|p| match p.trim().parse::<usize>() {
            Ok(n) if n > 0 => Ok(n),
            _ => Err(Error::Usage(format!(
                "{flag} '{s}': '{}' is not a whole number of at least 1",
                p.trim()
            ))),
        })
        .collect()
}

fn parse_axis(flag: &str, s: &str) -> Result<Axis> {
    s.parse::<Axis>()
        .map_err(|e| Error::Usage(format!("{flag}: {e}")))
}

/// Parses one of a fixed set of words, naming the flag and the choices when it fails.
fn choose<T: Copy>(flag: &str, s: &str, choices: &[(&str, T)]) -> Result<T> {
    let key = s.trim().to_ascii_lowercase();
    choices
        .iter()
        .find(|(name, _)| *name == key)
        .map(|&(_, v)| v)
        .ok_or_else(|| {
            let names: Vec<&str> = choices.iter().map(|(n, _)| *n).collect();
            Error::Usage(format!(
                "{flag} '{s}': expected one of {}",
                names.join(", ")
            ))
        })
}

impl GrainArgs {
    fn dist(&self) -> Result<RadiusDist> {
        let (mean, spread) = (self.radius, self.radius_spread);
        if self.radius_spread == 0.0 {
            if let Some(d) = &self.radius_dist {
                return Err(Error::Usage(format!(
                    "--radius-dist {d} needs --radius-spread above 0 (equal grains have no distribution)"
                )));
            }
            return Ok(RadiusDist::Mono { radius: mean });
        }
        let uniform = match self.radius_dist.as_deref() {
            None => false,
            Some(d) => choose(
                "--radius-dist",
                d,
                &[("uniform", true), ("lognormal", false)],
            )?,
        };
        Ok(if uniform {
            RadiusDist::Uniform { mean, spread }
        } else {
            RadiusDist::LogNormal { mean, spread }
        })
    }
}

impl Kind {
    /// The generator parameters and seed; every option and combination is checked here (the
    /// generator then checks the ranges that depend on the box).
    pub fn structure(&self) -> Result<(Structure, Option<u64>)> {
        Ok(match self {
            Kind::SphereArray(a) => {
                let lattice = choose(
                    "--lattice",
                    &a.lattice,
                    &[
                        ("sc", Lattice::Sc),
                        ("bcc", Lattice::Bcc),
                        ("fcc", Lattice::Fcc),
                    ],
                )?;
                let s = Structure::SphereArray(SphereArrayParams {
                    lattice,
                    solid_fraction: a.array.solid_fraction,
                    cell: a.array.cell,
                    cells: parse_size("--cells", &a.cells)?,
                    match_voxels: !a.array.analytic_radius,
                });
                (s, None)
            }
            Kind::CylinderArray(a) => {
                let packing = choose(
                    "--packing",
                    &a.packing,
                    &[
                        ("square", CylinderPacking::Square),
                        ("hexagonal", CylinderPacking::Hexagonal),
                    ],
                )?;
                let s = Structure::CylinderArray(CylinderArrayParams {
                    packing,
                    solid_fraction: a.array.solid_fraction,
                    cell: a.array.cell,
                    axis: parse_axis("--axis", &a.axis)?,
                    cells: parse_cells2(&a.cells)?,
                    length: a.length,
                    match_voxels: !a.array.analytic_radius,
                });
                (s, None)
            }
            Kind::SpherePack(a) => {
                let method = choose(
                    "--method",
                    &a.method,
                    &[
                        ("auto", PackMethod::Auto),
                        ("rsa", PackMethod::Rsa),
                        ("relaxation", PackMethod::Relaxation),
                    ],
                )?;
                let s = Structure::SpherePack(PackParams {
                    shape: parse_size("--size", &a.random.size)?,
                    porosity: a.random.porosity,
                    radius: a.grains.dist()?,
                    method,
                });
                (s, Some(a.random.seed))
            }
            Kind::OverlappingSpheres(a) => {
                let stretch = match (&a.stretch_axis, a.aspect) {
                    (Some(ax), Some(aspect)) => Some(Stretch {
                        axis: parse_axis("--stretch-axis", ax)?,
                        aspect,
                    }),
                    // clap's `requires` makes the two options come together.
                    _ => None,
                };
                let s = Structure::Boolean(BooleanParams {
                    shape: parse_size("--size", &a.random.size)?,
                    porosity: a.random.porosity,
                    radius: a.grains.dist()?,
                    stretch,
                });
                (s, Some(a.random.seed))
            }
            Kind::Fibres(a) => (Structure::Fibres(a.params()?), Some(a.random.seed)),
            Kind::Foam(a) => {
                let method = choose(
                    "--method",
                    &a.method,
                    &[
                        ("voronoi", FoamMethod::Voronoi),
                        ("inverted-spheres", FoamMethod::InvertedSpheres),
                    ],
                )?;
                let s = Structure::Foam(FoamParams {
                    shape: parse_size("--size", &a.random.size)?,
                    porosity: a.random.porosity,
                    cell_size: a.cell_size,
                    method,
                });
                (s, Some(a.random.seed))
            }
            Kind::Slits(a) => {
                let s = Structure::SlitStack(SlitStackParams {
                    shape: parse_size("--size", &a.size)?,
                    normal: parse_axis("--normal", &a.normal)?,
                    gap: a.gap,
                    period: a.period,
                });
                (s, None)
            }
            Kind::Duct(a) => {
                let s = Structure::SquareDuct(DuctParams {
                    axis: parse_axis("--axis", &a.channel.axis)?,
                    side: a.side,
                    length: a.channel.length,
                    wall: a.channel.wall,
                });
                (s, None)
            }
            Kind::Tube(a) => {
                let s = Structure::Tube(TubeParams {
                    axis: parse_axis("--axis", &a.channel.axis)?,
                    radius: a.radius,
                    length: a.channel.length,
                    wall: a.channel.wall,
                });
                (s, None)
            }
        })
    }

    fn output(&self) -> &OutputArgs {
        match self {
            Kind::SphereArray(a) => &a.output,
            Kind::CylinderArray(a) => &a.output,
            Kind::SpherePack(a) => &a.output,
            Kind::OverlappingSpheres(a) => &a.output,
            Kind::Fibres(a) => &a.output,
            Kind::Foam(a) => &a.output,
            Kind::Slits(a) => &a.output,
            Kind::Duct(a) => &a.output,
            Kind::Tube(a) => &a.output,
        }
    }
}

impl FibresArgs {
    fn params(&self) -> Result<FibreParams> {
        let kind = choose(
            "--orientation",
            &self.orientation,
            &[("aligned", 0), ("planar", 1), ("isotropic", 2)],
        )?;
        let refuse = |flag: &str, wanted: &str| {
            Err(Error::Usage(format!(
                "{flag} applies only to --orientation {wanted}"
            )))
        };
        if self.axis.is_some() && kind != 0 {
            return refuse("--axis", "aligned");
        }
        if self.normal.is_some() && kind != 1 {
            return refuse("--normal", "planar");
        }
        if self.length.is_some() && kind == 0 {
            return Err(Error::Usage(
                "--length does not apply to aligned fibres: they run through the whole box".into(),
            ));
        }
        let axis_or_z = |o: &Option<String>, flag: &str| -> Result<Axis> {
            o.as_deref().map_or(Ok(Axis::Z), |s| parse_axis(flag, s))
        };
        let orientation = match kind {
            0 => Orientation::Aligned {
                axis: axis_or_z(&self.axis, "--axis")?,
            },
            1 => Orientation::Planar {
                normal: axis_or_z(&self.normal, "--normal")?,
            },
            _ => Orientation::Isotropic,
        };
        Ok(FibreParams {
            shape: parse_size("--size", &self.random.size)?,
            porosity: self.random.porosity,
            radius: self.radius,
            orientation,
            length: self.length,
        })
    }
}

/// Voxels of the box a structure will fill, from its parameters (an upper bound for the
/// hexagonal cylinder cell and the tube, whose exact sizes the generator rounds); saturates
/// instead of overflowing.
fn claimed_voxels(s: &Structure) -> u64 {
    let prod = |v: &[u64]| v.iter().fold(1u64, |a, &b| a.saturating_mul(b));
    let n = |x: usize| x as u64;
    match s {
        Structure::SpherePack(p) => prod(&p.shape.map(n)),
        Structure::Boolean(p) => prod(&p.shape.map(n)),
        Structure::Fibres(p) => prod(&p.shape.map(n)),
        Structure::Foam(p) => prod(&p.shape.map(n)),
        Structure::SlitStack(p) => prod(&p.shape.map(n)),
        Structure::Slit(p) => prod(&p.shape.map(n)),
        Structure::SphereArray(p) => prod(&p.cells.map(|c| n(c).saturating_mul(n(p.cell)))),
        Structure::CylinderArray(p) => {
            let long = match p.packing {
                CylinderPacking::Square => n(p.cell),
                CylinderPacking::Hexagonal => n(p.cell).saturating_mul(2),
            };
            prod(&[
                n(p.cell).saturating_mul(n(p.cells[0])),
                long.saturating_mul(n(p.cells[1])),
                n(p.length.unwrap_or(p.cell)),
            ])
        }
        Structure::SquareDuct(p) => {
            let across = n(p.side).saturating_add(n(p.wall).saturating_mul(2));
            prod(&[across, across, n(p.length)])
        }
        Structure::Tube(p) => {
            let r = if p.radius.is_finite() {
                p.radius.clamp(0.0, 1e9).ceil() as u64
            } else {
                u64::MAX / 4
            };
            let across = r
                .saturating_mul(2)
                .saturating_add(n(p.wall).saturating_mul(2));
            prod(&[across, across, n(p.length)])
        }
    }
}

/// Refuses a structure whose mask, written copy and (for Voronoi foams) distance field would
/// not fit in `available` bytes, before the generator allocates anything.
fn check_memory(s: &Structure, available: u64) -> Result<()> {
    // Mask and the u8 volume written from it; the Voronoi foam adds an f32 distance per voxel.
    let per_voxel = match s {
        Structure::Foam(p) if p.method == FoamMethod::Voronoi => 6,
        _ => 2,
    };
    let voxels = claimed_voxels(s);
    let need = voxels.saturating_mul(per_voxel);
    if need > available / 10 * 9 {
        return Err(Error::Usage(format!(
            "synth: {voxels} voxels need about {} but only {} of memory is available; make the box smaller",
            voxperm::error::human_bytes(need),
            voxperm::error::human_bytes(available)
        )));
    }
    Ok(())
}

/// Runs the command.
pub fn run(a: SynthArgs) -> Result<i32> {
    let out = a.kind.output();
    let (structure, seed) = a.kind.structure()?;
    let voxel_size_m = out
        .voxel_size
        .as_deref()
        .map(parse_length)
        .transpose()
        .map_err(|e| Error::Usage(format!("--voxel-size {e}")))?;
    // A regular file: a TIFF is written with seeks, and the output is re-read for its hash.
    check_file_output(&out.out, "--out")?;
    if out.raw {
        check_extension(
            &out.out,
            "--out",
            "raw bytes",
            &["tif", "tiff", "json", "txt", "vti"],
            "a .raw name with --raw",
        )?;
    } else {
        check_extension(
            &out.out,
            "--out",
            "a TIFF",
            &["raw", "json", "txt", "csv", "vti", "html", "md", "png"],
            "a .tif name (or --raw)",
        )?;
    }
    if let Some(j) = &out.json {
        check_output_path(j, "--json")?;
        super::args::check_json_name(j)?;
        check_distinct_outputs(&[(&out.out, "--out"), (j, "--json")])?;
    }
    let plan = OutputPlan {
        path: out.out.clone(),
        raw: out.raw,
        voxel_size_m,
        json: out.json.clone(),
        quiet: out.quiet,
    };
    plan.check()?;
    check_memory(&structure, voxperm::volume::available_memory_bytes())?;
    let built = generate(&structure, seed.unwrap_or(0)).map_err(|e| match e {
        Error::Usage(msg) => Error::Usage(in_option_words(&msg)),
        other => other,
    })?;
    write_and_report(&plan, &structure, seed, &built)?;
    Ok(voxperm::error::exit::OK)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_and_counts() {
        assert_eq!(parse_size("--size", "64").unwrap(), [64; 3]);
        assert_eq!(parse_size("--size", "8x6X4").unwrap(), [8, 6, 4]);
        assert!(parse_size("--size", "8x6").is_err());
        assert!(parse_size("--size", "0").is_err());
        assert!(parse_size("--size", "-3").is_err());
        assert_eq!(parse_cells2("3").unwrap(), [3, 3]);
        assert!(parse_cells2("1x2x3").is_err());
    }

    #[test]
    fn words_name_the_flag_and_the_choices() {
        let e = choose("--lattice", "hcp", &[("sc", 0), ("fcc", 1)]).unwrap_err();
        assert_eq!(e.to_string(), "--lattice 'hcp': expected one of sc, fcc");
        assert_eq!(
            choose("--lattice", "FCC", &[("sc", 0), ("fcc", 1)]).unwrap(),
            1
        );
    }

    #[test]
    fn memory_is_checked_from_the_parameters() {
        let pack = |n: usize| {
            Structure::SpherePack(PackParams {
                shape: [n; 3],
                porosity: 0.5,
                radius: RadiusDist::Mono { radius: 4.0 },
                method: PackMethod::Auto,
            })
        };
        assert_eq!(claimed_voxels(&pack(100)), 1_000_000);
        assert!(check_memory(&pack(100), 4 << 20).is_ok());
        let e = check_memory(&pack(1000), 1 << 30).unwrap_err();
        assert!(e.to_string().contains("1000000000 voxels"), "{e}");
        let huge = Structure::SphereArray(SphereArrayParams {
            lattice: Lattice::Sc,
            solid_fraction: 0.1,
            cell: usize::MAX,
            cells: [usize::MAX; 3],
            match_voxels: true,
        });
        assert_eq!(claimed_voxels(&huge), u64::MAX);
        assert!(check_memory(&huge, u64::MAX).is_err());
    }

    #[test]
    fn radius_distribution_rules() {
        let g = |spread, dist: Option<&str>| GrainArgs {
            radius: 5.0,
            radius_spread: spread,
            radius_dist: dist.map(String::from),
        };
        assert_eq!(
            g(0.0, None).dist().unwrap(),
            RadiusDist::Mono { radius: 5.0 }
        );
        assert!(g(0.0, Some("uniform")).dist().is_err());
        assert!(matches!(
            g(0.2, Some("uniform")).dist().unwrap(),
            RadiusDist::Uniform { .. }
        ));
        assert!(matches!(
            g(0.2, None).dist().unwrap(),
            RadiusDist::LogNormal { .. }
        ));
        assert!(g(0.2, Some("gamma")).dist().is_err());
    }
}

/// Rewrites a generator message in the words of the command line: the library's structure
/// names become the subcommand names, and snake_case parameter names become their options
/// (`solid_fraction` → `--solid-fraction`).
fn in_option_words(msg: &str) -> String {
    const KINDS: [(&str, &str); 10] = [
        ("synth sphere_array", "synth sphere-array"),
        ("synth cylinder_array", "synth cylinder-array"),
        ("synth sphere_pack", "synth sphere-pack"),
        ("synth boolean", "synth overlapping-spheres"),
        ("synth slit_stack", "synth slits"),
        ("synth slit", "synth slits"),
        ("synth square_duct", "synth duct"),
        ("synth fibres", "synth fibres"),
        ("synth foam", "synth foam"),
        ("synth tube", "synth tube"),
    ];
    let mut text = msg.to_string();
    if let Some((lib, cli)) = KINDS.iter().find(|(lib, _)| text.starts_with(lib)) {
        text = format!("{cli}{}", &text[lib.len()..]);
    }
    let mut out = String::with_capacity(text.len() + 8);
    for (n, word) in text.split(' ').enumerate() {
        if n > 0 {
            out.push(' ');
        }
        let core = word.trim_end_matches([',', ':', ';', '.', ')']);
        let is_param = core.contains('_')
            && core.chars().all(|c| c.is_ascii_lowercase() || c == '_')
            && !core.starts_with('_');
        if is_param {
            out.push_str("--");
            out.push_str(&core.replace('_', "-"));
            out.push_str(&word[core.len()..]);
        } else {
            out.push_str(word);
        }
    }
    out
}

#[cfg(test)]
mod option_word_tests {
    use super::in_option_words;

    #[test]
    fn generator_messages_use_option_names() {
        assert_eq!(
            in_option_words("synth sphere_array: solid_fraction 0.9 exceeds close packing"),
            "synth sphere-array: --solid-fraction 0.9 exceeds close packing"
        );
        assert_eq!(
            in_option_words("synth foam: cell_size must lie between 4 and 4"),
            "synth foam: --cell-size must lie between 4 and 4"
        );
    }
}
