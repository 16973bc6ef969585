//! Geometry analysis without flow: cluster labelling along D3Q19 links, percolation along each
//! axis under the boundary modes, specific surface from voxel faces, Kozeny–Carman estimates and
//! the `describe` summary. All masks are built here from small closed-form shapes.

mod common;
use common::z_channel;
use voxperm::analysis::kozeny::{
    KOZENY_CONSTANT, kozeny_carman_from_surface, kozeny_carman_spheres, sphere_bed_specific_surface,
};
use voxperm::geometry::connectivity::{label_clusters, percolating, percolation_by_axis};
use voxperm::geometry::describe::summarize;
use voxperm::geometry::surface::measure_surface;
use voxperm::geometry::{Axis, PoreMask};

/// A mask whose pore voxels are exactly `pores`.
fn mask_of(shape: [usize; 3], pores: &[[usize; 3]]) -> PoreMask {
    PoreMask::from_fn(shape, |x, y, z| pores.contains(&[x, y, z]))
}

/// A seeded random mask (independent voxels), porosity `phi`.
fn random_mask(shape: [usize; 3], phi: f64, seed: u64) -> PoreMask {
    use rand::{RngExt, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let n = shape[0] * shape[1] * shape[2];
    PoreMask::new(shape, (0..n).map(|_| rng.random::<f64>() < phi).collect())
}

const NONE: [bool; 3] = [false; 3];

#[test]
fn two_separate_blobs_are_two_clusters() {
    let m = PoreMask::from_fn([12, 6, 6], |x, y, z| {
        let blob_a = (1..4).contains(&x) && (1..4).contains(&y) && (1..4).contains(&z);
        let blob_b = (7..11).contains(&x) && (2..5).contains(&y) && (2..5).contains(&z);
        blob_a || blob_b
    });
    let c = label_clusters(&m, NONE).unwrap();
    assert_eq!(c.count(), 2);
    assert_eq!(c.sizes(), &[27, 36]);
    assert_ne!(c.label(2, 2, 2), c.label(8, 3, 3));
    assert_eq!(c.label(0, 0, 0), 0);
}

#[test]
fn corner_contact_does_not_connect_but_edge_and_face_contact_do() {
    // D3Q19 has no corner (1,1,1) links, so the solver cannot pass between these two voxels.
    let corner = mask_of([3, 3, 3], &[[0, 0, 0], [1, 1, 1]]);
    assert_eq!(label_clusters(&corner, NONE).unwrap().count(), 2);
    // All 8 corner directions stay apart; all 12 edge directions join.
    for dx in 0..3usize {
        for dy in 0..3usize {
            for dz in 0..3usize {
                let nonzero = [dx, dy, dz].iter().filter(|&&d| d != 1).count();
                let m = mask_of([3, 3, 3], &[[1, 1, 1], [dx, dy, dz]]);
                let count = label_clusters(&m, NONE).unwrap().count();
                match nonzero {
                    3 => assert_eq!(count, 2, "corner {dx} {dy} {dz}"),
                    1 | 2 => assert_eq!(count, 1, "face/edge {dx} {dy} {dz}"),
                    _ => {}
                }
            }
        }
    }
    let face = mask_of([3, 3, 3], &[[1, 1, 1], [1, 1, 2]]);
    assert_eq!(label_clusters(&face, NONE).unwrap().count(), 1);
    // Corner contact across a periodic wrap does not connect either.
    let wrapped_corner = mask_of([4, 4, 4], &[[0, 0, 0], [3, 3, 3]]);
    assert_eq!(
        label_clusters(&wrapped_corner, [true; 3]).unwrap().count(),
        2
    );
    let wrapped_edge = mask_of([4, 4, 4], &[[0, 0, 1], [3, 3, 1]]);
    assert_eq!(label_clusters(&wrapped_edge, [true; 3]).unwrap().count(), 1);
}

#[test]
fn straight_channel_along_x_percolates_along_x_only() {
    let m = PoreMask::from_fn([16, 8, 8], |_, y, z| {
        (3..5).contains(&y) && (3..5).contains(&z)
    });
    for sides in [false, true] {
        for ends in [false, true] {
            let px = percolating(&m, Axis::X, sides, ends).unwrap();
            assert!(px.percolates);
            assert_eq!(px.connected_pore_voxels, 16 * 4);
            assert_eq!(px.mask, m);
            for axis in [Axis::Y, Axis::Z] {
                let p = percolating(&m, axis, sides, ends).unwrap();
                assert!(!p.percolates, "{axis} sides {sides} ends {ends}");
                assert_eq!(p.mask.pore_count(), 0);
                assert_eq!(p.clusters_kept, 0);
                assert_eq!(p.clusters_total, 1);
            }
            let by_axis = percolation_by_axis(&m, sides, ends).unwrap();
            assert_eq!(
                by_axis.map(|a| a.percolates),
                [true, false, false],
                "{sides} {ends}"
            );
        }
    }
}

#[test]
fn channel_through_the_periodic_y_wrap_percolates_only_with_periodic_sides() {
    // First half of the channel runs at y = ny − 1, second half at y = 0; at x = nx/2 both rows
    // are open, so the halves meet only through the face link across the y boundary.
    let [nx, ny, nz] = [20, 7, 5];
    let m = PoreMask::from_fn([nx, ny, nz], |x, y, z| {
        z == 2 && ((x <= nx / 2 && y == ny - 1) || (x >= nx / 2 && y == 0))
    });
    let sealed = percolating(&m, Axis::X, false, false).unwrap();
    assert!(!sealed.percolates);
    assert_eq!(sealed.clusters_total, 2);
    let wrapped = percolating(&m, Axis::X, true, false).unwrap();
    assert!(wrapped.percolates);
    assert_eq!(wrapped.clusters_total, 1);
    assert_eq!(wrapped.connected_pore_voxels, m.pore_count());
    // Periodic ends along x do not help: the break is in y.
    assert!(!percolating(&m, Axis::X, false, true).unwrap().percolates);
}

#[test]
fn isolated_pores_are_dropped_and_counted() {
    let m = PoreMask::from_fn([10, 9, 9], |x, y, z| {
        let channel = y == 4 && z == 4;
        let cavity = (1..3).contains(&x) && (1..3).contains(&y) && (1..3).contains(&z);
        let speck = (x, y, z) == (7, 7, 7);
        channel || cavity || speck
    });
    let p = percolating(&m, Axis::X, false, false).unwrap();
    assert!(p.percolates);
    assert_eq!(p.total_pore_voxels, 10 + 8 + 1);
    assert_eq!(p.connected_pore_voxels, 10);
    assert_eq!(p.isolated_pore_voxels(), 9);
    assert_eq!((p.clusters_total, p.clusters_kept), (3, 1));
    assert!(!p.mask.is_pore(1, 1, 1));
    assert!(!p.mask.is_pore(7, 7, 7));
    assert!(p.mask.is_pore(5, 4, 4));
    assert!((p.connected_porosity() - 10.0 / 810.0).abs() < 1e-15);
    assert_eq!(p.summary().connected_pore_voxels, 10);
}

#[test]
fn all_solid_mask_does_not_percolate() {
    let m = PoreMask::from_fn([6, 5, 4], |_, _, _| false);
    for sides in [false, true] {
        for ends in [false, true] {
            for axis in Axis::ALL {
                let p = percolating(&m, axis, sides, ends).unwrap();
                assert!(!p.percolates);
                assert_eq!(
                    (p.connected_pore_voxels, p.clusters_total, p.clusters_kept),
                    (0, 0, 0)
                );
                assert_eq!(p.connected_porosity(), 0.0);
            }
            assert!(
                percolation_by_axis(&m, sides, ends)
                    .unwrap()
                    .iter()
                    .all(|a| !a.percolates)
            );
        }
    }
    let s = summarize(&m, false, false).unwrap();
    assert!(!s.percolates_anywhere());
    assert_eq!(s.kc_estimate_voxel2, None);
    assert_eq!(s.surface.voxel_faces, 0);
}

#[test]
fn dead_end_branch_on_a_spanning_channel_is_kept() {
    // Channel along x at y = 2; a blind branch along y from (5, 3) to (5, 6).
    let m = PoreMask::from_fn([12, 9, 3], |x, y, z| {
        z == 1 && (y == 2 || (x == 5 && (3..7).contains(&y)))
    });
    let p = percolating(&m, Axis::X, false, false).unwrap();
    assert!(p.percolates);
    assert_eq!(p.connected_pore_voxels, 12 + 4);
    assert!(p.mask.is_pore(5, 6, 1));
    // Along y the branch does not reach y = 8, so nothing spans.
    assert!(!percolating(&m, Axis::Y, false, false).unwrap().percolates);
}

#[test]
fn periodic_ends_keep_a_piece_joined_only_through_the_flow_axis_wrap() {
    let nx = 14;
    // Spanning channel at y = 2; a branch from it up to y = 6 near the inlet, continuing along
    // x = 0..3 at y = 6; a separate piece at y = 6 near the outlet (x = nx−3..nx). The piece
    // touches the branch only across the x wrap: (nx−1, 6) – (0, 6).
    let m = PoreMask::from_fn([nx, 9, 3], |x, y, z| {
        let channel = y == 2;
        let branch = (x == 2 && (3..7).contains(&y)) || (y == 6 && x < 3);
        let piece = y == 6 && x >= nx - 3;
        z == 1 && (channel || branch || piece)
    });
    let cut = percolating(&m, Axis::X, false, false).unwrap();
    assert_eq!(cut.connected_pore_voxels, nx + 4 + 2);
    assert!(!cut.mask.is_pore(nx - 1, 6, 1));
    assert_eq!((cut.clusters_total, cut.clusters_kept), (2, 1));

    let wrapped = percolating(&m, Axis::X, false, true).unwrap();
    assert_eq!(wrapped.connected_pore_voxels, m.pore_count());
    assert!(wrapped.mask.is_pore(nx - 1, 6, 1));
    assert_eq!((wrapped.clusters_total, wrapped.clusters_kept), (1, 1));
}

#[test]
fn reaching_round_the_wrap_without_spanning_is_not_flow() {
    // Two pieces each touching one end face, joined through the x wrap: an open chain around the
    // periodic domain that closes no loop, so no net flow along x is possible.
    let nx = 12;
    let m = PoreMask::from_fn([nx, 5, 3], |x, y, z| {
        z == 1 && ((y == 1 && x < nx / 2 - 1) || (y == 3 && x > nx / 2))
            || (z == 1 && x == 0 && y < 4)
            || (z == 1 && x == nx - 1 && y >= 3)
    });
    // Sanity of the construction: one periodic cluster, two cut clusters.
    assert_eq!(label_clusters(&m, [true, false, false]).unwrap().count(), 1);
    assert_eq!(label_clusters(&m, NONE).unwrap().count(), 2);
    let p = percolating(&m, Axis::X, false, true).unwrap();
    assert!(!p.percolates);
    assert_eq!(p.clusters_total, 1);
}

#[test]
fn z_channel_spans_the_cut_but_does_not_wrap_so_periodic_ends_refuse_it() {
    // Its one cluster joins the inlet face to the outlet face, so with mirrored (cut) ends it
    // carries flow; with periodic ends its two ends do not meet across the x wrap, it closes no
    // loop around the periodic x axis and so can carry no net flow along x.
    for width in [1, 3] {
        let m = z_channel(width);
        for sides in [false, true] {
            let cut = percolating(&m, Axis::X, sides, false).unwrap();
            assert!(cut.percolates, "width {width} sides {sides}");
            assert_eq!(cut.connected_pore_voxels, m.pore_count());
            let p = percolating(&m, Axis::X, sides, true).unwrap();
            assert!(!p.percolates, "width {width} sides {sides}");
            assert_eq!(p.connected_pore_voxels, 0);
            assert_eq!(p.connected_porosity(), 0.0);
            assert_eq!(p.mask.pore_count(), 0);
            assert_eq!((p.clusters_total, p.clusters_kept), (1, 0));
            let by_axis = percolation_by_axis(&m, sides, true).unwrap();
            assert_eq!(by_axis[0], p.summary());
            assert!(by_axis.iter().all(|a| !a.percolates), "{by_axis:?}");
            assert!(!summarize(&m, sides, true).unwrap().percolates_anywhere());
        }
    }
}

#[test]
fn connected_porosity_with_periodic_ends_counts_only_wrapping_clusters() {
    // A straight channel along x at z = 6 beside the Z channel (z = 3): only the straight one
    // wraps, so only its 32 voxels are connected pore space.
    let z = z_channel(1);
    let m = PoreMask::from_fn(z.shape(), |x, y, zz| {
        z.is_pore(x, y, zz) || (y == 8 && zz == 6)
    });
    for sides in [false, true] {
        let p = percolating(&m, Axis::X, sides, true).unwrap();
        assert!(p.percolates);
        assert_eq!(p.connected_pore_voxels, 32);
        assert_eq!((p.clusters_total, p.clusters_kept), (2, 1));
        assert!(p.mask.is_pore(0, 8, 6) && !p.mask.is_pore(0, 2, 3));
        assert!((p.connected_porosity() - 32.0 / m.len() as f64).abs() < 1e-15);
        assert_eq!(
            percolation_by_axis(&m, sides, true).unwrap()[0],
            p.summary()
        );
    }
}

#[test]
fn diagonal_channels_that_wrap_through_the_sides_percolate_only_with_periodic_sides() {
    // Once round: a staircase y = x / 2 in a 16 × 8 layer; (15, 7) meets (0, 0) along the edge
    // link (+1, +1), which crosses the x and y faces together. The loop winds once along x and
    // once along y, so with periodic sides it carries flow along both.
    let once = PoreMask::from_fn([16, 8, 3], |x, y, z| z == 1 && y == x / 2);
    // Twice round along x per turn along y: two strands y = x and y = x + 8 in an 8 × 16 layer;
    // (7, 7) meets (0, 8) across the x wrap and (7, 15) meets (0, 0) across both wraps.
    let twice = PoreMask::from_fn([8, 16, 3], |x, y, z| z == 1 && (y == x || y == x + 8));
    for m in [&once, &twice] {
        let n = m.pore_count();
        let wrapped = percolating(m, Axis::X, true, true).unwrap();
        assert!(wrapped.percolates);
        assert_eq!(wrapped.connected_pore_voxels, n);
        assert_eq!((wrapped.clusters_total, wrapped.clusters_kept), (1, 1));
        assert_eq!(
            percolation_by_axis(m, true, true)
                .unwrap()
                .map(|a| a.percolates),
            [true, true, false]
        );
        // Sealed sides break the loop at the y faces: what is left is an open chain that
        // reaches round the x wrap (for `twice`) or not at all (`once`), and spans the cut.
        let sealed = percolating(m, Axis::X, false, true).unwrap();
        assert!(!sealed.percolates, "{:?}", m.shape());
        assert_eq!(sealed.clusters_total, 1);
        let cut = percolating(m, Axis::X, false, false).unwrap();
        assert!(cut.percolates);
        assert_eq!(cut.connected_pore_voxels, n);
    }
}

#[test]
fn a_layer_one_voxel_thick_along_a_periodic_flow_axis_wraps_onto_itself() {
    // n = 1 along x: every pore voxel is its own neighbour across the x wrap.
    let m = PoreMask::from_fn([1, 4, 4], |_, y, z| y == 1 && z == 2);
    let p = percolating(&m, Axis::X, false, true).unwrap();
    assert!(p.percolates);
    assert_eq!(p.connected_pore_voxels, 1);
    // n = 2: the pair is linked directly and across the wrap.
    let m = PoreMask::from_fn([2, 4, 4], |_, y, z| y == 1 && z == 2);
    assert_eq!(
        percolating(&m, Axis::X, false, true)
            .unwrap()
            .connected_pore_voxels,
        2
    );
}

#[test]
fn percolation_by_axis_agrees_with_the_mask_building_version() {
    // Near the D3Q19 site-percolation threshold (≈0.14, from memory) the answer differs between
    // axes and boundary modes, which is what this comparison needs.
    for (seed, phi) in [(1, 0.14), (2, 0.16), (3, 0.2)] {
        let m = random_mask([14, 11, 9], phi, seed);
        for sides in [false, true] {
            for ends in [false, true] {
                let by_axis = percolation_by_axis(&m, sides, ends).unwrap();
                for axis in Axis::ALL {
                    let p = percolating(&m, axis, sides, ends).unwrap();
                    assert_eq!(p.summary(), by_axis[axis.index()]);
                    assert_eq!(p.mask.pore_count(), p.connected_pore_voxels);
                    // The kept mask is a subset of the pore space.
                    assert!(
                        p.mask
                            .as_slice()
                            .iter()
                            .zip(m.as_slice())
                            .all(|(&k, &o)| !k || o)
                    );
                }
            }
        }
    }
}

#[test]
fn sphere_surface_is_1_5_times_in_raw_faces_and_close_after_correction() {
    // Voxelised ball of radius 20 (voxel centres inside), true area 4πr². The 3/2 ratio is the
    // isotropic mean of |n_x| + |n_y| + |n_z| (Cauchy–Crofton projection formula; Ohser &
    // Mücklich 2000, Statistical Analysis of Microstructures in Materials Science, from memory).
    // The ~5 % band allows for the staircase of a 20-voxel radius (common practice).
    let r = 20.0f64;
    let n = 48;
    let c = n as f64 / 2.0;
    let m = PoreMask::from_fn([n, n, n], |x, y, z| {
        let d = |i: usize| i as f64 + 0.5 - c;
        d(x).powi(2) + d(y).powi(2) + d(z).powi(2) <= r * r
    });
    let s = measure_surface(&m, NONE);
    let volume = m.len() as f64;
    let true_sv = 4.0 * std::f64::consts::PI * r * r / volume;
    let corrected = s.specific_surface / true_sv;
    let raw = s.face_area_per_bulk / true_sv;
    println!(
        "sphere r=20: faces {} corrected/true {corrected:.4} raw/true {raw:.4}",
        s.voxel_faces
    );
    assert!(
        (corrected - 1.0).abs() < 0.05,
        "corrected/true = {corrected}"
    );
    assert!((raw - 1.5).abs() < 0.075, "raw/true = {raw}");
    // The ball is symmetric under axis permutations, so each axis carries a third of the faces.
    assert_eq!(s.faces_by_axis[0], s.faces_by_axis[1]);
    assert_eq!(s.faces_by_axis[1], s.faces_by_axis[2]);
}

#[test]
fn slit_raw_faces_are_exact_and_the_isotropic_estimate_is_two_thirds() {
    // Pore slab between two solid walls, normal along z: 2 interfaces of nx·ny each.
    let [nx, ny, nz] = [10, 7, 12];
    let m = PoreMask::from_fn([nx, ny, nz], |_, _, z| (3..9).contains(&z));
    let s = measure_surface(&m, NONE);
    let true_sv = (2 * nx * ny) as f64 / m.len() as f64;
    assert_eq!(s.voxel_faces, 2 * nx * ny);
    assert_eq!(s.faces_by_axis, [0, 0, 2 * nx * ny]);
    assert!((s.face_area_per_bulk - true_sv).abs() < 1e-15);
    // The single estimator is documented as biased low by 2/3 for axis-aligned planes.
    assert!((s.specific_surface - 2.0 / 3.0 * true_sv).abs() < 1e-15);
}

#[test]
fn inclined_planes_count_faces_by_the_sum_of_normal_components() {
    // Periodic band (x + y) mod 64 < 32: two planes with normal (1, 1, 0)/√2, each 64√2 long in
    // the xy torus. The face count per true area is |n_x| + |n_y| = √2 (geometry of the
    // staircase, exact here), between the axis-aligned 1 and the isotropic mean 1.5.
    let [nx, ny, nz] = [64, 64, 3];
    let m = PoreMask::from_fn([nx, ny, nz], |x, y, _| (x + y) % 64 < 32);
    let s = measure_surface(&m, [true; 3]);
    let true_area = 2.0 * 64.0 * 2f64.sqrt() * nz as f64;
    let ratio = s.voxel_faces as f64 / true_area;
    assert!((ratio - 2f64.sqrt()).abs() < 1e-12, "{ratio}");
    // Without wrapping in x and y the faces at the grid rim vanish, but interior rows still
    // cross both planes except where a plane meets the rim.
    assert!(measure_surface(&m, NONE).voxel_faces < s.voxel_faces);
}

#[test]
fn voxel_sphere_bed_surface_and_kozeny_carman_match_the_sphere_forms() {
    // Simple cubic array of solid balls, diameter 16 in a periodic 24³ cell (8 cells). The
    // corrected face count should give S_v ≈ 6(1 − φ)/d (sphere geometry) with d from the voxel
    // solid volume, within the ~5 % staircase band of the single-ball test; KC in surface form
    // then matches the sphere form (Carman 1937) to about twice that, since k ∝ 1/S_v².
    let cell = 24usize;
    let rad = 8.0f64;
    let n = 2 * cell;
    let m = PoreMask::from_fn([n, n, n], |x, y, z| {
        let d = |i: usize| (i % cell) as f64 + 0.5 - cell as f64 / 2.0;
        d(x).powi(2) + d(y).powi(2) + d(z).powi(2) > rad * rad
    });
    let phi = m.porosity();
    let solid_per_ball = (m.len() - m.pore_count()) as f64 / 8.0;
    let d = 2.0 * (3.0 * solid_per_ball / (4.0 * std::f64::consts::PI)).cbrt();
    let s = measure_surface(&m, [true; 3]);
    let expected = sphere_bed_specific_surface(phi, d).unwrap();
    let rel = s.specific_surface / expected - 1.0;
    println!(
        "sphere bed: phi {phi:.4} d {d:.3} S_v {:.5} vs {expected:.5} ({rel:+.4})",
        s.specific_surface
    );
    assert!(rel.abs() < 0.05, "{rel}");
    let k_surface = kozeny_carman_from_surface(phi, s.specific_surface, KOZENY_CONSTANT).unwrap();
    let k_spheres = kozeny_carman_spheres(phi, d).unwrap();
    assert!((k_surface / k_spheres - 1.0).abs() < 0.1);
}

#[test]
fn summary_collects_porosity_percolation_surface_and_kc() {
    let m = PoreMask::from_fn([16, 8, 8], |_, y, z| {
        (3..5).contains(&y) && (3..5).contains(&z)
    });
    let s = summarize(&m, false, false).unwrap();
    assert_eq!(s.shape, [16, 8, 8]);
    assert_eq!(s.pore_voxels, 64);
    assert!((s.total_porosity - 64.0 / 1024.0).abs() < 1e-15);
    assert_eq!(s.axes.map(|a| a.percolates), [true, false, false]);
    // Square duct 2×2: 4 side walls of 16 faces each; the open ends lie on the grid boundary.
    assert_eq!(s.surface.voxel_faces, 4 * 2 * 16);
    let kc = s.kc_estimate_voxel2.unwrap();
    let expected = s.total_porosity.powi(3) / (5.0 * s.surface.specific_surface.powi(2));
    assert!((kc - expected).abs() < 1e-15 * expected);
    let json = serde_json::to_value(&s).unwrap();
    assert_eq!(json["axes"][0]["axis"], "x");
    assert_eq!(json["axes"][1]["percolates"], false);
    assert_eq!(json["surface"]["voxel_faces"], 128);
    assert!(json["kc_estimate_voxel2"].is_f64());
}

/// Timing on a 256³ random volume; run with
/// `cargo test --release --test geometry -- --ignored --nocapture timing`.
#[test]
#[ignore = "timing: allocates ~300 MB and takes a few seconds"]
fn timing_256_cubed() {
    use std::time::Instant;
    let m = random_mask([256, 256, 256], 0.3, 7);
    let t = Instant::now();
    let c = label_clusters(&m, [false; 3]).unwrap();
    let t_label = t.elapsed();
    assert_eq!(c.sizes().iter().sum::<usize>(), m.pore_count());
    let t = Instant::now();
    let cp = label_clusters(&m, [true; 3]).unwrap();
    let t_label_periodic = t.elapsed();
    assert!(cp.count() <= c.count());
    let t = Instant::now();
    let p = percolating(&m, Axis::X, false, false).unwrap();
    let t_perc = t.elapsed();
    assert!(p.percolates);
    let t = Instant::now();
    let s = summarize(&m, false, false).unwrap();
    let t_sum = t.elapsed();
    let t = Instant::now();
    let sp = summarize(&m, true, true).unwrap();
    let t_sum_periodic = t.elapsed();
    assert!(s.percolates_anywhere() && sp.percolates_anywhere());
    println!(
        "256^3 phi 0.3: label cut {t_label:?} ({} clusters), label periodic {t_label_periodic:?}, \
         percolating(x) {t_perc:?}, summarize sealed {t_sum:?}, summarize periodic {t_sum_periodic:?}; \
         connected porosity x {:.4}",
        c.count(),
        s.axes[0].connected_porosity
    );
    // A smooth, coherent pore space (gyroid-like level set, period 32 voxels) is the common case
    // for scans; the random volume above is the worst case for branch prediction.
    let k = 2.0 * std::f64::consts::PI / 32.0;
    let g = PoreMask::from_fn([256, 256, 256], |x, y, z| {
        let (x, y, z) = (x as f64 * k, y as f64 * k, z as f64 * k);
        x.sin() * y.cos() + y.sin() * z.cos() + z.sin() * x.cos() > 0.3
    });
    let t = Instant::now();
    let sg = summarize(&g, false, false).unwrap();
    let t_gyroid = t.elapsed();
    assert!(sg.percolates_anywhere());
    println!(
        "256^3 gyroid phi {:.3}: summarize sealed {t_gyroid:?}",
        sg.total_porosity
    );
}
