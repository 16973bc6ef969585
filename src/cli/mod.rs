//! Command-line front end: argument definitions (clap derive), one file per subcommand, and the
//! mapping from library errors to one-line messages and exit codes. No physics lives here.

mod args;
mod batch;
mod batch_plan;
mod batch_progress;
mod bench;
mod describe;
mod estimate;
mod progress;
mod report;

use clap::{Parser, Subcommand};
use voxperm::error::exit;

/// Permeability of segmented 3D images by lattice-Boltzmann flow simulation.
#[derive(Parser, Debug)]
#[command(name = "voxperm", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Simulate flow through a sample and report its permeability.
    Estimate(estimate::EstimateArgs),
    /// Geometry only: porosity, connectivity, surface, Kozeny–Carman, memory a solve needs.
    Describe(describe::DescribeArgs),
    /// Many samples from a manifest or a folder: one result file each, a summary table, resumable.
    ///
    /// Samples run one after another, each solve on all cores: a lattice-Boltzmann solve is
    /// limited by memory bandwidth, which one solve already uses up, so side-by-side solves would
    /// not finish sooner and would need more memory. A rerun into the same --out folder skips
    /// samples whose input file and settings are unchanged. Exit code 5 when some samples failed.
    /// The manifest format is described in docs/batch-manifest.md.
    Batch(batch::BatchArgs),
    /// Comparison report (HTML and/or Markdown with SVG plots) over result files.
    Report(report::ReportArgs),
    /// Kernel speed against measured memory bandwidth (the roofline), on generated structures.
    Bench(bench::BenchArgs),
}

/// Runs the command line and returns the process exit code.
pub fn main() -> i32 {
    voxperm::lbm::memory::return_large_blocks_promptly();
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() {
                exit::USAGE
            } else {
                exit::OK
            };
            let _ = e.print();
            return code;
        }
    };
    let result = match cli.command {
        Command::Estimate(a) => estimate::run(a),
        Command::Describe(a) => describe::run(a),
        Command::Batch(a) => batch::run(a),
        Command::Report(a) => report::run(a),
        Command::Bench(a) => bench::run_cmd(a),
    };
    match result {
        Ok(code) => code,
        Err(e) => {
            eprintln!("voxperm: error: {e}");
            e.exit_code()
        }
    }
}
