//! Terminal progress for solves: an indicatif bar with step, residual and ETA on a terminal;
//! nothing under `--quiet` or when stderr is not a terminal (logs and batch jobs stay clean).

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;
use voxperm::lbm::Progress;

/// Progress display for the solver.
pub struct Bar {
    bar: Option<ProgressBar>,
    enabled: bool,
}

impl Bar {
    /// A bar that draws only when `quiet` is off and stderr is a terminal.
    pub fn new(quiet: bool) -> Bar {
        Bar {
            bar: None,
            enabled: !quiet && std::io::stderr().is_terminal(),
        }
    }
}

impl Progress for Bar {
    fn on_start(&mut self, axis: &str, fluid_nodes: usize) {
        if !self.enabled {
            return;
        }
        let bar = ProgressBar::with_draw_target(Some(1000), ProgressDrawTarget::stderr());
        bar.set_style(
            ProgressStyle::with_template(
                "{prefix} [{bar:30}] {pos:>4}/1000 of the way to tolerance · {msg} · ETA {eta}",
            )
            .unwrap_or_else(|_| ProgressStyle::default_bar())
            .progress_chars("=> "),
        );
        bar.set_prefix(format!("flow along {axis} ({fluid_nodes} fluid nodes)"));
        self.bar = Some(bar);
    }

    fn on_check(&mut self, step: usize, max_steps: usize, residual: f64, tolerance: f64) {
        let Some(bar) = &self.bar else { return };
        // Progress in log-residual space: from 1e-1 down to the tolerance. The step count
        // is shown too, since the step cap may stop the run first.
        let fraction = if residual.is_finite() && residual > 0.0 {
            let top = 1e-1f64.ln();
            ((top - residual.ln()) / (top - tolerance.ln())).clamp(0.0, 1.0)
        } else {
            0.0
        };
        bar.set_position((fraction * 1000.0) as u64);
        bar.set_message(format!("step {step}/{max_steps} · residual {residual:.2e}"));
    }

    fn on_finish(&mut self) {
        if let Some(bar) = self.bar.take() {
            bar.finish_and_clear();
        }
    }
}

impl Drop for Bar {
    fn drop(&mut self) {
        if let Some(bar) = self.bar.take() {
            bar.finish_and_clear();
        }
    }
}
