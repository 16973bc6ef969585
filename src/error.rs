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
    #[error("{what} needs {needed_bytes} bytes ({:.2} GiB) but the limit is {:.2} GiB; raise it with --max-memory or crop the volume", *needed_bytes as f64 / GIB, *limit_bytes as f64 / GIB)]
    TooLarge {
        what: String,
        needed_bytes: u64,
        limit_bytes: u64,
    },
    /// No pore cluster connects the inlet to the outlet along the flow axis.
    #[error(
        "no percolating pore path along {axis}: the pore space does not connect the two {axis} faces"
    )]
    NoPercolatingPath { axis: char },
    /// The solution blew up (NaN) or left the low-Mach regime.
    #[error("solver diverged at step {step}: {reason}")]
    Diverged { step: usize, reason: String },
    /// Writing an output failed.
    #[error("{}: {msg}", path.display())]
    Output { path: PathBuf, msg: String },
    /// A bug: an invariant the code relies on did not hold.
    #[error("internal error: {0}")]
    Internal(String),
}

const GIB: f64 = 1024.0 * 1024.0 * 1024.0;

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

/// Result type of the voxperm library.
pub type Result<T> = std::result::Result<T, Error>;
