//! Memory limits for reading volumes: how much a reader may allocate, and the checked size
//! arithmetic every reader runs on the claimed dimensions *before* it allocates anything.

use crate::{Error, Result};

/// Assumed available memory when the operating system does not tell us (no /proc/meminfo),
/// so that the default read limit is 8 GiB. A guess sized for a workstation, not a
/// measured value.
const FALLBACK_AVAILABLE: u64 = 16 * 1024 * 1024 * 1024;

/// Upper bounds a reader must respect.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ReadLimits {
    /// Largest voxel buffer (in bytes) a reader may allocate for one volume.
    pub max_bytes: u64,
}

impl ReadLimits {
    /// A limit of exactly `max_bytes`.
    pub fn new(max_bytes: u64) -> Self {
        ReadLimits { max_bytes }
    }

    /// Fails with [`Error::TooLarge`] when `needed` bytes (None: the size overflowed 64 bits)
    /// exceed the limit. `what` names the thing, e.g. "stack.tif (400x400x300 u16)".
    pub fn check(&self, what: impl Into<String>, needed: Option<u64>) -> Result<()> {
        match needed {
            Some(n) if n <= self.max_bytes => Ok(()),
            _ => Err(Error::TooLarge {
                what: what.into(),
                needed_bytes: needed.unwrap_or(u64::MAX),
                limit_bytes: self.max_bytes,
            }),
        }
    }
}

impl Default for ReadLimits {
    /// Half of the memory available now. The loaded volume is only the first of several
    /// buffers (mask, fluid-node domain, populations), so the reader must leave room for them.
    fn default() -> Self {
        ReadLimits {
            max_bytes: available_memory_bytes() / 2,
        }
    }
}

/// Bytes needed for a grid of `shape` voxels of `bytes_per_voxel` bytes each; None on overflow.
pub fn bytes_for(shape: [usize; 3], bytes_per_voxel: u64) -> Option<u64> {
    let [nx, ny, nz] = shape.map(|n| u64::try_from(n).ok());
    nx?.checked_mul(ny?)?
        .checked_mul(nz?)?
        .checked_mul(bytes_per_voxel)
}

/// Memory the process may use now: `MemAvailable` from /proc/meminfo (or `MemTotal` on old
/// kernels), lowered to a cgroup v2 `memory.max` when one is set. Falls back to 16 GiB when
/// the system does not say.
pub fn available_memory_bytes() -> u64 {
    let meminfo = std::fs::read_to_string("/proc/meminfo").ok();
    let from_meminfo = meminfo.as_deref().and_then(|text| {
        meminfo_field(text, "MemAvailable").or_else(|| meminfo_field(text, "MemTotal"))
    });
    let cgroup = cgroup_headroom();
    match (from_meminfo, cgroup) {
        (Some(m), Some(c)) => m.min(c),
        (Some(m), None) => m,
        (None, Some(c)) => c,
        (None, None) => FALLBACK_AVAILABLE,
    }
}

/// Value of a `Name:   1234 kB` line of /proc/meminfo, in bytes.
fn meminfo_field(text: &str, name: &str) -> Option<u64> {
    text.lines().find_map(|line| {
        let rest = line.strip_prefix(name)?.strip_prefix(':')?;
        let mut parts = rest.split_whitespace();
        let value: u64 = parts.next()?.parse().ok()?;
        match parts.next() {
            Some("kB") => value.checked_mul(1024),
            None => Some(value),
            Some(_) => None,
        }
    })
}

/// Remaining room under a cgroup v2 memory limit, when the process runs under one.
fn cgroup_headroom() -> Option<u64> {
    let read = |name: &str| -> Option<u64> {
        std::fs::read_to_string(format!("/sys/fs/cgroup/{name}"))
            .ok()?
            .trim()
            .parse()
            .ok()
    };
    // "max" (no limit) does not parse as a number and yields None, as it should.
    let max = read("memory.max")?;
    let current = read("memory.current").unwrap_or(0);
    Some(max.saturating_sub(current))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bytes_for_is_checked() {
        assert_eq!(bytes_for([400, 400, 300], 2), Some(96_000_000));
        assert_eq!(bytes_for([usize::MAX, 2, 1], 1), None);
        assert_eq!(bytes_for([1 << 22, 1 << 22, 1 << 22], 1), None);
    }

    #[test]
    fn meminfo_parsing() {
        let text = "MemTotal:       24683584 kB\nMemFree:  1 kB\nMemAvailable:   1000 kB\n";
        assert_eq!(meminfo_field(text, "MemAvailable"), Some(1_024_000));
        assert_eq!(meminfo_field(text, "MemTotal"), Some(24_683_584 * 1024));
        assert_eq!(meminfo_field(text, "Missing"), None);
    }

    #[test]
    fn limit_check_reports_numbers() {
        let limits = ReadLimits::new(100);
        assert!(limits.check("a", Some(100)).is_ok());
        match limits.check("b", Some(101)) {
            Err(Error::TooLarge {
                needed_bytes,
                limit_bytes,
                ..
            }) => assert_eq!((needed_bytes, limit_bytes), (101, 100)),
            other => panic!("expected TooLarge, got {other:?}"),
        }
        assert!(matches!(
            limits.check("c", None),
            Err(Error::TooLarge {
                needed_bytes: u64::MAX,
                ..
            })
        ));
    }

    #[test]
    fn available_memory_is_positive() {
        assert!(available_memory_bytes() > 0);
    }
}
