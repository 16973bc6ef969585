//! Straight channels with exact solutions: plane Poiseuille flow in slits and the square duct.
mod common;
use common::*;
use voxperm::geometry::Axis;

/// Plane Poiseuille flow: mean over the N fluid nodes of the exact parabola gives
/// k = N²/12 + 1/24 per open area (White, Viscous Fluid Flow, plane Poiseuille flow; midpoint sampling of
/// h²/12 with h = N under half-way bounce-back). TRT with Λ = 3/16 reproduces it to round-off
/// (Ginzburg et al. 2008): measured ≤ 2.5 × 10⁻⁶, held to 10⁻⁵ (Λ = 1/6 is off by 2.6 × 10⁻³).
#[test]
fn slit_matches_plane_poiseuille_for_every_wall_orientation() {
    let n = 8usize;
    let exact_open = (n * n) as f64 / 12.0 + 1.0 / 24.0;
    let open_fraction = n as f64 / (n + 1) as f64;
    for normal in Axis::ALL {
        for flow in Axis::ALL.into_iter().filter(|&a| a != normal) {
            let r = solve_periodic(&slit(normal, n, 3), flow);
            let want = exact_open * open_fraction;
            let err = rel(r.permeability, want);
            println!(
                "slit normal {normal} flow {flow}: k = {:.6} want {want:.6} err {err:.2e}",
                r.permeability
            );
            assert!(
                err < 1e-5,
                "normal {normal} flow {flow}: k {} vs {want} ({err:.2e})",
                r.permeability
            );
            // Straight streamlines: hydraulic tortuosity exactly 1 (Koponen, Kataja & Timonen 1996, Phys. Rev. E 54, 406, define T; exact for straight streamlines).
            // By definition at least 1; rounding must not take it below.
            assert!(
                (1.0..1.0 + 1e-6).contains(&r.tortuosity),
                "tortuosity {}",
                r.tortuosity
            );
            // No flow across the walls.
            let across =
                r.superficial_velocity[normal.index()] / r.superficial_velocity[flow.index()];
            assert!(
                across.abs() < 1e-6,
                "flow across the walls: {across:.2e} of the axial flow"
            );
        }
    }
}

/// Square duct of side s: k = 0.0351442537 s² per open area, from the series solution for the
/// rectangular duct (White, Viscous Fluid Flow, rectangular-duct section; Shah & London 1978,
/// f·Re = 14.227). With half-way bounce-back, s = the number of fluid nodes across. The error
/// at s = 16 is the corners' discretisation, +0.37 %, falling as 1/s² (`voxperm check --full`);
/// held to ±0.03 % of that, so that a wrong Λ (1/4 gives +0.57 %) fails.
#[test]
fn square_duct_matches_series_solution() {
    let s = 16usize;
    let mask = voxperm::geometry::PoreMask::from_fn([2, s + 1, s + 1], |_, y, z| y < s && z < s);
    let r = solve_periodic(&mask, Axis::X);
    let open = (s * s) as f64 / ((s + 1) * (s + 1)) as f64;
    let want = 0.0351442537 * (s * s) as f64 * open;
    let err = rel(r.permeability, want);
    println!(
        "square duct {s}: k = {:.5} want {want:.5} err {err:.2e}",
        r.permeability
    );
    let signed = r.permeability / want - 1.0;
    assert!(
        (signed - 0.0037).abs() < 3e-4,
        "duct k {} vs {want}: {signed:+.3e}, expected +3.7e-3",
        r.permeability
    );
    assert!(
        (1.0..1.0 + 1e-6).contains(&r.tortuosity),
        "tortuosity {}",
        r.tortuosity
    );
}

/// A dead-end crack one voxel thick across the flow, off the side of a duct. Every link with
/// an x component of its nodes beyond the first layer ends in a wall, so the fluid there cannot
/// move along x: its x-momentum only bounces back, a two-step oscillation whose mean is zero
/// (`Domain::sealed_along`). k must be that of the duct with only the crack's first layer
/// (which does exchange x-momentum with the duct, through the diagonal links).
#[test]
fn a_dead_end_crack_across_the_flow_carries_no_flow() {
    let s = 8usize;
    let crack = |depth: usize| {
        voxperm::geometry::PoreMask::from_fn([8, s + 4, s + 1], move |x, y, z| {
            let duct = y < s && z < s;
            let in_crack = x == 3 && (s..s + depth).contains(&y) && z < s;
            duct || in_crack
        })
    };
    let sealed = solve_periodic(&crack(3), Axis::X);
    let first_layer = solve_periodic(&crack(1), Axis::X);
    let diff = rel(sealed.permeability, first_layer.permeability);
    println!(
        "duct with a dead-end crack: k = {:.7} (3 layers) vs {:.7} (1 layer): {diff:.2e}",
        sealed.permeability, first_layer.permeability
    );
    assert!(diff < 1e-6, "the walled-in crack moved k by {diff:.2e}");
    assert!(
        rel(sealed.tortuosity, first_layer.tortuosity) < 1e-6,
        "tortuosity {} vs {}",
        sealed.tortuosity,
        first_layer.tortuosity
    );
}
