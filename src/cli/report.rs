//! `voxperm report`: a comparison report over result files — a self-contained HTML page and/or
//! Markdown with SVG plots beside it. Reads a batch's results folder (its `summary.json` gives
//! the order and the samples that failed) or result files named one by one.

use super::args::{check_distinct_outputs, check_extension, check_file_output, check_output_path};
use clap::Args;
use std::path::{Path, PathBuf};
use voxperm::report::document::{Entry, build};
use voxperm::report::result::ResultView;
use voxperm::report::summary_table::{FAILED, NO_PATH, PENDING, read_summary_json};
use voxperm::report::{html, markdown};
use voxperm::volume::{natural_cmp, output_error, write_atomically};
use voxperm::{Error, Result};

/// Options of `voxperm report`.
#[derive(Args, Debug)]
pub struct ReportArgs {
    /// Results folders of `voxperm batch`, or result files (`batch` or `estimate --json`).
    #[arg(required = true, value_name = "RESULTS")]
    pub inputs: Vec<PathBuf>,
    /// Write the report as one self-contained HTML page.
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Write the report as Markdown, with its plots as SVG files beside it.
    #[arg(long, value_name = "FILE")]
    pub markdown: Option<PathBuf>,
    /// Title of the report.
    #[arg(long, default_value = "Permeability of the samples")]
    pub title: String,
}

/// Runs the command.
pub fn run(a: ReportArgs) -> Result<i32> {
    if a.out.is_none() && a.markdown.is_none() {
        return Err(Error::Usage(
            "say where to write the report: --out report.html and/or --markdown report.md".into(),
        ));
    }
    if let Some(p) = &a.out {
        check_output_path(p, "--out")?;
    }
    if let Some(p) = &a.markdown {
        // Its plots are written as files beside it.
        check_file_output(p, "--markdown")?;
    }
    if let (Some(o), Some(m)) = (&a.out, &a.markdown) {
        check_distinct_outputs(&[(o, "--out"), (m, "--markdown")])?;
    }
    if let Some(p) = &a.out {
        check_extension(
            p,
            "--out",
            "HTML",
            &["md", "markdown", "txt", "json", "csv"],
            "a .html name (Markdown goes to --markdown)",
        )?;
    }
    if let Some(p) = &a.markdown {
        check_extension(
            p,
            "--markdown",
            "Markdown",
            &["html", "htm", "json", "csv"],
            "a .md name (HTML goes to --out)",
        )?;
    }
    let (entries, failed) = collect(&a.inputs)?;
    if entries.is_empty() && failed.is_empty() {
        // Bad input (exit 3), as for a batch over a folder without samples.
        let names: Vec<String> = a.inputs.iter().map(|p| p.display().to_string()).collect();
        return Err(Error::bad_input(
            names.join(", "),
            "no result files (*.json written by voxperm estimate or batch) to report",
        ));
    }
    let doc = build(&a.title, &entries, failed)?;
    let markdown = a.markdown.as_ref().map(|p| {
        // The plots go beside the file the Markdown lands in (a link's target, if it is one),
        // where its relative image links point.
        let lands = voxperm::volume::resolved_destination(p).unwrap_or_else(|| p.clone());
        let stem = lands
            .file_stem()
            .map_or("report".into(), |s| s.to_string_lossy().into_owned());
        let (text, files) = markdown::render(&doc, &stem);
        let folder = lands.parent().unwrap_or(Path::new(""));
        let plots: Vec<(PathBuf, String)> = files
            .into_iter()
            .map(|(name, svg)| (folder.join(name), svg))
            .collect();
        (p, text, plots)
    });
    if let Some((_, _, plots)) = &markdown {
        check_plot_names(a.out.as_deref(), &a.inputs, plots)?;
    }
    if let Some(p) = &a.out {
        write_text(p, &html::render(&doc))?;
    }
    if let Some((p, text, plots)) = &markdown {
        for (path, svg) in plots {
            write_text(path, svg)?;
        }
        write_text(p, text)?;
    }
    Ok(voxperm::error::exit::OK)
}

/// Refuses plot files of the Markdown report that would replace the HTML report or one of the
/// inputs (`--out report-permeability.svg`, say). Earlier plots of the same name are replaced:
/// they are this report's own, from a previous run.
fn check_plot_names(
    out: Option<&Path>,
    inputs: &[PathBuf],
    plots: &[(PathBuf, String)],
) -> Result<()> {
    let others = out
        .map(|o| (o, "--out"))
        .into_iter()
        .chain(inputs.iter().map(|i| (i.as_path(), "an input")));
    for (other, flag) in others {
        for (plot, _) in plots {
            check_distinct_outputs(&[(plot, "a plot of --markdown"), (other, flag)])?;
        }
    }
    Ok(())
}

fn write_text(path: &Path, text: &str) -> Result<()> {
    write_atomically(path, |w| {
        use std::io::Write;
        w.write_all(text.as_bytes())
            .map_err(|e| output_error(path, e))
    })
}

/// Finished samples, and (name, reason) of samples without a result.
type Collected = (Vec<Entry>, Vec<(String, String)>);

/// The results to report, in batch order where a summary gives one, and the samples that have
/// none (failed or not yet run) with the reason.
fn collect(inputs: &[PathBuf]) -> Result<Collected> {
    let mut entries: Vec<Entry> = Vec::new();
    let mut failed = Vec::new();
    for input in inputs {
        if input.is_dir() {
            let (mut e, mut f) = from_folder(input)?;
            entries.append(&mut e);
            failed.append(&mut f);
        } else {
            entries.push(entry(input, ResultView::read(input)?));
        }
    }
    let mut seen = std::collections::HashSet::new();
    if let Some(e) = entries.iter().find(|e| !seen.insert(e.name.clone())) {
        return Err(Error::Usage(format!(
            "two results are named '{}'; report them separately or rename one",
            e.name
        )));
    }
    Ok((entries, failed))
}

fn entry(path: &Path, result: ResultView) -> Entry {
    let name = result.name.clone().unwrap_or_else(|| {
        path.file_stem()
            .map_or("sample".into(), |s| s.to_string_lossy().into_owned())
    });
    Entry { name, result }
}

fn from_folder(folder: &Path) -> Result<Collected> {
    let io = |e: std::io::Error| Error::bad_input(folder, e.to_string());
    let mut files = Vec::new();
    for item in std::fs::read_dir(folder).map_err(io)? {
        let p = item.map_err(io)?.path();
        let name = p
            .file_name()
            .unwrap_or_default()
            .to_string_lossy()
            .into_owned();
        let is_json = p
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("json"));
        if is_json && !name.starts_with('.') && name != "summary.json" && p.is_file() {
            files.push(p);
        }
    }
    let key = |p: &PathBuf| {
        p.file_name()
            .unwrap_or_default()
            .to_string_lossy()
            .into_owned()
    };
    files.sort_by(|a, b| natural_cmp(&key(a), &key(b)));
    let mut entries = Vec::new();
    for f in files {
        match ResultView::read(&f) {
            Ok(r) => entries.push(entry(&f, r)),
            // Other JSON files may share the folder; they are not ours to report.
            Err(e) => super::args::warn(format_args!("skipped {e}")),
        }
    }
    let summary = folder.join("summary.json");
    if !summary.exists() {
        return Ok((entries, Vec::new()));
    }
    let rows = read_summary_json(&summary)?;
    // A result the summary does not list is left from an earlier batch into this folder (a
    // sample since removed or renamed): not part of this batch's report.
    entries.retain(|e| {
        let listed = rows.iter().any(|r| r.name == e.name);
        if !listed {
            super::args::warn(format_args!(
                "skipped the result '{}' in {}: {} does not list it (left from an earlier batch?)",
                e.name,
                folder.display(),
                summary.display()
            ));
        }
        listed
    });
    let order = |name: &str| {
        rows.iter()
            .position(|r| r.name == name)
            .unwrap_or(usize::MAX)
    };
    entries.sort_by_key(|e| order(&e.name));
    let failed = rows
        .iter()
        .filter(|r| !entries.iter().any(|e| e.name == r.name))
        .filter_map(|r| match r.status.as_str() {
            FAILED | NO_PATH => Some((r.name.clone(), r.error.clone())),
            PENDING => Some((
                r.name.clone(),
                "not run yet (the batch was interrupted or is still running)".into(),
            )),
            _ => None,
        })
        .collect();
    Ok((entries, failed))
}
