//! Shared helpers for the validation tests: small structures built in the test, and a one-call
//! periodic solve.
#![allow(dead_code)]

pub mod cli;

use voxperm::analysis::{AxisFlow, analyse};
use voxperm::geometry::{Axis, PoreMask};
use voxperm::lbm::{BoundaryMode, Domain, Silent, SolverSettings, solve};

/// Solves a mask with the given boundary mode and force direction and returns the Darcy summary.
pub fn solve_mask(mask: &PoreMask, axis: Axis, mode: BoundaryMode, s: &SolverSettings) -> AxisFlow {
    let domain = Domain::build(mask, axis, mode, u64::MAX).expect("domain");
    let field = solve(&domain, axis, s, &mut Silent).expect("solve");
    assert!(
        field.converged,
        "not converged after {} steps (residual {})",
        field.steps, field.residual
    );
    analyse(&domain, &field, axis)
}

/// Periodic solve with the default settings but a tight tolerance.
pub fn solve_periodic(mask: &PoreMask, axis: Axis) -> AxisFlow {
    solve_mask(mask, axis, BoundaryMode::PERIODIC, &tight())
}

/// Default settings with the tolerance used by the validation tests.
pub fn tight() -> SolverSettings {
    SolverSettings {
        tolerance: 1e-8,
        ..SolverSettings::default()
    }
}

/// A periodic slit: `gap` fluid layers and one solid layer, walls normal to `normal`; the other
/// two extents are `width`.
pub fn slit(normal: Axis, gap: usize, width: usize) -> PoreMask {
    let mut shape = [width; 3];
    shape[normal.index()] = gap + 1;
    PoreMask::from_fn(shape, |x, y, z| [x, y, z][normal.index()] < gap)
}

/// A voxelised sphere of radius `r` centred in a periodic cubic cell of side `l` (voxel centres at
/// i + ½, so the sphere keeps the cell's symmetry).
pub fn sphere_cell(l: usize, r: f64) -> PoreMask {
    let c = l as f64 / 2.0;
    PoreMask::from_fn([l; 3], |x, y, z| {
        let d2 = [x, y, z]
            .iter()
            .map(|&i| (i as f64 + 0.5 - c).powi(2))
            .sum::<f64>();
        d2 > r * r
    })
}

/// A Z-shaped channel of square cross-section `width` in a 32 × 16 × 8 box, for percolation with
/// periodic ends: one leg along x at y = 2 for x < 16, the other at y = 12 for x ≥ 16, joined by a
/// riser along y at x = 16 − width. It connects the inlet face to the outlet face, but its two
/// ends do not meet across the x wrap (nor across the y or z wraps), so in a periodic box it is a
/// closed pocket that can carry no net flow along x.
pub fn z_channel(width: usize) -> PoreMask {
    PoreMask::from_fn([32, 16, 8], |x, y, z| {
        let band = |lo: usize, v: usize| (lo..lo + width).contains(&v);
        let first = x < 16 && band(2, y);
        let second = x >= 16 && band(12, y);
        let riser = band(16 - width, x) && (2..12 + width).contains(&y);
        band(3, z) && (first || second || riser)
    })
}

/// Relative error.
pub fn rel(got: f64, want: f64) -> f64 {
    (got - want).abs() / want.abs()
}

/// A minimal little-endian TIFF of `pages` IFDs, each claiming a `width` x `height` page of
/// `bits`-bit samples whose single strip lies beyond the end of the file. Layout from TIFF 6.0,
/// sections 2 (header, IFD entries of 12 bytes) and 4 (grey-scale tags) [from memory; the
/// within-limit case below checks the tiff crate accepts it as a TIFF].
pub fn hostile_header(
    width: u32,
    height: u32,
    bits: u16,
    sample_format: u16,
    pages: u32,
) -> Vec<u8> {
    const SHORT: u16 = 3;
    const LONG: u16 = 4;
    let entries: [(u16, u16, u32); 10] = [
        (256, LONG, width),                     // ImageWidth
        (257, LONG, height),                    // ImageLength
        (258, SHORT, u32::from(bits)),          // BitsPerSample
        (259, SHORT, 1),                        // Compression: none
        (262, SHORT, 1),                        // PhotometricInterpretation: BlackIsZero
        (273, LONG, 1 << 20),                   // StripOffsets: past the end of the file
        (277, SHORT, 1),                        // SamplesPerPixel
        (278, LONG, height),                    // RowsPerStrip: one strip
        (279, LONG, u32::MAX),                  // StripByteCounts
        (339, SHORT, u32::from(sample_format)), // SampleFormat
    ];
    tiff_of(&entries, pages, &[])
}

/// A little-endian TIFF of `pages` IFDs that all point to one strip of `strip` garbage bytes,
/// each claiming a `width` x `height` 8-bit page stored with TIFF compression code
/// `compression`: a header whose pages share their data, so per page the claim can look
/// plausible while the stack claims far more than the file holds. Layout as for
/// [`hostile_header`].
pub fn shared_strip_stack(
    width: u32,
    height: u32,
    pages: u32,
    compression: u16,
    strip: u32,
) -> Vec<u8> {
    const SHORT: u16 = 3;
    const LONG: u16 = 4;
    let strip_at = 8 + pages * (2 + 12 * 9 + 4);
    let entries: [(u16, u16, u32); 9] = [
        (256, LONG, width),
        (257, LONG, height),
        (258, SHORT, 8),
        (259, SHORT, u32::from(compression)),
        (262, SHORT, 1),
        (273, LONG, strip_at),
        (277, SHORT, 1),
        (278, LONG, height),
        (279, LONG, strip),
    ];
    let garbage: Vec<u8> = (0..strip).map(|i| (i * 7 + 3) as u8).collect();
    tiff_of(&entries, pages, &garbage)
}

/// A little-endian TIFF: the 8-byte header, `pages` chained copies of an IFD holding
/// `entries` (tag, type, one value each), then `tail`. Layout from TIFF 6.0, section 2 (header,
/// IFD entries of 12 bytes) [from memory].
fn tiff_of(entries: &[(u16, u16, u32)], pages: u32, tail: &[u8]) -> Vec<u8> {
    let ifd_len = 2 + 12 * entries.len() as u32 + 4;
    let mut b = Vec::new();
    b.extend_from_slice(b"II");
    b.extend_from_slice(&42u16.to_le_bytes());
    b.extend_from_slice(&8u32.to_le_bytes());
    for p in 0..pages {
        let start = 8 + p * ifd_len;
        b.extend_from_slice(&(entries.len() as u16).to_le_bytes());
        for &(tag, ty, value) in entries {
            b.extend_from_slice(&tag.to_le_bytes());
            b.extend_from_slice(&ty.to_le_bytes());
            b.extend_from_slice(&1u32.to_le_bytes());
            // A SHORT sits in the first two bytes of the value field; as little-endian u32
            // that is the same four bytes.
            b.extend_from_slice(&value.to_le_bytes());
        }
        let next = if p + 1 < pages { start + ifd_len } else { 0 };
        b.extend_from_slice(&next.to_le_bytes());
    }
    b.extend_from_slice(tail);
    b
}
