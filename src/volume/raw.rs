//! Headerless raw volumes: the user supplies shape, sample type and byte order, and the file
//! must hold exactly that many bytes (x fastest, then y, then z). Also the sample-type enum
//! shared by all readers and writers.

use std::fmt;
use std::fs::File;
use std::io::Read;
use std::path::Path;

use super::limits::{ReadLimits, bytes_for};
use super::{Volume, VoxelData};
use crate::{Error, Result};

/// Sample type of a volume (and of a raw file).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum RawType {
    U8,
    U16,
    F32,
}

impl RawType {
    /// Bytes per voxel.
    pub fn bytes(self) -> u64 {
        match self {
            RawType::U8 => 1,
            RawType::U16 => 2,
            RawType::F32 => 4,
        }
    }

    /// Parses "u8", "u16" or "f32" (case-insensitive).
    pub fn parse(s: &str) -> Result<RawType> {
        match s.trim().to_ascii_lowercase().as_str() {
            "u8" => Ok(RawType::U8),
            "u16" => Ok(RawType::U16),
            "f32" => Ok(RawType::F32),
            _ => Err(Error::Usage(format!(
                "unknown raw sample type '{s}' (expected u8, u16 or f32)"
            ))),
        }
    }
}

impl fmt::Display for RawType {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            RawType::U8 => "u8",
            RawType::U16 => "u16",
            RawType::F32 => "f32",
        })
    }
}

/// "little" or "big", as `--raw-endian` takes it.
impl fmt::Display for Endian {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Endian::Little => "little",
            Endian::Big => "big",
        })
    }
}

/// Byte order of multi-byte samples.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Endian {
    Little,
    Big,
}

impl Endian {
    /// Parses "little" or "big" (case-insensitive).
    pub fn parse(s: &str) -> Result<Endian> {
        match s.trim().to_ascii_lowercase().as_str() {
            "little" => Ok(Endian::Little),
            "big" => Ok(Endian::Big),
            _ => Err(Error::Usage(format!(
                "unknown byte order '{s}' (expected little or big)"
            ))),
        }
    }
}

/// Layout of a raw file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct RawSpec {
    /// `[nx, ny, nz]`.
    pub shape: [usize; 3],
    pub kind: RawType,
    pub endian: Endian,
}

/// Parses a shape such as "400x400x300" (nx, ny, nz; every side at least 1).
pub fn parse_shape(s: &str) -> Result<[usize; 3]> {
    let bad = |why: &str| {
        Error::Usage(format!(
            "bad shape '{s}': {why} (expected NXxNYxNZ, e.g. 400x400x300)"
        ))
    };
    let parts: Vec<&str> = s.trim().split(['x', 'X']).collect();
    if parts.len() != 3 {
        return Err(bad("need three sizes"));
    }
    let mut shape = [0usize; 3];
    for (side, part) in shape.iter_mut().zip(&parts) {
        *side = part
            .trim()
            .parse()
            .map_err(|_| bad(&format!("'{}' is not a whole number", part.trim())))?;
        if *side == 0 {
            return Err(bad("sizes must be at least 1"));
        }
    }
    Ok(shape)
}

/// Size of the read buffer: large enough for throughput, small next to any volume.
const CHUNK: usize = 1 << 20;

/// Reads a raw file laid out as `spec`. The file size must match the shape exactly, and the
/// size is checked against `limits` before the voxel buffer is allocated.
pub fn read_raw(path: &Path, spec: &RawSpec, limits: &ReadLimits) -> Result<Volume> {
    let [nx, ny, nz] = spec.shape;
    let what = format!("{} ({nx}x{ny}x{nz} {})", path.display(), spec.kind);
    if spec.shape.contains(&0) {
        return Err(Error::Usage(format!(
            "raw shape {nx}x{ny}x{nz} has a zero side"
        )));
    }
    let expected = bytes_for(spec.shape, spec.kind.bytes());
    let io_err = |e: std::io::Error| Error::bad_input(path, super::one_line(&e.to_string()));
    let mut file = File::open(path).map_err(io_err)?;
    let actual = file.metadata().map_err(io_err)?.len();
    if expected != Some(actual) {
        let expected = expected.map_or_else(|| "more than 2^64".to_string(), |e| e.to_string());
        return Err(Error::bad_input(
            path,
            format!(
                "raw file holds {actual} bytes but shape {nx}x{ny}x{nz} of {} needs {expected} bytes",
                spec.kind
            ),
        ));
    }
    limits.check(what, expected)?;
    // The limit check passed, so the voxel count fits in memory and in usize.
    let count = nx * ny * nz;

    let data = match spec.kind {
        RawType::U8 => {
            let mut v = vec![0u8; count];
            file.read_exact(&mut v).map_err(io_err)?;
            VoxelData::U8(v)
        }
        RawType::U16 => {
            let mut v = Vec::with_capacity(count);
            read_samples::<2>(&mut file, count, &mut |b| {
                v.push(match spec.endian {
                    Endian::Little => u16::from_le_bytes(b),
                    Endian::Big => u16::from_be_bytes(b),
                })
            })
            .map_err(io_err)?;
            VoxelData::U16(v)
        }
        RawType::F32 => {
            let mut v = Vec::with_capacity(count);
            read_samples::<4>(&mut file, count, &mut |b| {
                v.push(match spec.endian {
                    Endian::Little => f32::from_le_bytes(b),
                    Endian::Big => f32::from_be_bytes(b),
                })
            })
            .map_err(io_err)?;
            VoxelData::F32(v)
        }
    };
    Ok(Volume {
        shape: spec.shape,
        data,
        voxel_size: None,
    })
}

/// Streams `count` samples of `N` bytes through `push` using a fixed-size buffer, so a large
/// file never needs a second full-size byte copy.
fn read_samples<const N: usize>(
    file: &mut File,
    count: usize,
    push: &mut dyn FnMut([u8; N]),
) -> std::io::Result<()> {
    let mut buf = vec![0u8; CHUNK - CHUNK % N];
    let mut left = count;
    while left > 0 {
        let n = left.min(buf.len() / N);
        let bytes = &mut buf[..n * N];
        file.read_exact(bytes)?;
        for sample in bytes.chunks_exact(N) {
            let mut b = [0u8; N];
            b.copy_from_slice(sample);
            push(b);
        }
        left -= n;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parse_helpers() {
        assert_eq!(parse_shape("400x400x300").unwrap(), [400, 400, 300]);
        assert_eq!(parse_shape(" 4X5x6 ").unwrap(), [4, 5, 6]);
        for bad in ["400x400", "4x0x3", "4x-1x3", "axbxc", "", "1x2x3x4"] {
            assert!(matches!(parse_shape(bad), Err(Error::Usage(_))), "{bad}");
        }
        assert_eq!(RawType::parse("U16").unwrap(), RawType::U16);
        assert_eq!(RawType::parse("f32").unwrap(), RawType::F32);
        assert!(matches!(RawType::parse("i32"), Err(Error::Usage(_))));
        assert_eq!(Endian::parse("Big").unwrap(), Endian::Big);
        assert!(matches!(Endian::parse("middle"), Err(Error::Usage(_))));
    }
}
