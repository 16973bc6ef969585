//! From flow fields and geometry to the numbers a practitioner reads: permeability (lattice, m²,
//! mD) along an axis and as a tensor, tortuosity, flow-regime numbers, Kozeny–Carman.

pub mod estimate;
pub mod flow;
pub mod kozeny;
pub mod run;
pub mod tensor;
pub mod units;

pub use estimate::{AxisEstimate, Estimate, EstimateConfig, KeptField, estimate, estimate_axis};
pub use flow::{AxisFlow, analyse};
pub use run::{RunConfig, VtkRequest, run_sample};
pub use tensor::{TensorAnalysis, analyse_tensor};
