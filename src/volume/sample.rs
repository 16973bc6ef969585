//! A sample as the commands see it: where it is, how to read and segment it, and the resulting
//! pore mask with its voxel size and a content hash.

use super::{
    CropSpec, RawSpec, ReadLimits, Segmentation, VoxelSize, crop, load, segment, slice_files,
};
use crate::geometry::PoreMask;
use crate::{Error, Result};
use sha2::{Digest, Sha256};
use std::io::Read;
use std::path::{Path, PathBuf};

/// How to read one sample.
#[derive(Debug, Clone)]
pub struct SampleSpec {
    pub path: PathBuf,
    /// Raw layout; `None` reads a TIFF stack or a slice folder.
    pub raw: Option<RawSpec>,
    pub segmentation: Segmentation,
    pub crop: Option<CropSpec>,
    /// Voxel edge given by the user, metres; overrides what the file says.
    pub voxel_size_m: Option<f64>,
    /// The segmentation is the default (pore label 0), not one the user chose: an image of
    /// only 0 and 1, where 1 often marks the pore, then gets a warning.
    pub default_segmentation: bool,
}

/// A loaded, segmented sample.
#[derive(Debug, Clone)]
pub struct Sample {
    pub mask: PoreMask,
    pub voxel_size: Option<VoxelSize>,
    /// Shape of the file before cropping.
    pub file_shape: [usize; 3],
    /// Where the (cropped) sample's first voxel sits in the file, in voxels.
    pub crop_origin: [usize; 3],
    /// The file's own voxel size when `--voxel-size` replaced it with a different one.
    pub overridden_voxel_size: Option<VoxelSize>,
    /// The voxel size the file records, whether or not `--voxel-size` replaced it: what the
    /// file says about the image's voxels (e.g. that they are not cubic).
    pub file_voxel_size: Option<VoxelSize>,
    /// Sample type of the voxels ("u8", "u16", "f32").
    pub sample_type: String,
    /// Doubts about how the file was read, from its values: a raw file's sample type
    /// ([`wrong_type_sign`](super::raw::wrong_type_sign)), the default pore label on a 0/1
    /// image. Each one sentence, for a warning.
    pub doubts: Vec<String>,
}

/// Reads, crops and segments a sample. The voxel values are dropped once the mask exists.
pub fn load_sample(spec: &SampleSpec, limits: &ReadLimits) -> Result<Sample> {
    let mut vol = load(&spec.path, spec.raw.as_ref(), limits)?;
    let file_shape = vol.shape;
    // Over the whole file, before a crop: the signs are in the file order of the values.
    let mut doubts: Vec<String> = spec
        .raw
        .as_ref()
        .and_then(|_| super::raw::wrong_type_sign(&vol.data, vol.shape[0]))
        .into_iter()
        .collect();
    let mut crop_origin = [0; 3];
    let mut cropped = None;
    if let Some(c) = &spec.crop {
        let c = c.resolve(vol.shape)?;
        crop_origin = c.ranges.clone().map(|r| r.start);
        vol = crop(&vol, &c);
        cropped = Some(c);
    }
    // After the crop: the porosities the warning gives are the crop's.
    let zero_one = spec.default_segmentation && only_zero_and_one(&vol.data);
    let file_voxel_size = vol.voxel_size.clone();
    let mut overridden_voxel_size = None;
    if let Some(m) = spec.voxel_size_m {
        overridden_voxel_size = vol
            .voxel_size
            .clone()
            .filter(|v| (v.metres - m).abs() > 1e-6 * m);
        vol.set_user_voxel_size(m)?;
    }
    let mask = segment(&vol, &spec.segmentation, cropped.as_ref()).map_err(|e| match e {
        Error::Usage(msg) | Error::BadVolume(msg) => Error::bad_input(&spec.path, msg),
        other => other,
    })?;
    if zero_one {
        let phi = mask.porosity();
        doubts.push(format!(
            "the image holds only the values 0 and 1, and pore is 0 by default; many tools mark the phase of interest with 1: if 1 is the pore, give --pore-label 1 (porosity {:.3} instead of {phi:.3})",
            1.0 - phi
        ));
    }
    Ok(Sample {
        mask,
        voxel_size: vol.voxel_size.clone(),
        file_shape,
        crop_origin,
        overridden_voxel_size,
        file_voxel_size,
        sample_type: vol.data.kind().to_string(),
        doubts,
    })
}

/// True when the values are exactly 0 and 1, both present (a binary mask saved as 0/1).
fn only_zero_and_one(data: &super::VoxelData) -> bool {
    fn check<T: Copy + PartialEq>(v: &[T], zero: T, one: T) -> bool {
        let (mut zeros, mut ones) = (false, false);
        for &x in v {
            if x == zero {
                zeros = true;
            } else if x == one {
                ones = true;
            } else {
                return false;
            }
        }
        zeros && ones
    }
    match data {
        super::VoxelData::U8(v) => check(v, 0, 1),
        super::VoxelData::U16(v) => check(v, 0, 1),
        super::VoxelData::F32(v) => check(v, 0.0, 1.0),
    }
}

/// SHA-256 of the input: the file's bytes, or for a slice folder the sorted slice names and
/// their bytes. Used to recognise unchanged inputs (batch resume) and recorded in results.
pub fn input_sha256(path: &Path) -> Result<String> {
    let mut h = Sha256::new();
    let files = if path.is_dir() {
        slice_files(path)?
    } else {
        vec![path.to_path_buf()]
    };
    let mut buf = vec![0u8; 1 << 20];
    for f in &files {
        if path.is_dir() {
            h.update(
                f.file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default(),
            );
        }
        let mut file = std::fs::File::open(f).map_err(|e| Error::bad_input(f, e.to_string()))?;
        loop {
            let n = file
                .read(&mut buf)
                .map_err(|e| Error::bad_input(f, e.to_string()))?;
            if n == 0 {
                break;
            }
            h.update(&buf[..n]);
        }
    }
    Ok(hex::encode(h.finalize()))
}
