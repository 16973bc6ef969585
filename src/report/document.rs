//! The content of a comparison report, independent of its format: the comparison table, the
//! plots (as SVG text), the methods text built from the settings actually recorded, and the
//! cautions. `html.rs` and `markdown.rs` only lay this out.

use super::json::CAUTION;
use super::plots::{self, PermeabilityPorosity};
use super::result::ResultView;
use crate::analysis::kozeny::kozeny_carman_spheres;
use crate::analysis::units::m2_to_md;
use crate::geometry::Axis;
use crate::{Error, Result};
use std::collections::BTreeMap;

/// A finished sample to report.
pub struct Entry {
    pub name: String,
    pub result: ResultView,
}

/// A plot: a short file-name-safe id, a caption and the SVG text.
pub struct Plot {
    pub id: String,
    pub caption: String,
    pub svg: String,
}

/// A table whose cells may hold several lines (e.g. one per flow axis).
pub struct Table {
    pub headers: Vec<String>,
    pub rows: Vec<Vec<Vec<String>>>,
    /// Whether the columns after the first hold numbers (aligned right).
    pub numeric: bool,
}

/// Per-sample material: flow plots and the run's warnings.
pub struct SampleSection {
    pub name: String,
    pub plots: Vec<Plot>,
    pub warnings: Vec<String>,
}

/// Everything the report says.
pub struct Document {
    pub title: String,
    pub comparison: Table,
    pub table_notes: Vec<String>,
    /// (sample, one-line error) of samples that did not finish.
    pub failed: Vec<(String, String)>,
    pub plots: Vec<Plot>,
    pub samples: Vec<SampleSection>,
    pub inputs: Table,
    /// Paragraphs, one per group of samples sharing the same settings.
    pub methods: Vec<String>,
    pub cautions: Vec<String>,
}

/// Four significant figures, scientific outside 0.01–99 999.
pub fn num(v: f64) -> String {
    let a = v.abs();
    if v == 0.0 {
        "0".into()
    } else if !v.is_finite() {
        "–".into()
    } else if (0.01..1e5).contains(&a) {
        let decimals = (3 - a.log10().floor() as i32).max(0) as usize;
        format!("{v:.decimals$}")
    } else {
        format!("{v:.3e}")
    }
}

fn opt(v: Option<f64>) -> String {
    v.map_or("–".into(), num)
}

/// "x 1.234" lines for each solved axis.
fn per_axis(r: &ResultView, f: impl Fn(Axis) -> Option<f64>) -> Vec<String> {
    r.axes
        .iter()
        .map(|a| format!("{} {}", a.axis, opt(f(a.axis))))
        .collect()
}

/// Builds the report; `failed` lists samples that have no result.
pub fn build(title: &str, entries: &[Entry], failed: Vec<(String, String)>) -> Result<Document> {
    if entries.is_empty() && failed.is_empty() {
        return Err(Error::Usage("no results to report".into()));
    }
    let (plots, mut table_notes) = comparison_plots(entries)?;
    table_notes.insert(0, "Permeability k and its Kozeny–Carman estimate in voxel² (the lattice unit: voxel edge = 1) for every sample, and in mD (1 mD = 9.869233e-16 m²; k also in m²) where the voxel size is known. Pore diameter: hydraulic diameter 4φ/S in voxels, with S the corrected specific surface; for flat walls along the grid the true figure is 2/3 of it, and the cautions go by that lower reading: under about ten voxels expect a resolution error (common practice). Converged: per flow axis, whether its solve became steady, with its time steps (per solve, as in Methods; steps of a warm start on the coarsened image are not counted). A sample with warnings says how many beside its name; they are listed in its section.".into());
    Ok(Document {
        title: title.to_string(),
        comparison: comparison_table(entries),
        table_notes,
        failed,
        plots,
        samples: entries.iter().map(sample_section).collect::<Result<_>>()?,
        inputs: inputs_table(entries),
        methods: methods(entries),
        cautions: cautions(entries),
    })
}

fn comparison_table(entries: &[Entry]) -> Table {
    let headers = [
        "sample",
        "porosity total (–)",
        "porosity connected (–)",
        "k (mD)",
        "k (m²)",
        "k (voxel²)",
        "anisotropy (–)",
        "tortuosity (–)",
        "specific surface S (1/m)",
        "Kozeny–Carman k (mD)",
        "Kozeny–Carman k (voxel²)",
        "implied Kozeny constant (–)",
        "pore diameter (voxels)",
        "converged (steps per axis)",
    ];
    let rows = entries
        .iter()
        .map(|e| {
            let r = &e.result;
            let g = r.geometry.as_ref();
            let ax = |a: Axis| r.axis(a);
            let name = match super::summary_table::warnings_phrase(r.warnings.len()) {
                Some(w) => format!("{} ({w})", e.name),
                None => e.name.clone(),
            };
            vec![
                vec![name],
                vec![num(r.porosity)],
                per_axis(r, |a| ax(a).map(|v| v.connected_porosity)),
                per_axis(r, |a| ax(a).and_then(|v| v.permeability_md)),
                per_axis(r, |a| ax(a).and_then(|v| v.permeability_m2)),
                per_axis(r, |a| ax(a).map(|v| v.permeability_lattice)),
                vec![
                    r.anisotropy()
                        .map_or("–".into(), |(v, how)| format!("{} ({how})", num(v))),
                ],
                per_axis(r, |a| ax(a).and_then(|v| v.flow.as_ref()?.tortuosity)),
                vec![opt(g.and_then(|g| g.specific_surface_per_m))],
                vec![opt(g.and_then(|g| g.kozeny_carman_md))],
                vec![opt(g.and_then(|g| g.kozeny_carman_lattice))],
                per_axis(r, |a| r.implied_kozeny(a)),
                vec![opt(r.pore_diameter_voxels())],
                convergence(r),
            ]
        })
        .collect();
    Table {
        headers: headers.map(String::from).to_vec(),
        rows,
        numeric: true,
    }
}

/// "x yes (400)" for each solved axis: whether its solve converged and its steps, the same
/// per-solve count as the methods' "Steps per solve". An axis without a percolating path had
/// no solve.
fn convergence(r: &ResultView) -> Vec<String> {
    r.axes
        .iter()
        .map(|a| match (a.percolates, a.converged) {
            (false, _) => format!("{} no solve (no flow path)", a.axis),
            (true, c) => format!("{} {} ({})", a.axis, if c { "yes" } else { "NO" }, a.steps),
        })
        .collect()
}

/// k in the plots' unit: mD when any sample has a voxel size (samples without one are left out
/// of the permeability plots: voxel² of different images are different lengths squared), else
/// voxel².
fn k_unit(entries: &[Entry]) -> (&'static str, bool) {
    if entries.iter().any(|e| e.result.voxel_size_m.is_some()) {
        ("mD", true)
    } else {
        ("voxel²", false)
    }
}

fn comparison_plots(entries: &[Entry]) -> Result<(Vec<Plot>, Vec<String>)> {
    let mut notes = Vec::new();
    let (unit, physical) = k_unit(entries);
    let unscaled = names_where(entries, |e| physical && e.result.voxel_size_m.is_none());
    push_naming(
        &mut notes,
        "Left out of the permeability plots for want of a voxel size (their k in voxel² is in the table; a voxel² of one image is not that of another)",
        &unscaled,
    );
    let k_of = |e: &Entry, a: Axis| -> Option<f64> {
        let v = e.result.axis(a)?;
        if physical {
            v.permeability_md
        } else {
            Some(v.permeability_lattice)
        }
    };
    let mut pp = PermeabilityPorosity {
        simulated: [vec![], vec![], vec![]],
        kozeny_carman: vec![],
        curves: vec![],
        unit: unit.into(),
        samples: vec![],
    };
    let mut tort = [vec![], vec![], vec![]];
    let mut tort_samples = Vec::new();
    let mut bars = Vec::new();
    let mut bar_names = Vec::new();
    let mut grains = Vec::new();
    for e in entries {
        let r = &e.result;
        let phi = r.porosity;
        let (mut ks, mut ts) = (Vec::new(), Vec::new());
        for a in Axis::ALL {
            if let Some(k) = k_of(e, a).filter(|k| *k > 0.0) {
                pp.simulated[a.index()].push((phi, k));
                ks.push((phi, k));
            }
            if let Some(t) = r.axis(a).and_then(|v| v.flow.as_ref()?.tortuosity) {
                tort[a.index()].push((phi, t));
                ts.push((phi, t));
            }
        }
        // A sample left out of the k plot has no place in its key either.
        if !unscaled.contains(&e.name.as_str()) {
            pp.samples.push(plots::Named {
                name: e.name.clone(),
                points: ks,
            });
        }
        tort_samples.push(plots::Named {
            name: e.name.clone(),
            points: ts,
        });
        if !unscaled.contains(&e.name.as_str()) {
            bars.push(Axis::ALL.map(|a| k_of(e, a)));
            bar_names.push(e.name.clone());
        }
        let g = r.geometry.as_ref();
        let kc = if physical {
            g.and_then(|g| g.kozeny_carman_md)
        } else {
            g.and_then(|g| g.kozeny_carman_lattice)
        };
        if let Some(kc) = kc.filter(|k| *k > 0.0) {
            pp.kozeny_carman.push((phi, kc));
        }
        // Grain diameter of a sphere bed with the same φ and S: d = 6(1 − φ)/S (geometry).
        if let Some(s) = g.map(|g| g.specific_surface_per_voxel).filter(|s| *s > 0.0) {
            let dx = if physical { r.voxel_size_m } else { Some(1.0) };
            grains.extend(dx.map(|dx| 6.0 * (1.0 - phi) / s * dx));
        }
    }
    let mut plots = Vec::new();
    if !grains.is_empty() {
        grains.sort_by(f64::total_cmp);
        let d = grains[grains.len() / 2];
        for f in [0.5, 1.0, 2.0] {
            let dd = d * f;
            let curve = (1..100)
                .filter_map(|i| {
                    let phi = i as f64 / 100.0;
                    let k = kozeny_carman_spheres(phi, dd)?;
                    let k = if physical { m2_to_md(k) } else { k };
                    Some((phi, k))
                })
                .collect();
            let size = match physical {
                true if dd < 1e-3 => format!("{} µm", num(dd * 1e6)),
                true => format!("{} mm", num(dd * 1e3)),
                false => format!("{} voxels", num(dd)),
            };
            pp.curves
                .push((format!("Carman sphere pack, d = {size}"), curve));
        }
        notes.push("Curves: Carman (1937) sphere-pack form k = d²φ³/(180(1−φ)²) for half, once and twice the median equivalent grain diameter d = 6(1−φ)/S of the samples.".into());
    }
    if pp.simulated.iter().any(|v| !v.is_empty()) {
        plots.push(Plot {
            id: "permeability-porosity".into(),
            caption: format!("Simulated permeability ({unit}, log scale) against porosity, with Kozeny–Carman estimates."),
            svg: plots::permeability_porosity(&pp)?,
        });
        plots.push(Plot {
            id: "permeability-bars".into(),
            caption: format!("Permeability per sample and flow axis ({unit}, log scale); blocked axes (k = 0) have no bar."),
            svg: plots::permeability_bars(&bar_names, &bars, unit)?,
        });
    }
    if tort.iter().any(|v| !v.is_empty()) {
        plots.push(Plot {
            id: "tortuosity-porosity".into(),
            caption: "Hydraulic tortuosity (Koponen, Kataja & Timonen 1996) against porosity."
                .into(),
            svg: plots::tortuosity_porosity(&tort, &tort_samples)?,
        });
    }
    Ok((plots, notes))
}

/// A name fit for a file name: letters, digits, '-' and '_'.
pub fn file_id(name: &str) -> String {
    name.chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '-'
            }
        })
        .collect()
}

/// Where a speed map's plane lies, in the units of the map's axes: "x = 24 voxels (150 µm)"
/// for a title (the distance of the plane's first face from the sample's, as the map's axes
/// count from 0), and ", spanning 150–156.3 µm" for the caption; voxels only without a voxel
/// size.
fn plane_position(axis: Axis, index: usize, voxel_m: Option<f64>) -> (String, String) {
    let at = format!("{axis} = {index} voxels");
    match voxel_m {
        Some(dx) => {
            let um = |i: usize| plots::significant(i as f64 * dx * 1e6, 4);
            (
                format!("{at} ({} µm)", um(index)),
                format!(", spanning {}–{} µm", um(index), um(index + 1)),
            )
        }
        None => (at, String::new()),
    }
}

fn sample_section(e: &Entry) -> Result<SampleSection> {
    let mut plots = Vec::new();
    if let Some(s) = &e.result.flow_snapshot {
        let id = file_id(&e.name);
        plots.push(Plot {
            id: format!("{id}-speed-histogram"),
            caption: format!(
                "{}: distribution of local speeds over {} fluid nodes, flow along {}.",
                e.name, s.fluid_nodes, s.axis
            ),
            svg: plots::speed_histogram(
                &s.histogram,
                &format!("{}: speeds, flow along {}", e.name, s.axis),
            )?,
        });
        let m = &s.mid_plane;
        let (title, span) = plane_position(s.axis, m.plane_index, e.result.voxel_size_m);
        let length = e.result.input.shape[s.axis.index()];
        plots.push(Plot {
            id: format!("{id}-speed-map"),
            caption: format!(
                "{}: speed in the cross-section {} = voxel {} of {length} (counted from 0 at the sample's first face{span}; mid-length), flow along {}; grey: solid; blocks of {}×{} voxels.",
                e.name, s.axis, m.plane_index, s.axis, m.block, m.block
            ),
            svg: plots::speed_map(
                m,
                e.result.voxel_size_m,
                &format!("{}: speed at {title}", e.name),
            )?,
        });
    }
    Ok(SampleSection {
        name: e.name.clone(),
        plots,
        warnings: e.result.warnings.clone(),
    })
}

fn inputs_table(entries: &[Entry]) -> Table {
    let headers = [
        "sample",
        "file",
        "shape (voxels)",
        "segmentation",
        "crop",
        "voxel size",
    ];
    let rows = entries
        .iter()
        .map(|e| {
            let i = &e.result.input;
            let [nx, ny, nz] = i.shape;
            [
                e.name.clone(),
                i.path.clone(),
                format!("{nx}×{ny}×{nz}"),
                i.segmentation.clone(),
                i.crop.clone().unwrap_or_else(|| "none".into()),
                i.voxel_size_source.clone(),
            ]
            .map(|c| vec![c])
            .to_vec()
        })
        .collect();
    Table {
        headers: headers.map(String::from).to_vec(),
        rows,
        numeric: false,
    }
}

/// One paragraph per group of samples with equal settings. With several groups the sentences
/// every group shares come once, in a paragraph of their own, and each group's paragraph keeps
/// only the sentences in which it differs.
fn methods(entries: &[Entry]) -> Vec<String> {
    let mut groups: BTreeMap<Vec<String>, Vec<&Entry>> = BTreeMap::new();
    for e in entries {
        groups
            .entry(method_sentences(&e.result))
            .or_default()
            .push(e);
    }
    let shared: Vec<String> = match groups.keys().next() {
        Some(first) if groups.len() > 1 => first
            .iter()
            .filter(|t| groups.keys().all(|g| g.contains(t)))
            .cloned()
            .collect(),
        _ => Vec::new(),
    };
    let mut out = vec!["Permeability was computed by simulating steady, slow (Stokes) flow through the pore space of each segmented image and applying Darcy's law, k = ν⟨u⟩/g, with ⟨u⟩ the superficial velocity (mean over the whole sample, solid counted as zero), ν the lattice viscosity and g the body force. Hydraulic tortuosity is Σ|u|/Σu_axis over the fluid nodes (Koponen, Kataja & Timonen 1996). Kozeny–Carman estimates use k = φ³/(c_K S²) with c_K = 5 (Carman 1937); the implied Kozeny constant is φ³/(k S²) with the simulated k.".to_string()];
    if !shared.is_empty() {
        out.push(format!("All samples: {}", shared.join(" ")));
    }
    for (sentences, members) in groups {
        let text = sentences
            .iter()
            .filter(|t| !shared.contains(t))
            .cloned()
            .collect::<Vec<_>>()
            .join(" ");
        let names: Vec<&str> = members.iter().map(|e| e.name.as_str()).collect();
        let steps: Vec<usize> = members
            .iter()
            .flat_map(|e| e.result.axes.iter().map(|a| a.steps))
            .filter(|&s| s > 0)
            .collect();
        let forces: Vec<f64> = members
            .iter()
            .flat_map(|e| e.result.axes.iter().map(|a| a.body_force))
            .filter(|&g| g > 0.0)
            .collect();
        let range = |lo: String, hi: String| {
            if lo == hi {
                lo
            } else {
                format!("{lo} to {hi}")
            }
        };
        let used_steps = match (steps.iter().min(), steps.iter().max()) {
            (Some(a), Some(b)) => format!(
                " Time steps per solve (one flow axis{}): {}.",
                if members[0].result.settings.solver.warm_start {
                    ", on the full grid after the coarsened start"
                } else {
                    ""
                },
                range(a.to_string(), b.to_string())
            ),
            _ => String::new(),
        };
        let used_force = if forces.is_empty() {
            String::new()
        } else {
            let lo = forces.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = forces.iter().copied().fold(0.0, f64::max);
            format!(
                " Body force applied: {} lattice units.",
                range(format!("{lo:.3e}"), format!("{hi:.3e}"))
            )
        };
        out.push(format!(
            "{}: {text}{used_steps}{used_force}",
            names.join(", ")
        ));
    }
    out
}

/// The settings of one result in words, sentence by sentence; equal sentences mean equal
/// settings.
fn method_sentences(r: &ResultView) -> Vec<String> {
    let s = &r.settings;
    let v = &s.solver;
    let collision = match (v.collision.as_str(), s.tau_minus) {
        ("trt", Some(tm)) if !v.auto_tau => format!(
            "two-relaxation-time (TRT) collision, τ⁺ = {}, τ⁻ = {tm:.4}, magic parameter Λ = (τ⁺ − ½)(τ⁻ − ½) = {}",
            v.tau, v.magic
        ),
        // Per-sample τ values would make equal settings read differently; they are in the
        // result files (`axes[].tau`).
        ("trt", _) => format!(
            "two-relaxation-time (TRT) collision with τ⁺ chosen per solve from the pore size and grid length (automatic; each result file records the τ⁺ used), τ⁻ from the magic parameter Λ = (τ⁺ − ½)(τ⁻ − ½) = {}",
            v.magic
        ),
        _ => format!("single-relaxation-time (BGK) collision, τ = {}", v.tau),
    };
    let start = if v.warm_start {
        "Each solve started from the flow on the image coarsened 2× along every axis."
    } else {
        "Each solve started from rest."
    };
    let viscosity = s
        .viscosity_lattice
        .map_or("per solve, from τ⁺".to_string(), |nu| format!("{nu:.4}"));
    let force = match v.force {
        Some(g) => format!("a body force g = {g:e} (lattice units) given by the user"),
        None => format!(
            "a body force chosen from the pore size so that the flow stays slow (target peak speed {} lattice units, aiming at a Reynolds number below {}; the value reached is in each result)",
            v.target_speed.map_or("–".into(), |u| format!("{u:e}")),
            crate::lbm::solver::TARGET_REYNOLDS
        ),
    };
    let axes: Vec<String> = r.axes.iter().map(|a| a.axis.to_string()).collect();
    vec![
        format!(
            "Lattice {} (19 velocities) with {collision}, lattice viscosity ν = {viscosity}, driven by {force}, half-way bounce-back at pore walls{}.",
            s.lattice,
            if v.seal_edge_gaps {
                " and across edge gaps (links between pore voxels that touch only along an edge, their two shared face neighbours solid, treated as walls; pore space labelled along face links)"
            } else {
                ""
            }
        ),
        format!("Sample faces: sides {}, ends {}.", s.sides, s.ends),
        format!("Flow along {}.", axes.join(", ")),
        start.to_string(),
        format!(
            "Steady when the relative change of the mean velocity per step stayed below {:e} over two check windows of {} steps, at most {} steps.",
            v.tolerance, v.check_every, v.max_steps
        ),
        format!("Connectivity: {}.", s.connectivity),
    ]
}

fn cautions(entries: &[Entry]) -> Vec<String> {
    let mut out = vec![
        CAUTION.to_string(),
        "The image is a small piece of the material: permeability of heterogeneous materials changes with the size and location of the sample, and a representative volume must be shown, not assumed.".into(),
    ];
    push_naming(
        &mut out,
        "Not converged (values not final)",
        &names_where(entries, |e| !e.result.converged),
    );
    let coarse: Vec<String> = entries
        .iter()
        .filter_map(|e| {
            e.result
                .pore_diameter_voxels()
                .filter(|&d| crate::analysis::run::under_resolved(d))
                .map(|d| {
                    let flat = d * crate::geometry::surface::ISOTROPIC_FACE_FACTOR;
                    format!("{} ({} to {} voxels)", e.name, num(flat), num(d))
                })
        })
        .collect();
    push_naming(
        &mut out,
        "Pores resolved by fewer than about ten voxels (common practice for a few-% error; 4φ/S read for flat and for curved walls), so expect resolution errors",
        &coarse,
    );
    let edge_gaps = names_where(entries, |e| {
        e.result
            .warnings
            .iter()
            .any(|w| w.contains(crate::analysis::run::EDGE_GAP_MARK))
    });
    push_naming(
        &mut out,
        "Part or all of the flow crosses gaps where two solid voxels meet only along an edge (one-voxel walls), which the image does not resolve; k may be far too high",
        &edge_gaps,
    );
    push_naming(
        &mut out,
        "Periodic ends assume the structure repeats along the flow axis, which holds for generated unit cells but not for scans",
        &names_where(entries, |e| e.result.settings.ends == "periodic"),
    );
    out
}

/// Names of the samples for which `keep` holds, in report order.
fn names_where(entries: &[Entry], keep: impl Fn(&Entry) -> bool) -> Vec<&str> {
    entries
        .iter()
        .filter(|e| keep(e))
        .map(|e| e.name.as_str())
        .collect()
}

/// Adds "`sentence`: a, b." to `out` when `names` is not empty.
fn push_naming(out: &mut Vec<String>, sentence: &str, names: &[impl AsRef<str>]) {
    if !names.is_empty() {
        let list: Vec<&str> = names.iter().map(AsRef::as_ref).collect();
        out.push(format!("{sentence}: {}.", list.join(", ")));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    /// A result of two solved axes (x: 400 steps, y: 300), with or without a voxel size.
    fn result(voxel_m: Option<f64>) -> ResultView {
        let md = |k: f64| voxel_m.map(|dx| m2_to_md(k * dx * dx));
        let m2 = |k: f64| voxel_m.map(|dx| k * dx * dx);
        let axis = |a: &str, k: f64, steps: usize| {
            json!({
                "axis": a, "percolates": true, "connected_porosity": 0.4,
                "permeability_lattice": k, "permeability_m2": m2(k), "permeability_mD": md(k),
                "flow": {"tortuosity": 1.2, "reynolds": 1e-3, "mach": 1e-3},
                "steps": steps, "converged": true, "residual": 1e-7, "body_force": 1e-5
            })
        };
        let v = json!({
            "version": "0", "porosity": 0.4, "steps": 700, "converged": true,
            "wall_seconds": 1.0, "voxel_size_m": voxel_m,
            "geometry": {
                "specific_surface_per_voxel": 0.2, "specific_surface_per_m": voxel_m.map(|dx| 0.2 / dx),
                "surface_estimator": "test", "kozeny_carman_lattice": 0.32,
                "kozeny_carman_m2": m2(0.32), "kozeny_carman_mD": md(0.32),
                "kozeny_constant_assumed": 5.0
            },
            "input": {
                "path": "a.tif", "sha256": "0", "shape": [32, 32, 32],
                "segmentation": "pore labels 0", "crop": null, "voxel_size_source": "test"
            },
            "settings": {
                "lattice": "D3Q19",
                "solver": {
                    "collision": "trt", "tau": 1.0, "magic": 0.1875, "tolerance": 1e-5,
                    "max_steps": 1000, "check_every": 100, "force": null, "target_speed": 2e-3,
                    "warm_start": true
                },
                "tau_minus": 0.875, "viscosity_lattice": 0.1667, "sides": "sealed",
                "ends": "mirror", "connectivity": "test"
            },
            "axes": [axis("x", 0.2, 400), axis("y", 0.1, 300)],
            "tensor_analysis": null, "flow_snapshot": null
        });
        serde_json::from_value(v).expect("a result view")
    }

    fn entry(name: &str, voxel_m: Option<f64>) -> Entry {
        Entry {
            name: name.into(),
            result: result(voxel_m),
        }
    }

    fn column<'a>(t: &'a Table, header_start: &str) -> Vec<&'a Vec<String>> {
        let i = t
            .headers
            .iter()
            .position(|h| h.starts_with(header_start))
            .unwrap_or_else(|| panic!("no column '{header_start}' in {:?}", t.headers));
        t.rows.iter().map(|r| &r[i]).collect()
    }

    /// The table and the methods count steps alike: per solve (one axis), not summed.
    #[test]
    fn steps_are_per_axis_in_table_and_methods() {
        let d = build("t", &[entry("a", Some(2e-6))], vec![]).unwrap();
        assert_eq!(
            column(&d.comparison, "converged (steps per axis)"),
            [&vec!["x yes (400)".to_string(), "y yes (300)".to_string()]]
        );
        let m = d.methods.join(" ");
        assert!(m.contains("Time steps per solve (one flow axis"), "{m}");
        assert!(m.contains("): 300 to 400."), "{m}");
        assert!(!m.contains("700"), "{m}");
    }

    /// Groups that differ in one setting share the rest of their methods text, said once.
    #[test]
    fn methods_say_shared_settings_once() {
        let one = build("t", &[entry("a", None)], vec![]).unwrap();
        assert_eq!(one.methods.len(), 2, "{:?}", one.methods);
        assert!(
            one.methods[1].starts_with("a: Lattice"),
            "{:?}",
            one.methods
        );
        let mut b = entry("b", None);
        b.result.settings.ends = "periodic".into();
        let two = build("t", &[entry("a", None), b], vec![]).unwrap();
        let m = &two.methods;
        assert_eq!(m.len(), 4, "{m:?}");
        assert!(m[1].starts_with("All samples: Lattice"), "{m:?}");
        assert!(!m[1].contains("Sample faces"), "{m:?}");
        for (p, ends) in [(&m[2], "ends mirror"), (&m[3], "ends periodic")] {
            assert!(p.contains(ends) && !p.contains("Lattice"), "{m:?}");
            assert!(p.contains("Time steps per solve"), "{m:?}");
        }
    }

    /// A speed map's plane is placed in voxels and, with a voxel size, in the µm of its axes.
    #[test]
    fn plane_position_in_voxels_and_micrometres() {
        assert_eq!(
            plane_position(Axis::X, 24, Some(6.25e-6)),
            (
                "x = 24 voxels (150 µm)".into(),
                ", spanning 150–156.2 µm".into()
            )
        );
        assert_eq!(
            plane_position(Axis::Z, 8, None),
            ("z = 8 voxels".into(), String::new())
        );
    }

    /// With some voxel sizes known the plots are in mD, and a sample without one is left out of
    /// the permeability plots and named in a note (its voxel² is not the others'); with none
    /// known they are in voxel² for all.
    #[test]
    fn plots_never_mix_voxel2_of_different_images() {
        let d = build("t", &[entry("a", None), entry("b", Some(2e-6))], vec![]).unwrap();
        let bars = d
            .plots
            .iter()
            .find(|p| p.id == "permeability-bars")
            .unwrap();
        assert!(
            bars.svg.contains("\nb\n") && !bars.svg.contains("\na\n"),
            "{}",
            bars.svg
        );
        assert!(bars.caption.contains("(mD"), "{}", bars.caption);
        let note = d
            .table_notes
            .iter()
            .find(|n| n.starts_with("Left out"))
            .unwrap();
        assert!(note.ends_with(": a."), "{note}");
        // A name too long to stand beside the points would number every sample in a key under
        // the plot: the sample left out is not in the k plot's key (nor numbered in it).
        let long = "a sample with a long name";
        let d = build("t", &[entry(long, None), entry("b", Some(2e-6))], vec![]).unwrap();
        let svg = |id: &str| &d.plots.iter().find(|p| p.id == id).unwrap().svg;
        assert!(!svg("permeability-porosity").contains(long));
        assert!(svg("permeability-porosity").contains("\nb\n"));
        let d = build("t", &[entry("a", None), entry("c", None)], vec![]).unwrap();
        let bars = d
            .plots
            .iter()
            .find(|p| p.id == "permeability-bars")
            .unwrap();
        assert!(bars.caption.contains("(voxel²"), "{}", bars.caption);
        assert!(!d.table_notes.iter().any(|n| n.starts_with("Left out")));
    }

    /// Without a voxel size the Kozeny–Carman estimate is still given, in voxel² like k.
    #[test]
    fn kozeny_carman_in_the_units_of_k() {
        let d = build("t", &[entry("a", None), entry("b", Some(2e-6))], vec![]).unwrap();
        let kc = ["0.3200".to_string()];
        assert_eq!(
            column(&d.comparison, "Kozeny–Carman k (voxel²)"),
            [&kc, &kc]
        );
        assert_eq!(column(&d.comparison, "k (voxel²)")[0][0], "x 0.2000");
        let md = num(m2_to_md(0.32 * 4e-12));
        assert_eq!(
            column(&d.comparison, "Kozeny–Carman k (mD)"),
            [&vec!["–".to_string()], &vec![md]]
        );
    }
}
