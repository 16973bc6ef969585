//! The VTK image-data writer: solve tiny flows, write `.vti`, read them back with vtkio and check
//! shape, spacing, fields, units and values against the solver field and analytic flow.
mod common;
use common::*;
use std::path::Path;

use voxperm::Error;
use voxperm::analysis::KeptField;
use voxperm::geometry::{Axis, PoreMask};
use voxperm::lbm::domain::SOLID;
use voxperm::lbm::{BoundaryMode, Domain, Ends, Sides, Silent, solve};
use voxperm::report::vtk::{write_vti, write_vti_with_limit};

use vtkio::model::{Attribute, DataSet, Extent, IOBuffer, Piece};

fn kept(mask: &PoreMask, axis: Axis, mode: BoundaryMode) -> KeptField {
    let domain = Domain::build(mask, axis, mode, u64::MAX).expect("domain");
    let field = solve(&domain, axis, &tight(), &mut Silent).expect("solve");
    assert!(
        field.converged,
        "not converged: residual {}",
        field.residual
    );
    KeptField { domain, field }
}

/// Darcy velocity along the flow axis, computed here independently of the writer.
fn darcy_velocity(k: &KeptField) -> f64 {
    let a = k.domain.axis.index();
    let sum: f64 = (0..k.domain.fluid_nodes())
        .filter(|&n| k.domain.in_sample(n))
        .map(|n| k.field.velocity[n][a] as f64)
        .sum();
    sum / k.domain.sample_shape.iter().product::<usize>() as f64
}

/// What a `.vti` file holds, as read back by vtkio.
struct Read {
    cells: [usize; 3],
    origin: [f32; 3],
    spacing: [f32; 3],
    velocity: Vec<f32>,
    speed: Vec<f32>,
    pressure: Vec<f32>,
    pore: Vec<u8>,
    names: Vec<(String, usize)>,
}

impl Read {
    fn cell(&self, i: usize, j: usize, k: usize) -> usize {
        i + self.cells[0] * (j + self.cells[1] * k)
    }
    fn vel(&self, c: usize) -> [f32; 3] {
        [
            self.velocity[3 * c],
            self.velocity[3 * c + 1],
            self.velocity[3 * c + 2],
        ]
    }
}

fn read(path: &Path) -> Read {
    let vtk = vtkio::Vtk::import(path).expect("vtkio reads the file back");
    let DataSet::ImageData {
        extent,
        origin,
        spacing,
        pieces,
        ..
    } = vtk.data
    else {
        panic!("not image data");
    };
    let Extent::Ranges(r) = extent else {
        panic!("extent is not ranges")
    };
    assert!(r.iter().all(|x| *x.start() == 0), "extent starts at 0");
    let cells = r.map(|x| *x.end() as usize);
    assert_eq!(pieces.len(), 1);
    let Piece::Inline(piece) = pieces.into_iter().next().unwrap() else {
        panic!("piece not inline")
    };
    assert!(piece.data.point.is_empty(), "no point data expected");
    let mut out = Read {
        cells,
        origin,
        spacing,
        velocity: vec![],
        speed: vec![],
        pressure: vec![],
        pore: vec![],
        names: vec![],
    };
    for attr in piece.data.cell {
        let Attribute::DataArray(a) = attr else {
            panic!("field attribute in cell data")
        };
        out.names.push((a.name.clone(), a.num_comp()));
        match (a.name.as_str(), a.data) {
            ("velocity", IOBuffer::F32(v)) => out.velocity = v,
            ("speed", IOBuffer::F32(v)) => out.speed = v,
            ("pressure", IOBuffer::F32(v)) => out.pressure = v,
            ("pore", IOBuffer::U8(v)) => out.pore = v,
            (name, buf) => panic!("unexpected array {name} of type {:?}", buf.scalar_type()),
        }
    }
    out
}

fn expected_names() -> Vec<(String, usize)> {
    [("velocity", 3), ("speed", 1), ("pressure", 1), ("pore", 1)]
        .map(|(n, c)| (n.to_string(), c))
        .to_vec()
}

/// Mean density over the sample's fluid nodes.
fn mean_density(k: &KeptField) -> f64 {
    let inside: Vec<usize> = (0..k.domain.fluid_nodes())
        .filter(|&n| k.domain.in_sample(n))
        .collect();
    inside
        .iter()
        .map(|&n| k.field.density[n] as f64)
        .sum::<f64>()
        / inside.len() as f64
}

/// Every cell against the solver field: sample voxel (i·s, j·s, k·s) shifted by the sample's
/// origin in the solver grid; solid voxels zero with pore 0. Pressure is c_s²(ρ − ρ̄)/(ν U) with
/// c_s² = 1/3 (D3Q19: Qian, d'Humières & Lallemand 1992, Europhys. Lett. 17, 479, from memory) and U the Darcy velocity.
fn assert_cells_match_field(r: &Read, k: &KeptField, stride: usize) {
    let d = &k.domain;
    let u_d = darcy_velocity(k);
    let rho_mean = mean_density(k);
    for kz in 0..r.cells[2] {
        for jy in 0..r.cells[1] {
            for ix in 0..r.cells[0] {
                let c = r.cell(ix, jy, kz);
                let g: Vec<usize> = (0..3)
                    .map(|a| [ix, jy, kz][a] * stride + d.sample_origin[a])
                    .collect();
                let node = d.node_of_voxel[g[0] + d.shape[0] * (g[1] + d.shape[1] * g[2])];
                let v = r.vel(c);
                if node == SOLID {
                    assert_eq!(r.pore[c], 0, "cell {ix},{jy},{kz}");
                    assert_eq!(v, [0.0; 3], "solid cell {ix},{jy},{kz} moves");
                    assert_eq!(r.speed[c], 0.0);
                    continue;
                }
                assert_eq!(r.pore[c], 1, "cell {ix},{jy},{kz}");
                let u = k.field.velocity[node as usize];
                for q in 0..3 {
                    let want = u[q] as f64 / u_d;
                    assert!(
                        (v[q] as f64 - want).abs() <= 1e-5 * (1.0 + want.abs()),
                        "cell {ix},{jy},{kz} component {q}: {} vs {want}",
                        v[q]
                    );
                }
                let s = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
                assert!((r.speed[c] - s).abs() <= 1e-6 * (1.0 + s), "speed");
                let rho = k.field.density[node as usize] as f64;
                let p = (rho - rho_mean) / 3.0 / (k.field.viscosity * u_d);
                assert!(
                    (r.pressure[c] as f64 - p).abs() <= 1e-4 * (1.0 + p.abs()),
                    "cell {ix},{jy},{kz} pressure {} vs {p}",
                    r.pressure[c]
                );
            }
        }
    }
}

/// Plane Poiseuille flow in a periodic slit of N = 8 fluid layers (8×9×4, solid layer y = 8).
/// Nodal velocities follow the exact parabola u ∝ (y+½)(N−y−½) (White, Viscous Fluid Flow,
/// plane Poiseuille flow; exact for TRT with Λ = 3/16), and the Darcy velocity is its sum over the N nodes
/// / (N+1) layers, Σ = N(N²/6 + 1/12) from the node mean N²/6 + 1/12 of y(N−y) given there.
/// So the written, normalised velocity is (y+½)(N−y−½)(N+1) / (N(N²/6 + 1/12)).
#[test]
fn slit_writes_sample_shape_spacing_in_metres_and_normalised_poiseuille_profile() {
    let n = 8usize;
    let mask = PoreMask::from_fn([8, n + 1, 4], |_, y, _| y < n);
    let k = kept(&mask, Axis::X, BoundaryMode::PERIODIC);
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("slit.vti");
    write_vti(&path, &k, Some(2.5e-6), 1).unwrap();
    assert!(!dir.path().join("slit.vti.tmp").exists(), "temp file left");

    let r = read(&path);
    assert_eq!(r.cells, [8, 9, 4]);
    assert_eq!(r.origin, [0.0; 3]);
    assert_eq!(r.spacing, [2.5e-6f32; 3]);
    assert_eq!(r.names, expected_names());
    assert_eq!(r.velocity.len(), 3 * 8 * 9 * 4);
    assert_cells_match_field(&r, &k, 1);

    let nf = n as f64;
    let denom = nf * (nf * nf / 6.0 + 1.0 / 12.0);
    for y in 0..n {
        let yc = y as f64 + 0.5;
        let want = yc * (nf - yc) * (nf + 1.0) / denom;
        let got = r.vel(r.cell(3, y, 2))[0] as f64;
        assert!(rel(got, want) < 1e-3, "y {y}: {got} vs {want}");
    }
    // At stride 1 the flow-axis component averages to exactly 1 over all cells.
    let mean_x: f64 = r.velocity.chunks(3).map(|v| v[0] as f64).sum::<f64>() / (8 * 9 * 4) as f64;
    assert!(
        (mean_x - 1.0).abs() < 1e-5,
        "mean normalised velocity {mean_x}"
    );
    // A periodic slit has no pressure variation (force balances wall friction line by line).
    let pmax = r.pressure.iter().fold(0.0f32, |m, p| m.max(p.abs()));
    assert!(pmax < 1e-2, "pressure in a slit: {pmax}");
}

/// A sphere in a periodic cell, flow along z. Stokes flow past a body symmetric under z → −z has
/// a pressure field odd under that reflection (reversibility of Stokes flow; Happel & Brenner,
/// Low Reynolds Number Hydrodynamics, ch. 2, from memory); inertia at Re ≪ 1 breaks it only
/// slightly, hence 1 % of the peak as tolerance.
#[test]
fn sphere_cell_has_zero_solid_velocity_odd_pressure_and_stride_two_halves_the_grid() {
    let l = 8usize;
    let mask = sphere_cell(l, 2.6);
    let k = kept(&mask, Axis::Z, BoundaryMode::PERIODIC);
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sphere.vti");
    write_vti(&path, &k, None, 1).unwrap();
    let r = read(&path);
    assert_eq!(r.cells, [l; 3]);
    assert_eq!(r.spacing, [1.0; 3], "no voxel size: one unit per voxel");
    assert_eq!(r.names, expected_names());
    assert_cells_match_field(&r, &k, 1);
    let pores = r.pore.iter().filter(|&&p| p == 1).count();
    assert_eq!(pores, mask.pore_count());
    assert!(pores < l * l * l, "the sphere must leave solid cells");

    let pmax = r.pressure.iter().fold(0.0f32, |m, p| m.max(p.abs()));
    assert!(pmax > 0.1, "pressure should vary around a sphere: {pmax}");
    for z in 0..l {
        for y in 0..l {
            for x in 0..l {
                let p = r.pressure[r.cell(x, y, z)];
                let q = r.pressure[r.cell(x, y, l - 1 - z)];
                assert!((p + q).abs() < 1e-2 * pmax, "({x},{y},{z}): {p} vs {q}");
            }
        }
    }

    let path2 = dir.path().join("sphere2.vti");
    write_vti(&path2, &k, Some(1e-5), 2).unwrap();
    let r2 = read(&path2);
    assert_eq!(r2.cells, [l / 2; 3]);
    assert_eq!(r2.spacing, [2e-5f32; 3], "spacing is voxel size × stride");
    assert_cells_match_field(&r2, &k, 2);
    for z in 0..l / 2 {
        for y in 0..l / 2 {
            for x in 0..l / 2 {
                let c1 = r.cell(2 * x, 2 * y, 2 * z);
                let c2 = r2.cell(x, y, z);
                assert_eq!(r2.vel(c2), r.vel(c1));
                assert_eq!(r2.pore[c2], r.pore[c1]);
            }
        }
    }
}

/// An irregular sample: a bent channel, so the mirrored half of the solver grid differs from the
/// sample and a wrong offset would show.
fn bent_channel() -> PoreMask {
    PoreMask::from_fn([7, 5, 4], |x, y, z| {
        let centre = 1 + x / 3;
        (y as isize - centre as isize).abs() <= 1 && z < 3
    })
}

#[test]
fn mirror_ends_write_the_sample_not_the_doubled_grid() {
    let mode = BoundaryMode {
        sides: Sides::Sealed,
        ends: Ends::Mirror,
    };
    let mask = bent_channel();
    let k = kept(&mask, Axis::X, mode);
    assert_eq!(k.domain.shape, [14, 5, 4], "solver grid is doubled along x");
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("mirror.vti");
    write_vti(&path, &k, Some(1e-6), 1).unwrap();
    let r = read(&path);
    assert_eq!(r.cells, [7, 5, 4]);
    assert_cells_match_field(&r, &k, 1);
    for z in 0..4 {
        for y in 0..5 {
            for x in 0..7 {
                assert_eq!(r.pore[r.cell(x, y, z)] == 1, mask.is_pore(x, y, z));
            }
        }
    }
}

#[test]
fn buffer_ends_are_cut_away_and_the_sample_origin_honoured() {
    let mode = BoundaryMode {
        sides: Sides::Sealed,
        ends: Ends::Buffer(3),
    };
    let mask = bent_channel();
    let k = kept(&mask, Axis::X, mode);
    assert_eq!(k.domain.sample_origin, [3, 0, 0]);
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("buffer.vti");
    write_vti(&path, &k, None, 1).unwrap();
    let r = read(&path);
    assert_eq!(r.cells, [7, 5, 4]);
    assert_cells_match_field(&r, &k, 1);
    let pores = r.pore.iter().filter(|&&p| p == 1).count();
    assert_eq!(pores, mask.pore_count(), "buffer fluid must not be written");
}

#[test]
fn bad_destinations_and_limits_are_errors_not_panics() {
    let mask = PoreMask::from_fn([4, 5, 3], |_, y, _| y < 4);
    let k = kept(&mask, Axis::X, BoundaryMode::PERIODIC);
    let dir = tempfile::tempdir().unwrap();

    let missing = dir.path().join("no/such/folder/f.vti");
    let e = write_vti(&missing, &k, None, 1).unwrap_err();
    assert!(matches!(e, Error::Output { .. }), "{e}");
    assert!(e.to_string().contains("does not exist"), "{e}");

    let e = write_vti(&dir.path().join("f.vtk"), &k, None, 1).unwrap_err();
    assert!(matches!(e, Error::Output { .. }), "{e}");

    let e = write_vti(&dir.path().join("f.vti"), &k, None, 0).unwrap_err();
    assert!(matches!(e, Error::Usage(_)), "{e}");

    let e = write_vti(&dir.path().join("f.vti"), &k, Some(-1.0), 1).unwrap_err();
    assert!(matches!(e, Error::Usage(_)), "{e}");

    // 60 cells need 60 × 160 bytes, 12 cells at stride 2 need 1920: a 3000-byte cap refuses
    // stride 1 and names stride 2.
    let e = write_vti_with_limit(&dir.path().join("f.vti"), &k, None, 1, [0; 3], 3000).unwrap_err();
    let msg = e.to_string();
    assert!(matches!(e, Error::TooLarge { .. }), "{msg}");
    assert!(msg.contains("--vtk-stride 2 would fit"), "{msg}");
    assert!(!dir.path().join("f.vti").exists());
    write_vti_with_limit(&dir.path().join("f.vti"), &k, None, 2, [0; 3], 3000).unwrap();
    assert_eq!(read(&dir.path().join("f.vti")).cells, [2, 3, 2]);
}

/// Leaves a file for checking with the VTK library (scripts/check_vtk.py):
/// `VOXPERM_VTK_OUT=/tmp/sphere.vti cargo test --release --test vtk_output -- --ignored`.
#[test]
#[ignore]
fn write_sphere_file_for_external_check() {
    let out = std::env::var("VOXPERM_VTK_OUT").expect("set VOXPERM_VTK_OUT to the output path");
    let k = kept(
        &sphere_cell(16, 5.2),
        Axis::Z,
        BoundaryMode {
            sides: Sides::Sealed,
            ends: Ends::Mirror,
        },
    );
    write_vti(Path::new(&out), &k, Some(5e-6), 1).unwrap();
    println!(
        "wrote {out}: Darcy velocity {:.6e} (lattice)",
        darcy_velocity(&k)
    );
}
