//! Crash-safe output files: write to a temporary file beside the destination, flush it to disk,
//! then rename it over the destination, so an interrupted run never leaves a half-written file
//! under the real name. Every writer in voxperm (TIFF, raw, JSON, CSV, VTK) goes through here.

use std::fs::{self, File, OpenOptions};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use crate::{Error, Result};

/// Distinguishes temporary names of concurrent writes within one process.
static COUNTER: AtomicU64 = AtomicU64::new(0);

/// Writes `path` by running `f` on a buffered temporary file in the same folder and renaming
/// it into place once `f` succeeded and the data reached the disk. On any failure the
/// temporary file is removed and `path` is left as it was.
///
/// Fails before calling `f` when the destination folder does not exist or `path` is a folder.
/// I/O errors inside `f` should be reported as [`Error::Output`] naming `path`
/// (see [`output_error`]).
pub fn write_atomically(
    path: &Path,
    f: impl FnOnce(&mut BufWriter<File>) -> Result<()>,
) -> Result<()> {
    let folder = check_destination(path)?;
    let Some(name) = path.file_name() else {
        return Err(Error::Output {
            path: path.to_path_buf(),
            msg: "has no file name".into(),
        });
    };

    let (tmp_path, file) = create_temporary(&folder, &name.to_string_lossy(), path)?;
    let result = write_and_sync(file, path, f);
    match result.and_then(|()| fs::rename(&tmp_path, path).map_err(|e| output_error(path, e))) {
        Ok(()) => Ok(()),
        Err(e) => {
            // Best effort: the original error is what the user needs to see.
            let _ = fs::remove_file(&tmp_path);
            Err(e)
        }
    }
}

/// Checks that `path` could be written: its folder exists and it is not itself a folder.
/// Returns the folder. Commands call this before long work so a bad output path fails at once.
pub fn check_destination(path: &Path) -> Result<PathBuf> {
    let folder = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    if !folder.is_dir() {
        let what = if folder.exists() {
            "is a file, not a folder"
        } else {
            "does not exist"
        };
        return Err(Error::Output {
            path: path.to_path_buf(),
            msg: format!("the folder {} {what}", folder.display()),
        });
    }
    if path.is_dir() {
        return Err(Error::Output {
            path: path.to_path_buf(),
            msg: "is a folder, expected a file name".into(),
        });
    }
    Ok(folder)
}

/// An [`Error::Output`] for an I/O failure while writing `path`.
pub fn output_error(path: &Path, e: impl std::fmt::Display) -> Error {
    Error::Output {
        path: path.to_path_buf(),
        msg: one_line(&e.to_string()),
    }
}

/// Collapses a multi-line message so every error stays one line.
pub(crate) fn one_line(s: &str) -> String {
    s.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// Creates a fresh hidden temporary file `.NAME.PID.N.tmp` in `folder`. `create_new` makes a
/// stale file of the same name (a crashed earlier run) a reason to try the next number, never
/// something we write through.
fn create_temporary(folder: &Path, name: &str, dest: &Path) -> Result<(PathBuf, File)> {
    let pid = std::process::id();
    let mut last_err = None;
    for _ in 0..16 {
        let n = COUNTER.fetch_add(1, Ordering::Relaxed);
        let tmp = folder.join(format!(".{name}.{pid}.{n}.tmp"));
        match OpenOptions::new().write(true).create_new(true).open(&tmp) {
            Ok(file) => return Ok((tmp, file)),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => last_err = Some(e),
            Err(e) => return Err(output_error(dest, e)),
        }
    }
    Err(output_error(
        dest,
        last_err.map_or_else(
            || "cannot create a temporary file".to_string(),
            |e| e.to_string(),
        ),
    ))
}

fn write_and_sync(
    file: File,
    path: &Path,
    f: impl FnOnce(&mut BufWriter<File>) -> Result<()>,
) -> Result<()> {
    let mut writer = BufWriter::new(file);
    f(&mut writer)?;
    writer.flush().map_err(|e| output_error(path, e))?;
    // Without the sync a power loss after the rename can leave an empty file under the real name.
    writer
        .get_ref()
        .sync_all()
        .map_err(|e| output_error(path, e))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn writes_and_replaces() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.txt");
        write_atomically(&path, |w| {
            w.write_all(b"one").map_err(|e| output_error(&path, e))
        })
        .unwrap();
        write_atomically(&path, |w| {
            w.write_all(b"two").map_err(|e| output_error(&path, e))
        })
        .unwrap();
        assert_eq!(fs::read(&path).unwrap(), b"two");
        assert_eq!(
            fs::read_dir(dir.path()).unwrap().count(),
            1,
            "temp file left"
        );
    }

    #[test]
    fn failure_keeps_old_file_and_removes_temp() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.txt");
        fs::write(&path, b"old").unwrap();
        let err = write_atomically(&path, |w| {
            w.write_all(b"partial").unwrap();
            Err(Error::Internal("interrupted".into()))
        })
        .unwrap_err();
        assert!(matches!(err, Error::Internal(_)));
        assert_eq!(fs::read(&path).unwrap(), b"old");
        assert_eq!(
            fs::read_dir(dir.path()).unwrap().count(),
            1,
            "temp file left"
        );
    }

    #[test]
    fn missing_folder_fails_before_writing() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("nope").join("out.txt");
        let mut called = false;
        let err = write_atomically(&path, |_| {
            called = true;
            Ok(())
        })
        .unwrap_err();
        assert!(!called);
        let msg = err.to_string();
        assert!(matches!(err, Error::Output { .. }));
        assert!(msg.contains("does not exist"), "{msg}");
    }
}
