//! `voxperm check`: runs the built-in reference suite (`analysis::check`) and prints one row
//! per case — reference, source, voxperm's value, error, tolerance, pass/fail — and with
//! `--full` the error at each grid. Exit status 0 when every case passes, 4 when any fails.

use super::args::check_output_path;
use clap::Args;
use serde_json::json;
use std::fmt::Write as _;
use std::path::PathBuf;
use std::time::Instant;
use voxperm::analysis::check::{CheckRow, Level, check_settings, run_all};
use voxperm::error::exit;
use voxperm::volume::write_atomically;
use voxperm::{Error, Result};

/// Options of `voxperm check`.
#[derive(Args, Debug)]
pub struct CheckArgs {
    /// One small grid per case (the default; 5–15 s measured on two cores).
    #[arg(long, conflicts_with = "full")]
    pub quick: bool,
    /// Two or three grids per case, showing how the error falls with resolution (minutes).
    #[arg(long)]
    pub full: bool,
    /// Also write the rows to this JSON file.
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Worker threads (default: all cores).
    #[arg(long)]
    pub threads: Option<usize>,
    /// Print only the table, no progress lines.
    #[arg(long, short)]
    pub quiet: bool,
}

/// Runs the command.
pub fn run(a: CheckArgs) -> Result<i32> {
    let level = if a.full { Level::Full } else { Level::Quick };
    super::args::check_threads(a.threads)?;
    if let Some(p) = &a.json {
        check_output_path(p, "--json")?;
        super::args::check_json_name(p)?;
    }
    let threads = super::args::thread_count(a.threads);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .map_err(|e| Error::Internal(format!("cannot start {threads} worker threads: {e}")))?;
    let max_memory = voxperm::volume::available_memory_bytes() / 10 * 9;

    let started = Instant::now();
    let quiet = a.quiet;
    let rows = pool.install(|| {
        run_all(level, max_memory, |i, n, case| {
            if !quiet {
                super::args::note(format_args!("[{}/{n}] {}", i + 1, case.name));
            }
        })
    });
    let seconds = started.elapsed().as_secs_f64();
    let failed = rows.iter().filter(|r| !r.pass).count();

    if let Some(p) = &a.json {
        let doc = json!({
            "version": voxperm::VERSION,
            "level": level,
            "solver": check_settings(),
            "threads": threads,
            "seconds": seconds,
            "passed": rows.len() - failed,
            "failed": failed,
            "rows": rows,
        });
        write_atomically(p, |w| {
            use std::io::Write;
            let text = serde_json::to_string_pretty(&doc)
                .map_err(|e| Error::Internal(format!("check JSON: {e}")))?;
            w.write_all(text.as_bytes())
                .and_then(|_| w.write_all(b"\n"))
                .map_err(|e| voxperm::volume::output_error(p, e))
        })?;
    }
    super::args::print_out(&format!(
        "{}{} of {} cases pass ({:.0} s on {threads} threads)\n",
        render(&rows, level),
        rows.len() - failed,
        rows.len(),
        seconds
    ))?;
    Ok(if failed == 0 { exit::OK } else { exit::SOLVER })
}

/// Five significant figures.
fn sig5(v: f64) -> String {
    if !v.is_finite() {
        return "-".into();
    }
    let a = v.abs();
    if (1e-3..1e5).contains(&a) {
        let decimals = (4 - a.log10().floor() as i32).max(0) as usize;
        format!("{v:.decimals$}")
    } else {
        format!("{v:.4e}")
    }
}

/// A relative error or tolerance in percent, with enough decimals for small values.
fn pct(v: f64, signed: bool) -> String {
    if !v.is_finite() {
        return "-".into();
    }
    let p = 100.0 * v;
    let decimals = if p.abs() >= 1.0 {
        1
    } else if p.abs() >= 0.01 {
        2
    } else {
        4
    };
    if signed {
        format!("{p:+.decimals$} %")
    } else {
        format!("{p:.decimals$} %")
    }
}

/// The table: one line per case, and with several grids the error at each.
fn render(rows: &[CheckRow], level: Level) -> String {
    let mut s = String::new();
    let width = |f: &dyn Fn(&CheckRow) -> usize, head: &str| {
        rows.iter()
            .map(f)
            .max()
            .unwrap_or(0)
            .max(head.chars().count())
    };
    let name_w = width(&|r| r.case.chars().count(), "case");
    let qty_w = width(&|r| r.quantity.chars().count(), "quantity");
    let src_w = width(&|r| r.source.chars().count(), "source");
    let pad = |t: &str, w: usize| format!("{t}{}", " ".repeat(w.saturating_sub(t.chars().count())));
    let _ = writeln!(
        s,
        "{}  {}  {:<10}  {}  {:<10}  {:<9}  {:<9}  {}",
        pad("case", name_w),
        pad("quantity", qty_w),
        "reference",
        pad("source", src_w),
        "voxperm",
        "error",
        "tolerance",
        if level == Level::Full {
            "result  error by grid (resolution: error), observed order"
        } else {
            "result  grid"
        }
    );
    for r in rows {
        let verdict = if r.pass { "pass" } else { "FAIL" };
        let grids = r
            .grids
            .iter()
            .map(|g| format!("{}: {}", g.resolution, pct(g.error, true)))
            .collect::<Vec<_>>()
            .join(", ");
        let order = r
            .observed_order
            .map_or(String::new(), |p| format!(", p = {p:.2}"));
        let _ = writeln!(
            s,
            "{}  {}  {:<10}  {}  {:<10}  {:<9}  {:<9}  {verdict}    {} {grids}{order}",
            pad(&r.case, name_w),
            pad(r.quantity, qty_w),
            sig5(r.reference),
            pad(&r.source, src_w),
            sig5(r.value),
            pct(r.error, true),
            if r.expected_error == 0.0 {
                format!("±{}", pct(r.tolerance, false))
            } else {
                format!(
                    "{} ± {}",
                    pct(r.expected_error, true),
                    pct(r.tolerance, false)
                )
            },
            r.resolution_unit,
        );
        if let Some(f) = &r.failure {
            let _ = writeln!(s, "    failed: {f}");
        }
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_read_well() {
        assert_eq!(sig5(0.0351442537), "0.035144");
        assert_eq!(sig5(4.09883), "4.0988");
        assert_eq!(sig5(f64::NAN), "-");
        assert_eq!(pct(0.0123, true), "+1.2 %");
        assert_eq!(pct(-0.00123, true), "-0.12 %");
        assert_eq!(pct(1e-4, false), "0.01 %");
        assert_eq!(pct(-1e-6, true), "-0.0001 %");
    }
}
