//! `voxperm bench`: memory bandwidth and kernel throughput in one run, printed as a table
//! (MLUPS, bytes per update, achieved GB/s, fraction of the copy-bandwidth roofline) and
//! optionally written as JSON.

use super::args::{check_output_path, parse_bytes};
use clap::Args;
use std::fmt::Write as _;
use std::path::PathBuf;
use voxperm::lbm::bench::{BenchConfig, BenchReport, BenchStructure, run};
use voxperm::lbm::kernel::Isa;
use voxperm::volume::write_atomically;
use voxperm::{Error, Result};

/// Options of `voxperm bench`.
#[derive(Args, Debug)]
pub struct BenchArgs {
    /// Box edges of the generated structures, comma-separated (default 64,128,256; --quick
    /// 64,128).
    #[arg(long, value_name = "N,N,…", value_delimiter = ',')]
    pub sizes: Vec<usize>,
    /// A shorter run: sizes 64 and 128, fewer repetitions, smaller bandwidth arrays.
    #[arg(long)]
    pub quick: bool,
    /// Structures to time: pack, foam (comma-separated; default both).
    #[arg(long, value_name = "pack|foam", value_delimiter = ',')]
    pub structures: Vec<String>,
    /// Largest thread count; every count from 1 up to it is measured (default: all cores).
    #[arg(long)]
    pub threads: Option<usize>,
    /// Repetitions of every measurement; the best counts.
    #[arg(long)]
    pub reps: Option<usize>,
    /// Size of each of the three bandwidth arrays (keep it far above the last-level cache).
    #[arg(long, value_name = "SIZE")]
    pub array_size: Option<String>,
    /// Kernel build to time: portable, avx2 or avx512 (default: the best this CPU runs).
    #[arg(long, value_name = "BUILD")]
    pub isa: Option<String>,
    /// Write every figure to this JSON file.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// No progress lines on stderr.
    #[arg(long, short)]
    pub quiet: bool,
}

/// Runs the command.
pub fn run_cmd(a: BenchArgs) -> Result<i32> {
    super::args::check_threads(a.threads)?;
    let threads = super::args::thread_count(a.threads);
    let mut cfg = if a.quick {
        BenchConfig::quick(threads)
    } else {
        BenchConfig::full(threads)
    };
    if !a.sizes.is_empty() {
        if let Some(&bad) = a.sizes.iter().find(|&&n| !(32..=1024).contains(&n)) {
            return Err(Error::Usage(format!(
                "--sizes {bad}: box edges must lie between 32 and 1024"
            )));
        }
        cfg.sizes = a.sizes.clone();
    }
    if !a.structures.is_empty() {
        cfg.structures = a
            .structures
            .iter()
            .map(|s| match s.as_str() {
                "pack" | "sphere_pack" => Ok(BenchStructure::SpherePack),
                "foam" => Ok(BenchStructure::Foam),
                other => Err(Error::Usage(format!(
                    "--structures {other}: expected pack or foam"
                ))),
            })
            .collect::<Result<_>>()?;
    }
    if let Some(r) = a.reps {
        if r == 0 {
            return Err(Error::Usage("--reps must be at least 1".into()));
        }
        cfg.reps = r;
    }
    if let Some(s) = &a.array_size {
        cfg.bandwidth_array_bytes = usize::try_from(parse_bytes(s)?)
            .map_err(|_| Error::Usage(format!("--array-size {s} is too large")))?;
    }
    if let Some(isa) = &a.isa {
        cfg.isa = Some(match isa.as_str() {
            "portable" => Isa::Portable,
            "avx2" => Isa::Avx2,
            "avx512" => Isa::Avx512,
            other => {
                return Err(Error::Usage(format!(
                    "--isa {other}: expected portable, avx2 or avx512"
                )));
            }
        });
    }
    let available = voxperm::volume::available_memory_bytes();
    let bw_need = 3 * cfg.bandwidth_array_bytes as u64;
    if bw_need > available / 10 * 9 {
        return Err(Error::TooLarge {
            what: "the bandwidth arrays (--array-size, three of them)".into(),
            needed_bytes: bw_need,
            limit_bytes: available / 10 * 9,
        });
    }
    cfg.max_bytes = available / 10 * 9;
    if let Some(p) = &a.json {
        check_output_path(p, "--json")?;
        super::args::check_json_name(p)?;
    }
    let quiet = a.quiet;
    let report = run(&cfg, &mut |msg| {
        if !quiet {
            super::args::note(format_args!("bench: {msg}"));
        }
    })?;
    if let Some(p) = &a.json {
        let text =
            serde_json::to_string_pretty(&report).map_err(|e| Error::Internal(e.to_string()))?;
        write_atomically(p, |w| {
            use std::io::Write;
            w.write_all(text.as_bytes())
                .map_err(|e| voxperm::volume::output_error(p, e))
        })?;
    }
    super::args::print_out(&render(&report))?;
    Ok(voxperm::error::exit::OK)
}

/// The report as two plain-text tables.
fn render(r: &BenchReport) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "memory bandwidth, GB/s (3 arrays of {} MiB, best of {} in each of two passes, before and after the kernel)",
        r.config.bandwidth_array_bytes >> 20,
        r.config.reps
    );
    let _ = writeln!(out, "threads      copy     triad    update");
    for b in &r.bandwidth {
        let _ = writeln!(
            out,
            "{:>7} {:>9.2} {:>9.2} {:>9.2}",
            b.threads, b.copy_gb_s, b.triad_gb_s, b.update_gb_s
        );
    }
    let _ = writeln!(out);
    let _ = writeln!(
        out,
        "kernel (D3Q19 TRT, f32, AA pattern), best of {}",
        r.config.reps
    );
    let _ = writeln!(
        out,
        "structure      size  porosity  threads    MLUPS  even   odd   B/update  GB/s  roofline MLUPS  fraction"
    );
    for c in &r.cases {
        let _ = writeln!(
            out,
            "{:<13} {:>4}³ {:>9.3} {:>8} {:>8.1} {:>5.0} {:>5.0} {:>10.1} {:>5.1} {:>15.1} {:>8.0}%",
            c.structure.name(),
            c.size,
            c.porosity,
            c.threads,
            c.mlups,
            c.even_mlups,
            c.odd_mlups,
            c.traffic.total,
            c.achieved_gb_s,
            c.attainable_mlups,
            100.0 * c.roofline_fraction
        );
    }
    let _ = writeln!(
        out,
        "B/update: populations 152 + coordinates 3 + node map 2/φ (README, Performance); \
         roofline = copy GB/s ÷ B/update"
    );
    out
}
