//! Volume I/O round trips and hostile-input checks: every supported format is written and read
//! back voxel for voxel; every kind of bad input must give the right error variant with a
//! one-line message naming the file, and never a panic. All files are generated here.

mod common;
use common::hostile_header;
use std::fs;
use std::io::{Cursor, Write};
use std::path::Path;

use tiff::encoder::colortype::{ColorType, Gray8, Gray16, Gray32Float, RGB8};
use tiff::encoder::{Compression, Rational, TiffEncoder, TiffValue};
use tiff::tags::Tag;
use voxperm::Error;
use voxperm::volume::{
    self, Crop, CropSpec, Endian, RawSpec, RawType, ReadLimits, Segmentation, TiffCompression,
    Volume, VoxelData, VoxelSizeSource, load, parse_length, segment, write_raw, write_tiff_stack,
};

// ---------- helpers ----------

/// Deterministic pseudo-random sequence (64-bit LCG with Knuth's MMIX constants,
/// from memory; any full-period constants would do)
/// so test volumes have varied values without a random-number dependency.
fn lcg(seed: u64) -> impl FnMut() -> u64 {
    let mut s = seed;
    move || {
        s = s
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        s >> 33
    }
}

fn volume_of(kind: RawType, shape: [usize; 3], seed: u64) -> Volume {
    let n = shape.iter().product();
    let mut r = lcg(seed);
    let data = match kind {
        RawType::U8 => VoxelData::U8((0..n).map(|_| r() as u8).collect()),
        RawType::U16 => VoxelData::U16((0..n).map(|_| r() as u16).collect()),
        // Negative, fractional, tiny and large values: all must survive bit for bit.
        RawType::F32 => VoxelData::F32(
            (0..n)
                .map(|_| (r() as i32 - (1 << 30)) as f32 * 1.7e-3 / (1 + r() % 1000) as f32)
                .collect(),
        ),
    };
    Volume::new(shape, data).unwrap()
}

/// Voxel equality that compares f32 by bit pattern.
fn same_voxels(a: &VoxelData, b: &VoxelData) -> bool {
    match (a, b) {
        (VoxelData::F32(x), VoxelData::F32(y)) => {
            x.len() == y.len() && x.iter().zip(y).all(|(p, q)| p.to_bits() == q.to_bits())
        }
        _ => a == b,
    }
}

fn limits() -> ReadLimits {
    ReadLimits::new(1 << 30)
}

/// Writes one single-page TIFF with the tiff crate's encoder.
fn write_page<C: ColorType>(path: &Path, w: u32, h: u32, data: &[C::Inner], comp: Compression)
where
    [C::Inner]: TiffValue,
{
    let mut buf = Cursor::new(Vec::new());
    TiffEncoder::new(&mut buf)
        .unwrap()
        .with_compression(comp)
        .write_image::<C>(w, h, data)
        .unwrap();
    fs::write(path, buf.into_inner()).unwrap();
}

/// Asserts a BadInput whose one-line message names `file` and contains `fragment`.
fn assert_bad_input(result: voxperm::Result<Volume>, file: &str, fragment: &str) {
    match result {
        Err(e @ Error::BadInput { .. }) => {
            let msg = e.to_string();
            assert!(msg.contains(file), "message does not name {file}: {msg}");
            assert!(msg.contains(fragment), "expected '{fragment}' in: {msg}");
            assert!(!msg.contains('\n'), "message is not one line: {msg:?}");
        }
        other => panic!("expected BadInput naming {file}, got {other:?}"),
    }
}

// ---------- round trips ----------

#[test]
fn tiff_stack_round_trip_every_type_and_compression() {
    let dir = tempfile::tempdir().unwrap();
    for kind in [RawType::U8, RawType::U16, RawType::F32] {
        for comp in [
            TiffCompression::None,
            TiffCompression::Lzw,
            TiffCompression::Deflate,
        ] {
            let vol = volume_of(kind, [7, 5, 4], 11);
            let path = dir.path().join(format!("stack_{kind}_{comp:?}.tif"));
            write_tiff_stack(&path, &vol, comp, None).unwrap();
            let back = load(&path, None, &limits()).unwrap();
            assert_eq!(back.shape, vol.shape, "{kind} {comp:?}");
            assert_eq!(back.data.kind(), kind);
            assert!(same_voxels(&back.data, &vol.data), "{kind} {comp:?}");
            assert_eq!(back.voxel_size, None);
        }
    }
}

#[test]
fn multi_strip_compressed_pages_round_trip() {
    // 1000 x 600 u16 = 1.2 MB per page: the encoder splits pages larger than 1 MB into several
    // strips, so this exercises multi-strip LZW/Deflate pages with the horizontal predictor.
    let dir = tempfile::tempdir().unwrap();
    let vol = volume_of(RawType::U16, [1000, 600, 2], 5);
    for comp in [TiffCompression::Lzw, TiffCompression::Deflate] {
        let path = dir.path().join(format!("big_{comp:?}.tif"));
        write_tiff_stack(&path, &vol, comp, None).unwrap();
        let back = load(&path, None, &limits()).unwrap();
        assert_eq!(back.shape, vol.shape);
        assert!(same_voxels(&back.data, &vol.data), "{comp:?}");
    }
}

#[test]
fn packbits_pages_from_the_tiff_encoder_are_read() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("packbits.tif");
    let (w, h) = (9u32, 6u32);
    let pages: Vec<Vec<u8>> = (0..3)
        .map(|z| (0..w * h).map(|i| ((i / 4 + z * 7) % 5) as u8).collect())
        .collect();
    let mut buf = Cursor::new(Vec::new());
    let mut enc = TiffEncoder::new(&mut buf)
        .unwrap()
        .with_compression(Compression::Packbits);
    for p in &pages {
        enc.write_image::<Gray8>(w, h, p).unwrap();
    }
    fs::write(&path, buf.into_inner()).unwrap();
    let vol = load(&path, None, &limits()).unwrap();
    assert_eq!(vol.shape, [9, 6, 3]);
    assert_eq!(vol.data, VoxelData::U8(pages.concat()));
}

#[test]
fn bigtiff_from_the_tiff_encoder_is_read() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("big.tif");
    let vol = volume_of(RawType::F32, [5, 4, 2], 8);
    let VoxelData::F32(v) = &vol.data else {
        unreachable!()
    };
    let mut buf = Cursor::new(Vec::new());
    let mut enc = TiffEncoder::new_big(&mut buf).unwrap();
    for page in v.chunks(20) {
        enc.write_image::<Gray32Float>(5, 4, page).unwrap();
    }
    fs::write(&path, buf.into_inner()).unwrap();
    let back = load(&path, None, &limits()).unwrap();
    assert_eq!(back.shape, [5, 4, 2]);
    assert!(same_voxels(&back.data, &vol.data));
}

#[test]
fn limit_boundary_is_inclusive() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("small.tif");
    let vol = volume_of(RawType::U16, [4, 4, 3], 6);
    write_tiff_stack(&path, &vol, TiffCompression::Deflate, None).unwrap();
    // 4 * 4 * 3 voxels * 2 bytes = 96 bytes.
    assert!(load(&path, None, &ReadLimits::new(96)).is_ok());
    match load(&path, None, &ReadLimits::new(95)) {
        Err(Error::TooLarge {
            needed_bytes: 96,
            limit_bytes: 95,
            ..
        }) => {}
        other => panic!("expected TooLarge, got {other:?}"),
    }
}

#[test]
fn slice_folder_in_natural_order_equals_the_stack() {
    let dir = tempfile::tempdir().unwrap();
    let slices = dir.path().join("slices");
    fs::create_dir(&slices).unwrap();
    let shape = [6, 4, 12];
    let vol = volume_of(RawType::U16, shape, 3);
    let VoxelData::U16(v) = &vol.data else {
        unreachable!()
    };
    let page = shape[0] * shape[1];
    // s1..s12: plain string order would put s10, s11, s12 before s2.
    for z in 0..shape[2] {
        let comp = if z % 2 == 0 {
            Compression::Uncompressed
        } else {
            Compression::Lzw
        };
        let path = slices.join(format!("s{}.tif", z + 1));
        write_page::<Gray16>(&path, 6, 4, &v[z * page..(z + 1) * page], comp);
    }
    // Files that are not slices must be ignored.
    fs::write(slices.join("notes.txt"), "scan notes").unwrap();
    fs::write(slices.join(".s0.tif"), "hidden metadata").unwrap();

    let stack = dir.path().join("stack.tif");
    write_tiff_stack(&stack, &vol, TiffCompression::None, None).unwrap();
    let from_stack = load(&stack, None, &limits()).unwrap();
    let from_folder = load(&slices, None, &limits()).unwrap();
    assert_eq!(from_folder.shape, shape);
    assert_eq!(from_folder.data, from_stack.data);
    assert_eq!(from_folder.data, vol.data);

    let names: Vec<String> = volume::slice_files(&slices)
        .unwrap()
        .iter()
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names[..3], ["s1.tif", "s2.tif", "s3.tif"]);
    assert_eq!(names.last().unwrap(), "s12.tif");
}

#[test]
fn raw_round_trip_little_and_big_endian() {
    let dir = tempfile::tempdir().unwrap();
    for kind in [RawType::U8, RawType::U16, RawType::F32] {
        for endian in [Endian::Little, Endian::Big] {
            let vol = volume_of(kind, [5, 3, 4], 7);
            let path = dir.path().join(format!("vol_{kind}_{endian:?}.raw"));
            write_raw(&path, &vol, endian).unwrap();
            assert_eq!(
                fs::metadata(&path).unwrap().len(),
                60 * kind.bytes(),
                "file size"
            );
            let spec = RawSpec {
                shape: [5, 3, 4],
                kind,
                endian,
            };
            let back = load(&path, Some(&spec), &limits()).unwrap();
            assert_eq!(back.shape, vol.shape);
            assert!(same_voxels(&back.data, &vol.data), "{kind} {endian:?}");
        }
    }
}

#[test]
fn raw_byte_order_is_what_the_spec_says() {
    // Hand-written bytes, independent of our writer: 0x0102 big endian, then 0x0304.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("be.raw");
    fs::write(&path, [1u8, 2, 3, 4]).unwrap();
    let spec = |endian| RawSpec {
        shape: [2, 1, 1],
        kind: RawType::U16,
        endian,
    };
    let be = load(&path, Some(&spec(Endian::Big)), &limits()).unwrap();
    assert_eq!(be.data, VoxelData::U16(vec![0x0102, 0x0304]));
    let le = load(&path, Some(&spec(Endian::Little)), &limits()).unwrap();
    assert_eq!(le.data, VoxelData::U16(vec![0x0201, 0x0403]));
}

// ---------- voxel size ----------

#[test]
fn voxel_size_round_trips_through_tiff_tags() {
    let dir = tempfile::tempdir().unwrap();
    let vol = volume_of(RawType::U8, [4, 4, 3], 1);
    for metres in [2.5e-6, 3.7e-6, 800e-9, 1.234567e-4] {
        let path = dir.path().join("sized.tif");
        write_tiff_stack(&path, &vol, TiffCompression::Lzw, Some(metres)).unwrap();
        let back = load(&path, None, &limits()).unwrap();
        let size = back.voxel_size.expect("voxel size read from the file");
        assert_eq!(size.metres, metres, "exact via the description");
        match &size.source {
            VoxelSizeSource::File {
                path: p,
                slice_spacing,
                ..
            } => {
                assert_eq!(p, &path);
                assert_eq!(*slice_spacing, None);
            }
            other => panic!("expected a file source, got {other:?}"),
        }
        assert!(size.describe().contains("sized.tif"), "{}", size.describe());
    }
}

/// A one-slice 3x2 TIFF with resolution tags (unit 2 = inch, 3 = cm; TIFF 6.0 section 8, from
/// memory) and optionally an ImageDescription.
/// Resolutions are (numerator, denominator) pixels per unit.
fn resolution_tiff(
    path: &Path,
    unit: u16,
    x: (u32, u32),
    y: (u32, u32),
    description: Option<&str>,
) {
    let mut buf = Cursor::new(Vec::new());
    let mut enc = TiffEncoder::new(&mut buf).unwrap();
    let mut img = enc.new_image::<Gray8>(3, 2).unwrap();
    img.encoder().write_tag(Tag::ResolutionUnit, unit).unwrap();
    for (tag, (n, d)) in [(Tag::XResolution, x), (Tag::YResolution, y)] {
        img.encoder().write_tag(tag, Rational { n, d }).unwrap();
    }
    if let Some(text) = description {
        img.encoder()
            .write_tag(Tag::ImageDescription, text)
            .unwrap();
    }
    img.write_data(&[0u8; 6]).unwrap();
    fs::write(path, buf.into_inner()).unwrap();
}

#[test]
fn voxel_size_from_resolution_tags_alone() {
    // 4000 pixels per cm is 2.5 µm, with no ImageDescription.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("res.tif");
    let read = |unit, x, y, desc| {
        resolution_tiff(&path, unit, x, y, desc);
        load(&path, None, &limits()).unwrap().voxel_size.unwrap()
    };
    let size = read(3, (4000, 1), (4000, 1), None);
    assert!((size.metres - 2.5e-6).abs() < 1e-18, "{}", size.metres);
    assert!(size.source.not_cubic(size.metres).is_none());
    // A y resolution of half the x one: voxels twice as long along y.
    let size = read(3, (4000, 1), (2000, 1), None);
    let (how, ratio) = size.source.not_cubic(size.metres).unwrap();
    assert!(
        (ratio - 2.0).abs() < 1e-12 && how.contains("y size 5 µm"),
        "{how}"
    );
    // A 72 dpi y is a placeholder, as it would be for x: no claim about the voxel shape.
    let size = read(2, (25400, 1), (72, 1), None);
    assert!((size.metres - 1e-6).abs() < 1e-18, "{}", size.metres);
    assert!(size.source.not_cubic(size.metres).is_none(), "{size:?}");
    // An implausible x (0.001 pixels per cm: 10 m voxels) is not used, and then its y is not
    // compared with the description's spacing either.
    let size = read(3, (1, 1000), (10000, 1), Some("unit=micron\nspacing=2\n"));
    assert!((size.metres - 2e-6).abs() < 1e-18, "{}", size.metres);
    assert!(size.source.not_cubic(size.metres).is_none(), "{size:?}");
}

/// A hyperstack (ImageJ's `channels=` or `frames=` in the description) is refused: its pages
/// interleave channels or time frames, which would be read as one scrambled z stack.
#[test]
fn hyperstacks_with_channels_or_frames_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let write = |name: &str, text: &str| {
        let path = dir.path().join(name);
        let mut buf = Cursor::new(Vec::new());
        let mut enc = TiffEncoder::new(&mut buf).unwrap();
        for z in 0..4 {
            let mut img = enc.new_image::<Gray8>(2, 2).unwrap();
            if z == 0 {
                img.encoder()
                    .write_tag(Tag::ImageDescription, text)
                    .unwrap();
            }
            img.write_data(&[0u8, 1, 1, 0]).unwrap();
        }
        fs::write(&path, buf.into_inner()).unwrap();
        path
    };
    let two = write(
        "two.tif",
        "ImageJ=1.54f\nimages=4\nchannels=2\nslices=2\nhyperstack=true\n",
    );
    assert_bad_input(
        load(&two, None, &limits()),
        "two.tif",
        "2 channels (channels=2)",
    );
    let movie = write("movie.tif", "ImageJ=1.54f\nimages=4\nslices=2\nframes=2\n");
    assert_bad_input(
        load(&movie, None, &limits()),
        "movie.tif",
        "2 time frames (frames=2)",
    );
    // One channel and one frame, said explicitly, is a plain stack.
    let plain = write(
        "plain.tif",
        "ImageJ=1.54f\nimages=4\nchannels=1\nslices=4\nframes=1\n",
    );
    assert_eq!(load(&plain, None, &limits()).unwrap().shape, [2, 2, 4]);
}

#[test]
fn voxel_size_from_description_unit_and_spacing() {
    // The widespread key=value description convention: pixels per `unit` in XResolution with
    // ResolutionUnit "none", slice spacing in `spacing=`.
    let dir = tempfile::tempdir().unwrap();
    let write = |name: &str, spacing: &str| {
        let path = dir.path().join(name);
        let mut buf = Cursor::new(Vec::new());
        let mut enc = TiffEncoder::new(&mut buf).unwrap();
        for z in 0..2 {
            let mut img = enc.new_image::<Gray8>(2, 2).unwrap();
            img.encoder()
                .write_tag(Tag::XResolution, Rational { n: 1, d: 5 })
                .unwrap();
            img.encoder()
                .write_tag(Tag::YResolution, Rational { n: 1, d: 5 })
                .unwrap();
            if z == 0 {
                let text = format!("images=2\nslices=2\nunit=micron\nspacing={spacing}\n");
                img.encoder()
                    .write_tag(Tag::ImageDescription, text.as_str())
                    .unwrap();
            }
            img.write_data(&[1u8; 4]).unwrap();
        }
        fs::write(&path, buf.into_inner()).unwrap();
        load(&path, None, &limits()).unwrap().voxel_size.unwrap()
    };
    let cubic = write("cubic.tif", "5.0");
    assert!((cubic.metres - 5e-6).abs() < 1e-18);
    let VoxelSizeSource::File { slice_spacing, .. } = &cubic.source else {
        panic!()
    };
    assert_eq!(*slice_spacing, None);

    let tall = write("tall.tif", "10");
    assert!((tall.metres - 5e-6).abs() < 1e-18, "in-plane size wins");
    let VoxelSizeSource::File {
        slice_spacing,
        detail,
        ..
    } = &tall.source
    else {
        panic!()
    };
    assert!((slice_spacing.unwrap() - 1e-5).abs() < 1e-18);
    assert!(detail.contains("not cubic"), "{detail}");
    let (how, ratio) = tall.source.not_cubic(tall.metres).unwrap();
    assert!(
        (ratio - 2.0).abs() < 1e-12 && how.contains("slice spacing 10 µm"),
        "{how}"
    );
    assert!(cubic.source.not_cubic(cubic.metres).is_none());
    // Loaded as a sample, the file gives a warning that estimate and describe print.
    let spec = voxperm::volume::sample::SampleSpec {
        path: dir.path().join("tall.tif"),
        raw: None,
        segmentation: voxperm::volume::Segmentation::Labels(vec![1]),
        crop: None,
        voxel_size_m: None,
        default_segmentation: false,
    };
    // A --voxel-size (here the file's own x size) does not make the voxels cubic: still warned.
    for given in [None, Some(5e-6)] {
        let spec = voxperm::volume::sample::SampleSpec {
            voxel_size_m: given,
            ..spec.clone()
        };
        let sample = voxperm::volume::sample::load_sample(&spec, &limits()).unwrap();
        let warnings = voxperm::analysis::run::sample_warnings(&sample, &spec.path);
        assert!(
            warnings
                .iter()
                .any(|w| w.contains("not cubic") && w.contains("ratio 2.000")),
            "{given:?}: {warnings:?}"
        );
    }
}

#[test]
fn no_physical_unit_means_no_voxel_size_and_user_value_wins() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("plain.tif");
    // The tiff encoder writes XResolution 1/1 with ResolutionUnit "none" by default.
    write_page::<Gray8>(&path, 2, 2, &[0, 1, 2, 3], Compression::Uncompressed);
    let mut vol = load(&path, None, &limits()).unwrap();
    assert_eq!(vol.voxel_size, None);
    vol.set_user_voxel_size(parse_length("3.2 um").unwrap())
        .unwrap();
    let size = vol.voxel_size.unwrap();
    assert_eq!(size.source, VoxelSizeSource::User);
    assert!((size.metres - 3.2e-6).abs() < 1e-18);
}

// ---------- bad input ----------

#[test]
fn missing_path_is_bad_input() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("nowhere.tif");
    assert_bad_input(
        load(&path, None, &limits()),
        "nowhere.tif",
        "no such file or folder",
    );
    // A file named with a trailing slash (or as a folder on the way): said in words, not as
    // the system's "Not a directory (os error 20)".
    let file = dir.path().join("stack.tif");
    fs::write(&file, b"x").unwrap();
    let through = std::path::PathBuf::from(format!("{}/", file.display()));
    assert_bad_input(
        load(&through, None, &limits()),
        "stack.tif/",
        "a part of the path before a / is a file, not a folder",
    );
}

#[test]
fn text_and_empty_files_are_not_tiff() {
    let dir = tempfile::tempdir().unwrap();
    let text = dir.path().join("readme.tif");
    fs::write(&text, "this is not an image\n").unwrap();
    assert_bad_input(
        load(&text, None, &limits()),
        "readme.tif",
        "not a TIFF file",
    );
    let empty = dir.path().join("empty.tif");
    fs::write(&empty, b"").unwrap();
    assert_bad_input(
        load(&empty, None, &limits()),
        "empty.tif",
        "not a TIFF file",
    );
    assert_bad_input(load(&empty, None, &limits()), "empty.tif", "empty");
}

#[test]
fn truncated_tiff_names_file_and_page() {
    let dir = tempfile::tempdir().unwrap();
    let full = dir.path().join("full.tif");
    let vol = volume_of(RawType::U16, [20, 10, 6], 9);
    write_tiff_stack(&full, &vol, TiffCompression::None, None).unwrap();
    let bytes = fs::read(&full).unwrap();
    let half = dir.path().join("half.tif");
    fs::write(&half, &bytes[..bytes.len() / 2]).unwrap();
    assert_bad_input(load(&half, None, &limits()), "half.tif", "page ");
}

#[test]
fn every_truncation_and_byte_flip_fails_cleanly() {
    // Small LZW stack; each prefix must be refused (never read as a smaller volume, never a
    // panic), and corrupted bytes must give Ok or a one-line error, never a panic.
    let dir = tempfile::tempdir().unwrap();
    let full = dir.path().join("small.tif");
    let vol = volume_of(RawType::U8, [5, 4, 3], 2);
    write_tiff_stack(&full, &vol, TiffCompression::Lzw, Some(1e-6)).unwrap();
    let bytes = fs::read(&full).unwrap();
    let cut = dir.path().join("cut.tif");
    for len in 0..bytes.len() {
        fs::write(&cut, &bytes[..len]).unwrap();
        assert_bad_input(load(&cut, None, &limits()), "cut.tif", "");
    }
    for pos in 0..bytes.len() {
        for value in [0x00u8, 0xff, 0x7f] {
            let mut b = bytes.clone();
            b[pos] = value;
            fs::write(&cut, &b).unwrap();
            match load(&cut, None, &ReadLimits::new(1 << 24)) {
                Ok(v) => assert_eq!(v.len(), v.shape.iter().product::<usize>()),
                Err(e) => assert!(!e.to_string().contains('\n'), "{e}"),
            }
        }
    }
}

#[test]
fn stack_pages_must_match() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("mixed.tif");
    let mut buf = Cursor::new(Vec::new());
    let mut enc = TiffEncoder::new(&mut buf).unwrap();
    enc.write_image::<Gray8>(4, 4, &[0; 16]).unwrap();
    enc.write_image::<Gray8>(4, 4, &[0; 16]).unwrap();
    enc.write_image::<Gray8>(4, 3, &[0; 12]).unwrap();
    fs::write(&path, buf.into_inner()).unwrap();
    assert_bad_input(load(&path, None, &limits()), "mixed.tif", "page 3 (z = 2)");
}

#[test]
fn colour_images_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("rgb.tif");
    write_page::<RGB8>(&path, 2, 2, &[0; 12], Compression::Uncompressed);
    assert_bad_input(
        load(&path, None, &limits()),
        "rgb.tif",
        "page 1 (z = 0): 8-bit RGB colour: not supported; convert the image to one grey channel",
    );
}

fn slice_folder_with_odd_one(odd: impl FnOnce(&Path)) -> (tempfile::TempDir, std::path::PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let folder = dir.path().join("slices");
    fs::create_dir(&folder).unwrap();
    for z in [1, 2, 4] {
        write_page::<Gray8>(
            &folder.join(format!("img{z}.tiff")),
            4,
            3,
            &[z as u8; 12],
            Compression::Uncompressed,
        );
    }
    odd(&folder.join("img3.tiff"));
    (dir, folder)
}

#[test]
fn slices_of_different_size_name_the_slice() {
    let (_dir, folder) = slice_folder_with_odd_one(|p| {
        write_page::<Gray8>(p, 4, 4, &[0; 16], Compression::Uncompressed)
    });
    assert_bad_input(load(&folder, None, &limits()), "img3.tiff", "4x4 u8");
}

#[test]
fn slices_of_different_type_name_the_slice() {
    let (_dir, folder) = slice_folder_with_odd_one(|p| {
        write_page::<Gray32Float>(p, 4, 3, &[0.5; 12], Compression::Uncompressed)
    });
    assert_bad_input(load(&folder, None, &limits()), "img3.tiff", "f32");
}

#[test]
fn empty_folder_and_raw_spec_on_folder() {
    let dir = tempfile::tempdir().unwrap();
    assert_bad_input(load(dir.path(), None, &limits()), "", "no .tif");
    let spec = RawSpec {
        shape: [1, 1, 1],
        kind: RawType::U8,
        endian: Endian::Little,
    };
    assert!(matches!(
        load(dir.path(), Some(&spec), &limits()),
        Err(Error::Usage(_))
    ));
}

#[test]
fn raw_size_mismatch_gives_both_numbers() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("short.raw");
    fs::write(&path, vec![0u8; 1000]).unwrap();
    let spec = RawSpec {
        shape: [10, 10, 10],
        kind: RawType::U16,
        endian: Endian::Little,
    };
    assert_bad_input(
        load(&path, Some(&spec), &limits()),
        "short.raw",
        "1000 bytes",
    );
    assert_bad_input(
        load(&path, Some(&spec), &limits()),
        "short.raw",
        "2000 bytes",
    );
    // A TIFF given a raw layout: the size cannot match, and the message says what the file is.
    let tiff = dir.path().join("stack.tif");
    write_page::<Gray8>(&tiff, 4, 4, &[0; 16], Compression::Uncompressed);
    assert_bad_input(
        load(&tiff, Some(&spec), &limits()),
        "stack.tif",
        "the file is a TIFF (its first bytes say so): leave out --raw-shape",
    );
}

#[test]
fn raw_over_the_limit_is_too_large() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ok.raw");
    fs::write(&path, vec![0u8; 1000]).unwrap();
    let spec = RawSpec {
        shape: [10, 10, 10],
        kind: RawType::U8,
        endian: Endian::Little,
    };
    match load(&path, Some(&spec), &ReadLimits::new(999)) {
        Err(Error::TooLarge {
            needed_bytes: 1000,
            limit_bytes: 999,
            what,
        }) => assert!(what.contains("ok.raw"), "{what}"),
        other => panic!("expected TooLarge, got {other:?}"),
    }
}

#[test]
fn huge_claimed_size_is_refused_before_allocating() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("huge.tif");
    // 100000 x 100000 u8, one page: 1e10 bytes claimed by a file of ~140 bytes. No limit, not
    // even one above what the machine has (which a user may give), lets it reach the allocation.
    fs::write(&path, hostile_header(100_000, 100_000, 8, 1, 1)).unwrap();
    for limit in [1 << 20, 64 << 30, u64::MAX] {
        assert_bad_input(
            load(&path, None, &ReadLimits::new(limit)),
            "huge.tif",
            "page 1 (z = 0): the header claims 9.31 GiB of samples, more than its 134 stored bytes can hold (uncompressed)",
        );
    }
    // Claims whose byte count is near or beyond 2^64: a size, not an overflow or a panic.
    fs::write(&path, hostile_header(u32::MAX, u32::MAX, 32, 3, 3)).unwrap();
    assert_bad_input(
        load(&path, None, &ReadLimits::new(u64::MAX)),
        "huge.tif",
        "the header claims over 16 EiB of samples",
    );
    fs::write(&path, hostile_header(u32::MAX, u32::MAX, 8, 1, 1)).unwrap();
    assert_bad_input(
        load(&path, None, &ReadLimits::new(u64::MAX)),
        "huge.tif",
        "stored bytes can hold",
    );
    // Compressed pages that all point to one strip: each page's claim fits its strip at
    // Deflate's largest expansion (1 MiB from 2000 bytes), but the pages' strips add up to
    // far more than the file, which would otherwise admit any number of pages.
    fs::write(&path, common::shared_strip_stack(1024, 1024, 64, 8, 2000)).unwrap();
    assert_bad_input(
        load(&path, None, &ReadLimits::new(u64::MAX)),
        "huge.tif",
        "the pages' strips add up to 10000 bytes, more than the file's 9304",
    );
    // One such page per file of a slice folder passes every file's check; the total is held
    // against the limit, and garbage then fails to decode: bad input, nothing large reserved.
    let shared = dir.path().join("shared");
    fs::create_dir(&shared).unwrap();
    for i in 0..4 {
        let bytes = common::shared_strip_stack(1024, 1024, 1, 8, 2000);
        fs::write(shared.join(format!("s{i}.tif")), bytes).unwrap();
    }
    assert!(matches!(
        load(&shared, None, &ReadLimits::new(u64::MAX)),
        Err(Error::BadInput { .. })
    ));
    // Deflate cannot give 1 MiB from 500 bytes: refused per page.
    fs::write(&path, common::shared_strip_stack(1024, 1024, 1, 8, 500)).unwrap();
    assert_bad_input(
        load(&path, None, &ReadLimits::new(u64::MAX)),
        "huge.tif",
        "even at 1032:1, the most its compression gives",
    );
    // A header the file can hold is then held against the memory limit, before allocating.
    let vol = volume_of(RawType::U16, [64, 64, 8], 7);
    write_tiff_stack(&path, &vol, TiffCompression::None, None).unwrap();
    match load(&path, None, &ReadLimits::new(1 << 10)) {
        Err(e @ Error::TooLarge { .. }) => {
            let Error::TooLarge {
                needed_bytes,
                limit_bytes,
                ref what,
            } = e
            else {
                unreachable!()
            };
            assert_eq!(needed_bytes, 64 * 64 * 8 * 2);
            assert_eq!(limit_bytes, 1 << 10);
            assert!(what.contains("huge.tif"), "{what}");
            assert!(e.to_string().contains("--max-memory"), "{e}");
        }
        other => panic!("expected TooLarge, got {other:?}"),
    }
    // The same check for each file of a slice folder.
    let folder = dir.path().join("slices");
    fs::create_dir(&folder).unwrap();
    fs::write(
        folder.join("s1.tif"),
        hostile_header(100_000, 100_000, 8, 1, 1),
    )
    .unwrap();
    assert_bad_input(
        load(&folder, None, &ReadLimits::new(u64::MAX)),
        "s1.tif",
        "page 1: the header claims 9.31 GiB of samples",
    );
}

#[test]
fn unknown_label_names_label_and_present_values() {
    let vol = Volume::new([4, 1, 1], VoxelData::U8(vec![1, 2, 2, 7])).unwrap();
    match segment(&vol, &Segmentation::default(), None) {
        Err(Error::Usage(msg)) => {
            assert!(msg.contains("label 0"), "{msg}");
            assert!(msg.contains("1, 2, 7"), "{msg}");
        }
        other => panic!("expected a usage error, got {other:?}"),
    }
    let mask = segment(&vol, &Segmentation::Labels(vec![2, 7]), None).unwrap();
    assert_eq!(mask.as_slice(), &[false, true, true, true]);
}

#[test]
fn non_length_unit_is_usage_error() {
    for s in ["5kg", "5s", "2.5"] {
        match parse_length(s) {
            Err(Error::Usage(msg)) => assert!(msg.contains("um"), "{msg}"),
            other => panic!("{s}: expected a usage error, got {other:?}"),
        }
    }
}

#[test]
fn bad_crop_is_usage_error_and_good_crop_cuts() {
    let vol = volume_of(RawType::U8, [6, 5, 4], 4);
    for s in ["0:7,:,:", ":,3:3,:", "1:2,:", "x:y,:,:"] {
        let r = CropSpec::parse(s).and_then(|c| c.resolve(vol.shape));
        assert!(matches!(r, Err(Error::Usage(_))), "{s}: {r:?}");
    }
    let c = Crop::parse("2:5,:,1:3", vol.shape).unwrap();
    let out = volume::crop(&vol, &c);
    assert_eq!(out.shape, [3, 5, 2]);
    let (VoxelData::U8(a), VoxelData::U8(b)) = (&vol.data, &out.data) else {
        unreachable!()
    };
    assert_eq!(b[0], a[vol.index(2, 0, 1)]);
    assert_eq!(*b.last().unwrap(), a[vol.index(4, 4, 2)]);
}

#[test]
fn writer_refuses_missing_folder_and_leaves_no_partial_file() {
    let dir = tempfile::tempdir().unwrap();
    let vol = volume_of(RawType::U8, [2, 2, 2], 1);
    let missing = dir.path().join("no_such_dir").join("out.tif");
    match write_tiff_stack(&missing, &vol, TiffCompression::None, None) {
        Err(e @ Error::Output { .. }) => assert!(e.to_string().contains("does not exist"), "{e}"),
        other => panic!("expected an output error, got {other:?}"),
    }
    let out = dir.path().join("out.raw");
    volume::write_atomically(&out, |w| {
        w.write_all(b"half").unwrap();
        Err(Error::Internal("stop".into()))
    })
    .unwrap_err();
    assert!(!out.exists());
    assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 0);
}
