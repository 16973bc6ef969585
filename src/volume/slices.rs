//! Folders of single-page TIFF slices, one file per z slice, ordered by natural sort of the
//! file names (slice2 before slice10). All slice headers are checked for equal size and type
//! before the volume buffer is allocated.

use std::cmp::Ordering;
use std::path::{Path, PathBuf};

use tiff::decoder::DecodingResult;

use super::limits::{ReadLimits, bytes_for};
use super::tiff_read::{
    check_claim, check_total_stored, decode_page, file_voxel_size, open, page_info, page_limits,
    page_storage, stored_bytes,
};
use super::{Volume, VoxelData, one_line};
use crate::{Error, Result};

/// The `.tif`/`.tiff` files of `folder` (extension case-insensitive) in natural order. Hidden
/// files (names starting with '.') are skipped: they are the metadata files some systems drop
/// beside copied images, not slices.
pub fn slice_files(folder: &Path) -> Result<Vec<PathBuf>> {
    let io_err = |e: std::io::Error| Error::bad_input(folder, one_line(&e.to_string()));
    let mut files = Vec::new();
    for entry in std::fs::read_dir(folder).map_err(io_err)? {
        let entry = entry.map_err(io_err)?;
        let path = entry.path();
        let name = entry.file_name();
        let name = name.to_string_lossy();
        let is_tiff = path
            .extension()
            .map(|e| e.to_string_lossy().to_ascii_lowercase())
            .is_some_and(|e| e == "tif" || e == "tiff");
        if is_tiff && !name.starts_with('.') && path.is_file() {
            files.push(path);
        }
    }
    files.sort_by(|a, b| {
        let name = |p: &PathBuf| {
            p.file_name()
                .unwrap_or_default()
                .to_string_lossy()
                .into_owned()
        };
        natural_cmp(&name(a), &name(b))
    });
    Ok(files)
}

/// Reads a folder of single-page TIFF slices into a volume (slice i of the sorted names is z = i).
pub fn read_slice_folder(folder: &Path, limits: &ReadLimits) -> Result<Volume> {
    let files = slice_files(folder)?;
    let Some(first_path) = files.first() else {
        return Err(Error::bad_input(
            folder,
            "folder holds no .tif or .tiff files",
        ));
    };
    let slice_name = |p: &Path| {
        p.file_name()
            .unwrap_or_default()
            .to_string_lossy()
            .into_owned()
    };

    // Pass 1: every header must match the first before anything large is allocated.
    let mut dec = open(first_path)?;
    let first = page_info(&mut dec, first_path, 0)?;
    let voxel_size = file_voxel_size(&mut dec, first_path);
    let shape = [first.width as usize, first.height as usize, files.len()];
    let what = format!(
        "{} ({}x{}x{} {}, {} slices)",
        folder.display(),
        shape[0],
        shape[1],
        shape[2],
        first.kind,
        files.len()
    );
    for path in &files {
        let mut dec = open(path)?;
        let info = page_info(&mut dec, path, 0)?;
        let (storage, file_bytes) = (page_storage(&mut dec), stored_bytes(path));
        check_claim(path, "page 1", info.bytes(), &storage, file_bytes)?;
        check_total_stored(path, storage.stored, file_bytes)?;
        if info != first {
            return Err(Error::bad_input(
                path,
                format!(
                    "slice is {} but the first slice {} is {}; all slices must match",
                    info.describe(),
                    slice_name(first_path),
                    first.describe()
                ),
            ));
        }
        if dec.more_images() {
            return Err(Error::bad_input(
                path,
                "slice has more than one page; a slice folder holds single-page TIFFs (to run every stack in a folder, use voxperm batch)",
            ));
        }
    }

    limits.check(what, bytes_for(shape, first.kind.bytes()))?;

    // Pass 2: decode. The limit check bounds the total, so the products fit in usize.
    let mut data =
        VoxelData::try_with_capacity(first.kind, shape[0] * shape[1] * shape[2], folder)?;
    let mut buf = DecodingResult::U8(Vec::new());
    for path in &files {
        let mut dec = open(path)?.with_limits(page_limits(&first, limits));
        // The file could have been replaced since pass 1; never trust the earlier look.
        if page_info(&mut dec, path, 0)? != first {
            return Err(Error::bad_input(path, "slice changed while being read"));
        }
        decode_page(&mut dec, path, None, &first, &mut buf, &mut data)?;
    }
    Ok(Volume {
        shape,
        data,
        voxel_size,
    })
}

/// Natural order of file names: runs of digits compare by numeric value, so "s2" < "s10";
/// other characters compare one by one, case-insensitively. Ties (e.g. "s01" vs "s1", "A" vs
/// "a") fall back to plain byte order so the result is a total order and sorting is
/// deterministic.
pub fn natural_cmp(a: &str, b: &str) -> Ordering {
    let (mut x, mut y) = (a, b);
    loop {
        let (Some(p), Some(q)) = (x.chars().next(), y.chars().next()) else {
            // One name is a prefix of the other (shorter first), or they tie.
            return x.len().cmp(&y.len()).then_with(|| a.cmp(b));
        };
        if p.is_ascii_digit() && q.is_ascii_digit() {
            let (dp, rest_x) = split_digits(x);
            let (dq, rest_y) = split_digits(y);
            let ord = cmp_numeric(dp, dq);
            if ord != Ordering::Equal {
                return ord;
            }
            (x, y) = (rest_x, rest_y);
        } else {
            let ord = p.to_lowercase().cmp(q.to_lowercase());
            if ord != Ordering::Equal {
                return ord;
            }
            (x, y) = (&x[p.len_utf8()..], &y[q.len_utf8()..]);
        }
    }
}

/// Splits off the leading run of ASCII digits.
fn split_digits(s: &str) -> (&str, &str) {
    let end = s.find(|c: char| !c.is_ascii_digit()).unwrap_or(s.len());
    s.split_at(end)
}

/// Compares digit strings of any length by value without parsing (no overflow).
fn cmp_numeric(p: &str, q: &str) -> Ordering {
    let p = p.trim_start_matches('0');
    let q = q.trim_start_matches('0');
    p.len().cmp(&q.len()).then_with(|| p.cmp(q))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn natural_order() {
        let mut names = vec![
            "slice10.tif",
            "slice2.tif",
            "slice1.tif",
            "Slice3.tif",
            "slice02.tif",
            "slice.tif",
            "slice100.tif",
            "slice99999999999999999999999.tif",
        ];
        names.sort_by(|a, b| natural_cmp(a, b));
        assert_eq!(
            names,
            [
                "slice.tif",
                "slice1.tif",
                "slice02.tif",
                "slice2.tif",
                "Slice3.tif",
                "slice10.tif",
                "slice100.tif",
                "slice99999999999999999999999.tif",
            ]
        );
    }

    #[test]
    fn natural_cmp_basics() {
        assert_eq!(natural_cmp("s2", "s10"), Ordering::Less);
        assert_eq!(natural_cmp("s10", "s2"), Ordering::Greater);
        assert_eq!(natural_cmp("a", "a"), Ordering::Equal);
        assert_eq!(natural_cmp("z_0009_b", "z_0010_a"), Ordering::Less);
        assert_eq!(natural_cmp("img1_2", "img1_10"), Ordering::Less);
        assert_ne!(natural_cmp("s01", "s1"), Ordering::Equal);
        assert_eq!(natural_cmp("µ2", "µ10"), Ordering::Less);
    }
}
