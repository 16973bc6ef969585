//! Everything voxperm writes: the result JSON schema, the terminal summary, VTK files, tables and
//! reports. Writers go through [`crate::volume::write_atomically`] so no half file is ever left.

pub mod batch;
pub mod document;
pub mod html;
pub mod json;
pub mod markdown;
pub mod plots;
pub mod result;
pub mod snapshot;
pub mod summary;
pub mod summary_table;
pub mod vtk;

pub use json::{EstimateReport, InputRecord, Settings};
