//! The per-sample result file, as written and as read back.
//!
//! Written: [`SampleResult`] is the [`EstimateReport`] (all its keys at the top level) plus
//! `flow_snapshot` (see [`FlowSnapshot`]) and, for batch entries, `name` and `batch_key`.
//! Read: [`ResultView`] is the subset of keys the summary table and the report need; unknown
//! keys are ignored so older and newer result files both load.

use super::json::EstimateReport;
use super::snapshot::FlowSnapshot;
use crate::geometry::Axis;
use crate::volume::{output_error, write_atomically};
use crate::{Error, Result};
use serde::{Deserialize, Serialize};
use serde_json::Value;
use std::path::Path;

/// Largest result or summary file we read. Real ones are tens of kilobytes (a flow snapshot is
/// at most 128 × 128 levels); the cap keeps a wrong file from being read into memory whole.
pub const MAX_RESULT_BYTES: u64 = 64 << 20;

/// Reads a text file of at most [`MAX_RESULT_BYTES`], checking the size first.
pub fn read_small(path: &Path, what: &str) -> Result<String> {
    let bad = |m: String| Error::bad_input(path, m);
    let len = match std::fs::metadata(path) {
        Ok(m) => m.len(),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            return Err(bad("no such file or folder".into()));
        }
        Err(e) => return Err(bad(crate::volume::one_line(&e.to_string()))),
    };
    if len > MAX_RESULT_BYTES {
        return Err(bad(format!(
            "{len} bytes is far more than any {what} (at most {MAX_RESULT_BYTES})"
        )));
    }
    let bytes = std::fs::read(path).map_err(|e| bad(crate::volume::one_line(&e.to_string())))?;
    String::from_utf8(bytes).map_err(|_| bad(format!("not a {what}: the file is not text")))
}

/// One sample's result as written by `estimate --json` and by `batch`.
#[derive(Debug, Clone, Serialize)]
pub struct SampleResult {
    /// Sample name in a batch (also the file name without `.json`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub name: Option<String>,
    /// Resume key of a batch entry: SHA-256 over the input hash and the settings.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub batch_key: Option<String>,
    #[serde(flatten)]
    pub report: EstimateReport,
    /// Speed histogram and mid-plane map of the first solved axis.
    pub flow_snapshot: Option<FlowSnapshot>,
}

impl SampleResult {
    /// Pretty JSON text.
    pub fn to_json(&self) -> Result<String> {
        serde_json::to_string_pretty(self).map_err(|e| Error::Internal(e.to_string()))
    }

    /// Writes the result to `path` atomically.
    pub fn write(&self, path: &Path) -> Result<()> {
        let text = self.to_json()?;
        write_atomically(path, |w| {
            use std::io::Write;
            w.write_all(text.as_bytes())
                .map_err(|e| output_error(path, e))
        })
    }
}

/// What the input was.
#[derive(Debug, Clone, Deserialize)]
pub struct InputView {
    pub path: String,
    pub sha256: String,
    pub shape: [usize; 3],
    pub segmentation: String,
    pub crop: Option<String>,
    pub voxel_size_source: String,
}

/// The solver settings as recorded.
#[derive(Debug, Clone, Deserialize)]
pub struct SolverView {
    pub collision: String,
    pub tau: f64,
    pub magic: f64,
    pub tolerance: f64,
    pub max_steps: usize,
    pub check_every: usize,
    pub force: Option<f64>,
    /// Peak speed the automatic force aims at, lattice units.
    pub target_speed: Option<f64>,
    /// τ chosen per solve (files before it existed: fixed τ).
    #[serde(default)]
    pub auto_tau: bool,
    /// Started from the coarsened image (files before it existed started from rest).
    #[serde(default)]
    pub warm_start: bool,
    /// Edge gaps treated as walls (`--edge-gaps sealed`; files before it existed: open).
    #[serde(default)]
    pub seal_edge_gaps: bool,
}

/// The run settings as recorded.
#[derive(Debug, Clone, Deserialize)]
pub struct SettingsView {
    pub lattice: String,
    pub solver: SolverView,
    /// `null` with the automatic τ.
    pub tau_minus: Option<f64>,
    pub viscosity_lattice: Option<f64>,
    pub sides: String,
    pub ends: String,
    pub connectivity: String,
}

/// Geometry figures.
#[derive(Debug, Clone, Deserialize)]
pub struct GeometryView {
    pub specific_surface_per_voxel: f64,
    pub specific_surface_per_m: Option<f64>,
    pub surface_estimator: String,
    pub kozeny_carman_lattice: Option<f64>,
    pub kozeny_carman_m2: Option<f64>,
    #[serde(rename = "kozeny_carman_mD")]
    pub kozeny_carman_md: Option<f64>,
    pub kozeny_constant_assumed: f64,
}

/// Darcy figures of one solve.
#[derive(Debug, Clone, Deserialize)]
pub struct FlowView {
    pub tortuosity: Option<f64>,
    pub reynolds: Option<f64>,
    pub mach: Option<f64>,
}

/// One flow axis.
#[derive(Debug, Clone, Deserialize)]
pub struct AxisView {
    pub axis: Axis,
    pub percolates: bool,
    pub connected_porosity: f64,
    /// Absent in result files older than the face-link labelling.
    #[serde(default)]
    pub face_connected_porosity: Option<f64>,
    pub permeability_lattice: f64,
    pub permeability_m2: Option<f64>,
    #[serde(rename = "permeability_mD")]
    pub permeability_md: Option<f64>,
    pub flow: Option<FlowView>,
    pub steps: usize,
    pub converged: bool,
    /// `null` in the file when no convergence check had run yet (infinite residual).
    pub residual: Option<f64>,
    pub body_force: f64,
}

/// Tensor figures.
#[derive(Debug, Clone, Deserialize)]
pub struct TensorView {
    pub principal_values: [f64; 3],
    /// Absent (null) when the smallest principal value is not positive.
    pub anisotropy_ratio: Option<f64>,
}

/// A result file read back.
#[derive(Debug, Clone, Deserialize)]
pub struct ResultView {
    pub name: Option<String>,
    pub batch_key: Option<String>,
    pub version: String,
    pub porosity: f64,
    pub geometry: Option<GeometryView>,
    pub steps: usize,
    pub converged: bool,
    pub wall_seconds: f64,
    pub voxel_size_m: Option<f64>,
    pub input: InputView,
    pub settings: SettingsView,
    pub axes: Vec<AxisView>,
    pub tensor_analysis: Option<TensorView>,
    #[serde(default)]
    pub kozeny_constant_implied: Value,
    #[serde(default)]
    pub warnings: Vec<String>,
    pub flow_snapshot: Option<FlowSnapshot>,
}

impl ResultView {
    /// Parses result JSON text; `path` names the file in errors.
    pub fn parse(text: &str, path: &Path) -> Result<ResultView> {
        let mut view: ResultView = serde_json::from_str(text).map_err(|e| {
            let why = if e.is_syntax() || e.is_eof() {
                format!(
                    "not a voxperm result file: it is not JSON ({e}); give result .json files or a batch's results folder"
                )
            } else {
                format!("not a voxperm result file: {e}")
            };
            Error::bad_input(path, why)
        })?;
        view.add_edge_gap_warnings();
        Ok(view)
    }

    /// Adds the edge-gap warning (`analysis::run::edge_gap_warning`) of any percolating axis
    /// whose recorded porosities call for it and whose warnings lack it: a file written before
    /// the warning covered part of the pore space (same version, so a batch resumes it rather
    /// than solving it again) would otherwise reach the summary and the report unflagged.
    fn add_edge_gap_warnings(&mut self) {
        use crate::analysis::run::{EDGE_GAP_MARK, edge_gap_warning};
        for a in self.axes.iter().filter(|a| a.percolates) {
            let Some(face) = a.face_connected_porosity else {
                continue;
            };
            let prefix = format!("axis {}:", a.axis);
            let given = self
                .warnings
                .iter()
                .any(|w| w.starts_with(&prefix) && w.contains(EDGE_GAP_MARK));
            if !given {
                self.warnings
                    .extend(edge_gap_warning(a.axis, a.connected_porosity, face));
            }
        }
    }

    /// Reads and parses a result file.
    pub fn read(path: &Path) -> Result<ResultView> {
        ResultView::parse(&read_small(path, "voxperm result file")?, path)
    }

    /// The figures of one axis, if it was solved.
    pub fn axis(&self, a: Axis) -> Option<&AxisView> {
        self.axes.iter().find(|v| v.axis == a)
    }

    /// Kozeny constant implied by the simulated k along `a`: the recorded number (one axis) or
    /// the entry of the per-axis object.
    pub fn implied_kozeny(&self, a: Axis) -> Option<f64> {
        match &self.kozeny_constant_implied {
            Value::Number(n) if self.axes.len() == 1 && self.axes[0].axis == a => n.as_f64(),
            Value::Object(m) => m.get(&a.to_string()).and_then(Value::as_f64),
            _ => None,
        }
    }

    /// Hydraulic pore diameter 4φ/S in voxels, with S the recorded (corrected) specific
    /// surface: how many voxels resolve a typical pore (common practice).
    pub fn pore_diameter_voxels(&self) -> Option<f64> {
        let s = self.geometry.as_ref()?.specific_surface_per_voxel;
        (s > 0.0).then(|| 4.0 * self.porosity / s)
    }

    /// Largest over smallest principal permeability with the tensor; otherwise largest over
    /// smallest k of the solved axes (two or more, all flowing). The flag says which.
    pub fn anisotropy(&self) -> Option<(f64, &'static str)> {
        if let Some(r) = self
            .tensor_analysis
            .as_ref()
            .and_then(|t| t.anisotropy_ratio)
        {
            return Some((r, "principal"));
        }
        let ks: Vec<f64> = self.axes.iter().map(|a| a.permeability_lattice).collect();
        let min = ks.iter().copied().fold(f64::INFINITY, f64::min);
        let max = ks.iter().copied().fold(0.0, f64::max);
        (ks.len() >= 2 && min > 0.0).then(|| (max / min, "per axis"))
    }
}
