//! The built-in reference suite behind `voxperm check`: each case builds a structure with the
//! generator library, solves periodic flow through it and compares a dimensionless permeability
//! with a published or analytic value from [`super::references`].
//!
//! A case runs at one grid (`quick`) or at two or three grids (`full`); every grid has its own
//! tolerance, set from what that resolution achieved when the suite was calibrated plus a margin
//! (README.md, "How accurate is it?"), and the case passes only if every grid is within its
//! tolerance. With several grids the row also shows the error at each and the observed order of
//! convergence between the two finest.
//!
//! Geometric quantities are taken from the voxels, not from the nominal parameters: the solid
//! fraction from the voxel count, sphere and cylinder radii from the voxel volume or area, the
//! tube radius from its open area. Reference values that depend on the solid fraction are
//! evaluated at the voxel value: formulas directly, tables by log-log interpolation between
//! their entries (`references::loglog_interpolate`), at most [`MAX_FRACTION_MISMATCH`] away.

use super::estimate::{EstimateConfig, estimate_axis};
use super::kozeny::kozeny_carman_spheres;
use super::references::{self as refs, Source};
use crate::geometry::Axis;
use crate::geometry::synth::{
    CylinderArrayParams, CylinderPacking, DuctParams, Info, Lattice, PackMethod, PackParams,
    RadiusDist, SlitStackParams, SphereArrayParams, Structure, Synthetic, TubeParams, generate,
};
use crate::lbm::{BoundaryMode, Silent, SolverSettings};
use crate::{Error, Result};
use serde::Serialize;
use std::f64::consts::PI;
use std::time::Instant;

/// How thorough a run is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Level {
    /// One small grid per case (about a minute on two cores).
    Quick,
    /// Two or three grids per case, showing the error fall with resolution.
    Full,
}

/// Which published value a sphere array is compared with.
#[derive(Debug, Clone, Copy)]
enum SphereRef {
    /// Zick & Homsy's Table 2, interpolated to the voxel solid fraction.
    Table,
    /// The dilute series at the voxel solid fraction.
    Dilute,
    /// The simple-cubic series with extra terms at the voxel solid fraction.
    ScSeries,
}

/// Which published value a cylinder array across the flow is compared with.
#[derive(Debug, Clone, Copy)]
enum CylinderRef {
    /// Sangani & Acrivos' Table 1, interpolated to the voxel fraction.
    Table,
    /// Drummond & Tahir's fit at the voxel fraction.
    Fit,
}

#[derive(Debug, Clone)]
enum Geometry {
    /// Periodic slit stack; resolution = fluid nodes across.
    Slit,
    /// Square duct; resolution = fluid nodes across.
    Duct,
    /// Circular tube; resolution = radius in voxels.
    Tube,
    /// Cubic sphere array; resolution = unit-cell edge.
    Spheres {
        lattice: Lattice,
        c: f64,
        reference: SphereRef,
    },
    /// Cylinders, flow across; resolution = lattice spacing.
    CylindersAcross {
        packing: CylinderPacking,
        phi: f64,
        reference: CylinderRef,
    },
    /// Cylinders, flow along the axes; resolution = lattice spacing.
    CylindersAlong { packing: CylinderPacking, phi: f64 },
    /// Random hard-sphere pack in a box of 8 radii; resolution = sphere radius.
    Pack { porosity: f64, seed: u64 },
}

/// One reference case.
#[derive(Debug, Clone)]
pub struct Case {
    /// What is checked, e.g. "simple cubic spheres, c = 0.125".
    pub name: String,
    /// The compared quantity, e.g. "k/a²".
    pub quantity: &'static str,
    pub source: Source,
    /// What the resolution counts, e.g. "cell edge".
    pub resolution_unit: &'static str,
    /// Why the tolerance is what it is, or what limits the comparison.
    pub note: &'static str,
    geometry: Geometry,
    /// (resolution, tolerance) of the quick run.
    pub quick: Vec<(usize, f64)>,
    /// (resolution, tolerance) of the full run, coarse to fine.
    pub full: Vec<(usize, f64)>,
}

impl Case {
    /// (resolution, tolerance) pairs used at `level`.
    pub fn grids(&self, level: Level) -> &[(usize, f64)] {
        match level {
            Level::Quick => &self.quick,
            Level::Full => &self.full,
        }
    }
}

/// The result at one resolution.
#[derive(Debug, Clone, Serialize)]
pub struct GridPoint {
    pub resolution: usize,
    /// voxperm's value of the compared quantity.
    pub value: f64,
    /// The reference at this grid (it can depend on the voxel solid fraction).
    pub reference: f64,
    /// Relative error value/reference − 1.
    pub error: f64,
    /// The error the comparison carries by construction at this grid (0 except the slit's
    /// +1/(2N²)); the grid passes when |error − expected_error| ≤ tolerance.
    pub expected_error: f64,
    pub tolerance: f64,
    pub pass: bool,
    pub steps: usize,
    pub seconds: f64,
    /// Voxel geometry the comparison used, e.g. "c = 0.12498, a = 9.843".
    pub geometry: String,
}

/// One row of the check table.
#[derive(Debug, Clone, Serialize)]
pub struct CheckRow {
    pub case: String,
    pub quantity: &'static str,
    /// Short source, with "(from memory)" where that is the truth.
    pub source: String,
    pub citation: &'static str,
    pub from_memory: bool,
    pub resolution_unit: &'static str,
    /// Reference, value, error and tolerance at the finest grid run.
    pub reference: f64,
    pub value: f64,
    pub error: f64,
    /// See [`GridPoint::expected_error`].
    pub expected_error: f64,
    pub tolerance: f64,
    /// True when every grid is within its tolerance.
    pub pass: bool,
    /// Every grid, coarse to fine.
    pub grids: Vec<GridPoint>,
    /// Observed order of convergence between the two finest grids, when the error is in its
    /// asymptotic range (see `observed_order`).
    pub observed_order: Option<f64>,
    pub note: &'static str,
    /// Set when a solve failed; the row then fails.
    pub failure: Option<String>,
}

/// Solver settings of every check solve: the defaults (TRT, τ = 1, Λ = 3/16, automatic force)
/// with a steady-state tolerance tight enough that the remaining transient (about the
/// tolerance times the viscous relaxation time, a few thousand steps on these grids) stays
/// below 10⁻⁴, under the smallest tolerance checked.
pub fn check_settings() -> SolverSettings {
    SolverSettings {
        tolerance: 1e-8,
        max_steps: 400_000,
        ..SolverSettings::default()
    }
}

/// Largest relative distance between a voxel solid fraction and the nominal one at which a
/// tabulated reference is still interpolated to the voxel value: further out the interpolation
/// between table entries, not the solver, would dominate the comparison.
pub const MAX_FRACTION_MISMATCH: f64 = 0.02;

fn check_mismatch(nominal: f64, voxel: f64) -> Result<()> {
    if (voxel / nominal - 1.0).abs() <= MAX_FRACTION_MISMATCH {
        Ok(())
    } else {
        Err(Error::Internal(format!(
            "check: the voxel solid fraction {voxel:.5} is more than {} % from the tabulated \
             {nominal}; choose another grid",
            100.0 * MAX_FRACTION_MISMATCH
        )))
    }
}

/// Measured values at one grid.
struct Measured {
    value: f64,
    reference: f64,
    /// The error the comparison is known to carry at this grid (0 but for the slit, whose
    /// nodal flux exceeds h²/12 by exactly 1/(2N²)): the check is on the departure from it.
    expected_error: f64,
    geometry: String,
    steps: usize,
}

fn array_info(s: &Synthetic) -> Result<&crate::geometry::synth::ArrayInfo> {
    match &s.info {
        Info::Array(a) => Ok(a),
        _ => Err(Error::Internal("check: expected an array structure".into())),
    }
}

/// Solves periodic flow along `axis` and returns k (voxel²) and the step count.
fn solve(s: &Synthetic, axis: Axis, max_memory: u64) -> Result<(f64, usize)> {
    let cfg = EstimateConfig {
        axes: vec![axis],
        mode: BoundaryMode::PERIODIC,
        solver: check_settings(),
        max_memory_bytes: max_memory,
        voxel_size_m: None,
    };
    let (est, _) = estimate_axis(&s.mask, axis, &cfg, &mut Silent, false)?;
    if !est.converged {
        return Err(Error::Diverged {
            step: est.steps,
            reason: format!(
                "not steady after {} steps (residual {:.1e})",
                est.steps, est.residual
            ),
        });
    }
    Ok((est.permeability_lattice, est.steps))
}

impl Geometry {
    fn measure(&self, n: usize, max_memory: u64) -> Result<Measured> {
        let nf = n as f64;
        match *self {
            Geometry::Slit => {
                let s = generate(
                    &Structure::SlitStack(SlitStackParams {
                        shape: [1, 1, n + 1],
                        normal: Axis::Z,
                        gap: n,
                        period: n + 1,
                    }),
                    0,
                )?;
                let (k, steps) = solve(&s, Axis::X, max_memory)?;
                let open = k / s.porosity;
                Ok(Measured {
                    value: open / (nf * nf),
                    reference: refs::PLANE_POISEUILLE_PER_OPEN_AREA,
                    geometry: format!("N = {n}"),
                    steps,
                    expected_error: 1.0 / (2.0 * nf * nf),
                })
            }
            Geometry::Duct => {
                let s = generate(
                    &Structure::SquareDuct(DuctParams {
                        axis: Axis::X,
                        side: n,
                        length: 1,
                        wall: 1,
                    }),
                    0,
                )?;
                let (k, steps) = solve(&s, Axis::X, max_memory)?;
                Ok(Measured {
                    value: k / s.porosity / (nf * nf),
                    reference: refs::SQUARE_DUCT_PER_OPEN_AREA,
                    geometry: format!("s = {n}"),
                    steps,
                    expected_error: 0.0,
                })
            }
            Geometry::Tube => {
                let s = generate(
                    &Structure::Tube(TubeParams {
                        axis: Axis::X,
                        radius: nf,
                        length: 1,
                        wall: 1,
                    }),
                    0,
                )?;
                let (k, steps) = solve(&s, Axis::X, max_memory)?;
                // Radius of the circle with the tube's open area: the staircase keeps the area
                // but not the perimeter, and the comparison isolates that shape effect.
                let area = s.mask.pore_count() as f64;
                let r_eq = (area / PI).sqrt();
                Ok(Measured {
                    value: k / s.porosity / (r_eq * r_eq),
                    reference: refs::TUBE_PER_OPEN_AREA,
                    geometry: format!("R = {n}, R_area = {r_eq:.3}"),
                    steps,
                    expected_error: 0.0,
                })
            }
            Geometry::Spheres {
                lattice,
                c,
                reference,
            } => {
                let s = generate(
                    &Structure::SphereArray(SphereArrayParams {
                        lattice,
                        solid_fraction: c,
                        cell: n,
                        cells: [1, 1, 1],
                        match_voxels: true,
                    }),
                    0,
                )?;
                let info = array_info(&s)?;
                let (cv, a) = (info.solid_fraction, info.equivalent_radius);
                let drag = match reference {
                    SphereRef::Table => {
                        check_mismatch(c, cv)?;
                        refs::zick_homsy_drag(cv).ok_or_else(|| {
                            Error::Internal(format!(
                                "check: c = {cv} is outside Zick & Homsy's table"
                            ))
                        })?
                    }
                    SphereRef::Dilute => refs::dilute_drag(lattice, cv),
                    SphereRef::ScSeries => refs::sc_series_drag(cv),
                };
                let (k, steps) = solve(&s, Axis::X, max_memory)?;
                Ok(Measured {
                    value: k / (a * a),
                    reference: refs::sphere_array_k_over_a2(cv, drag),
                    geometry: format!("c = {cv:.5}, a = {a:.3}"),
                    steps,
                    expected_error: 0.0,
                })
            }
            Geometry::CylindersAcross {
                packing,
                phi,
                reference,
            } => {
                let (s, pv, a) = cylinders(packing, phi, n)?;
                let want = match reference {
                    CylinderRef::Table => {
                        check_mismatch(phi, pv)?;
                        let drag = refs::sangani_acrivos_drag(pv).ok_or_else(|| {
                            Error::Internal(format!(
                                "check: φ = {pv} is outside Sangani & Acrivos' table"
                            ))
                        })?;
                        refs::cylinder_k_over_a2(pv, drag)
                    }
                    CylinderRef::Fit => refs::drummond_tahir_across(packing, pv),
                };
                let (k, steps) = solve(&s, Axis::X, max_memory)?;
                Ok(Measured {
                    value: k / (a * a),
                    reference: want,
                    geometry: format!("φ = {pv:.5}, a = {a:.3}"),
                    steps,
                    expected_error: 0.0,
                })
            }
            Geometry::CylindersAlong { packing, phi } => {
                let (s, pv, a) = cylinders(packing, phi, n)?;
                let (k, steps) = solve(&s, Axis::Z, max_memory)?;
                Ok(Measured {
                    value: k / (a * a),
                    reference: refs::drummond_tahir_along(packing, pv),
                    geometry: format!("φ = {pv:.5}, a = {a:.3}"),
                    steps,
                    expected_error: 0.0,
                })
            }
            Geometry::Pack { porosity, seed } => {
                let s = generate(
                    &Structure::SpherePack(PackParams {
                        shape: [8 * n; 3],
                        porosity,
                        radius: RadiusDist::Mono { radius: nf },
                        method: PackMethod::Relaxation,
                    }),
                    seed,
                )?;
                let grains = match &s.info {
                    Info::Grains(g) => g.grains.len(),
                    _ => return Err(Error::Internal("check: expected a sphere pack".into())),
                };
                let solid = (s.mask.len() - s.mask.pore_count()) as f64;
                let d = 2.0 * (3.0 * solid / (4.0 * PI * grains as f64)).cbrt();
                let phi = s.porosity;
                let want = kozeny_carman_spheres(phi, 1.0).ok_or_else(|| {
                    Error::Internal(format!("check: no Kozeny–Carman value at φ = {phi}"))
                })?;
                let (k, steps) = solve(&s, Axis::X, max_memory)?;
                Ok(Measured {
                    value: k / (d * d),
                    reference: want,
                    geometry: format!("φ = {phi:.4}, d = {d:.3}, {grains} spheres"),
                    steps,
                    expected_error: 0.0,
                })
            }
        }
    }
}

/// A one-voxel-long cylinder array along z (the flow is two-dimensional across it and uniform
/// along it); returns the structure, the voxel area fraction and the equivalent radius.
fn cylinders(packing: CylinderPacking, phi: f64, cell: usize) -> Result<(Synthetic, f64, f64)> {
    let s = generate(
        &Structure::CylinderArray(CylinderArrayParams {
            packing,
            solid_fraction: phi,
            cell,
            axis: Axis::Z,
            cells: [1, 1],
            length: Some(1),
            match_voxels: true,
        }),
        0,
    )?;
    let (pv, a) = {
        let info = array_info(&s)?;
        (info.solid_fraction, info.equivalent_radius)
    };
    Ok((s, pv, a))
}

/// Runs one case at the grids of `level`. A failed solve is recorded in the row, which then
/// fails; it does not stop the suite.
pub fn run_case(case: &Case, level: Level, max_memory: u64) -> CheckRow {
    let mut grids = Vec::new();
    let mut failure = None;
    for &(n, tolerance) in case.grids(level) {
        let started = Instant::now();
        match case.geometry.measure(n, max_memory) {
            Ok(m) => {
                let error = m.value / m.reference - 1.0;
                grids.push(GridPoint {
                    resolution: n,
                    value: m.value,
                    reference: m.reference,
                    error,
                    expected_error: m.expected_error,
                    tolerance,
                    pass: (error - m.expected_error).abs() <= tolerance,
                    steps: m.steps,
                    seconds: started.elapsed().as_secs_f64(),
                    geometry: m.geometry,
                });
            }
            Err(e) => {
                failure = Some(format!("{} {n}: {e}", case.resolution_unit));
                break;
            }
        }
    }
    let last = grids.last();
    CheckRow {
        case: case.name.clone(),
        quantity: case.quantity,
        source: case.source.label(),
        citation: case.source.citation,
        from_memory: case.source.from_memory,
        resolution_unit: case.resolution_unit,
        reference: last.map_or(f64::NAN, |g| g.reference),
        value: last.map_or(f64::NAN, |g| g.value),
        error: last.map_or(f64::NAN, |g| g.error),
        expected_error: last.map_or(0.0, |g| g.expected_error),
        tolerance: last.map_or(f64::NAN, |g| g.tolerance),
        pass: failure.is_none() && !grids.is_empty() && grids.iter().all(|g| g.pass),
        observed_order: observed_order(&grids),
        grids,
        note: case.note,
        failure,
    }
}

/// p = ln(|e₁|/|e₂|) / ln(n₂/n₁) between the two finest grids, only when the error is in its
/// asymptotic range: the errors at all grids share a sign, shrink steadily, stay above the
/// noise (10⁻⁴), and with three or more grids the orders of successive pairs agree within
/// 30 %. Staircase walls make the error jump between grids; then p would mean nothing.
fn observed_order(grids: &[GridPoint]) -> Option<f64> {
    let order = |a: &GridPoint, b: &GridPoint| {
        (a.error.abs() / b.error.abs()).ln() / (b.resolution as f64 / a.resolution as f64).ln()
    };
    let steady = grids
        .windows(2)
        .all(|w| w[0].error.signum() == w[1].error.signum() && w[1].error.abs() < w[0].error.abs());
    let [.., g1, g2] = grids else { return None };
    if !steady || g2.error.abs() < 1e-4 {
        return None;
    }
    let p = order(g1, g2);
    if let [.., g0, _, _] = grids {
        let p0 = order(g0, g1);
        if (p0 - p).abs() > 0.3 * p0.max(p) {
            return None;
        }
    }
    Some(p)
}

/// Runs every case; `on_case(i, total, case)` is called before each (for progress display).
pub fn run_all(
    level: Level,
    max_memory: u64,
    mut on_case: impl FnMut(usize, usize, &Case),
) -> Vec<CheckRow> {
    let all = cases();
    all.iter()
        .enumerate()
        .map(|(i, c)| {
            on_case(i, all.len(), c);
            run_case(c, level, max_memory)
        })
        .collect()
}

/// (resolution, tolerance) pairs: one for `--quick`, several (coarse to fine) for `--full`.
struct Grids {
    quick: (usize, f64),
    full: &'static [(usize, f64)],
}

fn case(
    name: String,
    quantity: &'static str,
    source: Source,
    resolution_unit: &'static str,
    note: &'static str,
    geometry: Geometry,
    grids: Grids,
) -> Case {
    Case {
        name,
        quantity,
        source,
        resolution_unit,
        note,
        geometry,
        quick: vec![grids.quick],
        full: grids.full.to_vec(),
    }
}

/// The suite. Each tolerance is the largest error seen over neighbouring grid sizes (about
/// ±30 % around the one used) when the suite was calibrated, plus a margin; see each `note`
/// for what limits the comparison.
pub fn cases() -> Vec<Case> {
    let mut v = vec![
        case(
            "slit (plane Poiseuille)".into(),
            "k/N² per open area",
            refs::PLANE_POISEUILLE,
            "nodes across",
            "TRT with Λ = 3/16 gives the exact parabola at the nodes, but their mean (the \
             flux) exceeds h²/12 by 1/(2N²), the midpoint rule's error on a parabola: +3.1 % \
             at N = 4, +0.78 % at 8, +0.20 % at 16; the check is on the departure from that, \
             within 10⁻⁴ (a wrong Λ, 1/6, departs by 2.6 × 10⁻³)",
            Geometry::Slit,
            Grids {
                quick: (8, 1e-4),
                full: &[(4, 1e-4), (8, 1e-4), (16, 1e-4)],
            },
        ),
        case(
            "square duct".into(),
            "k/s² per open area",
            refs::RECTANGULAR_DUCT_SERIES,
            "nodes across",
            "the corners limit the accuracy; the error falls as 1/s²",
            Geometry::Duct,
            Grids {
                quick: (16, 0.005),
                full: &[(8, 0.02), (16, 0.005), (32, 0.0015)],
            },
        ),
        case(
            "circular tube".into(),
            "k/R² per open area",
            refs::HAGEN_POISEUILLE,
            "radius",
            "staircase wall, R from the open area; the error falls about as 1/R but not \
             steadily, hence the generous tolerance",
            Geometry::Tube,
            Grids {
                quick: (12, 0.03),
                full: &[(6, 0.05), (12, 0.03), (24, 0.02)],
            },
        ),
    ];
    let sc: [(f64, Grids); 4] = [
        (
            0.064,
            Grids {
                quick: (22, 0.03),
                full: &[(22, 0.03), (33, 0.03), (44, 0.025)],
            },
        ),
        (
            0.125,
            Grids {
                quick: (24, 0.03),
                full: &[(24, 0.03), (36, 0.03), (48, 0.025)],
            },
        ),
        (
            0.216,
            Grids {
                quick: (24, 0.035),
                full: &[(24, 0.035), (36, 0.035), (48, 0.03)],
            },
        ),
        (
            0.343,
            Grids {
                quick: (24, 0.04),
                full: &[(24, 0.04), (36, 0.04), (48, 0.035)],
            },
        ),
    ];
    for (c, grids) in sc {
        v.push(case(
            format!("simple cubic spheres, c = {c}"),
            "k/a²",
            refs::ZICK_HOMSY_1982,
            "cell edge",
            "a and c from the voxels, K interpolated to the voxel c; the staircase surface \
             keeps the error between −0.5 and −3 % at radii of 5–21 voxels, largest where \
             the gaps between spheres are narrow (c = 0.343)",
            Geometry::Spheres {
                lattice: Lattice::Sc,
                c,
                reference: SphereRef::Table,
            },
            grids,
        ));
    }
    let dilute: [(Lattice, &str, Source, SphereRef, Grids); 3] = [
        (
            Lattice::Sc,
            "simple",
            refs::SC_SERIES,
            SphereRef::ScSeries,
            Grids {
                quick: (24, 0.02),
                full: &[(24, 0.02), (32, 0.02), (40, 0.02)],
            },
        ),
        (
            Lattice::Bcc,
            "body-centred",
            refs::DILUTE_SERIES,
            SphereRef::Dilute,
            Grids {
                quick: (24, 0.02),
                full: &[(24, 0.02), (32, 0.02), (40, 0.015)],
            },
        ),
        (
            Lattice::Fcc,
            "face-centred",
            refs::DILUTE_SERIES,
            SphereRef::Dilute,
            Grids {
                quick: (28, 0.035),
                full: &[(24, 0.04), (32, 0.02), (40, 0.015)],
            },
        ),
    ];
    for (lattice, name, source, reference, grids) in dilute {
        v.push(case(
            format!("{name} cubic spheres, dilute c = 0.02"),
            "k/a²",
            source,
            "cell edge",
            "series at the voxel c (at c = 0.02 the c² term is 0.1 % of 1/K, later terms \
             0.02 %); the error is the voxelisation of small spheres (radius 2.4–7 voxels)",
            Geometry::Spheres {
                lattice,
                c: 0.02,
                reference,
            },
            grids,
        ));
    }
    let sa: [(f64, Grids); 3] = [
        (
            0.1,
            Grids {
                quick: (33, 0.02),
                full: &[(33, 0.02), (64, 0.025), (97, 0.015)],
            },
        ),
        (
            0.3,
            Grids {
                quick: (48, 0.04),
                full: &[(24, 0.05), (48, 0.04), (96, 0.03)],
            },
        ),
        (
            0.5,
            Grids {
                quick: (56, 0.05),
                full: &[(28, 0.12), (56, 0.05), (92, 0.05)],
            },
        ),
    ];
    for (phi, grids) in sa {
        v.push(case(
            format!("square cylinder array across, φ = {phi}"),
            "k/a²",
            refs::SANGANI_ACRIVOS_1982,
            "spacing",
            "a and φ from the voxel cross-section, F/(μU) interpolated to the voxel φ; where \
             the gaps are narrow (φ = 0.5) a half-voxel step of the staircase at the throat \
             moves k by several %",
            Geometry::CylindersAcross {
                packing: CylinderPacking::Square,
                phi,
                reference: CylinderRef::Table,
            },
            grids,
        ));
    }
    let across: [(CylinderPacking, &str, f64, Grids); 3] = [
        (
            CylinderPacking::Square,
            "square",
            0.05,
            Grids {
                quick: (32, 0.02),
                full: &[(24, 0.025), (48, 0.015), (96, 0.012)],
            },
        ),
        (
            CylinderPacking::Hexagonal,
            "hexagonal",
            0.1,
            Grids {
                quick: (30, 0.015),
                full: &[(30, 0.015), (56, 0.02), (97, 0.015)],
            },
        ),
        (
            CylinderPacking::Hexagonal,
            "hexagonal",
            0.2,
            Grids {
                quick: (30, 0.025),
                full: &[(30, 0.025), (56, 0.03), (97, 0.015)],
            },
        ),
    ];
    for (packing, name, phi, grids) in across {
        v.push(case(
            format!("{name} cylinder array across, φ = {phi}"),
            "k/a²",
            refs::DRUMMOND_TAHIR_1984,
            "spacing",
            "fit at the voxel φ; hexagonal cells a × round(√3 a) with √3 a within 0.1 % of a \
             whole number",
            Geometry::CylindersAcross {
                packing,
                phi,
                reference: CylinderRef::Fit,
            },
            grids,
        ));
    }
    let along: [(CylinderPacking, &str, Grids); 2] = [
        (
            CylinderPacking::Square,
            "square",
            Grids {
                quick: (32, 0.03),
                full: &[(32, 0.03), (64, 0.02), (96, 0.015)],
            },
        ),
        (
            CylinderPacking::Hexagonal,
            "hexagonal",
            Grids {
                quick: (30, 0.045),
                full: &[(30, 0.045), (56, 0.02), (97, 0.015)],
            },
        ),
    ];
    for (packing, name, grids) in along {
        v.push(case(
            format!("{name} cylinder array along, φ = 0.3"),
            "k/a²",
            refs::DRUMMOND_TAHIR_1984,
            "spacing",
            "fit at the voxel φ; the staircase cylinder wall limits the accuracy",
            Geometry::CylindersAlong { packing, phi: 0.3 },
            grids,
        ));
    }
    v.push(case(
        "random sphere pack, φ ≈ 0.40".into(),
        "k/d²",
        refs::CARMAN_1937,
        "sphere radius",
        "a band, not an exact value: random packs scatter by about ±25 % around \
         Kozeny–Carman; the same 74-sphere pack is refined (box of 8 radii)",
        Geometry::Pack {
            porosity: 0.40,
            seed: 11,
        },
        Grids {
            quick: (5, refs::CARMAN_KOZENY_SCATTER),
            full: &[
                (5, refs::CARMAN_KOZENY_SCATTER),
                (7, refs::CARMAN_KOZENY_SCATTER),
                (10, refs::CARMAN_KOZENY_SCATTER),
            ],
        },
    ));
    v
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(n: usize, error: f64) -> GridPoint {
        GridPoint {
            resolution: n,
            value: 1.0 + error,
            reference: 1.0,
            error,
            expected_error: 0.0,
            tolerance: 1.0,
            pass: true,
            steps: 0,
            seconds: 0.0,
            geometry: String::new(),
        }
    }

    #[test]
    fn observed_order_of_a_second_order_error() {
        let g = [point(4, 0.16), point(8, 0.04), point(16, 0.01)];
        assert!((observed_order(&g).unwrap() - 2.0).abs() < 1e-12);
        // Sign change, growth, noise or a single grid: no order.
        assert!(observed_order(&[point(8, 0.04), point(16, -0.01)]).is_none());
        assert!(observed_order(&[point(4, 0.01), point(8, 0.04), point(16, 0.02)]).is_none());
        assert!(observed_order(&[point(8, 0.04), point(16, 1e-5)]).is_none());
        // Shrinking, but at inconsistent rates (a zero crossing nearby): no order.
        assert!(observed_order(&[point(24, 0.028), point(32, 0.008), point(40, 0.0009)]).is_none());
        assert!(observed_order(&[point(8, 0.04)]).is_none());
    }

    #[test]
    fn every_case_has_grids_and_positive_tolerances() {
        for c in cases() {
            for level in [Level::Quick, Level::Full] {
                let g = c.grids(level);
                assert!(!g.is_empty(), "{}", c.name);
                assert!(
                    g.iter().all(|&(n, t)| n > 0 && t > 0.0 && t < 1.0),
                    "{}",
                    c.name
                );
                assert!(g.windows(2).all(|w| w[0].0 < w[1].0), "{}", c.name);
            }
        }
    }
}
