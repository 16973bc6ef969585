//! The result file of `voxperm estimate`: every figure with its unit and every setting used.
//!
//! The top-level keys `permeability_m2`, `permeability_mD`, `permeability_lattice`, `porosity`,
//! `tortuosity`, `axis`, `steps`, `converged`, `mlups`, `voxel_size_m`, `settings` and `version`
//! are read by other tools and by our own scripts: keep them stable. With one flow axis the
//! per-axis values are numbers; with `--axis all` they are objects keyed by axis. Numbers are SI
//! unless the key says otherwise (`_lattice`: voxel units; `_mD`: millidarcy).

use crate::analysis::units::{lattice_to_m2, m2_to_md};
use crate::analysis::{AxisEstimate, Estimate, TensorAnalysis};
use crate::lbm::{BoundaryMode, SolverSettings};
use serde::Serialize;
use serde_json::{Map, Value, json};

/// Caution printed with every result (README.md, "Cautions").
pub const CAUTION: &str = "Image-based estimate: the result depends on segmentation, image \
resolution and sample size, and does not replace laboratory measurement to the applicable \
standard or licensed professional judgement.";

/// What was read and how it was segmented.
#[derive(Debug, Clone, Serialize)]
pub struct InputRecord {
    pub path: String,
    /// SHA-256 of the input file(s) (for a slice folder: of the sorted slice names and contents).
    pub sha256: String,
    /// Shape of the file as read, `[nx, ny, nz]`.
    pub file_shape: [usize; 3],
    /// Shape analysed (after `--crop`).
    pub shape: [usize; 3],
    /// Sample type of the voxels, e.g. "u8".
    pub sample_type: String,
    pub segmentation: String,
    pub crop: Option<String>,
    /// The raw layout the file was read with (`NXxNYxNZ type endian`), for a raw file.
    pub raw_layout: Option<String>,
    /// Where the voxel size came from, or why there is none.
    pub voxel_size_source: String,
}

/// Settings of the run, recorded in full.
#[derive(Debug, Clone, Serialize)]
pub struct Settings {
    pub lattice: &'static str,
    pub solver: SolverSettings,
    /// From the configured τ; `null` with the automatic τ (each solve's τ is `axes[].tau`).
    pub tau_minus: Option<f64>,
    pub viscosity_lattice: Option<f64>,
    pub boundary: BoundaryMode,
    pub sides: String,
    pub ends: String,
    pub threads: usize,
    pub max_memory_bytes: u64,
    pub connectivity: &'static str,
}

/// Geometry figures computed without solving.
#[derive(Debug, Clone, Serialize)]
pub struct GeometryRecord {
    /// Pore–solid surface per bulk volume, 1/voxel (corrected estimator, see `estimator`).
    pub specific_surface_per_voxel: f64,
    /// The same in 1/m, when the voxel size is known.
    pub specific_surface_per_m: Option<f64>,
    pub surface_estimator: String,
    /// Kozeny–Carman estimate φ³/(c_K S²), voxel², and in m² and mD when the voxel size is known.
    pub kozeny_carman_lattice: Option<f64>,
    pub kozeny_carman_m2: Option<f64>,
    #[serde(rename = "kozeny_carman_mD")]
    pub kozeny_carman_md: Option<f64>,
    pub kozeny_constant_assumed: f64,
}

/// Memory of the run: what `voxperm describe` predicts beforehand against what the process
/// used.
#[derive(Debug, Clone, Serialize)]
pub struct MemoryRecord {
    /// Largest stage of the memory model (reading the file, or building and solving an axis).
    pub predicted_peak_bytes: u64,
    /// Peak resident set (VmHWM), where the system reports it.
    pub measured_peak_bytes: Option<u64>,
    /// "sample": the counter was restarted before this sample was read; "process": it counts
    /// from the start of the program (the system could not restart it).
    pub measured_over: &'static str,
}

/// The whole result of one `estimate` run.
#[derive(Debug, Clone, Serialize)]
pub struct EstimateReport {
    pub version: &'static str,
    pub axis: String,
    pub permeability_lattice: Value,
    pub permeability_m2: Value,
    #[serde(rename = "permeability_mD")]
    pub permeability_md: Value,
    /// Row-major 3×3 tensor in m² (with `--axis all` and a voxel size).
    pub permeability_tensor_m2: Option<[[f64; 3]; 3]>,
    pub permeability_tensor_lattice: Option<[[f64; 3]; 3]>,
    /// Symmetric part, principal values (voxel²) and directions, anisotropy ratio.
    pub tensor_analysis: Option<TensorAnalysis>,
    pub principal_permeabilities_m2: Option<[f64; 3]>,
    pub porosity: f64,
    pub connected_porosity: Value,
    pub tortuosity: Value,
    /// Kozeny constant implied by the simulated k: φ³/(k S²), per axis.
    pub kozeny_constant_implied: Value,
    pub geometry: Option<GeometryRecord>,
    pub steps: usize,
    pub converged: bool,
    pub mlups: f64,
    pub wall_seconds: f64,
    pub voxel_size_m: Option<f64>,
    pub input: InputRecord,
    pub settings: Settings,
    /// Full per-axis results, including the convergence history.
    pub axes: Vec<AxisEstimate>,
    pub warnings: Vec<String>,
    pub units: Value,
    /// Filled in by the caller that measured it (`analysis::run_sample`).
    pub memory: Option<MemoryRecord>,
    pub caution: &'static str,
}

impl EstimateReport {
    /// Assembles the report.
    pub fn new(
        est: &Estimate,
        input: InputRecord,
        settings: Settings,
        geometry: Option<GeometryRecord>,
        voxel_size_m: Option<f64>,
        warnings: Vec<String>,
    ) -> EstimateReport {
        let single = est.axes.len() == 1;
        let per_axis = |f: &dyn Fn(&AxisEstimate) -> Value| -> Value {
            if single {
                f(&est.axes[0])
            } else {
                let mut m = Map::new();
                for a in &est.axes {
                    m.insert(a.axis.to_string(), f(a));
                }
                Value::Object(m)
            }
        };
        let num = |v: Option<f64>| {
            v.filter(|x| x.is_finite())
                .map_or(Value::Null, |x| json!(x))
        };
        let s_v = geometry.as_ref().map(|g| g.specific_surface_per_voxel);
        let implied = |a: &AxisEstimate| {
            let k = a.permeability_lattice;
            match s_v {
                Some(s) if k > 0.0 && s > 0.0 => json!(est.porosity.powi(3) / (k * s * s)),
                _ => Value::Null,
            }
        };
        let tensor_lattice = est.tensor.as_ref().map(|t| t.tensor);
        let to_m2 = |t: [[f64; 3]; 3], dx: f64| t.map(|row| row.map(|k| lattice_to_m2(k, dx)));
        EstimateReport {
            version: crate::VERSION,
            axis: if single {
                est.axes[0].axis.to_string()
            } else {
                "all".into()
            },
            permeability_lattice: per_axis(&|a| json!(a.permeability_lattice)),
            permeability_m2: per_axis(&|a| num(a.permeability_m2)),
            permeability_md: per_axis(&|a| num(a.permeability_md)),
            permeability_tensor_m2: tensor_lattice.zip(voxel_size_m).map(|(t, dx)| to_m2(t, dx)),
            permeability_tensor_lattice: tensor_lattice,
            principal_permeabilities_m2: est
                .tensor
                .as_ref()
                .zip(voxel_size_m)
                .map(|(t, dx)| t.principal_values.map(|k| lattice_to_m2(k, dx))),
            tensor_analysis: est.tensor.clone(),
            porosity: est.porosity,
            connected_porosity: per_axis(&|a| json!(a.connected_porosity)),
            tortuosity: per_axis(&|a| num(a.flow.as_ref().map(|f| f.tortuosity))),
            kozeny_constant_implied: per_axis(&implied),
            geometry,
            steps: est.steps(),
            converged: est.converged(),
            mlups: est.mlups(),
            wall_seconds: est.axes.iter().map(|a| a.wall_seconds).sum(),
            voxel_size_m,
            input,
            settings,
            axes: est.axes.clone(),
            warnings,
            units: json!({
                "permeability_m2": "m^2",
                "permeability_mD": "millidarcy (1 mD = 9.869233e-16 m^2)",
                "permeability_lattice": "voxel^2",
                "porosity": "fraction of bulk volume",
                "tortuosity": "dimensionless, sum |u| / sum u_axis",
                "voxel_size_m": "m",
                "wall_seconds": "s",
                "mlups": "million fluid-node updates per second",
                "body_force": "lattice units (voxel / step^2)",
                "specific_surface_per_voxel": "1/voxel",
                "specific_surface_per_m": "1/m",
            }),
            memory: None,
            caution: CAUTION,
        }
    }

    /// Pretty JSON text.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"))
    }
}

/// Converts a lattice permeability to (m², mD) when the voxel size is known.
pub fn physical(k_lattice: f64, voxel_m: Option<f64>) -> Option<(f64, f64)> {
    voxel_m.map(|dx| {
        let m2 = lattice_to_m2(k_lattice, dx);
        (m2, m2_to_md(m2))
    })
}
