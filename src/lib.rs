//! voxperm: absolute (Darcy) permeability of segmented 3D voxel images with a D3Q19
//! lattice-Boltzmann solver.
//!
//! The pipeline, one module per arrow:
//! image file(s) → [`volume`] (load, segment) → [`geometry`] (mask, connectivity, surface)
//! → [`lbm`] (fluid-node domain, collision + streaming, steady state)
//! → [`analysis`] (permeability, tortuosity, Kozeny–Carman) → [`report`] (JSON, VTK, tables).
//!
//! The `voxperm` binary (src/main.rs, src/cli/) only wires these steps together.

pub mod analysis;
pub mod error;
pub mod geometry;
pub mod lbm;
pub mod report;
pub mod volume;

pub use error::{Error, Result};

/// Tool version, recorded in every result file.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
