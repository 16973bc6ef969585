//! Writing volumes: multi-page grey TIFF stacks (with the voxel size recorded so our reader
//! gets it back) and raw files. Both go through [`write_atomically`], so an interrupted write
//! never leaves a partial file under the real name.

use std::io::{Seek, Write};
use std::path::Path;

use tiff::encoder::colortype::{ColorType, Gray8, Gray16, Gray32Float};
use tiff::encoder::{Compression, Predictor, Rational, TiffEncoder, TiffKind, TiffValue};
use tiff::tags::Tag;

use super::atomic::{output_error, write_atomically};
use super::raw::Endian;
use super::{Volume, VoxelData};
use crate::{Error, Result};

/// Compression of written TIFF pages.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum TiffCompression {
    #[default]
    None,
    Lzw,
    Deflate,
}

impl TiffCompression {
    /// Parses "none", "lzw" or "deflate" (case-insensitive).
    pub fn parse(s: &str) -> Result<TiffCompression> {
        match s.trim().to_ascii_lowercase().as_str() {
            "none" => Ok(TiffCompression::None),
            "lzw" => Ok(TiffCompression::Lzw),
            "deflate" => Ok(TiffCompression::Deflate),
            _ => Err(Error::Usage(format!(
                "unknown TIFF compression '{s}' (expected none, lzw or deflate)"
            ))),
        }
    }

    fn to_tiff(self) -> Compression {
        match self {
            TiffCompression::None => Compression::Uncompressed,
            TiffCompression::Lzw => Compression::Lzw,
            TiffCompression::Deflate => Compression::Deflate(Default::default()),
        }
    }
}

/// Files whose pixel data come near 4 GiB are written as BigTIFF: classic TIFF offsets are
/// 32-bit (TIFF 6.0 spec, section 2 [from memory]). The margin leaves room for tags and compression overhead.
const BIGTIFF_ABOVE: u64 = (1 << 32) - (64 << 20);

/// Writes `vol` as a multi-page grey TIFF, one page per z slice. With `voxel_size` (metres),
/// each page gets XResolution/YResolution in pixels per centimetre with ResolutionUnit
/// centimetre (TIFF 6.0, section 8 [from memory]), and the first page an ImageDescription with
/// `unit=m` and `spacing=` holding the exact value.
pub fn write_tiff_stack(
    path: &Path,
    vol: &Volume,
    compression: TiffCompression,
    voxel_size: Option<f64>,
) -> Result<()> {
    let [nx, ny, nz] = vol.shape;
    let too_big = || Error::Output {
        path: path.to_path_buf(),
        msg: format!("a TIFF page of {nx}x{ny} exceeds the format's 2^32-1 pixel side"),
    };
    let width = u32::try_from(nx).map_err(|_| too_big())?;
    let height = u32::try_from(ny).map_err(|_| too_big())?;
    if vol.shape.contains(&0) || vol.data.len() != nx * ny * nz {
        return Err(Error::Internal(format!(
            "cannot write volume of shape {:?} with {} voxels",
            vol.shape,
            vol.data.len()
        )));
    }
    if let Some(m) = voxel_size
        && !(m.is_finite() && (1e-10..=1.0).contains(&m))
    {
        return Err(Error::Usage(format!(
            "voxel size {m} m is outside 0.1 nm – 1 m; cannot record it in a TIFF"
        )));
    }
    let meta = PageMeta {
        width,
        height,
        pages: nz,
        voxel_size,
    };
    let predictor = match (compression, &vol.data) {
        // Horizontal differencing helps LZW/Deflate on integer images; the tiff crate does
        // not offer it for floats.
        (TiffCompression::None, _) | (_, VoxelData::F32(_)) => Predictor::None,
        _ => Predictor::Horizontal,
    };
    let raw_bytes = (vol.data.len() as u64).saturating_mul(vol.data.kind().bytes());
    write_atomically(path, |w| {
        let result = if raw_bytes > BIGTIFF_ABOVE {
            TiffEncoder::new_big(&mut *w).and_then(|enc| {
                write_data(
                    enc.with_compression(compression.to_tiff())
                        .with_predictor(predictor),
                    &vol.data,
                    &meta,
                )
            })
        } else {
            TiffEncoder::new(&mut *w).and_then(|enc| {
                write_data(
                    enc.with_compression(compression.to_tiff())
                        .with_predictor(predictor),
                    &vol.data,
                    &meta,
                )
            })
        };
        result.map_err(|e| output_error(path, e))
    })
}

struct PageMeta {
    width: u32,
    height: u32,
    pages: usize,
    voxel_size: Option<f64>,
}

fn write_data<W: Write + Seek, K: TiffKind>(
    mut enc: TiffEncoder<W, K>,
    data: &VoxelData,
    meta: &PageMeta,
) -> tiff::TiffResult<()> {
    match data {
        VoxelData::U8(v) => write_pages::<W, K, Gray8>(&mut enc, v, meta),
        VoxelData::U16(v) => write_pages::<W, K, Gray16>(&mut enc, v, meta),
        VoxelData::F32(v) => write_pages::<W, K, Gray32Float>(&mut enc, v, meta),
    }
}

fn write_pages<W: Write + Seek, K: TiffKind, C: ColorType>(
    enc: &mut TiffEncoder<W, K>,
    data: &[C::Inner],
    meta: &PageMeta,
) -> tiff::TiffResult<()>
where
    [C::Inner]: TiffValue,
{
    let page = meta.width as usize * meta.height as usize;
    for z in 0..meta.pages {
        let mut image = enc.new_image::<C>(meta.width, meta.height)?;
        if let Some(metres) = meta.voxel_size {
            let per_cm = pixels_per_cm(metres);
            let dir = image.encoder();
            // ResolutionUnit 3 = centimetre (TIFF 6.0, section 8 [from memory]).
            dir.write_tag(Tag::ResolutionUnit, 3u16)?;
            dir.write_tag(Tag::XResolution, per_cm.clone())?;
            dir.write_tag(Tag::YResolution, per_cm)?;
            if z == 0 {
                // `{}` of an f64 prints the shortest text that parses back to the same value.
                let text = format!(
                    "voxperm volume {}x{}x{}\nunit=m\nspacing={metres}\n",
                    meta.width, meta.height, meta.pages
                );
                dir.write_tag(Tag::ImageDescription, text.as_str())?;
            }
        }
        image.write_data(&data[z * page..(z + 1) * page])?;
    }
    Ok(())
}

/// 0.01 m / `metres` as a rational with the largest power-of-ten denominator that keeps the
/// numerator in u32 (about 9 significant digits). The caller keeps `metres` in 0.1 nm – 1 m,
/// i.e. 0.01 to 1e8 pixels per cm.
fn pixels_per_cm(metres: f64) -> Rational {
    let x = 0.01 / metres;
    let mut d: u32 = 1;
    while d <= 100_000_000 && x * f64::from(d) * 10.0 <= f64::from(u32::MAX) {
        d *= 10;
    }
    Rational {
        n: (x * f64::from(d)).round() as u32,
        d,
    }
}

/// Samples converted per write call: bounds the staging buffer.
const CHUNK_SAMPLES: usize = 1 << 18;

/// Writes the voxels as a headerless raw file, x fastest, in the given byte order.
pub fn write_raw(path: &Path, vol: &Volume, endian: Endian) -> Result<()> {
    write_atomically(path, |w| {
        let result = match &vol.data {
            VoxelData::U8(v) => w.write_all(v),
            VoxelData::U16(v) => write_samples(w, v, |x| match endian {
                Endian::Little => x.to_le_bytes(),
                Endian::Big => x.to_be_bytes(),
            }),
            VoxelData::F32(v) => write_samples(w, v, |x| match endian {
                Endian::Little => x.to_le_bytes(),
                Endian::Big => x.to_be_bytes(),
            }),
        };
        result.map_err(|e| output_error(path, e))
    })
}

fn write_samples<T: Copy, const N: usize>(
    w: &mut impl Write,
    v: &[T],
    to_bytes: impl Fn(T) -> [u8; N],
) -> std::io::Result<()> {
    let mut buf = Vec::with_capacity(CHUNK_SAMPLES * N);
    for chunk in v.chunks(CHUNK_SAMPLES) {
        buf.clear();
        buf.extend(chunk.iter().flat_map(|&x| to_bytes(x)));
        w.write_all(&buf)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rational_keeps_nine_digits() {
        for m in [2.5e-6, 3.7e-6, 1e-10, 1.0, 0.123456789e-3] {
            let r = pixels_per_cm(m);
            let back = 0.01 / (f64::from(r.n) / f64::from(r.d));
            assert!((back - m).abs() <= 1e-8 * m, "{m}: {}/{}", r.n, r.d);
        }
    }

    #[test]
    fn compression_names() {
        assert_eq!(TiffCompression::parse("LZW").unwrap(), TiffCompression::Lzw);
        assert!(matches!(
            TiffCompression::parse("zip"),
            Err(Error::Usage(_))
        ));
    }
}
