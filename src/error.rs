//! Library errors. Each variant carries the data a user needs to fix the problem; the CLI turns
//! them into one-line messages and the documented exit codes (see [`Error::exit_code`]).

use std::path::PathBuf;

/// Exit codes of the `voxperm` binary (documented in README.md).
pub mod exit {
    /// Success.
    pub const OK: i32 = 0;
    /// Internal error (a bug in voxperm).
    pub const INTERNAL: i32 = 1;
    /// Usage error: bad or contradictory options.
    pub const USAGE: i32 = 2;
    /// Bad input: missing, unreadable, corrupt or implausible input file, or an unwritable output.
    pub const BAD_INPUT: i32 = 3;
    /// Solver failure: no percolating path, divergence, Mach number too high.
    pub const SOLVER: i32 = 4;
    /// A batch finished but some samples failed.
    pub const PARTIAL: i32 = 5;
    /// Interrupted by the user.
    pub const INTERRUPTED: i32 = 130;
}

/// Everything that can go wrong in voxperm.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A bad option value or a contradictory combination of options.
    #[error("{0}")]
    Usage(String),
    /// The input file is missing, unreadable, corrupt or not what it claims to be.
    #[error("{}: {msg}", path.display())]
    BadInput { path: PathBuf, msg: String },
    /// The volume (after segmentation) cannot be used for a flow solve.
    #[error("{0}")]
    BadVolume(String),
    /// The input claims a size that would not fit in the allowed memory.
    #[error("{what} needs {} but the limit is {}; raise it with --max-memory or crop the volume", human_bytes(*needed_bytes), human_bytes(*limit_bytes))]
    TooLarge {
        what: String,
        needed_bytes: u64,
        limit_bytes: u64,
    },
    /// No pore cluster connects the inlet to the outlet along the flow axis; with periodic ends,
    /// none winds round the periodic flow axis (see `geometry::connectivity::percolating`).
    #[error("no percolating pore path along {axis}: {}", no_path_reason(*axis, *periodic_ends))]
    NoPercolatingPath { axis: char, periodic_ends: bool },
    /// The solution blew up (NaN) or left the low-Mach regime.
    #[error("solver diverged at step {step}: {reason}")]
    Diverged { step: usize, reason: String },
    /// Writing an output failed.
    #[error("{}: {msg}", path.display())]
    Output { path: PathBuf, msg: String },
    /// One of the errors above that does not name a file, about a sample: names it.
    #[error("{}: {inner}", path.display())]
    InSample { path: PathBuf, inner: Box<Error> },
    /// A bug: an invariant the code relies on did not hold.
    #[error("internal error: {0}")]
    Internal(String),
}

/// A byte count for messages: "512 B", "3.4 MiB", "12.00 GiB".
pub fn human_bytes(b: u64) -> String {
    const UNITS: [&str; 5] = ["B", "KiB", "MiB", "GiB", "TiB"];
    let mut v = b as f64;
    let mut u = 0;
    while v >= 1024.0 && u + 1 < UNITS.len() {
        v /= 1024.0;
        u += 1;
    }
    if u == 0 {
        format!("{b} B")
    } else {
        format!("{v:.2} {}", UNITS[u])
    }
}

impl Error {
    /// The process exit code for this error.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Usage(_) => exit::USAGE,
            Error::BadInput { .. } | Error::BadVolume(_) | Error::TooLarge { .. } => {
                exit::BAD_INPUT
            }
            Error::Output { .. } => exit::BAD_INPUT,
            Error::NoPercolatingPath { .. } | Error::Diverged { .. } => exit::SOLVER,
            Error::Internal(_) => exit::INTERNAL,
            Error::InSample { inner, .. } => inner.exit_code(),
        }
    }

    /// True for [`Error::NoPercolatingPath`], named in a sample or not: a finding about the
    /// sample (k = 0 along the axis at this resolution), not a failure to read or solve it.
    pub fn is_no_path(&self) -> bool {
        match self {
            Error::NoPercolatingPath { .. } => true,
            Error::InSample { inner, .. } => inner.is_no_path(),
            _ => false,
        }
    }

    /// The error with `path` named in front, for the kinds whose message names no file (no
    /// percolating path, divergence, an unusable volume, a solve too large); others unchanged.
    pub fn in_sample(self, path: impl Into<PathBuf>) -> Self {
        match self {
            Error::NoPercolatingPath { .. }
            | Error::Diverged { .. }
            | Error::BadVolume(_)
            | Error::TooLarge { .. } => Error::InSample {
                path: path.into(),
                inner: Box::new(self),
            },
            other => other,
        }
    }

    /// Shorthand for a [`Error::BadInput`] about `path`.
    pub fn bad_input(path: impl Into<PathBuf>, msg: impl Into<String>) -> Self {
        Error::BadInput {
            path: path.into(),
            msg: msg.into(),
        }
    }
}

/// Why no path percolates: with periodic ends a pore path may connect the two faces and still
/// carry no net flow, so that message would be false there.
fn no_path_reason(axis: char, periodic_ends: bool) -> String {
    if periodic_ends {
        format!(
            "with periodic ends, no pore path leaves through one {axis} face and comes back through the other to close on itself"
        )
    } else {
        format!("the pore space does not connect the two {axis} faces")
    }
}

/// Result type of the voxperm library.
pub type Result<T> = std::result::Result<T, Error>;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sample_errors_name_the_file_and_keep_their_code() {
        for periodic_ends in [false, true] {
            let e = Error::NoPercolatingPath {
                axis: 'x',
                periodic_ends,
            }
            .in_sample("core.tif");
            assert_eq!(e.exit_code(), exit::SOLVER);
            assert!(
                e.to_string()
                    .starts_with("core.tif: no percolating pore path along x: "),
                "{e}"
            );
        }
        let u = Error::Usage("bad".into()).in_sample("core.tif");
        assert_eq!(u.to_string(), "bad");
    }

    #[test]
    fn byte_counts_read_well() {
        assert_eq!(human_bytes(512), "512 B");
        assert_eq!(human_bytes(3 * 1024 * 1024 + 512 * 1024), "3.50 MiB");
        assert_eq!(human_bytes(12 << 30), "12.00 GiB");
    }

    #[test]
    fn exit_codes_follow_the_design() {
        assert_eq!(Error::Usage("x".into()).exit_code(), exit::USAGE);
        assert_eq!(Error::bad_input("a", "b").exit_code(), exit::BAD_INPUT);
        assert_eq!(
            Error::NoPercolatingPath {
                axis: 'x',
                periodic_ends: true
            }
            .exit_code(),
            exit::SOLVER
        );
        let e = Error::TooLarge {
            what: "a.tif".into(),
            needed_bytes: 2 << 30,
            limit_bytes: 1 << 30,
        };
        assert_eq!(e.exit_code(), exit::BAD_INPUT);
        assert_eq!(
            e.to_string(),
            "a.tif needs 2.00 GiB but the limit is 1.00 GiB; raise it with --max-memory or crop the volume"
        );
    }
}
