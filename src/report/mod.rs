//! Everything voxperm writes: the result JSON schema, the terminal summary, VTK files, tables and
//! reports. Writers go through [`crate::volume::write_atomically`] so no half file is ever left.

pub mod json;
pub mod summary;
pub mod vtk;

pub use json::{EstimateReport, InputRecord, Settings};
