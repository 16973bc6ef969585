//! Cropping a volume to a box given as "x0:x1,y0:y1,z0:z1" (half-open, zero-based voxel
//! indices; an empty side means the full extent, e.g. ":,10:50,:"). Parsing is split from
//! resolving against the shape so a malformed option fails before any file is read.

use std::ops::Range;

use super::{Volume, VoxelData};
use crate::{Error, Result};

/// A crop box as typed: per axis an optional start and end, not yet checked against a shape.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct CropSpec {
    pub bounds: [(Option<usize>, Option<usize>); 3],
    text: String,
}

impl CropSpec {
    /// Parses "x0:x1,y0:y1,z0:z1"; each side may omit either end (":", "10:", ":50") or be
    /// empty (the full extent, as ":").
    pub fn parse(s: &str) -> Result<CropSpec> {
        let bad = |why: String| {
            Error::Usage(format!(
                "bad crop '{s}': {why} (expected x0:x1,y0:y1,z0:z1, e.g. :,10:50,:)"
            ))
        };
        let parts: Vec<&str> = s.split(',').collect();
        if parts.len() != 3 {
            return Err(bad(format!("need 3 ranges, found {}", parts.len())));
        }
        let mut bounds = [(None, None); 3];
        for (axis, (part, slot)) in parts.iter().zip(bounds.iter_mut()).enumerate() {
            let name = ['x', 'y', 'z'][axis];
            // An empty range is the full extent, like ':' ("0:9,," crops x only).
            let (a, b) = if part.trim().is_empty() {
                ("", "")
            } else {
                part.split_once(':')
                    .ok_or_else(|| bad(format!("{name} range '{}' has no ':'", part.trim())))?
            };
            let end = |t: &str| -> Result<Option<usize>> {
                let t = t.trim();
                if t.is_empty() {
                    return Ok(None);
                }
                t.parse()
                    .map(Some)
                    .map_err(|_| bad(format!("{name} bound '{t}' is not a whole number ≥ 0")))
            };
            *slot = (end(a)?, end(b)?);
        }
        Ok(CropSpec {
            bounds,
            text: s.to_string(),
        })
    }

    /// Resolves the open ends against `shape` and checks the box lies inside it and is not
    /// empty.
    pub fn resolve(&self, shape: [usize; 3]) -> Result<Crop> {
        let mut ranges = [0..0, 0..0, 0..0];
        for axis in 0..3 {
            let n = shape[axis];
            let (a, b) = self.bounds[axis];
            let (a, b) = (a.unwrap_or(0), b.unwrap_or(n));
            let name = ['x', 'y', 'z'][axis];
            if b > n {
                return Err(Error::Usage(format!(
                    "crop '{}': {name} end {b} is beyond the volume's {name} size {n}",
                    self.text
                )));
            }
            if a >= b {
                return Err(Error::Usage(format!(
                    "crop '{}': {name} range {a}:{b} is empty (start must be below end)",
                    self.text
                )));
            }
            ranges[axis] = a..b;
        }
        Ok(Crop { ranges })
    }
}

/// A crop box checked against a volume shape: half-open voxel index ranges per axis.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Crop {
    pub ranges: [Range<usize>; 3],
}

/// The box as `--crop` takes it: `x0:x1,y0:y1,z0:z1`, open ends left empty (`:,10:50,:`).
impl std::fmt::Display for CropSpec {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let side = |(a, b): (Option<usize>, Option<usize>)| {
            let n = |v: Option<usize>| v.map_or(String::new(), |v| v.to_string());
            format!("{}:{}", n(a), n(b))
        };
        f.write_str(&self.bounds.map(side).join(","))
    }
}

/// The resolved box in the `--crop` syntax, every end given.
impl std::fmt::Display for Crop {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let spec = CropSpec {
            bounds: self.ranges.clone().map(|r| (Some(r.start), Some(r.end))),
            text: String::new(),
        };
        spec.fmt(f)
    }
}

impl Crop {
    /// Parses `s` and checks it against `shape` in one step.
    pub fn parse(s: &str, shape: [usize; 3]) -> Result<Crop> {
        CropSpec::parse(s)?.resolve(shape)
    }

    /// Shape of the cropped volume.
    pub fn shape(&self) -> [usize; 3] {
        self.ranges.clone().map(|r| r.len())
    }

    /// True when the box lies inside `shape` and no side is empty.
    pub fn fits(&self, shape: [usize; 3]) -> bool {
        self.ranges
            .iter()
            .zip(shape)
            .all(|(r, n)| r.start < r.end && r.end <= n)
    }
}

/// The part of `vol` inside `c`; the voxel size is kept.
///
/// Panics if `c` does not fit `vol` (see [`Crop::fits`]): crops come from [`Crop::parse`] or
/// [`CropSpec::resolve`] against this volume's shape, so a misfit is a bug, not bad input.
pub fn crop(vol: &Volume, c: &Crop) -> Volume {
    assert!(
        c.fits(vol.shape),
        "crop {c} does not fit volume shape {:?}",
        vol.shape
    );
    let data = match &vol.data {
        VoxelData::U8(v) => VoxelData::U8(crop_vec(v, vol.shape, c)),
        VoxelData::U16(v) => VoxelData::U16(crop_vec(v, vol.shape, c)),
        VoxelData::F32(v) => VoxelData::F32(crop_vec(v, vol.shape, c)),
    };
    Volume {
        shape: c.shape(),
        data,
        voxel_size: vol.voxel_size.clone(),
    }
}

fn crop_vec<T: Copy>(v: &[T], shape: [usize; 3], c: &Crop) -> Vec<T> {
    let [nx, ny, _] = shape;
    let [rx, ry, rz] = &c.ranges;
    let mut out = Vec::with_capacity(c.shape().iter().product());
    for z in rz.clone() {
        for y in ry.clone() {
            let row = nx * (y + ny * z);
            out.extend_from_slice(&v[row + rx.start..row + rx.end]);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_and_resolves() {
        let c = Crop::parse(":,10:50,:", [100, 60, 30]).unwrap();
        assert_eq!(c.ranges, [0..100, 10..50, 0..30]);
        let c = Crop::parse(" 5: , :7 ,2:3", [10, 10, 10]).unwrap();
        assert_eq!(c.ranges, [5..10, 0..7, 2..3]);
        assert_eq!(c.shape(), [5, 7, 1]);
        // An empty range is the full extent, as the help says.
        let c = Crop::parse("0:9,, ", [10, 12, 14]).unwrap();
        assert_eq!(c.ranges, [0..9, 0..12, 0..14]);
    }

    #[test]
    fn bad_crops_are_usage_errors() {
        for s in [
            "",
            ":,:",
            ":,:,:,:",
            "1-2,:,:",
            "a:b,:,:",
            "-1:3,:,:",
            "0:5:7,:,:",
        ] {
            assert!(matches!(CropSpec::parse(s), Err(Error::Usage(_))), "{s}");
        }
        for s in ["0:11,:,:", "5:5,:,:", "6:5,:,:", ":,:,10:"] {
            match Crop::parse(s, [10, 10, 10]) {
                Err(Error::Usage(msg)) => assert!(msg.contains(s), "{msg}"),
                other => panic!("{s}: {other:?}"),
            }
        }
    }

    #[test]
    fn crop_picks_the_right_voxels() {
        let shape = [4, 3, 2];
        let data: Vec<u16> = (0..24).collect();
        let vol = Volume::new(shape, VoxelData::U16(data)).unwrap();
        let c = Crop::parse("1:3,2:3,1:2", shape).unwrap();
        let out = crop(&vol, &c);
        assert_eq!(out.shape, [2, 1, 1]);
        // voxel (1,2,1) has index 1 + 4*(2 + 3*1) = 21.
        assert_eq!(out.data, VoxelData::U16(vec![21, 22]));
    }
}
