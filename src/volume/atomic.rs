//! Crash-safe output files: write to a temporary file beside the destination, flush it to disk,
//! then rename it over the destination, so an interrupted run never leaves a half-written file
//! under the real name. Every writer in voxperm (TIFF, raw, JSON, CSV, VTK) goes through here.

use std::fs::{self, File, OpenOptions};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::sync::atomic::{AtomicU64, Ordering};

use crate::{Error, Result};

/// Distinguishes temporary names of concurrent writes within one process.
static COUNTER: AtomicU64 = AtomicU64::new(0);

/// Temporary files being written right now, so an interrupt can remove them.
static PENDING: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());

fn pending() -> std::sync::MutexGuard<'static, Vec<PathBuf>> {
    // A panic elsewhere while the list was held leaves it usable: it is only a list of names.
    PENDING.lock().unwrap_or_else(|e| e.into_inner())
}

/// Removes the temporary files of every write still in progress, for an interrupt handler
/// about to end the process, and keeps new ones from starting: returns with the list locked
/// until the process exits. The destinations keep whatever they held before.
pub fn remove_pending_temporaries() {
    let mut list = pending();
    for tmp in list.drain(..) {
        let _ = fs::remove_file(tmp);
    }
    std::mem::forget(list);
}

/// Where an output goes once the path is looked at.
enum Destination {
    /// A regular file (new or existing, possibly behind symbolic links): written to a temporary
    /// file in `folder` and renamed onto `file`, so links to it stay links.
    Replace { file: PathBuf, folder: PathBuf },
    /// Standard output (`-`), a pipe or a device: written straight through; there is nothing to
    /// rename, and replacing `/dev/null` or a FIFO with a regular file would be destructive.
    Stream,
}

/// Writes `path` by running `f` on a buffered temporary file in the same folder and renaming
/// it into place once `f` succeeded and the data reached the disk. On any failure the
/// temporary file is removed and `path` is left as it was. A symbolic link is followed and its
/// target replaced; `-` means standard output; a pipe or device is written straight through.
///
/// Fails before calling `f` when the destination folder does not exist, `path` is a folder or
/// a link to nothing. I/O errors inside `f` should be reported as [`Error::Output`] naming
/// `path` (see [`output_error`]).
pub fn write_atomically(
    path: &Path,
    f: impl FnOnce(&mut BufWriter<File>) -> Result<()>,
) -> Result<()> {
    let (file, folder) = match destination(path)? {
        Destination::Stream => return write_through(path, f),
        Destination::Replace { file, folder } => (file, folder),
    };
    let Some(name) = file.file_name() else {
        return Err(Error::Output {
            path: path.to_path_buf(),
            msg: "has no file name".into(),
        });
    };

    let (tmp_path, handle) = create_temporary(&folder, &name.to_string_lossy(), path)?;
    let result = write_and_sync(handle, path, f);
    let outcome = match result
        .and_then(|()| fs::rename(&tmp_path, &file).map_err(|e| output_error(path, e)))
    {
        Ok(()) => Ok(()),
        Err(e) => {
            // Best effort: the original error is what the user needs to see.
            let _ = fs::remove_file(&tmp_path);
            Err(e)
        }
    };
    pending().retain(|p| p != &tmp_path);
    outcome
}

/// Checks that `path` could be written: its folder exists, and it is not a folder or a link
/// to nothing. Commands call this before long work so a bad output path fails at once.
pub fn check_destination(path: &Path) -> Result<()> {
    destination(path).map(|_| ())
}

fn destination(path: &Path) -> Result<Destination> {
    let out = |msg: String| Error::Output {
        path: path.to_path_buf(),
        msg,
    };
    if path.as_os_str() == "-" {
        return Ok(Destination::Stream);
    }
    let file = match fs::symlink_metadata(path) {
        Ok(m) if m.file_type().is_symlink() => match fs::metadata(path) {
            // Replace the file the link points to, beside it, so the link survives.
            Ok(t) if t.is_file() => fs::canonicalize(path).map_err(|e| output_error(path, e))?,
            Ok(t) if t.is_dir() => return Err(out("is a folder, expected a file name".into())),
            Ok(_) => return Ok(Destination::Stream),
            Err(_) => return Err(out("is a symbolic link to nothing".into())),
        },
        Ok(m) if m.is_dir() => return Err(out("is a folder, expected a file name".into())),
        Ok(m) if !m.is_file() => return Ok(Destination::Stream),
        _ => path.to_path_buf(),
    };
    let folder = match file.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    if !folder.is_dir() {
        let what = if folder.exists() {
            "is a file, not a folder"
        } else {
            "does not exist"
        };
        return Err(out(format!("the folder {} {what}", folder.display())));
    }
    Ok(Destination::Replace { file, folder })
}

/// Writes to standard output (`-`) or to an existing pipe or device, without a temporary file.
fn write_through(path: &Path, f: impl FnOnce(&mut BufWriter<File>) -> Result<()>) -> Result<()> {
    let handle = if path.as_os_str() == "-" {
        stdout_file().map_err(|e| output_error(path, e))?
    } else {
        OpenOptions::new()
            .write(true)
            .open(path)
            .map_err(|e| output_error(path, e))?
    };
    let mut writer = BufWriter::new(handle);
    f(&mut writer)?;
    writer.flush().map_err(|e| output_error(path, e))
}

/// A `File` writing to this process's standard output.
#[cfg(unix)]
fn stdout_file() -> std::io::Result<File> {
    use std::os::fd::AsFd;
    std::io::stdout().flush()?;
    Ok(File::from(std::io::stdout().as_fd().try_clone_to_owned()?))
}

#[cfg(not(unix))]
fn stdout_file() -> std::io::Result<File> {
    Err(std::io::Error::other(
        "writing to standard output with - needs a Unix system",
    ))
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
        // Listed before it exists, so an interrupt between the two still removes it.
        pending().push(tmp.clone());
        match OpenOptions::new().write(true).create_new(true).open(&tmp) {
            Ok(file) => return Ok((tmp, file)),
            Err(e) => {
                pending().retain(|p| p != &tmp);
                if e.kind() != std::io::ErrorKind::AlreadyExists {
                    return Err(output_error(dest, e));
                }
                last_err = Some(e);
            }
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

    #[cfg(unix)]
    #[test]
    fn a_link_keeps_pointing_at_the_replaced_file() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("real.json");
        let link = dir.path().join("link.json");
        fs::write(&target, b"old").unwrap();
        std::os::unix::fs::symlink(&target, &link).unwrap();
        write_atomically(&link, |w| {
            w.write_all(b"new").map_err(|e| output_error(&link, e))
        })
        .unwrap();
        assert!(
            fs::symlink_metadata(&link)
                .unwrap()
                .file_type()
                .is_symlink()
        );
        assert_eq!(fs::read(&target).unwrap(), b"new");
        assert_eq!(
            fs::read_dir(dir.path()).unwrap().count(),
            2,
            "temp file left"
        );
    }

    #[cfg(unix)]
    #[test]
    fn a_link_to_nothing_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let link = dir.path().join("dangling.json");
        std::os::unix::fs::symlink(dir.path().join("gone.json"), &link).unwrap();
        let msg = check_destination(&link).unwrap_err().to_string();
        assert!(msg.contains("link to nothing"), "{msg}");
    }

    #[cfg(target_os = "linux")]
    #[test]
    fn a_pipe_is_written_through_not_replaced() {
        use std::io::Read;
        use std::os::unix::ffi::OsStrExt;
        let dir = tempfile::tempdir().unwrap();
        let fifo = dir.path().join("pipe.json");
        let c = std::ffi::CString::new(fifo.as_os_str().as_bytes()).unwrap();
        assert_eq!(unsafe { libc::mkfifo(c.as_ptr(), 0o600) }, 0);
        let reader = {
            let fifo = fifo.clone();
            std::thread::spawn(move || {
                let mut got = Vec::new();
                File::open(&fifo).unwrap().read_to_end(&mut got).unwrap();
                got
            })
        };
        write_atomically(&fifo, |w| {
            w.write_all(b"through").map_err(|e| output_error(&fifo, e))
        })
        .unwrap();
        assert_eq!(reader.join().unwrap(), b"through");
        let kind = fs::symlink_metadata(&fifo).unwrap().file_type();
        assert!(!kind.is_file(), "the pipe was replaced by a regular file");
    }
}
