//! How the faces of a finite sample are treated: the transverse sides and the two ends along the
//! flow axis.
//!
//! A scanned sample is not periodic. The sides can be sealed (no-flow walls, like a sleeve around a
//! core plug) or periodic; the ends can be mirrored (the sample followed by its mirror image, then
//! periodic, so inlet and outlet faces match), periodic (only right for periodic structures), or
//! padded with N slices of free fluid at each end (a buffer, then periodic).

use std::fmt;

/// Treatment of the four faces parallel to the flow axis.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Sides {
    /// No-flow walls (half-way bounce-back) just outside the sample.
    Sealed,
    /// The sample repeats across the side faces.
    Periodic,
}

/// Treatment of the two faces normal to the flow axis.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Ends {
    /// Sample plus its mirror image along the axis, periodic over both.
    Mirror,
    /// The sample repeats along the flow axis.
    Periodic,
    /// This many slices of free fluid before and after the sample, then periodic.
    Buffer(usize),
}

/// Widest buffer `--ends buffer:N` takes: two of them fill the 65536 voxels a solver axis
/// holds (grid coordinates are u16).
pub const MAX_BUFFER: usize = 32768;

/// The boundary treatment of one solve.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct BoundaryMode {
    pub sides: Sides,
    pub ends: Ends,
}

impl BoundaryMode {
    /// Fully periodic: right for synthetic periodic structures (unit cells, generated packs).
    pub const PERIODIC: BoundaryMode = BoundaryMode {
        sides: Sides::Periodic,
        ends: Ends::Periodic,
    };

    /// The default for scans: sealed sides, mirrored ends.
    pub const SCAN: BoundaryMode = BoundaryMode {
        sides: Sides::Sealed,
        ends: Ends::Mirror,
    };
}

impl std::str::FromStr for Sides {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s {
            "sealed" => Ok(Sides::Sealed),
            "periodic" => Ok(Sides::Periodic),
            _ => Err(format!(
                "unknown side treatment '{s}' (expected sealed or periodic)"
            )),
        }
    }
}

impl std::str::FromStr for Ends {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s {
            "mirror" => Ok(Ends::Mirror),
            "periodic" => Ok(Ends::Periodic),
            _ => match s.strip_prefix("buffer:") {
                Some(n) => match n.parse::<usize>() {
                    Ok(n) if (1..=MAX_BUFFER).contains(&n) => Ok(Ends::Buffer(n)),
                    _ => Err(format!(
                        "bad buffer width in '{s}' (expected buffer:N with N a whole number from 1 to {MAX_BUFFER}; the sample and both buffers must fit the 65536 voxels of a solver axis)"
                    )),
                },
                None => Err(format!(
                    "unknown end treatment '{s}' (expected mirror, periodic or buffer:N)"
                )),
            },
        }
    }
}

impl fmt::Display for Sides {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Sides::Sealed => "sealed",
            Sides::Periodic => "periodic",
        })
    }
}

impl fmt::Display for Ends {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Ends::Mirror => f.write_str("mirror"),
            Ends::Periodic => f.write_str("periodic"),
            Ends::Buffer(n) => write!(f, "buffer:{n}"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_and_prints_modes() {
        for s in ["mirror", "periodic", "buffer:7"] {
            assert_eq!(s.parse::<Ends>().unwrap().to_string(), s);
        }
        assert!("buffer:0".parse::<Ends>().is_err());
        assert!("buffer:x".parse::<Ends>().is_err());
        // Wider than a solver axis (and, for 2^63 + 1, wider than 2N fits in 64 bits).
        assert_eq!("buffer:32768".parse::<Ends>(), Ok(Ends::Buffer(MAX_BUFFER)));
        for wide in ["buffer:32769", "buffer:9223372036854775809"] {
            let e = wide.parse::<Ends>().unwrap_err();
            assert!(e.contains("from 1 to 32768"), "{e}");
        }
        assert!("open".parse::<Ends>().is_err());
        assert_eq!("sealed".parse::<Sides>().unwrap(), Sides::Sealed);
        assert!("walls".parse::<Sides>().is_err());
    }
}
