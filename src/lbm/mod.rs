//! The D3Q19 lattice-Boltzmann flow solver: lattice constants, the fluid-node domain with its
//! boundary modes, the collide-and-stream kernel and the time loop to steady state.

pub mod bench;
pub mod boundary;
pub mod collide;
pub mod d3q19;
pub mod domain;
pub mod kernel;
pub mod memory;
#[cfg(target_arch = "x86_64")]
mod odd_x86;
pub mod pages;
pub mod solver;
pub mod warm;

pub use boundary::{BoundaryMode, Ends, Sides};
pub use domain::Domain;
pub use solver::{
    Collision, FlowField, Progress, Silent, SolverSettings, WarmStart, auto_tau,
    hydraulic_diameter, solve, solve_from,
};
