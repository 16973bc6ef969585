//! Option groups shared by several subcommands, and their second-stage validation into library
//! settings (every cross-option rule is checked here, before any file is read).

use clap::Args;
use std::path::Path;
use voxperm::geometry::Axis;
use voxperm::lbm::{BoundaryMode, Collision, Ends, Sides, SolverSettings};
use voxperm::volume::{
    CropSpec, Endian, RawSpec, RawType, Segmentation, parse_length, parse_shape,
};
use voxperm::{Error, Result};

/// How to read and segment the input.
#[derive(Args, Debug, Clone)]
pub struct InputArgs {
    /// Voxel edge length with a unit, e.g. 2.5um, 800nm, 0.01mm (overrides the file's own).
    #[arg(long, value_name = "LENGTH", allow_hyphen_values = true)]
    pub voxel_size: Option<String>,
    /// Voxel value that marks pore space (repeatable or comma-separated; default 0).
    #[arg(long, value_name = "N", value_delimiter = ',')]
    pub pore_label: Vec<u32>,
    /// Grey-value threshold for unsegmented images (use with --pore).
    #[arg(long, value_name = "T", allow_hyphen_values = true)]
    pub threshold: Option<f64>,
    /// Which side of --threshold is pore.
    #[arg(long, value_name = "below|above", requires = "threshold")]
    pub pore: Option<String>,
    /// Analyse a sub-volume: x0:x1,y0:y1,z0:z1 (half-open voxel ranges, empty = full).
    #[arg(long, value_name = "RANGES")]
    pub crop: Option<String>,
    /// Read a raw file of this shape, x fastest: NXxNYxNZ, e.g. 400x400x300.
    #[arg(long, value_name = "NXxNYxNZ")]
    pub raw_shape: Option<String>,
    /// Sample type of a raw file [default: u8].
    #[arg(long, value_name = "u8|u16|f32", requires = "raw_shape")]
    pub raw_type: Option<String>,
    /// Byte order of a raw file [default: little].
    #[arg(long, value_name = "little|big", requires = "raw_shape")]
    pub raw_endian: Option<String>,
    /// Memory the run may use, e.g. 8GiB or 500MB (default: 90 % of the memory available at start).
    #[arg(long, value_name = "SIZE")]
    pub max_memory: Option<String>,
}

/// How to solve.
#[derive(Args, Debug, Clone)]
pub struct SolverArgs {
    /// Collision operator: trt (τ-independent permeability) or bgk (for comparison).
    #[arg(long, default_value = "trt", value_name = "trt|bgk")]
    pub collision: String,
    /// Relaxation time τ (TRT: τ⁺); sets the lattice viscosity (τ − ½)/3.
    #[arg(long, default_value_t = 1.0)]
    pub tau: f64,
    /// Choose τ per solve from the pore size and grid length for the fewest steps (TRT only;
    /// k moves by up to about 0.15 % on poorly resolved pores, README Performance). Overrides
    /// --tau.
    #[arg(long)]
    pub auto_tau: bool,
    /// Start every solve from rest instead of from the flow on the 2× coarsened image (the
    /// default warm start reaches the same criterion in fewer full-grid steps).
    #[arg(long)]
    pub cold_start: bool,
    /// Links between pore voxels that touch only along an edge (their two shared face
    /// neighbours solid): open passes flow through them (D3Q19 as is), sealed treats them as
    /// walls, as a one-voxel staircase wall would be in the material (README, Connectivity).
    #[arg(long, default_value = "open", value_name = "open|sealed")]
    pub edge_gaps: String,
    /// TRT magic parameter Λ = (τ⁺ − ½)(τ⁻ − ½).
    #[arg(long, default_value_t = 3.0 / 16.0, value_name = "LAMBDA", allow_hyphen_values = true)]
    pub magic: f64,
    /// Steady when the mean velocity changes by less than this per step (relative).
    #[arg(long, default_value_t = 1e-6, allow_hyphen_values = true)]
    pub tolerance: f64,
    /// Give up (unconverged, flagged) after this many steps.
    #[arg(long, default_value_t = 200_000)]
    pub max_steps: usize,
    /// Steps between convergence checks.
    #[arg(long, default_value_t = 100, value_name = "STEPS")]
    pub check_every: usize,
    /// Body force in lattice units (default: chosen from the pore size for a slow, Stokes flow).
    #[arg(long, value_name = "G", allow_hyphen_values = true)]
    pub force: Option<f64>,
    /// Worker threads (default: all cores).
    #[arg(long)]
    pub threads: Option<usize>,
}

/// How to treat the faces of the sample.
#[derive(Args, Debug, Clone)]
pub struct BoundaryArgs {
    /// Faces parallel to the flow: sealed (no-flow walls) or periodic [default: sealed].
    #[arg(long, value_name = "sealed|periodic")]
    pub sides: Option<String>,
    /// Faces normal to the flow: mirror, periodic, or buffer:N (N free-fluid slices per end)
    /// [default: mirror].
    #[arg(long, value_name = "mirror|periodic|buffer:N")]
    pub ends: Option<String>,
    /// Shorthand for --sides periodic --ends periodic (periodic unit cells, generated structures).
    #[arg(long, conflicts_with_all = ["sides", "ends"])]
    pub periodic: bool,
}

/// Parses a size such as "8GiB", "500MB", "2G", "1048576".
pub fn parse_bytes(s: &str) -> Result<u64> {
    let t = s.trim();
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let value: f64 = num.parse().map_err(|_| {
        Error::Usage(format!(
            "bad memory size '{s}' (expected e.g. 8GiB or 500MB)"
        ))
    })?;
    let mult: f64 = match unit.trim().to_ascii_lowercase().as_str() {
        "" | "b" => 1.0,
        "k" | "kb" => 1e3,
        "kib" => 1024.0,
        "m" | "mb" => 1e6,
        "mib" => 1024.0 * 1024.0,
        "g" | "gb" => 1e9,
        "gib" => 1024.0 * 1024.0 * 1024.0,
        "t" | "tb" => 1e12,
        "tib" => 1024.0f64.powi(4),
        other => {
            return Err(Error::Usage(format!(
                "unknown size unit '{other}' in '{s}' (expected B, KB, MB, GB, TB, KiB, MiB, GiB, TiB)"
            )));
        }
    };
    let bytes = value * mult;
    if !(bytes.is_finite() && bytes >= 1.0) {
        return Err(Error::Usage(format!("memory size '{s}' must be positive")));
    }
    Ok(bytes as u64)
}

/// Validated input options.
pub struct InputPlan {
    pub raw: Option<RawSpec>,
    pub segmentation: Segmentation,
    pub crop: Option<CropSpec>,
    pub voxel_size_m: Option<f64>,
    pub max_memory: u64,
    /// No --pore-label or --threshold was given: pore is label 0 by default.
    pub default_segmentation: bool,
}

impl InputArgs {
    /// Second stage: checks every option and combination before anything is read.
    pub fn plan(&self) -> Result<InputPlan> {
        let raw = match &self.raw_shape {
            Some(shape) => Some(RawSpec {
                shape: parse_shape(shape).map_err(|e| Error::Usage(format!("--raw-shape: {e}")))?,
                kind: RawType::parse(self.raw_type.as_deref().unwrap_or("u8"))?,
                endian: Endian::parse(self.raw_endian.as_deref().unwrap_or("little"))?,
            }),
            None => None,
        };
        let segmentation =
            match (self.threshold, &self.pore) {
                (Some(_), _) if !self.pore_label.is_empty() => return Err(Error::Usage(
                    "--pore-label and --threshold exclude each other: choose labels or a threshold"
                        .into(),
                )),
                (Some(t), _) if !t.is_finite() => {
                    return Err(Error::Usage(format!(
                        "--threshold must be a finite number, got {t}"
                    )));
                }
                (Some(t), Some(side)) => Segmentation::Threshold {
                    t,
                    pore_below: match side.as_str() {
                        "below" => true,
                        "above" => false,
                        other => {
                            return Err(Error::Usage(format!(
                                "--pore {other}: expected below or above"
                            )));
                        }
                    },
                },
                (Some(_), None) => {
                    return Err(Error::Usage(
                        "--threshold needs --pore below|above to say which side is pore".into(),
                    ));
                }
                (None, _) if self.pore_label.is_empty() => Segmentation::default(),
                (None, _) => Segmentation::Labels(self.pore_label.clone()),
            };
        let crop = self.crop.as_deref().map(CropSpec::parse).transpose()?;
        let voxel_size_m = self
            .voxel_size
            .as_deref()
            .map(parse_length)
            .transpose()
            .map_err(|e| Error::Usage(format!("--voxel-size {e}")))?;
        let max_memory = match &self.max_memory {
            Some(s) => parse_bytes(s)?,
            None => voxperm::volume::available_memory_bytes() / 10 * 9,
        };
        Ok(InputPlan {
            raw,
            segmentation,
            crop,
            voxel_size_m,
            max_memory,
            default_segmentation: self.pore_label.is_empty() && self.threshold.is_none(),
        })
    }
}

impl SolverArgs {
    /// Second stage: the library's solver settings, validated.
    pub fn settings(&self) -> Result<(SolverSettings, Vec<String>)> {
        let s = SolverSettings {
            collision: self.collision.parse::<Collision>().map_err(Error::Usage)?,
            tau: self.tau,
            magic: self.magic,
            tolerance: self.tolerance,
            max_steps: self.max_steps,
            check_every: self.check_every,
            force: self.force,
            auto_tau: self.auto_tau,
            warm_start: !self.cold_start,
            seal_edge_gaps: match self.edge_gaps.as_str() {
                "open" => false,
                "sealed" => true,
                other => {
                    return Err(Error::Usage(format!(
                        "--edge-gaps takes open or sealed, not '{other}'"
                    )));
                }
            },
            ..SolverSettings::default()
        };
        let warnings = s.validate()?;
        check_threads(self.threads)?;
        Ok((s, warnings))
    }

    /// Number of worker threads to use.
    pub fn thread_count(&self) -> usize {
        thread_count(self.threads)
    }
}

/// Most worker threads accepted: far above any core count that helps a bandwidth-bound solve,
/// low enough that a typo cannot start tens of thousands of threads.
pub const MAX_THREADS: usize = 1024;

/// Refuses an output that would overwrite the input (e.g. `--json scan.tif` for `scan.tif`).
pub fn check_not_input(output: &Path, input: &Path, flag: &str) -> Result<()> {
    if voxperm::volume::same_existing_file(output, input) {
        return Err(Error::Usage(format!(
            "{flag} {} is the input sample itself; choose another output file",
            output.display()
        )));
    }
    Ok(())
}

/// `--threads`, or all cores when it is not given.
pub fn thread_count(threads: Option<usize>) -> usize {
    threads.unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()))
}

/// Refuses `--threads 0` and absurd counts before any thread is started.
pub fn check_threads(threads: Option<usize>) -> Result<()> {
    match threads {
        Some(0) => Err(Error::Usage("--threads must be at least 1".into())),
        Some(n) if n > MAX_THREADS => Err(Error::Usage(format!(
            "--threads {n} is more than the {MAX_THREADS} allowed (this machine has {} cores)",
            std::thread::available_parallelism().map_or(1, |c| c.get())
        ))),
        _ => Ok(()),
    }
}

impl BoundaryArgs {
    /// Second stage: the boundary mode, with `default` for what the user left out.
    pub fn mode(&self, default: BoundaryMode) -> Result<BoundaryMode> {
        if self.periodic {
            return Ok(BoundaryMode::PERIODIC);
        }
        let sides = match &self.sides {
            Some(s) => s
                .parse::<Sides>()
                .map_err(|e| Error::Usage(format!("--sides: {e}")))?,
            None => default.sides,
        };
        let ends = match &self.ends {
            Some(s) => s
                .parse::<Ends>()
                .map_err(|e| Error::Usage(format!("--ends: {e}")))?,
            None => default.ends,
        };
        Ok(BoundaryMode { sides, ends })
    }
}

/// Parses `--axis`: x, y, z or all.
pub fn parse_axes(s: &str) -> Result<Vec<Axis>> {
    if s.eq_ignore_ascii_case("all") {
        return Ok(Axis::ALL.to_vec());
    }
    s.parse::<Axis>()
        .map(|a| vec![a])
        .map_err(|e| Error::Usage(format!("--axis: {e} or all")))
}

/// Fails now, before hours of solving, if an output could not be written later: its folder
/// must exist and it must not be a folder itself.
pub fn check_output_path(path: &Path, flag: &str) -> Result<()> {
    if voxperm::volume::is_standard_output(path) {
        return Err(Error::Usage(format!(
            "{flag} {}: standard output takes only the JSON of estimate and describe; give a file name",
            path.display()
        )));
    }
    check_json_output(path, flag)
}

/// As [`check_output_path`], also accepting standard output (`-`): for the JSON of commands
/// that then print nothing else there.
pub fn check_json_output(path: &Path, flag: &str) -> Result<()> {
    voxperm::volume::check_destination(path).map_err(|e| match e {
        Error::Output { path, msg } => Error::Output {
            path,
            msg: format!("{flag}: {msg}"),
        },
        other => other,
    })
}

/// As [`check_output_path`], for outputs that must be regular files: re-read after writing, or
/// written with seeks (TIFF), or with files beside them.
pub fn check_file_output(path: &Path, flag: &str) -> Result<()> {
    check_output_path(path, flag)?;
    if voxperm::volume::is_stream(path) {
        return Err(Error::Usage(format!(
            "{flag} {}: needs a regular file, not a pipe or device",
            path.display()
        )));
    }
    Ok(())
}

/// Refuses two outputs of one run that land in the same file (one would silently replace the
/// other), also through links or spelled differently (`g.tif` and `./g.tif`).
pub fn check_distinct_outputs(outputs: &[(&Path, &str)]) -> Result<()> {
    for (i, (a, fa)) in outputs.iter().enumerate() {
        for (b, fb) in &outputs[i + 1..] {
            let same = match (
                voxperm::volume::resolved_destination(a),
                voxperm::volume::resolved_destination(b),
            ) {
                (Some(x), Some(y)) => x == y,
                _ => a == b && voxperm::volume::is_standard_output(a),
            } || voxperm::volume::same_existing_file(a, b);
            if same {
                return Err(Error::Usage(format!(
                    "{fa} and {fb} name the same file ({}); give two different names",
                    a.display()
                )));
            }
        }
    }
    Ok(())
}

/// Prints one line on standard error, ignoring a closed or broken stderr: diagnostics that
/// cannot be shown (a log reader that quit, `2>&-`) must not stop a run or make it panic.
pub fn note(line: impl std::fmt::Display) {
    use std::io::Write;
    let _ = writeln!(std::io::stderr(), "{line}");
}

/// A warning on standard error, in the one form every subcommand uses: `voxperm: warning: …`.
pub fn warn(what: impl std::fmt::Display) {
    note(format_args!("voxperm: warning: {what}"));
}

/// Prints `text` on standard output. A closed or broken standard output (a reader that quit
/// early, `>&-`) is an output error, one line and exit 3, never a panic.
pub fn print_out(text: &str) -> Result<()> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|e| voxperm::volume::output_error(Path::new("standard output"), e))
}

/// Refuses a `--json` file name that says another format (`--json scan.tif`, `--json flow.vti`):
/// a later folder batch or viewer would take it for what its name says.
pub fn check_json_name(path: &Path) -> Result<()> {
    if voxperm::volume::is_standard_output(path) || voxperm::volume::is_pipe_or_device(path) {
        return Ok(());
    }
    check_extension(
        path,
        "--json",
        "JSON",
        &[
            "tif", "tiff", "raw", "vti", "vtk", "html", "htm", "md", "markdown", "csv", "svg",
            "toml", "txt",
        ],
        "a .json name",
    )
}

/// Refuses an output name whose extension says another format than the one written (`wrong`
/// lists such extensions, lower case), naming the extension to use: a TIFF called .txt or an
/// HTML page called .md is skipped or misread later.
pub fn check_extension(
    path: &Path,
    flag: &str,
    writes: &str,
    wrong: &[&str],
    want: &str,
) -> Result<()> {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    match ext {
        Some(e) if wrong.contains(&e.as_str()) => Err(Error::Usage(format!(
            "{flag} {}: this writes {writes}, not .{e}; use {want}",
            path.display()
        ))),
        _ => Ok(()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// One file spelled two ways (`g.tif`, `./g.tif`) is one output.
    #[test]
    fn outputs_spelled_differently_are_one_file() {
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join("g.tif");
        let b = dir.path().join(".").join("g.tif");
        let err = check_distinct_outputs(&[(&a, "--out"), (&b, "--json")]).unwrap_err();
        assert!(err.to_string().contains("name the same file"), "{err}");
        let c = dir.path().join("h.json");
        assert!(check_distinct_outputs(&[(&a, "--out"), (&c, "--json")]).is_ok());
    }

    #[test]
    fn parses_memory_sizes() {
        assert_eq!(parse_bytes("8GiB").unwrap(), 8 * 1024 * 1024 * 1024);
        assert_eq!(parse_bytes("500MB").unwrap(), 500_000_000);
        assert_eq!(parse_bytes("1024").unwrap(), 1024);
        assert!(parse_bytes("lots").is_err());
        assert!(parse_bytes("5parsecs").is_err());
    }

    #[test]
    fn refuses_absurd_thread_counts() {
        assert!(check_threads(None).is_ok());
        assert!(check_threads(Some(2)).is_ok());
        assert!(check_threads(Some(0)).is_err());
        assert!(check_threads(Some(100_000)).is_err());
    }

    #[test]
    fn parses_axes() {
        assert_eq!(parse_axes("all").unwrap().len(), 3);
        assert_eq!(parse_axes("y").unwrap(), vec![Axis::Y]);
        assert!(parse_axes("w").is_err());
    }
}
