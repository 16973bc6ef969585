//! Geometry of the pore space: the boolean pore mask, flow axes, and (in submodules) porosity,
//! connectivity, surface area and synthetic structure generators.

pub mod connectivity;
pub mod describe;
mod mask;
pub mod surface;
pub mod synth;

pub use mask::PoreMask;

use std::fmt;

/// A Cartesian axis of the voxel grid (x is the fastest-varying index in memory).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Axis {
    X,
    Y,
    Z,
}

impl Axis {
    /// All three axes in order.
    pub const ALL: [Axis; 3] = [Axis::X, Axis::Y, Axis::Z];

    /// 0 for x, 1 for y, 2 for z.
    pub fn index(self) -> usize {
        match self {
            Axis::X => 0,
            Axis::Y => 1,
            Axis::Z => 2,
        }
    }

    /// The axis with index 0, 1 or 2.
    pub fn from_index(i: usize) -> Option<Axis> {
        Axis::ALL.get(i).copied()
    }

    /// Lower-case letter of the axis.
    pub fn letter(self) -> char {
        ['x', 'y', 'z'][self.index()]
    }
}

impl fmt::Display for Axis {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.letter())
    }
}

impl std::str::FromStr for Axis {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s.to_ascii_lowercase().as_str() {
            "x" => Ok(Axis::X),
            "y" => Ok(Axis::Y),
            "z" => Ok(Axis::Z),
            _ => Err(format!("unknown axis '{s}' (expected x, y or z)")),
        }
    }
}
