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
/// until the process exits. The destinations keep whatever they held before. Returns how many
/// temporary files it removed.
pub fn remove_pending_temporaries() -> usize {
    let mut list = pending();
    let removed = list
        .drain(..)
        .filter(|tmp| fs::remove_file(tmp).is_ok())
        .count();
    std::mem::forget(list);
    removed
}

/// A temporary file on the pending list: removed (file and entry) when dropped unless it was
/// renamed into place, so an error or a panic inside the writer leaves nothing behind.
struct Temporary {
    path: PathBuf,
    renamed: bool,
}

impl Drop for Temporary {
    fn drop(&mut self) {
        let mut list = pending();
        if !self.renamed {
            // Best effort: the original error is what the user needs to see.
            let _ = fs::remove_file(&self.path);
        }
        list.retain(|p| p != &self.path);
    }
}

/// Where an output goes once the path is looked at.
enum Destination {
    /// A regular file (new or existing, possibly behind symbolic links): written to a temporary
    /// file in `folder` and renamed onto `file`, so links to it stay links.
    Replace { file: PathBuf, folder: PathBuf },
    /// This process's standard output or error (`-`, `/dev/stdout`, or a path naming the file
    /// they are open on): written through that descriptor, at its position.
    Descriptor(Fd),
    /// A pipe or device: opened and written straight through; there is nothing to rename, and
    /// replacing `/dev/null` or a FIFO with a regular file would be destructive.
    Stream,
}

#[derive(Clone, Copy)]
enum Fd {
    Out,
    Err,
}

/// Writes `path` by running `f` on a buffered temporary file in the same folder and renaming
/// it into place once `f` succeeded and the data reached the disk. On any failure the
/// temporary file is removed and `path` is left as it was. A symbolic link is followed and its
/// target replaced; `-`, or any path to the file standard output (error) is open on, writes to
/// that descriptor; a pipe or device is written straight through.
///
/// Fails before calling `f` when the destination folder does not exist, `path` is a folder or
/// a link that cannot be followed. I/O errors inside `f` should be reported as
/// [`Error::Output`] naming `path` (see [`output_error`]).
pub fn write_atomically(
    path: &Path,
    f: impl FnOnce(&mut BufWriter<File>) -> Result<()>,
) -> Result<()> {
    let (file, folder) = match destination(path)? {
        Destination::Descriptor(fd) => {
            let handle = descriptor_file(fd).map_err(|e| output_error(path, e))?;
            return write_through(handle, path, f);
        }
        Destination::Stream => {
            let handle = OpenOptions::new()
                .write(true)
                .open(path)
                .map_err(|e| output_error(path, e))?;
            return write_through(handle, path, f);
        }
        Destination::Replace { file, folder } => (file, folder),
    };
    let Some(name) = file.file_name() else {
        return Err(Error::Output {
            path: path.to_path_buf(),
            msg: "has no file name".into(),
        });
    };

    let (mut tmp, handle) = create_temporary(&folder, &name.to_string_lossy(), path)?;
    // A replaced file keeps its permissions (a private 600 result stays private) and, where
    // the process may set it (root rewriting another user's file), its owner and group.
    if let Ok(old) = fs::metadata(&file) {
        #[cfg(unix)]
        {
            use std::os::unix::fs::MetadataExt;
            let _ = std::os::unix::fs::fchown(&handle, Some(old.uid()), Some(old.gid()));
        }
        let _ = handle.set_permissions(old.permissions());
    }
    write_and_sync(handle, path, f)?;
    fs::rename(&tmp.path, &file).map_err(|e| output_error(path, e))?;
    tmp.renamed = true;
    Ok(())
}

/// Checks that `path` could be written: its folder exists, and it is not a folder, a link
/// that cannot be followed, or standard error (which carries the messages, `--vtk run.log
/// 2>run.log`). Commands call this before long work so a bad output path fails at once.
pub fn check_destination(path: &Path) -> Result<()> {
    let target = destination(path)?;
    if let Destination::Descriptor(Fd::Err) = target {
        return Err(Error::Output {
            path: path.to_path_buf(),
            msg: "is where standard error goes, which carries the messages; give another file"
                .into(),
        });
    }
    if let Destination::Replace { folder, .. } = target {
        // The rename needs a temporary file in the folder: try one now, so a read-only folder
        // fails before hours of work rather than after.
        let (probe, _file) =
            create_temporary(&folder, "voxperm-probe", path).map_err(|e| Error::Output {
                path: path.to_path_buf(),
                msg: format!(
                    "cannot write in the folder {}: {}",
                    folder.display(),
                    match e {
                        Error::Output { msg, .. } => msg,
                        other => other.to_string(),
                    }
                ),
            })?;
        drop(probe);
    }
    Ok(())
}

/// True when `path` would be written as a stream (standard output, a pipe, a device) rather
/// than as a file that can be re-read or seeked.
pub fn is_stream(path: &Path) -> bool {
    matches!(
        destination(path),
        Ok(Destination::Stream | Destination::Descriptor(_))
    )
}

/// True when `path` is a pipe or a device (`/dev/null`, a FIFO): written straight through, with
/// no file name for a reader to go by.
pub fn is_pipe_or_device(path: &Path) -> bool {
    matches!(destination(path), Ok(Destination::Stream))
}

/// True when `path` writes to this process's standard output (`-`, `/dev/stdout`, or the
/// file standard output is redirected to).
pub fn is_standard_output(path: &Path) -> bool {
    matches!(destination(path), Ok(Destination::Descriptor(Fd::Out)))
}

/// The file an output path ends up replacing, for telling whether two outputs of one run are
/// the same file: the resolved path for a file (existing or not), None for streams.
pub fn resolved_destination(path: &Path) -> Option<PathBuf> {
    match destination(path).ok()? {
        Destination::Replace { file, folder } => {
            let folder = fs::canonicalize(&folder).unwrap_or(folder);
            Some(folder.join(file.file_name()?))
        }
        _ => None,
    }
}

/// True when `a` and `b` both exist and are one regular file: the same device and inode, so
/// hard links and paths through links count as one. (Devices such as /dev/null are shared by
/// design.)
pub fn same_existing_file(a: &Path, b: &Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        match (fs::metadata(a), fs::metadata(b)) {
            (Ok(x), Ok(y)) => x.is_file() && x.dev() == y.dev() && x.ino() == y.ino(),
            _ => false,
        }
    }
    #[cfg(not(unix))]
    {
        matches!(
            (fs::canonicalize(a), fs::canonicalize(b)),
            (Ok(x), Ok(y)) if x == y && x.is_file()
        )
    }
}

fn destination(path: &Path) -> Result<Destination> {
    let out = |msg: String| Error::Output {
        path: path.to_path_buf(),
        msg,
    };
    if path.as_os_str() == "-" {
        return Ok(Destination::Descriptor(Fd::Out));
    }
    let file = match fs::symlink_metadata(path) {
        Ok(m) if m.file_type().is_symlink() => match fs::metadata(path) {
            // /dev/stdout and the like: the descriptor itself, wherever it points, so a
            // redirected log is appended to, not replaced.
            Ok(t) if let Some(fd) = open_descriptor(&t) => return Ok(Destination::Descriptor(fd)),
            // Replace the file the link points to, beside it, so the link survives.
            Ok(t) if t.is_file() => fs::canonicalize(path).map_err(|e| output_error(path, e))?,
            Ok(t) if t.is_dir() => return Err(out("is a folder, expected a file name".into())),
            Ok(_) => return Ok(Destination::Stream),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                return Err(out("is a symbolic link to nothing".into()));
            }
            Err(e) => {
                return Err(out(format!(
                    "is a symbolic link that cannot be followed: {}",
                    one_line(&e.to_string())
                )));
            }
        },
        Ok(m) if m.is_dir() => return Err(out("is a folder, expected a file name".into())),
        // A log file standard output or error is redirected to. Devices and pipes named
        // directly (/dev/null, a FIFO) are streams even when a descriptor is open on them too
        // (`2>/dev/null`): written straight through either way.
        Ok(m)
            if m.is_file()
                && let Some(fd) = open_descriptor(&m) =>
        {
            return Ok(Destination::Descriptor(fd));
        }
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

/// Whether `m` describes the very file this process's standard output or error is open on.
#[cfg(unix)]
fn open_descriptor(m: &fs::Metadata) -> Option<Fd> {
    use std::os::unix::fs::MetadataExt;
    let same = |fd: Fd| {
        descriptor_file(fd)
            .and_then(|f| f.metadata())
            .is_ok_and(|d| d.dev() == m.dev() && d.ino() == m.ino())
    };
    [Fd::Out, Fd::Err].into_iter().find(|&fd| same(fd))
}

#[cfg(not(unix))]
fn open_descriptor(_m: &fs::Metadata) -> Option<Fd> {
    None
}

/// Runs `f` on `handle` behind a buffer and flushes it; returns the handle.
fn write_buffered(
    handle: File,
    path: &Path,
    f: impl FnOnce(&mut BufWriter<File>) -> Result<()>,
) -> Result<File> {
    let mut writer = BufWriter::new(handle);
    f(&mut writer)?;
    writer
        .into_inner()
        .map_err(|e| output_error(path, e.error()))
}

/// Writes to an open descriptor or stream, without a temporary file.
fn write_through(
    handle: File,
    path: &Path,
    f: impl FnOnce(&mut BufWriter<File>) -> Result<()>,
) -> Result<()> {
    write_buffered(handle, path, f).map(drop)
}

/// A `File` on a duplicate of this process's standard output or error.
#[cfg(unix)]
fn descriptor_file(fd: Fd) -> std::io::Result<File> {
    use std::os::fd::AsFd;
    Ok(match fd {
        Fd::Out => {
            std::io::stdout().flush()?;
            File::from(std::io::stdout().as_fd().try_clone_to_owned()?)
        }
        Fd::Err => File::from(std::io::stderr().as_fd().try_clone_to_owned()?),
    })
}

#[cfg(not(unix))]
fn descriptor_file(_fd: Fd) -> std::io::Result<File> {
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

/// Creates a fresh hidden temporary file `.NAME.PID.N.tmp` in `folder`, on the pending list.
/// `create_new` makes a stale file of the same name (a crashed earlier run) a reason to try
/// the next number, never something we write through. The list stays locked from the entry to
/// the file's creation, so an interrupt sees either neither or both.
fn create_temporary(folder: &Path, name: &str, dest: &Path) -> Result<(Temporary, File)> {
    let pid = std::process::id();
    let mut last_err = None;
    for _ in 0..16 {
        let n = COUNTER.fetch_add(1, Ordering::Relaxed);
        let tmp = folder.join(format!(".{name}.{pid}.{n}.tmp"));
        let mut list = pending();
        match OpenOptions::new().write(true).create_new(true).open(&tmp) {
            Ok(file) => {
                list.push(tmp.clone());
                drop(list);
                let temporary = Temporary {
                    path: tmp,
                    renamed: false,
                };
                return Ok((temporary, file));
            }
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
    let file = write_buffered(file, path, f)?;
    // Without the sync a power loss after the rename can leave an empty file under the real name.
    file.sync_all().map_err(|e| output_error(path, e))
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

    #[test]
    fn a_panicking_writer_leaves_no_temporary_file() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.json");
        let caught = std::panic::catch_unwind(|| {
            let _ = write_atomically(&path, |w| {
                w.write_all(b"partial").unwrap();
                panic!("writer failed");
            });
        });
        assert!(caught.is_err());
        assert_eq!(
            fs::read_dir(dir.path()).unwrap().count(),
            0,
            "temp file left"
        );
        assert!(!pending().iter().any(|p| p.starts_with(dir.path())));
    }

    #[cfg(unix)]
    #[test]
    fn a_replaced_file_keeps_its_permissions() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("private.json");
        fs::write(&path, b"old").unwrap();
        fs::set_permissions(&path, fs::Permissions::from_mode(0o600)).unwrap();
        write_atomically(&path, |w| {
            w.write_all(b"new").map_err(|e| output_error(&path, e))
        })
        .unwrap();
        assert_eq!(
            fs::metadata(&path).unwrap().permissions().mode() & 0o777,
            0o600
        );
        assert_eq!(fs::read(&path).unwrap(), b"new");
    }

    /// Root rewriting another user's file gives it back to that user. Run as another user the
    /// set-up `chown` is not allowed, and the test checks only that the owner stays ours.
    #[cfg(unix)]
    #[test]
    fn a_replaced_file_keeps_its_owner() {
        use std::os::unix::fs::MetadataExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("theirs.json");
        fs::write(&path, b"old").unwrap();
        let ours = fs::metadata(&path).unwrap();
        let (uid, gid) = match std::os::unix::fs::chown(&path, Some(54321), Some(54322)) {
            Ok(()) => (54321, 54322),
            Err(_) => (ours.uid(), ours.gid()),
        };
        write_atomically(&path, |w| {
            w.write_all(b"new").map_err(|e| output_error(&path, e))
        })
        .unwrap();
        let now = fs::metadata(&path).unwrap();
        assert_eq!((now.uid(), now.gid()), (uid, gid));
        assert_eq!(fs::read(&path).unwrap(), b"new");
    }

    #[cfg(unix)]
    #[test]
    fn an_unwritable_folder_fails_the_early_check() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let ro = dir.path().join("ro");
        fs::create_dir(&ro).unwrap();
        fs::set_permissions(&ro, fs::Permissions::from_mode(0o555)).unwrap();
        let path = ro.join("x.json");
        // Root writes anywhere; the check then passes, as the write would.
        let root_like = File::create(ro.join("probe")).is_ok();
        let result = check_destination(&path);
        fs::set_permissions(&ro, fs::Permissions::from_mode(0o755)).unwrap();
        if root_like {
            assert!(result.is_ok());
        } else {
            let msg = result.unwrap_err().to_string();
            assert!(msg.contains("cannot write in the folder"), "{msg}");
        }
        let ok = dir.path().join("fine.json");
        check_destination(&ok).unwrap();
        assert_eq!(
            fs::read_dir(dir.path()).unwrap().count(),
            1,
            "probe left behind"
        );
    }
}
