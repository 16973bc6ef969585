//! The human-readable summary `voxperm estimate` prints on stdout.

use super::json::{CAUTION, EstimateReport};
use std::fmt::Write;

/// Formats a number in engineering-friendly scientific notation.
fn sci(v: f64) -> String {
    if v == 0.0 {
        "0".into()
    } else {
        format!("{v:.4e}")
    }
}

/// Four significant figures, switching to scientific notation outside 0.01–99999.
fn sig4(v: f64) -> String {
    let a = v.abs();
    if v == 0.0 {
        "0".into()
    } else if (0.01..1e5).contains(&a) {
        let decimals = (3 - a.log10().floor() as i32).max(0) as usize;
        format!("{v:.decimals$}")
    } else {
        format!("{v:.3e}")
    }
}

/// Renders the summary text.
pub fn render(r: &EstimateReport) -> String {
    let mut s = String::new();
    let inp = &r.input;
    let _ = writeln!(s, "voxperm {} — permeability estimate", r.version);
    let _ = writeln!(
        s,
        "sample      {}  ({}x{}x{} {}, {})",
        inp.path, inp.shape[0], inp.shape[1], inp.shape[2], inp.sample_type, inp.segmentation
    );
    if let Some(raw) = &inp.raw_layout {
        let _ = writeln!(s, "raw layout  {raw}");
    }
    if let Some(c) = &inp.crop {
        let [fx, fy, fz] = inp.file_shape;
        let _ = writeln!(s, "crop        {c} of the file's {fx}x{fy}x{fz} voxels");
    }
    match r.voxel_size_m {
        Some(dx) => {
            let _ = writeln!(s, "voxel size  {} m, {}", sci(dx), inp.voxel_size_source);
        }
        None => {
            let _ = writeln!(
                s,
                "voxel size  unknown: results in voxel² only; give --voxel-size for m² and mD"
            );
        }
    }
    let set = &r.settings;
    let tau = match set.tau_minus {
        Some(tm) if !set.solver.auto_tau => format!("tau {} (tau- {tm:.4})", set.solver.tau),
        _ => {
            let used: Vec<String> = r
                .axes
                .iter()
                .filter(|a| a.percolates)
                .map(|a| format!("{} {:.3}", a.axis, a.tau))
                .collect();
            format!("tau automatic ({})", used.join(", "))
        }
    };
    let _ = writeln!(
        s,
        "solver      D3Q19 {}, {tau}, sides {}, ends {}, tolerance {:.1e}, {}{}",
        set.solver.collision,
        set.sides,
        set.ends,
        set.solver.tolerance,
        if set.solver.warm_start {
            "warm start"
        } else {
            "cold start"
        },
        if set.solver.seal_edge_gaps {
            ", edge gaps sealed"
        } else {
            ""
        }
    );
    let _ = writeln!(s, "porosity    {:.4}", r.porosity);
    if let Some(g) = &r.geometry {
        let _ = writeln!(
            s,
            "surface     {:.4e} 1/voxel ({})",
            g.specific_surface_per_voxel, g.surface_estimator
        );
    }
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "axis  k [voxel²]    k [m²]        k [mD]        connected φ  tortuosity  Re        Ma        steps   converged"
    );
    for a in &r.axes {
        let (tort, re, ma) = match &a.flow {
            Some(f) => (
                format!("{:.4}", f.tortuosity),
                format!("{:.2e}", f.reynolds),
                format!("{:.2e}", f.mach),
            ),
            None => ("-".into(), "-".into(), "-".into()),
        };
        let _ = writeln!(
            s,
            "{:<5} {:<13} {:<13} {:<13} {:<12.4} {:<11} {:<9} {:<9} {:<7} {}",
            a.axis.to_string(),
            sci(a.permeability_lattice),
            a.permeability_m2.map_or("-".into(), sci),
            a.permeability_md.map_or("-".into(), sig4),
            a.connected_porosity,
            tort,
            re,
            ma,
            if a.percolates {
                a.steps.to_string()
            } else {
                "-".into()
            },
            // A blocked axis was not solved: k = 0 is exact, not a converged solve.
            match (a.percolates, a.converged) {
                (false, _) => "no path",
                (true, true) => "yes",
                (true, false) => "NO",
            }
        );
        if let Some(w) = &a.warm_start {
            let _ = writeln!(
                s,
                "      started from the 2x coarsened image: {} steps on {} nodes, {:.2} s",
                w.coarse_steps, w.coarse_nodes, w.coarse_seconds
            );
        }
        if let Some(n) = &a.note {
            let _ = writeln!(s, "      note: {n}");
        }
    }
    if let Some(t) = &r.tensor_analysis {
        let _ = writeln!(s);
        let _ = writeln!(s, "permeability tensor [voxel²] (column j: force along j)");
        for row in &t.tensor {
            let _ = writeln!(
                s,
                "  {:>12} {:>12} {:>12}",
                sci(row[0]),
                sci(row[1]),
                sci(row[2])
            );
        }
        let ratio = if t.anisotropy_ratio.is_finite() {
            format!("{:.3}", t.anisotropy_ratio)
        } else {
            "unbounded (no flow along one principal direction)".to_string()
        };
        let _ = writeln!(
            s,
            "principal values [voxel²] {} {} {}; anisotropy ratio {ratio}; asymmetry {:.1e}",
            sci(t.principal_values[0]),
            sci(t.principal_values[1]),
            sci(t.principal_values[2]),
            t.asymmetry
        );
        if let Some(m2) = r.principal_permeabilities_m2 {
            let md = m2.map(crate::analysis::units::m2_to_md);
            let _ = writeln!(
                s,
                "principal values [m²]     {} {} {}  = {} {} {} mD",
                sci(m2[0]),
                sci(m2[1]),
                sci(m2[2]),
                sig4(md[0]),
                sig4(md[1]),
                sig4(md[2])
            );
        }
        for (v, d) in t.principal_values.iter().zip(&t.principal_directions) {
            let _ = writeln!(
                s,
                "  direction of {}: ({:+.3}, {:+.3}, {:+.3})",
                sci(*v),
                d[0],
                d[1],
                d[2]
            );
        }
    }
    if let Some((g, kc)) = r
        .geometry
        .as_ref()
        .and_then(|g| g.kozeny_carman_lattice.map(|kc| (g, kc)))
    {
        let _ = writeln!(s);
        let phys = g
            .kozeny_carman_md
            .map_or(String::new(), |md| format!(" = {} mD", sig4(md)));
        let _ = writeln!(
            s,
            "Kozeny–Carman (c_K = {}): k = {} voxel²{phys}; implied c_K from the solve: {}",
            g.kozeny_constant_assumed,
            sci(kc),
            match &r.kozeny_constant_implied {
                serde_json::Value::Number(n) => format!("{:.3}", n.as_f64().unwrap_or(f64::NAN)),
                serde_json::Value::Object(m) => m
                    .iter()
                    .map(|(k, v)| format!(
                        "{k} {}",
                        v.as_f64().map_or("-".into(), |x| format!("{x:.3}"))
                    ))
                    .collect::<Vec<_>>()
                    .join(", "),
                _ => "-".into(),
            }
        );
    }
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "{} steps in {:.2} s, {:.1} MLUPS",
        r.steps, r.wall_seconds, r.mlups
    );
    if let Some(m) = &r.memory {
        let mib = |b: u64| b as f64 / (1u64 << 20) as f64;
        let _ = match m.measured_peak_bytes {
            Some(b) => writeln!(
                s,
                "memory      peak {:.1} MiB resident ({:.1} MiB predicted)",
                mib(b),
                mib(m.predicted_peak_bytes)
            ),
            None => writeln!(
                s,
                "memory      {:.1} MiB predicted peak",
                mib(m.predicted_peak_bytes)
            ),
        };
    }
    for w in &r.warnings {
        let _ = writeln!(s, "warning: {w}");
    }
    let _ = writeln!(s, "caution: {CAUTION}");
    s
}
