//! Synthetic microstructures for validation and experiments: regular sphere and cylinder arrays,
//! random sphere packs (hard and overlapping), fibre mats, open-cell foams, layered slits,
//! stretched grains, and straight channels.
//!
//! Every generator returns a [`Synthetic`]: the [`PoreMask`], its voxel porosity and an [`Info`]
//! record of what was actually built (radius used, equivalent radius, object lists). Random
//! generators draw from `ChaCha8Rng` seeded with a `u64`, so one seed always gives one mask.
//! Structures are periodic: an object crossing a face of the box re-enters on the opposite face,
//! so the volume tiles (the straight-channel helpers are periodic along their axis only).
//!
//! Parameters come as one serde-friendly struct per family, gathered in [`Structure`], so a
//! command line or a TOML/JSON file maps onto them directly. Validation happens before any
//! allocation and reports the offending parameter by its field name.

mod canvas;
mod cells;
mod channels;
mod cylinder_array;
mod fibres;
mod foam;
mod grains;
mod lattice;
mod layered;
mod random;
mod relax;
mod sphere_array;
mod sphere_pack;

pub use channels::{
    DuctParams, SlitParams, TubeParams, circular_tube, slit, slit_mask, square_duct,
    square_duct_mask, tube_mask,
};
pub use cylinder_array::{CylinderArrayParams, CylinderPacking, cylinder_array};
pub use fibres::{Fibre, FibreParams, Orientation, fibre_mat};
pub use foam::{FoamMethod, FoamParams, foam};
pub use grains::{BooleanParams, Stretch, boolean_grains};
pub use layered::{SlitStackParams, slit_stack};
pub use random::RadiusDist;
pub use sphere_array::{Lattice, SphereArrayParams, sphere_array};
pub use sphere_pack::{
    AUTO_RSA_LIMIT, PackMethod, PackParams, RELAXATION_LIMIT, RSA_JAMMING_LIMIT, sphere_pack,
};

use super::{Axis, PoreMask};
use crate::{Error, Result};
use serde::{Deserialize, Serialize};

/// Largest box the generators will allocate (one byte per voxel: 1 GiB).
pub const MAX_VOXELS: usize = 1 << 30;

/// Largest allowed distance between the measured voxel porosity and a porosity target.
pub const POROSITY_TOLERANCE: f64 = 0.01;

/// Any structure the generators can build, tagged by `kind` in serialised form.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Structure {
    /// Spheres on a simple, body-centred or face-centred cubic lattice.
    SphereArray(SphereArrayParams),
    /// Parallel cylinders on a square or hexagonal lattice.
    CylinderArray(CylinderArrayParams),
    /// Random non-overlapping spheres.
    SpherePack(PackParams),
    /// Random overlapping spheres or stretched ellipsoids (Boolean model).
    Boolean(BooleanParams),
    /// Random straight fibres (aligned, planar-random or isotropic).
    Fibres(FibreParams),
    /// Open-cell foam.
    Foam(FoamParams),
    /// A periodic stack of slits.
    SlitStack(SlitStackParams),
    /// One slit between two walls.
    Slit(SlitParams),
    /// A square duct.
    SquareDuct(DuctParams),
    /// A circular tube.
    Tube(TubeParams),
}

impl Structure {
    /// Short name of the family, as used in the `kind` tag.
    pub fn kind(&self) -> &'static str {
        match self {
            Structure::SphereArray(_) => "sphere_array",
            Structure::CylinderArray(_) => "cylinder_array",
            Structure::SpherePack(_) => "sphere_pack",
            Structure::Boolean(_) => "boolean",
            Structure::Fibres(_) => "fibres",
            Structure::Foam(_) => "foam",
            Structure::SlitStack(_) => "slit_stack",
            Structure::Slit(_) => "slit",
            Structure::SquareDuct(_) => "square_duct",
            Structure::Tube(_) => "tube",
        }
    }
}

/// A generated structure and what was achieved.
#[derive(Debug, Clone)]
pub struct Synthetic {
    /// The pore mask (`true` = pore).
    pub mask: PoreMask,
    /// Voxel porosity of `mask`.
    pub porosity: f64,
    /// Achieved parameters and object lists.
    pub info: Info,
}

impl Synthetic {
    fn new(mask: PoreMask, info: Info) -> Self {
        let porosity = mask.porosity();
        Synthetic {
            mask,
            porosity,
            info,
        }
    }
}

/// What a generator actually built, tagged by `kind` in serialised form.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Info {
    /// Regular sphere or cylinder arrays.
    Array(ArrayInfo),
    /// Random spheres or ellipsoids (packs, Boolean grains).
    Grains(GrainsInfo),
    /// Fibre mats.
    Fibres(FibresInfo),
    /// Foams.
    Foam(FoamInfo),
    /// Slits, slit stacks, ducts and tubes.
    Channel(ChannelInfo),
}

/// Achieved geometry of a regular array.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ArrayInfo {
    /// Solid fraction asked for.
    pub requested_solid_fraction: f64,
    /// Solid fraction of the voxel mask.
    pub solid_fraction: f64,
    /// Radius from the requested solid fraction (voxels).
    pub analytic_radius: f64,
    /// Radius used for voxelisation (voxels); differs from `analytic_radius` when matching.
    pub radius: f64,
    /// Radius at which neighbouring objects touch (voxels).
    pub touching_radius: f64,
    /// Radius of an object with the mean voxel volume (spheres) or cross-section (cylinders).
    pub equivalent_radius: f64,
    /// Number of spheres or cylinders in the box.
    pub objects: usize,
    /// Unit-cell size in voxels along x, y, z.
    pub cell_shape: [usize; 3],
}

/// A sphere (or the transverse semi-axis of an ellipsoid) in voxel units, centre in `[0, n)`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Grain {
    /// Centre (x, y, z) in voxel units; voxel i spans `[i, i+1)`.
    pub centre: [f64; 3],
    /// Radius in voxels.
    pub radius: f64,
}

/// Achieved geometry of a random grain structure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GrainsInfo {
    /// Porosity asked for.
    pub target_porosity: f64,
    /// Placement method: "rsa", "relaxation" or "boolean".
    pub method: String,
    /// Stretch of the grains into ellipsoids, if any.
    pub stretch: Option<Stretch>,
    /// The grains in the mask.
    pub grains: Vec<Grain>,
}

/// Achieved geometry of a fibre mat.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FibresInfo {
    /// Porosity asked for.
    pub target_porosity: f64,
    /// Fibre radius (voxels).
    pub radius: f64,
    /// Fibre length (voxels); for aligned fibres the box length (they close on themselves).
    pub length: f64,
    /// The fibres in the mask.
    pub fibres: Vec<Fibre>,
}

/// Achieved geometry of a foam.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FoamInfo {
    /// Porosity asked for.
    pub target_porosity: f64,
    /// Construction method.
    pub method: FoamMethod,
    /// Mean cell size asked for (voxels).
    pub cell_size: f64,
    /// Number of foam cells (Voronoi seeds) or pore spheres.
    pub cells: usize,
    /// Voronoi method: strut half-thickness threshold on the edge distance (voxels).
    pub strut_half_thickness: Option<f64>,
    /// Voronoi seeds, or the pore spheres of the inverted method (radius 0 for seeds).
    pub sites: Vec<Grain>,
}

/// Geometry of a straight channel or a slit stack.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChannelInfo {
    /// Channel axis (duct, tube) or slit normal.
    pub axis: Axis,
    /// Fluid voxels in one cross-section normal to the channel axis; for slits the fluid layers
    /// per period.
    pub open_area: usize,
    /// Radius of the circle with the same open area, sqrt(open_area / pi) (tubes; else 0).
    pub equivalent_radius: f64,
}

/// Builds any structure; `seed` is ignored by the deterministic ones.
pub fn generate(s: &Structure, seed: u64) -> Result<Synthetic> {
    match s {
        Structure::SphereArray(p) => sphere_array(p),
        Structure::CylinderArray(p) => cylinder_array(p),
        Structure::SpherePack(p) => sphere_pack(p, seed),
        Structure::Boolean(p) => boolean_grains(p, seed),
        Structure::Fibres(p) => fibre_mat(p, seed),
        Structure::Foam(p) => foam(p, seed),
        Structure::SlitStack(p) => slit_stack(p),
        Structure::Slit(p) => slit(p),
        Structure::SquareDuct(p) => square_duct(p),
        Structure::Tube(p) => circular_tube(p),
    }
}

// ---- validation shared by the families -------------------------------------------------------

fn usage(kind: &str, msg: impl std::fmt::Display) -> Error {
    Error::Usage(format!("synth {kind}: {msg}"))
}

/// Checks that every extent is positive and the voxel count stays below [`MAX_VOXELS`].
fn check_shape(kind: &str, name: &str, shape: [usize; 3]) -> Result<usize> {
    if shape.contains(&0) {
        return Err(usage(
            kind,
            format!("{name} must be positive along every axis, got {shape:?}"),
        ));
    }
    shape
        .iter()
        .try_fold(1usize, |acc, &n| acc.checked_mul(n))
        .filter(|&n| n <= MAX_VOXELS)
        .ok_or_else(|| {
            usage(
                kind,
                format!("{name} {shape:?} exceeds the limit of {MAX_VOXELS} voxels"),
            )
        })
}

fn check_porosity(kind: &str, name: &str, phi: f64) -> Result<()> {
    if phi.is_finite() && phi > 0.0 && phi < 1.0 {
        Ok(())
    } else {
        Err(usage(
            kind,
            format!("{name} must lie strictly between 0 and 1, got {phi}"),
        ))
    }
}

fn check_range(kind: &str, name: &str, x: f64, lo: f64, hi: f64) -> Result<()> {
    if x.is_finite() && x >= lo && x <= hi {
        Ok(())
    } else {
        Err(usage(
            kind,
            format!("{name} must lie between {lo} and {hi}, got {x}"),
        ))
    }
}

/// Refuses objects so large that stopping at the nearest count could miss a porosity target by
/// more than [`POROSITY_TOLERANCE`]: the stop rule keeps the closer of the two states around the
/// target, so the miss is at most half of one object's volume fraction.
fn check_object_volume(kind: &str, name: &str, object_volume: f64, voxels: usize) -> Result<()> {
    let fraction = object_volume / voxels as f64;
    if fraction <= 2.0 * POROSITY_TOLERANCE {
        Ok(())
    } else {
        Err(usage(
            kind,
            format!(
                "one object fills {:.1} % of the box, so the porosity cannot be met within {}; \
                 make {name} smaller or the box larger",
                100.0 * fraction,
                POROSITY_TOLERANCE
            ),
        ))
    }
}

/// Final guard for the target-porosity families.
fn check_achieved(kind: &str, target: f64, achieved: f64) -> Result<()> {
    if (achieved - target).abs() <= POROSITY_TOLERANCE {
        Ok(())
    } else {
        Err(usage(
            kind,
            format!(
                "reached porosity {achieved:.4} instead of {target:.4}; try a larger box or smaller objects"
            ),
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shape_limits_are_checked_before_allocation() {
        assert!(check_shape("t", "shape", [0, 4, 4]).is_err());
        let e = check_shape("t", "shape", [usize::MAX, 2, 2]).unwrap_err();
        assert!(e.to_string().contains("shape"), "{e}");
        assert_eq!(check_shape("t", "shape", [2, 3, 4]).unwrap(), 24);
    }

    #[test]
    fn structures_parse_with_defaults_and_reject_unknown_fields() {
        let s: Structure = serde_json::from_str(
            r#"{"kind":"sphere_array","lattice":"fcc","solid_fraction":0.3,"cell":20}"#,
        )
        .unwrap();
        match &s {
            Structure::SphereArray(p) => {
                assert_eq!(p.cells, [1, 1, 1]);
                assert!(p.match_voxels);
            }
            other => panic!("parsed as {other:?}"),
        }
        let bad = serde_json::from_str::<Structure>(
            r#"{"kind":"sphere_array","lattice":"fcc","solid_fraction":0.3,"cel":20}"#,
        );
        assert!(bad.is_err());
        let pack: Structure = serde_json::from_str(
            r#"{"kind":"sphere_pack","shape":[32,32,32],"porosity":0.6,
                "radius":{"kind":"log_normal","mean":4,"spread":0.2}}"#,
        )
        .unwrap();
        assert_eq!(pack.kind(), "sphere_pack");
        let back: Structure = serde_json::from_str(&serde_json::to_string(&pack).unwrap()).unwrap();
        assert_eq!(back, pack);
    }
}
