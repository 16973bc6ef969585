//! Exact integer geometry for the regular arrays: distances in doubled voxel units and the choice
//! of the voxelisation radius.
//!
//! Voxel centres sit at i + ½ and lattice sites at multiples of half a cell, so in doubled units
//! (coordinate × 2) every centre–site offset is an integer and every squared distance an exact
//! integer q = 4 d². A voxel is solid when q < q_thr; counting voxels per q value (a histogram
//! over one unit cell) gives the voxel solid fraction for every possible radius at once, which
//! replaces a bisection on the radius by an exact search.

/// Offset `delta` on a periodic axis of doubled period `period`, reduced to (−period/2, period/2].
#[inline]
pub(super) fn wrap(delta: i64, period: i64) -> i64 {
    let d = delta.rem_euclid(period);
    if 2 * d > period { d - period } else { d }
}

/// The radius chosen for voxelisation and the matching integer threshold on q = 4 d².
#[derive(Debug, Clone, Copy)]
pub(super) struct Threshold {
    /// Voxels with q < `q` are solid.
    pub q: u64,
    /// The radius (voxels) that gives this threshold.
    pub radius: f64,
}

impl Threshold {
    /// Threshold for a given radius: d < r ⟺ q < 4r² ⟺ q < ⌈4r²⌉ for integer q.
    pub fn from_radius(radius: f64) -> Self {
        Threshold {
            q: (4.0 * radius * radius).ceil() as u64,
            radius,
        }
    }
}

/// Picks the radius whose voxel count is closest to `target` voxels among radii up to
/// `touching` (objects may not overlap). `hist[q]` counts the cell's voxels at squared doubled
/// distance q. Each candidate radius sits midway (in q) between two occupied distance shells, so
/// it is robust to rounding; ties go to the smaller radius.
pub(super) fn closest_radius(hist: &[u64], target: f64, touching: f64) -> Threshold {
    let touch = Threshold::from_radius(touching);
    let below = |thr: u64| -> u64 { hist[..(thr as usize).min(hist.len())].iter().sum() };
    let mut best = (
        (below(touch.q) as f64 - target).abs(),
        touch.radius,
        touch.q,
    );
    let mut cum = 0u64;
    let mut prev: Option<u64> = None;
    for (q, &n) in hist.iter().enumerate() {
        if n == 0 {
            continue;
        }
        let q = q as u64;
        let r2x4 = match prev {
            Some(p) => 0.5 * (p + q) as f64,
            None => 0.5 * q as f64,
        };
        let radius = 0.5 * r2x4.sqrt();
        if radius > touching {
            break;
        }
        let err = (cum as f64 - target).abs();
        if err < best.0 || (err == best.0 && radius < best.1) {
            best = (err, radius, Threshold::from_radius(radius).q);
        }
        cum += n;
        prev = Some(q);
    }
    Threshold {
        q: best.2,
        radius: best.1,
    }
}

/// Number of voxels with q below the threshold.
pub(super) fn count_below(hist: &[u64], thr: u64) -> u64 {
    hist[..(thr as usize).min(hist.len())].iter().sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wrap_reduces_to_the_nearest_image() {
        assert_eq!(wrap(7, 8), -1);
        assert_eq!(wrap(4, 8), 4);
        assert_eq!(wrap(-5, 8), 3);
        assert_eq!(wrap(-4, 8), 4);
    }

    #[test]
    fn closest_radius_hits_the_nearest_achievable_count() {
        // Shells: 1 voxel at q=1, 6 at q=5, 12 at q=9.
        let mut hist = vec![0u64; 12];
        hist[1] = 1;
        hist[5] = 6;
        hist[9] = 12;
        let t = closest_radius(&hist, 6.0, 10.0);
        assert_eq!(count_below(&hist, t.q), 7);
        assert!(t.radius * 2.0 > 5f64.sqrt() && t.radius * 2.0 < 3.0);
        let t = closest_radius(&hist, 16.0, 10.0);
        assert_eq!(count_below(&hist, t.q), 19);
        // The touching limit caps the radius below the q = 9 shell.
        let t = closest_radius(&hist, 16.0, 1.4);
        assert_eq!(count_below(&hist, t.q), 7);
        assert!(t.radius <= 1.4);
    }
}
