//! Reading TIFF files: multi-page stacks (one page per z slice) and the single pages of a
//! slice folder. Grey 8-/16-bit unsigned and 32-bit float samples, any compression the `tiff`
//! crate decodes. Page headers are walked first and the total size checked against the memory
//! limit before the volume buffer is allocated; pages are then decoded one at a time with the
//! decoder's own limits set to exactly one page.
//!
//! Values are those the `tiff` crate returns: for the rare WhiteIsZero pages it inverts them
//! (as displayed), so pore labels of such files refer to the displayed values.

use std::fs::File;
use std::io::{BufReader, Read};
use std::path::Path;

use tiff::TiffError;
use tiff::decoder::{Decoder, DecodingResult, Limits};
use tiff::tags::Tag;

use super::limits::{ReadLimits, bytes_for};
use super::raw::RawType;
use super::{Volume, VoxelData, VoxelSize, VoxelSizeSource, format_length, one_line};
use crate::{Error, Result};

/// A decoder over a buffered file.
pub(crate) type TiffDecoder = Decoder<BufReader<File>>;

/// Size and sample type of one page; every page of a volume must have the same.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct PageInfo {
    pub width: u32,
    pub height: u32,
    pub kind: RawType,
}

impl PageInfo {
    pub fn describe(&self) -> String {
        format!("{}x{} {}", self.width, self.height, self.kind)
    }

    /// Bytes of one decoded page; None if it overflows.
    pub fn bytes(&self) -> Option<u64> {
        bytes_for(
            [self.width as usize, self.height as usize, 1],
            self.kind.bytes(),
        )
    }
}

/// Largest tag value (e.g. a strip offset table) we let the decoder read. The crate's default
/// of 1 MiB is too small for tall pages stored one row per strip; 8 MiB still bounds what a
/// hostile header can make us read per page.
const MAX_TAG_BYTES: usize = 8 << 20;

/// Most decoded bytes one stored byte can give under the page's compression, to bound what a
/// header may claim before anything is allocated (all from memory):
/// - none: 1;
/// - PackBits: 64 (a 2-byte run of 128: TIFF 6.0, section 9);
/// - Deflate: 1032 (zlib's own documentation of its limits);
/// - LZW: codes have at least 9 bits and stand for at most 4096 bytes (a string table of 4096
///   entries: TIFF 6.0, section 13), so at most 4096 × 8/9 ≈ 3641; 4096 is used;
/// - anything else the decoder takes (JPEG): 4096, more than its block coding can reach.
fn max_expansion(compression: Option<u16>) -> u64 {
    match compression {
        None | Some(1) => 1,
        Some(32773) => 64,
        Some(8) | Some(32946) => 1032,
        _ => 4096,
    }
}

/// Where the current page's samples are stored: the sum of its strip (or tile) byte counts,
/// and the most its compression can expand them ([`max_expansion`]).
pub(crate) struct PageStorage {
    pub stored: u64,
    pub ratio: u64,
}

/// Reads the current page's [`PageStorage`]. A missing or unreadable count reads as 0, which
/// no page passes [`check_claim`] with.
pub(crate) fn page_storage(dec: &mut TiffDecoder) -> PageStorage {
    let mut counts = |tag| {
        dec.find_tag_unsigned_vec::<u64>(tag)
            .ok()
            .flatten()
            .map(|v| v.iter().fold(0u64, |a, &b| a.saturating_add(b)))
    };
    let stored = match counts(Tag::StripByteCounts) {
        Some(n) => n,
        None => counts(Tag::TileByteCounts).unwrap_or(0),
    };
    let compression = dec
        .find_tag_unsigned::<u16>(Tag::Compression)
        .ok()
        .flatten();
    PageStorage {
        stored,
        ratio: max_expansion(compression),
    }
}

/// Refuses a page whose claimed decoded size (`claimed` bytes; None: beyond 64 bits) its
/// stored bytes (at most what is left of the file, `file_bytes`) cannot hold at its
/// compression's largest expansion: a corrupt or hostile header, which must fail as bad input
/// before the size is held against the memory limit (raising the limit would only reach the
/// allocation).
pub(crate) fn check_claim(
    path: &Path,
    page: &str,
    claimed: Option<u64>,
    storage: &PageStorage,
    file_bytes: u64,
) -> Result<()> {
    let stored = storage.stored.min(file_bytes);
    match claimed {
        Some(c) if c <= stored.saturating_mul(storage.ratio) => Ok(()),
        _ => Err(Error::bad_input(
            path,
            format!(
                "{page}: the header claims {} of samples, more than its {stored} stored bytes can hold{}: the file is corrupt or cut short",
                claimed.map_or("over 16 EiB".into(), crate::error::human_bytes),
                match storage.ratio {
                    1 => " (uncompressed)".to_string(),
                    r => format!(" even at {r}:1, the most its compression gives"),
                }
            ),
        )),
    }
}

/// Refuses pages whose strips add up to more than the file holds (strips shared between
/// pages, or counts that lie): else one small strip could stand for every page of a stack.
pub(crate) fn check_total_stored(path: &Path, total: u64, file_bytes: u64) -> Result<()> {
    if total <= file_bytes {
        return Ok(());
    }
    Err(Error::bad_input(
        path,
        format!(
            "the pages' strips add up to {total} bytes, more than the file's {file_bytes}: the header is corrupt"
        ),
    ))
}

/// Length of the file at `path` in bytes (0 if it cannot be read; the decoder has opened it).
pub(crate) fn stored_bytes(path: &Path) -> u64 {
    std::fs::metadata(path).map_or(0, |m| m.len())
}

/// "page 4 (z = 3)": one-based like image viewers, with the zero-based z voxperm uses.
pub(crate) fn page_label(z: usize) -> String {
    format!("page {} (z = {z})", z + 1)
}

/// Reads a multi-page TIFF, one page per z slice.
pub fn read_tiff_stack(path: &Path, limits: &ReadLimits) -> Result<Volume> {
    // Pass 1: walk the page headers only.
    let mut dec = open(path)?;
    let first = page_info(&mut dec, path, 0)?;
    check_not_hyperstack(&mut dec, path)?;
    let voxel_size = file_voxel_size(&mut dec, path);
    let file_bytes = stored_bytes(path);
    let mut total_stored = 0u64;
    let mut claim = |dec: &mut TiffDecoder, z: usize, info: &PageInfo| -> Result<()> {
        let storage = page_storage(dec);
        check_claim(path, &page_label(z), info.bytes(), &storage, file_bytes)?;
        total_stored = total_stored.saturating_add(storage.stored);
        check_total_stored(path, total_stored, file_bytes)
    };
    claim(&mut dec, 0, &first)?;
    let mut pages = 1usize;
    while dec.more_images() {
        dec.next_image()
            .map_err(|e| tiff_error(path, Some(pages), e))?;
        let info = page_info(&mut dec, path, pages)?;
        claim(&mut dec, pages, &info)?;
        if info != first {
            return Err(Error::bad_input(
                path,
                format!(
                    "{} is {} but page 1 is {}; all pages of a stack must match",
                    page_label(pages),
                    info.describe(),
                    first.describe()
                ),
            ));
        }
        pages += 1;
    }
    let shape = [first.width as usize, first.height as usize, pages];
    let what = format!(
        "{} ({}x{}x{pages} {})",
        path.display(),
        first.width,
        first.height,
        first.kind
    );
    limits.check(what, bytes_for(shape, first.kind.bytes()))?;

    // Pass 2: decode. The check above bounds the total, so the products fit in usize.
    let page_voxels = shape[0] * shape[1];
    let mut data = VoxelData::try_with_capacity(first.kind, page_voxels * pages, path)?;
    let mut dec = open(path)?.with_limits(page_limits(&first, limits));
    let mut buf = DecodingResult::U8(Vec::new());
    for z in 0..pages {
        if z > 0 {
            dec.next_image().map_err(|e| tiff_error(path, Some(z), e))?;
        }
        // The file could have been replaced since pass 1 (same page count, other pages):
        // never trust the earlier look.
        if page_info(&mut dec, path, z)? != first {
            return Err(Error::bad_input(path, "file changed while being read"));
        }
        decode_page(&mut dec, path, Some(z), &first, &mut buf, &mut data)?;
    }
    Ok(Volume {
        shape,
        data,
        voxel_size,
    })
}

/// Opens `path` as a TIFF after checking its signature, with decoder limits for walking headers.
pub(crate) fn open(path: &Path) -> Result<TiffDecoder> {
    let io_err = |e: std::io::Error| Error::bad_input(path, one_line(&e.to_string()));
    let mut file = File::open(path).map_err(io_err)?;
    let mut magic = [0u8; 4];
    let got = read_up_to(&mut file, &mut magic).map_err(io_err)?;
    if got == 0 {
        return Err(Error::bad_input(
            path,
            "not a TIFF file (the file is empty)",
        ));
    }
    // Classic TIFF is "II*\0" / "MM\0*"; BigTIFF uses 43 ('+') in place of 42 ('*').
    if !matches!(&magic[..got], b"II*\0" | b"MM\0*" | b"II+\0" | b"MM\0+") {
        return Err(Error::bad_input(
            path,
            "not a TIFF file (no TIFF signature); a raw file needs its shape, sample type and byte order",
        ));
    }
    let file = File::open(path).map_err(io_err)?;
    // Walking headers decodes no pixels: the decoder's buffer limit (which also bounds decoded
    // tag values) only needs to fit tags.
    let mut header_limits = Limits::default();
    header_limits.decoding_buffer_size = MAX_TAG_BYTES;
    header_limits.ifd_value_size = MAX_TAG_BYTES;
    Decoder::new(BufReader::new(file))
        .map(|d| d.with_limits(header_limits))
        .map_err(|e| tiff_error(path, Some(0), e))
}

/// Decoder limits while decoding pages of size `info`: one page of output (or the tag limit,
/// since the crate bounds decoded tag values by the same number), and compressed strips of at
/// most twice a page (LZW, the worst of the supported codecs, expands incompressible data by
/// at most 12/8 with 12-bit codes: TIFF 6.0 spec, section 13 [from memory]; the factor 2 is our
/// margin).
pub(crate) fn page_limits(info: &PageInfo, limits: &ReadLimits) -> Limits {
    let page = info.bytes().unwrap_or(u64::MAX).min(limits.max_bytes);
    let mut l = Limits::default();
    l.decoding_buffer_size = usize::try_from(page)
        .unwrap_or(usize::MAX)
        .max(MAX_TAG_BYTES);
    l.intermediate_buffer_size =
        usize::try_from(page.saturating_mul(2).saturating_add(1 << 20)).unwrap_or(usize::MAX);
    l.ifd_value_size = MAX_TAG_BYTES;
    l
}

/// Reads as many bytes as are available, up to `buf.len()`.
fn read_up_to(file: &mut File, buf: &mut [u8]) -> std::io::Result<usize> {
    let mut got = 0;
    while got < buf.len() {
        match file.read(&mut buf[got..])? {
            0 => break,
            n => got += n,
        }
    }
    Ok(got)
}

/// Size and sample type of the current page, refusing anything but grey samples we support.
pub(crate) fn page_info(dec: &mut TiffDecoder, path: &Path, z: usize) -> Result<PageInfo> {
    let err = |e| tiff_error(path, Some(z), e);
    let (width, height) = dec.dimensions().map_err(err)?;
    let color = dec.colortype().map_err(err)?;
    // SampleFormat: 1 = unsigned integer (the default), 3 = IEEE float (TIFF 6.0, section 19 [from memory]).
    let format = dec
        .find_tag_unsigned_vec::<u16>(Tag::SampleFormat)
        .map_err(err)?
        .and_then(|v| v.first().copied())
        .unwrap_or(1);
    let kind = match (color, format) {
        (tiff::ColorType::Gray(8), 1) => RawType::U8,
        (tiff::ColorType::Gray(16), 1) => RawType::U16,
        (tiff::ColorType::Gray(32), 3) => RawType::F32,
        (tiff::ColorType::Gray(bits), f) => {
            let kind = match f {
                1 => "unsigned",
                2 => "signed",
                3 => "float",
                _ => "unknown-format",
            };
            return Err(Error::bad_input(
                path,
                format!(
                    "{}: {bits}-bit {kind} samples are not supported (use 8- or 16-bit unsigned or 32-bit float grey)",
                    page_label(z)
                ),
            ));
        }
        (other, _) => {
            use tiff::ColorType as T;
            let what = match other {
                T::Multiband {
                    bit_depth,
                    num_samples,
                } => format!("{num_samples} {bit_depth}-bit samples per pixel (several channels)"),
                T::RGB(b) => format!("{b}-bit RGB colour"),
                T::RGBA(b) => format!("{b}-bit RGB colour with alpha"),
                T::GrayA(b) => format!("{b}-bit grey with alpha"),
                T::Palette(b) => format!("{b}-bit palette colour"),
                T::CMYK(b) | T::CMYKA(b) => format!("{b}-bit CMYK colour"),
                T::YCbCr(b) => format!("{b}-bit YCbCr colour"),
                T::Lab(b) => format!("{b}-bit CIE L*a*b* colour"),
                T::Gray(b) => format!("{b}-bit grey"),
                other => format!("colour type {other:?}"),
            };
            return Err(Error::bad_input(
                path,
                format!(
                    "{}: {what}: not supported; convert the image to one grey channel",
                    page_label(z)
                ),
            ));
        }
    };
    Ok(PageInfo {
        width,
        height,
        kind,
    })
}

/// Decodes the current page (already checked to be `info`) and appends it to `out`.
pub(crate) fn decode_page(
    dec: &mut TiffDecoder,
    path: &Path,
    z: Option<usize>,
    info: &PageInfo,
    buf: &mut DecodingResult,
    out: &mut VoxelData,
) -> Result<()> {
    dec.read_image_to_buffer(buf)
        .map_err(|e| tiff_error(path, z, e))?;
    let expected = info.width as usize * info.height as usize;
    let short = |got: usize| {
        Error::bad_input(
            path,
            format!(
                "{}decoded {got} samples, expected {expected}",
                z.map(|z| format!("{}: ", page_label(z)))
                    .unwrap_or_default()
            ),
        )
    };
    match (buf, out) {
        (DecodingResult::U8(src), VoxelData::U8(dst)) if src.len() == expected => {
            dst.extend_from_slice(src)
        }
        (DecodingResult::U16(src), VoxelData::U16(dst)) if src.len() == expected => {
            dst.extend_from_slice(src)
        }
        (DecodingResult::F32(src), VoxelData::F32(dst)) if src.len() == expected => {
            dst.extend_from_slice(src)
        }
        (DecodingResult::U8(s), _) => return Err(short(s.len())),
        (DecodingResult::U16(s), _) => return Err(short(s.len())),
        (DecodingResult::F32(s), _) => return Err(short(s.len())),
        _ => {
            return Err(Error::bad_input(
                path,
                "decoded samples of an unexpected type",
            ));
        }
    }
    Ok(())
}

/// Turns a decoder error into a one-line [`Error::BadInput`] naming the file and page.
pub(crate) fn tiff_error(path: &Path, z: Option<usize>, e: TiffError) -> Error {
    let msg = match e {
        TiffError::IoError(io) if io.kind() == std::io::ErrorKind::UnexpectedEof => {
            "the file ends early (truncated?)".to_string()
        }
        TiffError::IoError(io) => format!("read error: {io}"),
        TiffError::FormatError(f) => format!("corrupt TIFF: {f}"),
        TiffError::UnsupportedError(u) => format!("unsupported TIFF feature: {u}"),
        TiffError::LimitsExceeded => {
            "a strip or tag is larger than the page can need (corrupt file?)".to_string()
        }
        other => format!("cannot decode: {other}"),
    };
    let msg = match z {
        Some(z) => format!("{}: {msg}", page_label(z)),
        None => msg,
    };
    Error::bad_input(path, one_line(&msg))
}

/// Refuses a stack whose ImageDescription says its pages hold several channels or time
/// frames (the `channels=` and `frames=` keys ImageJ writes for hyperstacks): read page by
/// page as z slices, the channels or frames would be interleaved into one scrambled volume.
fn check_not_hyperstack(dec: &mut TiffDecoder, path: &Path) -> Result<()> {
    let d = Description::parse(&description_text(dec));
    let what = match (d.channels.filter(|&c| c > 1), d.frames.filter(|&f| f > 1)) {
        (Some(c), _) => format!("{c} channels (channels={c})"),
        (None, Some(f)) => format!("{f} time frames (frames={f})"),
        (None, None) => return Ok(()),
    };
    Err(Error::bad_input(
        path,
        format!(
            "the ImageDescription says the pages hold {what}, not one z stack: save one channel and one frame as its own stack"
        ),
    ))
}

/// The current page's ImageDescription text, empty when it has none or it is not text.
fn description_text(dec: &mut TiffDecoder) -> String {
    dec.find_tag(Tag::ImageDescription)
        .ok()
        .flatten()
        .and_then(|v| v.into_string().ok())
        .unwrap_or_default()
}

/// Resolutions of 72 and 96 pixels per inch are what many writers store when they know
/// nothing about the pixel size (screen defaults): common practice, so they are ignored.
const PLACEHOLDER_DPI: [f64; 2] = [72.0, 96.0];

/// Voxel size stated by the current page, if any: in-plane from XResolution/YResolution with
/// ResolutionUnit (TIFF 6.0, section 8 [from memory]), or with the `unit=` key of the
/// ImageDescription when ResolutionUnit is "none"; slice spacing from `spacing=`. Unreadable
/// or implausible tags are ignored rather than failing the load: the user can always give
/// the voxel size explicitly.
pub(crate) fn file_voxel_size(dec: &mut TiffDecoder, path: &Path) -> Option<VoxelSize> {
    let desc = Description::parse(&description_text(dec));
    let res_unit = dec
        .find_tag_unsigned::<u16>(Tag::ResolutionUnit)
        .ok()
        .flatten();
    let xres = rational(dec.find_tag(Tag::XResolution).ok().flatten());
    let yres = rational(dec.find_tag(Tag::YResolution).ok().flatten());

    let mut notes = Vec::new();
    let mut row_size = None;
    let in_plane = xres.and_then(|x| {
        let (metres_per_unit, unit_name) = match res_unit {
            Some(3) => (1e-2, "cm".to_string()),
            Some(2) if PLACEHOLDER_DPI.contains(&x) => return None,
            Some(2) => (0.0254, "inch".to_string()),
            _ => (desc.unit?, desc.unit_name.clone()?),
        };
        let size = metres_per_unit / x;
        if !plausible(size) {
            return None;
        }
        // A y resolution that differs means voxels that are not square in plane, unless it is
        // a placeholder (72 or 96 dpi, as for x).
        let placeholder_y = |y: f64| res_unit == Some(2) && PLACEHOLDER_DPI.contains(&y);
        if let Some(y) = yres
            && (y - x).abs() > 1e-3 * x
            && !placeholder_y(y)
        {
            notes.push(format!(
                "YResolution {y} differs from XResolution {x}; using x"
            ));
            row_size = Some(metres_per_unit / y).filter(|&v| plausible(v));
        }
        Some((size, format!("XResolution {x} pixels/{unit_name}")))
    });
    let spacing = desc
        .spacing
        .zip(desc.unit)
        .map(|(s, u)| s * u)
        .filter(|&s| plausible(s));

    let (metres, detail, slice_spacing) = match (in_plane, spacing) {
        // Same value twice: keep the description's, written in full precision.
        (Some((xy, tag)), Some(z)) if (z - xy).abs() <= 1e-6 * xy => {
            (z, format!("{tag} and ImageDescription spacing"), None)
        }
        (Some((xy, tag)), Some(z)) => {
            notes.push(format!(
                "slice spacing {} differs from the in-plane size: voxels are not cubic",
                format_length(z)
            ));
            (xy, tag, Some(z))
        }
        (Some((xy, tag)), None) => (xy, tag, None),
        (None, Some(z)) => (z, "ImageDescription spacing".to_string(), None),
        (None, None) => return None,
    };
    let detail = std::iter::once(detail)
        .chain(notes)
        .collect::<Vec<_>>()
        .join("; ");
    Some(VoxelSize {
        metres,
        source: VoxelSizeSource::File {
            path: path.to_path_buf(),
            detail,
            slice_spacing,
            row_size,
        },
    })
}

/// Voxel sizes outside 0.1 nm – 1 m are not images of porous media; treat them as garbage.
fn plausible(metres: f64) -> bool {
    metres.is_finite() && (1e-10..=1.0).contains(&metres)
}

fn rational(v: Option<tiff::decoder::ifd::Value>) -> Option<f64> {
    use tiff::decoder::ifd::Value;
    let x = match v? {
        Value::Rational(n, d) if d != 0 => f64::from(n) / f64::from(d),
        Value::Float(f) => f64::from(f),
        Value::Double(f) => f,
        _ => return None,
    };
    (x.is_finite() && x > 0.0).then_some(x)
}

/// The `key=value` lines of an ImageDescription that matter for the voxel size.
#[derive(Debug, Default, PartialEq)]
struct Description {
    /// Metres per unit of the `unit=` key.
    unit: Option<f64>,
    unit_name: Option<String>,
    /// The `spacing=` value, in that unit.
    spacing: Option<f64>,
    /// `channels=` and `frames=`: a hyperstack whose pages are not (only) z slices.
    channels: Option<u64>,
    frames: Option<u64>,
}

impl Description {
    fn parse(text: &str) -> Description {
        let mut d = Description::default();
        for line in text.lines() {
            let Some((key, value)) = line.split_once('=') else {
                continue;
            };
            let value = value.trim();
            match key.trim() {
                "unit" => {
                    // Some writers escape the micro sign as the literal text "\u00B5".
                    let name = value.replace("\\u00B5", "µ").replace("\\u00b5", "µ");
                    d.unit = super::unit_to_metres(&name);
                    d.unit_name = d.unit.map(|_| name);
                }
                "spacing" => d.spacing = value.parse().ok().filter(|s: &f64| *s > 0.0),
                "channels" => d.channels = value.parse().ok(),
                "frames" => d.frames = value.parse().ok(),
                _ => {}
            }
        }
        d
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn description_keys() {
        let d = Description::parse(
            "writer=some tool\nimages=10\nunit=micron\nspacing=2.5\nloop=false\n",
        );
        assert_eq!(d.unit, Some(1e-6));
        assert_eq!(d.spacing, Some(2.5));
        let d = Description::parse("unit=\\u00B5m\nspacing=0.5");
        assert_eq!(d.unit, Some(1e-6));
        let d = Description::parse("unit=pixel\nspacing=-1\nnonsense");
        assert_eq!(d, Description::default());
        let d =
            Description::parse("ImageJ=1.54f\nimages=20\nchannels=2\nslices=10\nhyperstack=true");
        assert_eq!((d.channels, d.frames), (Some(2), None));
    }

    #[test]
    fn page_labels_are_one_based_with_z() {
        assert_eq!(page_label(0), "page 1 (z = 0)");
    }
}
