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
        let mut head = [0u8; 4];
        let tiff = file.read_exact(&mut head).is_ok()
            && matches!(&head, b"II*\0" | b"MM\0*" | b"II+\0" | b"MM\0+");
        return Err(Error::bad_input(
            path,
            format!(
                "raw file holds {actual} bytes but shape {nx}x{ny}x{nz} of {} needs {expected} bytes{}",
                spec.kind,
                if tiff {
                    "; the file is a TIFF (its first bytes say so): leave out --raw-shape, --raw-type and --raw-endian"
                } else {
                    ""
                }
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

/// Signs in the values that a raw file was read with the wrong sample type: nothing in a raw
/// file says its type, and a wrong one with a matching byte count (a u8 file of 2N voxels read
/// as N u16 voxels) otherwise gives a plausible-looking but scrambled structure. Returns one
/// sentence for a warning, or `None` when nothing looks wrong. Checks (common practice for
/// spotting a mis-declared raw layout, not from a published source):
/// - u16 values built from the same few byte values in both halves, mixed (0, 1, 256 and 257):
///   8-bit labels read two voxels at a time;
/// - one value in every second voxel (every fourth for u8) while the others vary: the constant
///   high (or low) part of wider samples, i.e. 16-bit data read as u8, or 32-bit as u16 or u8.
///
/// Plates across x every 2 or 4 voxels (synthetic slits) show the second sign too, but every
/// x-row of such an image is the same (`nx` is the row length as read); rows of a wider
/// sample read narrower are halves of different rows, so an image whose rows all repeat is
/// taken as what it says.
pub fn wrong_type_sign(data: &VoxelData, nx: usize) -> Option<String> {
    const MIN_VOXELS: usize = 64;
    fn rows_repeat<T: PartialEq>(v: &[T], nx: usize) -> bool {
        nx > 0 && v.len() > nx && v[nx..].iter().zip(v).all(|(a, b)| a == b)
    }
    if data.len() < MIN_VOXELS {
        return None;
    }
    let repeats = match data {
        VoxelData::U8(v) => rows_repeat(v, nx),
        VoxelData::U16(v) => rows_repeat(v, nx),
        VoxelData::F32(v) => rows_repeat(v, nx),
    };
    if repeats {
        return None;
    }
    match data {
        VoxelData::U8(v) => constant_phase(v, 2, "16-bit data read as u8")
            .or_else(|| constant_phase(v, 4, "32-bit data read as u8")),
        VoxelData::U16(v) => {
            let (mut lo, mut hi) = ([0u64; 4], [0u64; 4]);
            let mut mixed = false;
            for &x in v {
                let (l, h) = ((x & 0xff) as usize, (x >> 8) as usize);
                lo[l / 64] |= 1 << (l % 64);
                hi[h / 64] |= 1 << (h % 64);
                mixed |= l != h;
            }
            let bytes: u32 = lo.iter().map(|w| w.count_ones()).sum();
            if lo == hi && (2..=4).contains(&bytes) && mixed {
                let set: Vec<String> = (0..256)
                    .filter(|&b| lo[b / 64] >> (b % 64) & 1 == 1)
                    .map(|b| b.to_string())
                    .collect();
                return Some(format!(
                    "every u16 value pairs two bytes from {{{}}}, as 8-bit labels read two voxels at a time would: if the file is 8-bit, give --raw-type u8 with its full shape",
                    set.join(", ")
                ));
            }
            constant_phase(v, 2, "32-bit data read as u16")
        }
        VoxelData::F32(_) => None,
    }
}

/// "every second voxel is 0 …" when the values at one position modulo `step` are all equal
/// while the rest take at least two values.
fn constant_phase<T: Copy + PartialEq + fmt::Display>(
    v: &[T],
    step: usize,
    what: &str,
) -> Option<String> {
    let rest_varies = |p: usize| {
        let mut others = (0..step)
            .filter(|&q| q != p)
            .flat_map(|q| v.iter().skip(q).step_by(step));
        others.next().is_some_and(|&a| others.any(|&b| b != a))
    };
    (0..step).find_map(|p| {
        let first = v[p];
        let constant = v.iter().skip(p).step_by(step).all(|&x| x == first);
        (constant && rest_varies(p)).then(|| {
            format!(
                "every {} voxel in file order is {first} while the others vary, as {what} would: check --raw-type and --raw-shape",
                if step == 2 { "second" } else { "fourth" }
            )
        })
    })
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

    /// A labelled structure with edges at odd and even positions: spheres on a 16³ grid,
    /// label 1 inside, 0 outside.
    fn labels() -> Vec<u8> {
        let n = 16i32;
        let centres = [[3, 4, 5], [11, 9, 2], [7, 13, 12], [14, 2, 10]];
        let mut v = Vec::new();
        for z in 0..n {
            for y in 0..n {
                for x in 0..n {
                    let inside = centres
                        .iter()
                        .any(|c| (x - c[0]).pow(2) + (y - c[1]).pow(2) + (z - c[2]).pow(2) < 10);
                    v.push(inside as u8);
                }
            }
        }
        v
    }

    /// The file's bytes as another sample type would read them, little-endian.
    fn u16_of(bytes: &[u8]) -> Vec<u16> {
        bytes
            .chunks_exact(2)
            .map(|b| u16::from_le_bytes([b[0], b[1]]))
            .collect()
    }

    #[test]
    fn wrong_sample_type_leaves_signs_in_the_values() {
        let l = labels();
        let scaled: Vec<u8> = l.iter().map(|&b| b * 255).collect();
        let wide: Vec<u8> = l.iter().flat_map(|&b| (b as u16).to_le_bytes()).collect();
        let float: Vec<u8> = l.iter().flat_map(|&b| (b as f32).to_le_bytes()).collect();
        // Row lengths as a wrong type reads them: the 16-voxel rows halved or doubled.
        let cases = [
            (VoxelData::U16(u16_of(&l)), 8, "pairs two bytes from {0, 1}"),
            (
                VoxelData::U16(u16_of(&scaled)),
                8,
                "pairs two bytes from {0, 255}",
            ),
            (
                VoxelData::U8(wide.clone()),
                32,
                "every second voxel in file order is 0",
            ),
            (
                VoxelData::U16(u16_of(&float)),
                32,
                "as 32-bit data read as u16",
            ),
            (
                VoxelData::U8(float),
                64,
                "every fourth voxel in file order is 0",
            ),
        ];
        for (data, nx, sign) in cases {
            let got = wrong_type_sign(&data, nx).unwrap_or_default();
            assert!(got.contains(sign), "{sign}: got '{got}'");
        }
    }

    #[test]
    fn right_sample_types_raise_no_doubt() {
        let l = labels();
        // 16-bit grey values with noise in both bytes (a scan before segmentation).
        let grey: Vec<u16> = l
            .iter()
            .enumerate()
            .map(|(i, &b)| 20000 + 9000 * b as u16 + (i * 7919 % 1543) as u16)
            .collect();
        // Plates across x every third voxel: a value repeats at a fixed spacing, but not at
        // the spacing of a wider sample.
        let plates: Vec<u8> = (0..4096).map(|i| (i % 3 == 0) as u8 * 255).collect();
        // Slits across x every 2 and 4 voxels (`voxperm synth slits --normal x`): one value
        // in every second or fourth voxel, but every row the same.
        let slits = |period: usize, gap: usize| -> Vec<u8> {
            (0..4096)
                .map(|i| if i % 16 % period < gap { 0 } else { 255 })
                .collect()
        };
        let cases = [
            VoxelData::U8(l.clone()),
            VoxelData::U16(l.iter().map(|&b| b as u16 * 3).collect()),
            // 8-bit labels scaled to the 16-bit range (×257): both bytes equal, never mixed.
            VoxelData::U16(l.iter().map(|&b| b as u16 * 65535).collect()),
            VoxelData::U16(grey),
            VoxelData::U8(plates),
            VoxelData::U8(slits(2, 1)),
            VoxelData::U8(slits(4, 1)),
            VoxelData::U8(slits(4, 2)),
            VoxelData::U8(slits(4, 3)),
            VoxelData::F32(l.iter().map(|&b| b as f32).collect()),
        ];
        for data in cases {
            assert_eq!(wrong_type_sign(&data, 16), None, "{:?}", data.kind());
        }
    }
}
