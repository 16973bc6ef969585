//! Progress of a batch: on a terminal two lines — samples done of the total with an ETA, and
//! the current sample's solve (axis, step, residual); one plain line per finished sample on
//! stderr (above the bars on a terminal, alone in logs); nothing at all under `--quiet`.

use indicatif::{MultiProgress, ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;
use std::time::Duration;
use voxperm::lbm::Progress;

/// Bars of a running batch.
pub struct BatchProgress {
    bars: Option<(MultiProgress, ProgressBar, ProgressBar)>,
    quiet: bool,
    total: usize,
    done: usize,
    failed: usize,
    solved: usize,
    solve_seconds: f64,
    /// "flow along x (N fluid nodes)" of the running solve.
    solve: String,
}

fn style(template: &str) -> ProgressStyle {
    ProgressStyle::with_template(template)
        .unwrap_or_else(|_| ProgressStyle::default_bar())
        .progress_chars("=> ")
}

impl BatchProgress {
    /// Draws only when not `quiet` and stderr is a terminal.
    pub fn new(total: usize, quiet: bool) -> BatchProgress {
        let bars = (!quiet && std::io::stderr().is_terminal()).then(|| {
            let multi = MultiProgress::with_draw_target(ProgressDrawTarget::stderr());
            let overall = multi.add(ProgressBar::new(total as u64));
            overall.set_style(style("samples {pos}/{len} [{bar:30}] {msg}"));
            let current = multi.add(ProgressBar::new_spinner());
            current.set_style(style("  {prefix}: {msg}"));
            current.enable_steady_tick(Duration::from_millis(500));
            (multi, overall, current)
        });
        BatchProgress {
            bars,
            quiet,
            total,
            done: 0,
            failed: 0,
            solved: 0,
            solve_seconds: 0.0,
            solve: String::new(),
        }
    }

    /// A new sample starts.
    pub fn start_sample(&mut self, name: &str) {
        if let Some((_, _, current)) = &self.bars {
            current.set_prefix(name.to_string());
            current.set_message("reading");
        }
    }

    /// A sample ended: `line` goes to the log, `solve_seconds` (when it was solved rather than
    /// skipped) feeds the ETA.
    pub fn finish_sample(&mut self, line: &str, failed: bool, solve_seconds: Option<f64>) {
        self.done += 1;
        self.failed += usize::from(failed);
        if let Some(s) = solve_seconds {
            self.solved += 1;
            self.solve_seconds += s;
        }
        if self.quiet {
            return;
        }
        let Some((multi, overall, _)) = &self.bars else {
            super::args::note(line);
            return;
        };
        let _ = multi.println(line);
        overall.set_position(self.done as u64);
        let mut msg = String::new();
        if self.failed > 0 {
            msg.push_str(&format!("{} failed or no path · ", self.failed));
        }
        if self.solved > 0 {
            let left = (self.total - self.done) as f64 * self.solve_seconds / self.solved as f64;
            msg.push_str(&format!("ETA {}", indicatif::HumanDuration(secs(left))));
        }
        overall.set_message(msg);
    }
}

fn secs(s: f64) -> Duration {
    Duration::from_secs_f64(if s.is_finite() { s.max(0.0) } else { 0.0 })
}

impl Progress for BatchProgress {
    fn on_start(&mut self, axis: &str, fluid_nodes: usize) {
        self.solve = format!("flow along {axis} ({fluid_nodes} fluid nodes)");
        if let Some((_, _, current)) = &self.bars {
            current.set_message(self.solve.clone());
        }
    }

    fn on_check(&mut self, step: usize, max_steps: usize, residual: f64, tolerance: f64) {
        if let Some((_, _, current)) = &self.bars {
            current.set_message(format!(
                "{} · step {step}/{max_steps} · residual {residual:.2e} (tolerance {tolerance:.0e})",
                self.solve
            ));
        }
    }
}

impl Drop for BatchProgress {
    fn drop(&mut self) {
        if let Some((multi, overall, current)) = self.bars.take() {
            current.finish_and_clear();
            overall.finish_and_clear();
            let _ = multi.clear();
        }
    }
}
