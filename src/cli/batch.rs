//! `voxperm batch`: many samples, one after another, each written to its own result file as
//! soon as it finishes, with a summary table rewritten after every sample. Resumable: a rerun
//! skips samples whose input and settings are unchanged (see `voxperm::report::batch`).
//!
//! Samples run one at a time, each on all cores: a lattice-Boltzmann solve is limited by memory
//! bandwidth, which one solve already saturates, so running samples side by side would not
//! finish the batch sooner and would multiply the memory needed.

use super::args::{BoundaryArgs, InputArgs, SolverArgs};
use super::batch_plan::{Planned, from_folder, from_manifest};
use super::batch_progress::BatchProgress;
use clap::Args;
use std::path::{Path, PathBuf};
use voxperm::analysis::{RunConfig, run_sample};
use voxperm::error::exit;
use voxperm::lbm::SolverSettings;
use voxperm::report::batch::{batch_key, sample_settings, unchanged_result};
use voxperm::report::result::ResultView;
use voxperm::report::summary_table::{SummaryRow, render_text, write_summary};
use voxperm::volume::sample::input_sha256;
use voxperm::{Error, Result};

/// Options of `voxperm batch`.
#[derive(Args, Debug)]
pub struct BatchArgs {
    /// A manifest (.toml, per-sample settings) or a folder of TIFF stacks, slice folders and
    /// (with --raw-shape) .raw files, all run with the options given here.
    pub source: PathBuf,
    /// Folder for the results: NAME.json per sample, summary.csv and summary.json (created if
    /// missing; rerunning into it skips unchanged samples).
    #[arg(long, value_name = "FOLDER")]
    pub out: PathBuf,
    /// Flow axis: x, y, z, or all (three solves and the permeability tensor).
    #[arg(long, default_value = "x")]
    pub axis: String,
    #[command(flatten)]
    pub input: InputArgs,
    #[command(flatten)]
    pub solver: SolverArgs,
    #[command(flatten)]
    pub boundary: BoundaryArgs,
    /// Print nothing but errors (no progress, no per-sample lines, no table).
    #[arg(long, short)]
    pub quiet: bool,
}

/// How one sample ended.
enum Outcome {
    Solved { seconds: f64, line: String },
    Skipped,
}

/// Runs the command: exit code 0 when every sample finished, 5 when some failed.
pub fn run(a: BatchArgs) -> Result<i32> {
    let plan = a.input.plan()?;
    let (solver, _) = a.solver.settings()?;
    let items = if a.source.is_dir() {
        from_folder(&a.source, &a.input, &a.axis, &a.boundary)?
    } else {
        from_manifest(&a.source, &a.input, &a.axis, &a.boundary)?
    };
    prepare_out(&a.out)?;
    let mut rows: Vec<SummaryRow> = items
        .iter()
        .map(|p| SummaryRow::pending(&p.name, &p.spec.path))
        .collect();
    write_summary(&a.out, &rows)?;

    let n = items.len();
    let threads = a.solver.thread_count();
    let mut progress = BatchProgress::new(n, a.quiet);
    let mut failed = 0;
    for (i, item) in items.iter().enumerate() {
        let cfg = run_config(item, &solver, plan.max_memory, threads);
        progress.start_sample(&item.name);
        let tag = format!("[{}/{n}] {}", i + 1, item.name);
        let result_path = a.out.join(format!("{}.json", item.name));
        match run_one(item, &cfg, &result_path, &mut progress) {
            Ok((row, Outcome::Solved { seconds, line })) => {
                rows[i] = row;
                progress.finish_sample(&format!("{tag}: {line}"), false, Some(seconds));
            }
            Ok((row, Outcome::Skipped)) => {
                rows[i] = row;
                progress.finish_sample(&format!("{tag}: skipped (unchanged)"), false, None);
            }
            Err(e) => {
                failed += 1;
                let msg = e
                    .to_string()
                    .split_whitespace()
                    .collect::<Vec<_>>()
                    .join(" ");
                // A stale result from an earlier run must not outlive a failure.
                let _ = std::fs::remove_file(&result_path);
                if e.is_no_path() {
                    rows[i] = SummaryRow::no_path(&item.name, &item.spec.path, &msg);
                    progress.finish_sample(&format!("{tag}: no path: {msg}"), true, None);
                } else {
                    rows[i] = SummaryRow::failed(&item.name, &item.spec.path, &msg);
                    progress.finish_sample(&format!("{tag}: failed: {msg}"), true, None);
                }
            }
        }
        write_summary(&a.out, &rows)?;
    }
    drop(progress);
    if !a.quiet {
        super::args::print_out(&render_text(&rows))?;
    }
    Ok(if failed > 0 { exit::PARTIAL } else { exit::OK })
}

fn run_config(
    item: &Planned,
    solver: &SolverSettings,
    max_memory: u64,
    threads: usize,
) -> RunConfig {
    RunConfig {
        axes: item.axes.clone(),
        mode: item.mode,
        solver: solver.clone(),
        max_memory_bytes: max_memory,
        threads,
        flow_snapshot: true,
        vtk: None,
    }
}

/// The results folder is created if it does not exist, inside a folder that does: a mistyped
/// parent would otherwise quietly start a fresh batch that reruns every sample.
fn prepare_out(out: &Path) -> Result<()> {
    if out.is_dir() {
        return Ok(());
    }
    if out.exists() {
        return Err(Error::Output {
            path: out.to_path_buf(),
            msg: "--out: is a file, expected a folder".into(),
        });
    }
    let parent = out
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    if !parent.is_dir() {
        return Err(Error::Output {
            path: out.to_path_buf(),
            msg: format!(
                "--out: the folder {} does not exist (the results folder itself is created)",
                parent.display()
            ),
        });
    }
    std::fs::create_dir(out).map_err(|e| voxperm::volume::output_error(out, e))
}

/// Skips an unchanged sample or runs it and writes its result file.
fn run_one(
    item: &Planned,
    cfg: &RunConfig,
    result_path: &Path,
    progress: &mut BatchProgress,
) -> Result<(SummaryRow, Outcome)> {
    let path = &item.spec.path;
    if !path.exists() {
        return Err(Error::bad_input(path, "no such file or folder"));
    }
    let settings = sample_settings(&item.spec, cfg);
    let key = batch_key(&input_sha256(path)?, &settings);
    if let Some(view) = unchanged_result(result_path, &key) {
        return Ok((SummaryRow::finished(&item.name, &view), Outcome::Skipped));
    }
    let mut result = run_sample(&item.spec, cfg, progress)?;
    result.name = Some(item.name.clone());
    // Keyed by the content actually solved, in case the file changed since the check above.
    result.batch_key = Some(batch_key(&result.report.input.sha256, &settings));
    let text = result.to_json()?;
    result.write(result_path)?;
    // The row comes from the file's own content, through the reader resume and report use.
    let view = ResultView::parse(&text, result_path)?;
    let row = SummaryRow::finished(&item.name, &view);
    let r = &result.report;
    let line = format!(
        "porosity {:.4}, {}; {} steps in {:.1} s",
        r.porosity,
        row.headline(),
        r.steps,
        r.wall_seconds
    );
    Ok((
        row,
        Outcome::Solved {
            seconds: r.wall_seconds,
            line,
        },
    ))
}
