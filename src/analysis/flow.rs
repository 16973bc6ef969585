//! From a steady flow field to Darcy permeability, hydraulic tortuosity and flow-regime numbers.

use crate::geometry::Axis;
use crate::lbm::d3q19::CS2;
use crate::lbm::{Domain, Ends, FlowField};

/// Darcy quantities of one solve (force along `axis`), in lattice units.
#[derive(Debug, Clone, serde::Serialize)]
pub struct AxisFlow {
    pub axis: Axis,
    /// k_{i,axis} = ν ⟨u_i⟩ / g_eff for i = x, y, z: one column of the permeability tensor.
    pub permeability_column: [f64; 3],
    /// The diagonal entry k_{axis,axis}, voxel².
    pub permeability: f64,
    /// Superficial (Darcy) velocity over the sample: Σ u over fluid nodes / sample voxels.
    pub superficial_velocity: [f64; 3],
    /// Body force (acceleration) applied to every fluid node, lattice units.
    pub body_force: f64,
    /// Driving acceleration: the body force plus, with buffer ends, the mean pressure drop across
    /// the sample per unit length.
    pub effective_force: f64,
    /// Hydraulic tortuosity Σ|u| / Σ u_axis over the sample's fluid nodes.
    pub tortuosity: f64,
    /// Peak Mach number |u|max / c_s.
    pub mach: f64,
    /// Reynolds number (u_superficial / φ) · d_h / ν with d_h = 4 φ / S the hydraulic diameter.
    pub reynolds: f64,
}

/// Computes the Darcy quantities of a steady flow.
///
/// Darcy's law with a body force g: ⟨u⟩ = (k/μ)(ρg − ∇p) and ρ ≈ 1, so k = ν⟨u⟩/g_eff with
/// g_eff = g − Δp/L (e.g. Pan, Luo & Miller 2006, Computers & Fluids 35, 898).
/// In periodic and mirrored domains the mean pressure gradient vanishes; with buffer ends it is
/// the drop between the sample's two faces.
pub fn analyse(domain: &Domain, field: &FlowField, axis: Axis) -> AxisFlow {
    let a = axis.index();
    let sample_voxels = domain.sample_shape.iter().product::<usize>() as f64;
    let mut sum_u = [0.0f64; 3];
    let mut sum_speed = 0.0f64;
    let mut fluid_in_sample = 0usize;
    for (k, u) in field.velocity.iter().enumerate() {
        if !domain.in_sample(k) {
            continue;
        }
        fluid_in_sample += 1;
        for d in 0..3 {
            sum_u[d] += u[d] as f64;
        }
        // In f64: the square of an f32 is exact there and the square root correctly rounded,
        // so |u| >= u_axis holds term by term and (rounding being monotone) the tortuosity
        // never comes out below 1, as it did with |u| in f32 on straight channels.
        let [x, y, z] = u.map(|c| c as f64);
        sum_speed += (x * x + y * y + z * z).sqrt();
    }
    let superficial = sum_u.map(|s| s / sample_voxels);
    let g = field.force[a];
    let effective_force = match domain.mode.ends {
        Ends::Buffer(_) => {
            // The pressure at the two faces of the sample, which lie half a voxel beyond the
            // centres of the buffer slices next to them: each is extrapolated along the
            // buffer's own gradient, measured between that slice and the next buffer slice
            // out (across the periodic wrap, where the two buffers meet). Then the drop
            // spans exactly the sample's length.
            let n = domain.shape[a];
            let (origin, length) = (domain.sample_origin[a], domain.sample_shape[a]);
            let p = |at: usize| slice_pressure(domain, field, a, at % n);
            let (inlet, outlet) = (origin - 1, origin + length);
            let p_in = p(inlet) + 0.5 * (p(inlet) - p(inlet + n - 1));
            let p_out = p(outlet) - 0.5 * (p(outlet + 1) - p(outlet));
            g - (p_out - p_in) / length as f64
        }
        _ => g,
    };
    let column = superficial.map(|u| field.viscosity * u / effective_force);
    let porosity = fluid_in_sample as f64 / sample_voxels;
    let reynolds = if porosity > 0.0 {
        (superficial[a] / porosity).abs() * field.hydraulic_diameter / field.viscosity
    } else {
        0.0
    };
    AxisFlow {
        axis,
        permeability_column: column,
        permeability: column[a],
        superficial_velocity: superficial,
        body_force: g,
        effective_force,
        tortuosity: if sum_u[a] != 0.0 {
            sum_speed / sum_u[a]
        } else {
            f64::NAN
        },
        mach: field.max_speed / CS2.sqrt(),
        reynolds,
    }
}

/// Mean pressure c_s² ρ over the fluid nodes of grid slice `at` normal to axis `a`.
fn slice_pressure(domain: &Domain, field: &FlowField, a: usize, at: usize) -> f64 {
    let (sum, n) = domain
        .coords
        .iter()
        .zip(&field.density)
        .filter(|(c, _)| c[a] as usize == at)
        .fold((0.0, 0usize), |(s, n), (_, &rho)| (s + rho as f64, n + 1));
    if n == 0 { 0.0 } else { CS2 * sum / n as f64 }
}
