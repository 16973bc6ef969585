//! Voxel volumes in and out: reading multi-page TIFF stacks, folders of TIFF slices and raw
//! files into a [`Volume`]; segmenting it into a [`PoreMask`](crate::geometry::PoreMask);
//! cropping; voxel size and length units; and writing TIFF stacks and raw files.
//!
//! Every reader distrusts its input: claimed sizes are checked with checked arithmetic against
//! a [`ReadLimits`] before any voxel buffer is allocated, and every failure is a one-line
//! [`Error`] naming the file (and the page or slice).

mod atomic;
mod crop;
mod limits;
mod raw;
mod segment;
mod slices;
mod tiff_read;
mod units;
mod write;

pub mod sample;

use std::fmt;
use std::path::{Path, PathBuf};

pub(crate) use atomic::one_line;
pub use atomic::{
    check_destination, is_pipe_or_device, is_standard_output, is_stream, output_error,
    remove_pending_temporaries, resolved_destination, same_existing_file, write_atomically,
};
pub use crop::{Crop, CropSpec, crop};
pub use limits::{ReadLimits, available_memory_bytes, bytes_for};
pub use raw::{Endian, RawSpec, RawType, parse_shape, read_raw};
pub use segment::{Segmentation, segment};
pub use slices::{natural_cmp, read_slice_folder, slice_files};
pub use tiff_read::read_tiff_stack;
pub use units::{ACCEPTED_UNITS, format_length, parse_length, unit_to_metres};
pub use write::{TiffCompression, write_raw, write_tiff_stack};

use crate::geometry::PoreMask;
use crate::{Error, Result};

/// The voxel values of a volume, x fastest: voxel (x, y, z) is at `x + nx*(y + ny*z)`, and z
/// is the page (or slice) index.
#[derive(Clone, Debug, PartialEq)]
pub enum VoxelData {
    U8(Vec<u8>),
    U16(Vec<u16>),
    F32(Vec<f32>),
}

impl VoxelData {
    /// Number of voxels.
    pub fn len(&self) -> usize {
        match self {
            VoxelData::U8(v) => v.len(),
            VoxelData::U16(v) => v.len(),
            VoxelData::F32(v) => v.len(),
        }
    }

    /// True when there are no voxels.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The sample type.
    pub fn kind(&self) -> RawType {
        match self {
            VoxelData::U8(_) => RawType::U8,
            VoxelData::U16(_) => RawType::U16,
            VoxelData::F32(_) => RawType::F32,
        }
    }

    /// Value of voxel `i` as f64 (exact for every sample type).
    pub fn get_f64(&self, i: usize) -> f64 {
        match self {
            VoxelData::U8(v) => f64::from(v[i]),
            VoxelData::U16(v) => f64::from(v[i]),
            VoxelData::F32(v) => f64::from(v[i]),
        }
    }

    /// An empty buffer of `kind` with room for `n` voxels (the caller has checked `n` against
    /// the file and the memory limit). An allocation the system refuses all the same (a
    /// `--max-memory` above what the machine has) is an error naming `path`, not an abort.
    pub(crate) fn try_with_capacity(kind: RawType, n: usize, path: &Path) -> Result<VoxelData> {
        fn reserve<T>(n: usize) -> std::result::Result<Vec<T>, std::collections::TryReserveError> {
            let mut v = Vec::new();
            v.try_reserve_exact(n)?;
            Ok(v)
        }
        let refused = |_| Error::TooLarge {
            what: format!(
                "{} ({n} voxels of {kind}): the system refused the memory",
                path.display()
            ),
            needed_bytes: (n as u64).saturating_mul(kind.bytes()),
            limit_bytes: available_memory_bytes(),
        };
        Ok(match kind {
            RawType::U8 => VoxelData::U8(reserve(n).map_err(refused)?),
            RawType::U16 => VoxelData::U16(reserve(n).map_err(refused)?),
            RawType::F32 => VoxelData::F32(reserve(n).map_err(refused)?),
        })
    }
}

/// Where a voxel size came from, so reports can say whether the user gave it or the file did.
#[derive(Clone, Debug, PartialEq)]
pub enum VoxelSizeSource {
    /// Given by the user (a command-line option or a library call).
    User,
    /// Read from the image file: TIFF resolution tags and/or an ImageDescription `spacing=`.
    File {
        path: PathBuf,
        /// Which tags gave the value, e.g. "TIFF XResolution/ResolutionUnit (4000 pixels/cm)".
        detail: String,
        /// The slice spacing (metres) when the file states one that differs from the in-plane
        /// voxel size, i.e. the voxels are not cubic. None when it agrees or is not given.
        slice_spacing: Option<f64>,
        /// The voxel size along y (metres) when the y resolution differs from the x one. None
        /// when it agrees or is not given.
        row_size: Option<f64>,
    },
}

impl VoxelSizeSource {
    /// How the voxels are not cubic, when the file says so: e.g. "slice spacing 4 µm against
    /// 2 µm in plane", with the largest ratio of two edge lengths.
    pub fn not_cubic(&self, in_plane: f64) -> Option<(String, f64)> {
        let VoxelSizeSource::File {
            slice_spacing,
            row_size,
            ..
        } = self
        else {
            return None;
        };
        let mut parts = Vec::new();
        let mut ratio = 1.0f64;
        for (what, v) in [("y size", row_size), ("slice spacing", slice_spacing)] {
            if let Some(v) = *v {
                parts.push(format!("{what} {}", crate::volume::format_length(v)));
                ratio = ratio.max(v / in_plane).max(in_plane / v);
            }
        }
        (!parts.is_empty()).then(|| {
            (
                format!(
                    "{} against x size {}",
                    parts.join(", "),
                    crate::volume::format_length(in_plane)
                ),
                ratio,
            )
        })
    }
}

impl VoxelSizeSource {
    /// One-line description for reports.
    pub fn describe(&self) -> String {
        match self {
            VoxelSizeSource::User => "given by the user".to_string(),
            VoxelSizeSource::File { path, detail, .. } => {
                format!("read from {}: {detail}", path.display())
            }
        }
    }
}

impl fmt::Display for VoxelSizeSource {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.describe())
    }
}

/// Edge length of a (cubic) voxel.
#[derive(Clone, Debug, PartialEq)]
pub struct VoxelSize {
    /// Edge length in metres.
    pub metres: f64,
    pub source: VoxelSizeSource,
}

impl VoxelSize {
    /// A voxel size the user gave; must be positive and finite.
    pub fn from_user(metres: f64) -> Result<VoxelSize> {
        if !(metres.is_finite() && metres > 0.0) {
            return Err(Error::Usage(format!(
                "voxel size must be positive and finite, got {metres} m"
            )));
        }
        Ok(VoxelSize {
            metres,
            source: VoxelSizeSource::User,
        })
    }

    /// e.g. "2.5 µm (read from stack.tif: TIFF XResolution/ResolutionUnit)".
    pub fn describe(&self) -> String {
        format!(
            "{} ({})",
            format_length(self.metres),
            self.source.describe()
        )
    }
}

/// A 3D image: shape `[nx, ny, nz]`, voxel values and (when known) the voxel size.
#[derive(Clone, Debug, PartialEq)]
pub struct Volume {
    pub shape: [usize; 3],
    pub data: VoxelData,
    pub voxel_size: Option<VoxelSize>,
}

impl Volume {
    /// Builds a volume, checking that the voxel count matches the shape.
    pub fn new(shape: [usize; 3], data: VoxelData) -> Result<Volume> {
        let expected = shape[0]
            .checked_mul(shape[1])
            .and_then(|n| n.checked_mul(shape[2]));
        if expected != Some(data.len()) {
            return Err(Error::Internal(format!(
                "volume of shape {shape:?} given {} voxels",
                data.len()
            )));
        }
        Ok(Volume {
            shape,
            data,
            voxel_size: None,
        })
    }

    /// A u8 volume from a mask: pore voxels `pore`, solid voxels `solid`. Lets generated
    /// structures be written with [`write_tiff_stack`].
    pub fn from_mask(mask: &PoreMask, pore: u8, solid: u8) -> Volume {
        let data = mask
            .as_slice()
            .iter()
            .map(|&p| if p { pore } else { solid })
            .collect();
        Volume {
            shape: mask.shape(),
            data: VoxelData::U8(data),
            voxel_size: None,
        }
    }

    /// Number of voxels.
    pub fn len(&self) -> usize {
        self.data.len()
    }

    /// True when the volume has no voxels.
    pub fn is_empty(&self) -> bool {
        self.data.is_empty()
    }

    /// Linear index of voxel (x, y, z).
    #[inline]
    pub fn index(&self, x: usize, y: usize, z: usize) -> usize {
        x + self.shape[0] * (y + self.shape[1] * z)
    }

    /// Replaces the voxel size with one the user gave.
    pub fn set_user_voxel_size(&mut self, metres: f64) -> Result<()> {
        self.voxel_size = Some(VoxelSize::from_user(metres)?);
        Ok(())
    }

    /// e.g. "400x400x300 u16".
    pub fn describe(&self) -> String {
        let [nx, ny, nz] = self.shape;
        format!("{nx}x{ny}x{nz} {}", self.data.kind())
    }
}

/// Loads a volume from `path`: a folder is read as TIFF slices, a file with a `raw` layout as
/// raw data, any other file as a (multi-page) TIFF recognised by its signature.
pub fn load(path: &Path, raw: Option<&RawSpec>, limits: &ReadLimits) -> Result<Volume> {
    let meta = match std::fs::metadata(path) {
        Ok(m) => m,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            return Err(Error::bad_input(path, "no such file or folder"));
        }
        Err(e) if e.kind() == std::io::ErrorKind::NotADirectory => {
            return Err(Error::bad_input(
                path,
                "a part of the path before a / is a file, not a folder (a / after a file name?)",
            ));
        }
        Err(e) => return Err(Error::bad_input(path, one_line(&e.to_string()))),
    };
    if meta.is_dir() {
        if raw.is_some() {
            return Err(Error::Usage(format!(
                "{} is a folder, but a raw layout applies to a single file",
                path.display()
            )));
        }
        return read_slice_folder(path, limits);
    }
    match raw {
        Some(spec) => read_raw(path, spec, limits),
        None => read_tiff_stack(path, limits),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A buffer the system cannot give is an error naming the file, not an abort.
    #[test]
    fn a_refused_buffer_is_an_error() {
        let r = VoxelData::try_with_capacity(RawType::U16, usize::MAX / 2, Path::new("big.tif"));
        match r {
            Err(Error::TooLarge { what, .. }) => assert!(what.contains("big.tif"), "{what}"),
            other => panic!("expected TooLarge, got {:?}", other.map(|d| d.len())),
        }
        assert_eq!(
            VoxelData::try_with_capacity(RawType::U8, 10, Path::new("a"))
                .unwrap()
                .len(),
            0
        );
    }

    #[test]
    fn new_checks_length() {
        assert!(Volume::new([2, 3, 4], VoxelData::U8(vec![0; 24])).is_ok());
        assert!(matches!(
            Volume::new([2, 3, 4], VoxelData::U8(vec![0; 23])),
            Err(Error::Internal(_))
        ));
    }

    #[test]
    fn from_mask_keeps_layout() {
        let mask = PoreMask::from_fn([3, 2, 2], |x, y, z| x == 1 && y == 0 && z == 1);
        let v = Volume::from_mask(&mask, 0, 255);
        assert_eq!(v.shape, [3, 2, 2]);
        let VoxelData::U8(d) = &v.data else { panic!() };
        assert_eq!(d[v.index(1, 0, 1)], 0);
        assert_eq!(d.iter().filter(|&&b| b == 255).count(), 11);
    }

    #[test]
    fn user_voxel_size_is_validated() {
        assert!(VoxelSize::from_user(2.5e-6).is_ok());
        assert!(matches!(VoxelSize::from_user(0.0), Err(Error::Usage(_))));
        assert!(matches!(
            VoxelSize::from_user(f64::NAN),
            Err(Error::Usage(_))
        ));
    }
}
