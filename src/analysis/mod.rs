//! From flow fields and geometry to the numbers a practitioner reads: permeability (lattice, m²,
//! mD), tortuosity, flow-regime numbers.

pub mod flow;
pub mod units;

pub use flow::{AxisFlow, analyse};
