//! The batch summary: one row per sample (finished, failed or not yet run) with the headline
//! figures, written as `summary.csv` and `summary.json` and as a short text table.
//!
//! Column names carry their units: `_mD` millidarcy, `_m2` m², `_voxel2` voxel², `_per_m` 1/m,
//! `_per_voxel` 1/voxel, `_voxels` voxel edges, `_s` seconds, `_m` metres; porosities,
//! tortuosities, Kozeny constants and the anisotropy ratio are dimensionless. Per-axis columns
//! are empty for axes that were not solved; every figure is empty for a failed sample.

use super::result::ResultView;
use crate::geometry::Axis;
use crate::volume::{output_error, write_atomically};
use crate::{Error, Result};
use serde::{Deserialize, Serialize};
use std::fmt::Write as _;
use std::path::Path;

/// Status of a finished sample.
pub const OK: &str = "ok";
/// Status of a sample that failed; `error` says why.
pub const FAILED: &str = "failed";
/// Status of a sample with no percolating path along any requested axis (with several axes, a
/// blocked one beside open ones is k = 0 in an `ok` row); `error` says so.
pub const NO_PATH: &str = "no path";
/// Status of a sample not yet run (the batch was interrupted or is still running).
pub const PENDING: &str = "pending";

/// One sample's line of the summary.
#[derive(Debug, Clone, Default, Serialize, Deserialize)]
pub struct SummaryRow {
    pub name: String,
    pub status: String,
    /// One-line error of a failed sample, else empty.
    pub error: String,
    pub path: String,
    /// Solved axes, e.g. "x" or "xyz".
    pub axes: String,
    pub porosity_total: Option<f64>,
    pub porosity_connected_x: Option<f64>,
    pub porosity_connected_y: Option<f64>,
    pub porosity_connected_z: Option<f64>,
    #[serde(rename = "permeability_x_mD")]
    pub permeability_x_md: Option<f64>,
    #[serde(rename = "permeability_y_mD")]
    pub permeability_y_md: Option<f64>,
    #[serde(rename = "permeability_z_mD")]
    pub permeability_z_md: Option<f64>,
    pub permeability_x_m2: Option<f64>,
    pub permeability_y_m2: Option<f64>,
    pub permeability_z_m2: Option<f64>,
    pub permeability_x_voxel2: Option<f64>,
    pub permeability_y_voxel2: Option<f64>,
    pub permeability_z_voxel2: Option<f64>,
    /// Largest over smallest principal value (tensor) or per-axis k.
    pub anisotropy_ratio: Option<f64>,
    pub tortuosity_x: Option<f64>,
    pub tortuosity_y: Option<f64>,
    pub tortuosity_z: Option<f64>,
    pub specific_surface_per_m: Option<f64>,
    pub specific_surface_per_voxel: Option<f64>,
    /// Hydraulic pore diameter 4φ/S.
    pub pore_diameter_voxels: Option<f64>,
    #[serde(rename = "kozeny_carman_mD")]
    pub kozeny_carman_md: Option<f64>,
    pub kozeny_carman_m2: Option<f64>,
    pub kozeny_carman_voxel2: Option<f64>,
    pub kozeny_constant_implied_x: Option<f64>,
    pub kozeny_constant_implied_y: Option<f64>,
    pub kozeny_constant_implied_z: Option<f64>,
    pub voxel_size_m: Option<f64>,
    pub steps: Option<usize>,
    pub converged: Option<bool>,
    /// Number of warnings in the sample's result file (with the edge-gap warning its recorded
    /// porosities call for, if an older file lacks it: `ResultView::parse`).
    pub warning_count: Option<usize>,
    /// Those warnings, joined by " | ".
    #[serde(default)]
    pub warnings: String,
    pub wall_s: Option<f64>,
    pub batch_key: String,
}

impl SummaryRow {
    /// The row of a finished sample.
    pub fn finished(name: &str, r: &ResultView) -> SummaryRow {
        let per = |f: &dyn Fn(Axis) -> Option<f64>| Axis::ALL.map(f);
        let ax = |a: Axis| r.axis(a);
        let [cx, cy, cz] = per(&|a| ax(a).map(|v| v.connected_porosity));
        let [mx, my, mz] = per(&|a| ax(a).and_then(|v| v.permeability_md));
        let [sx, sy, sz] = per(&|a| ax(a).and_then(|v| v.permeability_m2));
        let [lx, ly, lz] = per(&|a| ax(a).map(|v| v.permeability_lattice));
        let [tx, ty, tz] = per(&|a| ax(a).and_then(|v| v.flow.as_ref()?.tortuosity));
        let [ix, iy, iz] = per(&|a| r.implied_kozeny(a));
        let g = r.geometry.as_ref();
        SummaryRow {
            name: name.to_string(),
            status: OK.into(),
            error: String::new(),
            path: r.input.path.clone(),
            axes: r.axes.iter().map(|a| a.axis.letter()).collect(),
            porosity_total: Some(r.porosity),
            porosity_connected_x: cx,
            porosity_connected_y: cy,
            porosity_connected_z: cz,
            permeability_x_md: mx,
            permeability_y_md: my,
            permeability_z_md: mz,
            permeability_x_m2: sx,
            permeability_y_m2: sy,
            permeability_z_m2: sz,
            permeability_x_voxel2: lx,
            permeability_y_voxel2: ly,
            permeability_z_voxel2: lz,
            anisotropy_ratio: r.anisotropy().map(|(v, _)| v),
            tortuosity_x: tx,
            tortuosity_y: ty,
            tortuosity_z: tz,
            specific_surface_per_m: g.and_then(|g| g.specific_surface_per_m),
            specific_surface_per_voxel: g.map(|g| g.specific_surface_per_voxel),
            pore_diameter_voxels: r.pore_diameter_voxels(),
            kozeny_carman_md: g.and_then(|g| g.kozeny_carman_md),
            kozeny_carman_m2: g.and_then(|g| g.kozeny_carman_m2),
            kozeny_carman_voxel2: g.and_then(|g| g.kozeny_carman_lattice),
            kozeny_constant_implied_x: ix,
            kozeny_constant_implied_y: iy,
            kozeny_constant_implied_z: iz,
            voxel_size_m: r.voxel_size_m,
            steps: Some(r.steps),
            converged: Some(r.converged),
            warning_count: Some(r.warnings.len()),
            warnings: r.warnings.join(" | "),
            wall_s: Some(r.wall_seconds),
            batch_key: r.batch_key.clone().unwrap_or_default(),
        }
    }

    /// The row of a failed sample.
    pub fn failed(name: &str, path: &Path, error: &str) -> SummaryRow {
        SummaryRow {
            name: name.to_string(),
            status: FAILED.into(),
            error: error.to_string(),
            path: path.display().to_string(),
            ..SummaryRow::default()
        }
    }

    /// The row of a sample with no percolating path (`error` says along which axis).
    pub fn no_path(name: &str, path: &Path, error: &str) -> SummaryRow {
        SummaryRow {
            status: NO_PATH.into(),
            ..SummaryRow::failed(name, path, error)
        }
    }

    /// The row of a sample not yet run.
    pub fn pending(name: &str, path: &Path) -> SummaryRow {
        SummaryRow {
            status: PENDING.into(),
            ..SummaryRow::failed(name, path, "")
        }
    }

    /// "k x 1.2345e3 mD, y …" for a finished sample: mD when the voxel size is known, else
    /// voxel²; flags an unconverged solve and counts the warnings.
    pub fn headline(&self) -> String {
        let md = [
            self.permeability_x_md,
            self.permeability_y_md,
            self.permeability_z_md,
        ];
        let lat = [
            self.permeability_x_voxel2,
            self.permeability_y_voxel2,
            self.permeability_z_voxel2,
        ];
        let (vals, unit) = if md.iter().any(Option::is_some) {
            (md, "mD")
        } else {
            (lat, "voxel²")
        };
        let ks: Vec<String> = ['x', 'y', 'z']
            .into_iter()
            .zip(vals)
            .filter_map(|(a, v)| v.map(|v| format!("{a} {v:.4e}")))
            .collect();
        let conv = if self.converged == Some(false) {
            ", NOT converged"
        } else {
            ""
        };
        let warned = self
            .warning_count
            .and_then(warnings_phrase)
            .map_or(String::new(), |w| format!(", {w}"));
        format!("k {} {unit}{conv}{warned}", ks.join(", "))
    }
}

/// "1 warning", "3 warnings"; nothing for none.
pub fn warnings_phrase(n: usize) -> Option<String> {
    match n {
        0 => None,
        1 => Some("1 warning".into()),
        n => Some(format!("{n} warnings")),
    }
}

/// Writes `summary.csv` and `summary.json` into `folder`, each atomically.
pub fn write_summary(folder: &Path, rows: &[SummaryRow]) -> Result<()> {
    let csv_path = folder.join("summary.csv");
    write_atomically(&csv_path, |w| {
        let mut out = csv::Writer::from_writer(w);
        for r in rows {
            out.serialize(r).map_err(|e| output_error(&csv_path, e))?;
        }
        out.flush().map_err(|e| output_error(&csv_path, e))
    })?;
    let json_path = folder.join("summary.json");
    let doc = serde_json::json!({ "version": crate::VERSION, "samples": rows });
    let text = serde_json::to_string_pretty(&doc).map_err(|e| Error::Internal(e.to_string()))?;
    write_atomically(&json_path, |w| {
        use std::io::Write;
        w.write_all(text.as_bytes())
            .map_err(|e| output_error(&json_path, e))
    })
}

/// Reads the rows of a `summary.json`.
pub fn read_summary_json(path: &Path) -> Result<Vec<SummaryRow>> {
    #[derive(Deserialize)]
    struct Doc {
        samples: Vec<SummaryRow>,
    }
    let text = super::result::read_small(path, "voxperm batch summary")?;
    let doc: Doc = serde_json::from_str(&text)
        .map_err(|e| Error::bad_input(path, format!("not a voxperm batch summary: {e}")))?;
    Ok(doc.samples)
}

/// A short table for the terminal: status, porosity and k per sample.
pub fn render_text(rows: &[SummaryRow]) -> String {
    let width = rows
        .iter()
        .map(|r| r.name.chars().count())
        .max()
        .unwrap_or(4);
    let mut s = String::new();
    let _ = writeln!(s, "{:<width$}  status   porosity  permeability", "sample");
    for r in rows {
        let detail = match r.status.as_str() {
            OK => r.headline(),
            _ => r.error.clone(),
        };
        let phi = r.porosity_total.map_or("-".into(), |p| format!("{p:.4}"));
        let _ = writeln!(s, "{:<width$}  {:<7}  {phi:<8}  {detail}", r.name, r.status);
    }
    s
}
