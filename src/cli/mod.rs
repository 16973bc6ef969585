//! Command-line front end: argument definitions (clap derive), one file per subcommand, and the
//! mapping from library errors to one-line messages and exit codes. No physics lives here.

mod args;
mod batch;
mod batch_plan;
mod batch_progress;
mod bench;
mod check;
mod describe;
mod estimate;
mod progress;
mod report;
mod synth;
mod synth_output;

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
    #[command(allow_negative_numbers = true)]
    Estimate(estimate::EstimateArgs),
    /// Geometry only: porosity, connectivity, surface, Kozeny–Carman, memory a solve needs.
    #[command(allow_negative_numbers = true)]
    Describe(describe::DescribeArgs),
    /// Many samples from a manifest or a folder: one result file each, a summary table, resumable.
    ///
    /// Samples run one after another, each solve on all cores: a lattice-Boltzmann solve is
    /// limited by memory bandwidth, which one solve already uses up, so side-by-side solves would
    /// not finish sooner and would need more memory. A rerun into the same --out folder skips
    /// samples whose input file and settings are unchanged. Exit code 5 when some samples failed.
    /// The manifest format is described in docs/batch-manifest.md.
    #[command(allow_negative_numbers = true)]
    Batch(batch::BatchArgs),
    /// Comparison report (HTML and/or Markdown with SVG plots) over result files.
    #[command(allow_negative_numbers = true)]
    Report(report::ReportArgs),
    /// Build a synthetic structure (sphere arrays and packs, fibre mats, foams, channels).
    #[command(allow_negative_numbers = true)]
    Synth(synth::SynthArgs),
    /// Run the built-in reference suite against published and analytic results.
    #[command(allow_negative_numbers = true)]
    Check(check::CheckArgs),
    /// Kernel speed against measured memory bandwidth (the roofline), on generated structures.
    #[command(allow_negative_numbers = true)]
    Bench(bench::BenchArgs),
}

/// Runs the command line and returns the process exit code.
pub fn main() -> i32 {
    voxperm::lbm::memory::return_large_blocks_promptly();
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            if !e.use_stderr() {
                // --help and --version: clap's own output, success.
                let _ = e.print();
                return exit::OK;
            }
            args::note(format_args!("voxperm: {}", one_line_usage(&e.to_string())));
            return exit::USAGE;
        }
    };
    on_interrupt(if matches!(cli.command, Command::Batch(_)) {
        "; finished samples are kept: run the same batch again to resume"
    } else {
        ""
    });
    let result = match cli.command {
        Command::Estimate(a) => estimate::run(a),
        Command::Describe(a) => describe::run(a),
        Command::Batch(a) => batch::run(a),
        Command::Report(a) => report::run(a),
        Command::Synth(a) => synth::run(a),
        Command::Check(a) => check::run(a),
        Command::Bench(a) => bench::run_cmd(a),
    };
    match result {
        Ok(code) => code,
        Err(e) => {
            args::note(format_args!("voxperm: error: {e}"));
            e.exit_code()
        }
    }
}

/// Ctrl-C (SIGINT, or SIGTERM or SIGHUP): remove the temporary files of writes in progress, so no
/// partial output is left (finished files stay), say so in one line and exit 130.
fn on_interrupt(advice: &'static str) {
    let installed = ctrlc::set_handler(move || {
        let removed = voxperm::volume::remove_pending_temporaries();
        // Never panic here (stderr may be a closed pipe or a hung-up terminal): a panic would
        // end this thread with the pending list locked, and the run would go on and hang.
        use std::io::Write;
        let what = match removed {
            0 => String::new(),
            1 => "; the unfinished output was removed".to_string(),
            n => format!("; {n} unfinished outputs were removed"),
        };
        // On a terminal the line starts after the echoed ^C or a progress bar; in a log it
        // starts on its own.
        use std::io::IsTerminal;
        let lead = if std::io::stderr().is_terminal() {
            "\n"
        } else {
            ""
        };
        let _ = writeln!(
            std::io::stderr(),
            "{lead}voxperm: interrupted{what}{advice}"
        );
        std::process::exit(exit::INTERRUPTED);
    });
    // Without the handler an interrupt still ends the run (exit 130 by the shell's count), only
    // a temporary file may stay behind; not a reason to refuse to run.
    drop(installed);
}

/// Folds clap's multi-line usage error into one line: the error itself and any "tip" (the
/// nearest valid option or value), then a pointer to --help.
fn one_line_usage(text: &str) -> String {
    // Everything before clap's "Usage:" block: the error, any indented detail lines (such as the
    // names of missing arguments) and tips.
    let mut parts: Vec<&str> = text
        .lines()
        .map(str::trim)
        .take_while(|l| !l.starts_with("Usage:"))
        // clap's own pointer to --help; ours ends the line.
        .filter(|l| !l.is_empty() && !l.starts_with("For more information"))
        .collect();
    if parts.is_empty() {
        parts.push(text.lines().next().unwrap_or("error: bad command line"));
    }
    let mut line = String::new();
    for p in parts {
        if !line.is_empty() {
            line.push_str(if line.ends_with(':') { " " } else { "; " });
        }
        line.push_str(p);
    }
    format!("{line}; see --help")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn usage_errors_fold_into_one_line() {
        let e = Cli::try_parse_from(["voxperm", "estimate", "a.tif", "--tua", "1"]).unwrap_err();
        let line = one_line_usage(&e.to_string());
        assert!(!line.contains('\n'), "{line}");
        assert!(
            line.starts_with("error: unexpected argument '--tua'"),
            "{line}"
        );
        let e = Cli::try_parse_from(["voxperm", "estimate"]).unwrap_err();
        let line = one_line_usage(&e.to_string());
        assert!(
            line.contains("<SAMPLE>"),
            "the missing argument should be named: {line}"
        );
        let e = Cli::try_parse_from(["voxperm", "estimat"]).unwrap_err();
        let line = one_line_usage(&e.to_string());
        assert!(!line.contains('\n'), "{line}");
        assert!(
            line.contains("'estimate'"),
            "the nearest command should be suggested: {line}"
        );
        let e = Cli::try_parse_from(["voxperm", "describe", "a.tif", "--pore-label", "-1"])
            .unwrap_err();
        let line = one_line_usage(&e.to_string());
        assert_eq!(line.matches("--help").count(), 1, "{line}");
    }
}
