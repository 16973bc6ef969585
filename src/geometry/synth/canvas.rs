//! Voxelisation on a periodic box: stamping ellipsoids and capsules with wrap-around, the
//! "add objects until the porosity target" loop, and a parallel per-voxel fill.
//!
//! A voxel belongs to an object when its centre (i + ½) lies inside it. Objects are stamped in
//! unwrapped coordinates and each visited voxel index is wrapped into the box, so a voxel is set
//! when any periodic image of the object covers it: the result tiles space.

use super::super::PoreMask;
use crate::Result;
use rayon::prelude::*;

/// A box of pore flags being painted with one value.
pub(super) struct Canvas {
    shape: [usize; 3],
    voxels: Vec<bool>,
    paint: bool,
    painted: usize,
    last: Vec<usize>,
}

impl Canvas {
    /// A box filled with `!paint` (callers have checked the size).
    pub fn new(shape: [usize; 3], paint: bool) -> Self {
        Canvas {
            shape,
            voxels: vec![!paint; shape[0] * shape[1] * shape[2]],
            paint,
            painted: 0,
            last: Vec::new(),
        }
    }

    /// Number of voxels holding the paint value.
    pub fn painted(&self) -> usize {
        self.painted
    }

    pub fn len(&self) -> usize {
        self.voxels.len()
    }

    #[inline]
    fn set(&mut self, x: i64, y: i64, z: i64) {
        let [nx, ny, nz] = self.shape.map(|n| n as i64);
        let i = (x.rem_euclid(nx) + nx * (y.rem_euclid(ny) + ny * z.rem_euclid(nz))) as usize;
        if self.voxels[i] != self.paint {
            self.voxels[i] = self.paint;
            self.painted += 1;
            self.last.push(i);
        }
    }

    /// Reverts the voxels changed by the last stamp.
    fn undo_last(&mut self) {
        for &i in &self.last {
            self.voxels[i] = !self.paint;
        }
        self.painted -= self.last.len();
        self.last.clear();
    }

    /// Paints the ellipsoid with centre `c` and axis-aligned semi-axes `semi`.
    pub fn stamp_ellipsoid(&mut self, c: [f64; 3], semi: [f64; 3]) {
        self.last.clear();
        let lo: [i64; 3] = std::array::from_fn(|a| (c[a] - semi[a] - 0.5).ceil() as i64);
        let hi: [i64; 3] = std::array::from_fn(|a| (c[a] + semi[a] - 0.5).floor() as i64);
        let inv: [f64; 3] = semi.map(|s| 1.0 / (s * s));
        for z in lo[2]..=hi[2] {
            let dz = z as f64 + 0.5 - c[2];
            let qz = dz * dz * inv[2];
            for y in lo[1]..=hi[1] {
                let dy = y as f64 + 0.5 - c[1];
                let qyz = qz + dy * dy * inv[1];
                if qyz >= 1.0 {
                    continue;
                }
                for x in lo[0]..=hi[0] {
                    let dx = x as f64 + 0.5 - c[0];
                    if qyz + dx * dx * inv[0] < 1.0 {
                        self.set(x, y, z);
                    }
                }
            }
        }
    }

    /// Paints the capsule of radius `r` around the segment `c ± t d`, |t| ≤ `half`, with `d` a
    /// unit vector.
    ///
    /// Walks the planes normal to the dominant axis `a` of `d`. A point within `r` of the segment
    /// in plane s lies within 2r (in-plane) of the segment point at the clamped line parameter:
    /// the nearest segment points of the two differ in t by at most r/|d_a|, and every other
    /// component of d is at most |d_a|.
    pub fn stamp_capsule(&mut self, c: [f64; 3], d: [f64; 3], half: f64, r: f64) {
        self.last.clear();
        let a = (0..3)
            .max_by(|&i, &j| d[i].abs().total_cmp(&d[j].abs()))
            .unwrap_or(0);
        let (b, e) = ((a + 1) % 3, (a + 2) % 3);
        let ext = half * d[a].abs() + r;
        let k_lo = (c[a] - ext - 0.5).ceil() as i64;
        let k_hi = (c[a] + ext - 0.5).floor() as i64;
        let r2 = r * r;
        let w = 2.0 * r;
        let mut p = [0i64; 3];
        for k in k_lo..=k_hi {
            let s = k as f64 + 0.5;
            let t = ((s - c[a]) / d[a]).clamp(-half, half);
            let qb = c[b] + t * d[b];
            let qe = c[e] + t * d[e];
            p[a] = k;
            for ib in (qb - w - 0.5).ceil() as i64..=(qb + w - 0.5).floor() as i64 {
                p[b] = ib;
                for ie in (qe - w - 0.5).ceil() as i64..=(qe + w - 0.5).floor() as i64 {
                    p[e] = ie;
                    let v: [f64; 3] = std::array::from_fn(|i| p[i] as f64 + 0.5 - c[i]);
                    let tt = (v[0] * d[0] + v[1] * d[1] + v[2] * d[2]).clamp(-half, half);
                    let dist2 = (0..3).map(|i| (v[i] - tt * d[i]).powi(2)).sum::<f64>();
                    if dist2 < r2 {
                        self.set(p[0], p[1], p[2]);
                    }
                }
            }
        }
    }

    /// The finished mask.
    pub fn into_mask(self) -> PoreMask {
        PoreMask::new(self.shape, self.voxels)
    }
}

/// Stamps objects from `next` until `target` voxels are painted, then keeps whichever of the
/// last two states (with or without the final object) is closer to the target. Returns the
/// objects kept. `next` stamps one object on the canvas and describes it, or fails (e.g. a
/// jammed packing); it is called at most `max_objects` times.
pub(super) fn paint_until<T>(
    canvas: &mut Canvas,
    target: usize,
    max_objects: usize,
    mut next: impl FnMut(&mut Canvas) -> Result<Option<T>>,
) -> Result<Vec<T>> {
    let mut kept = Vec::new();
    for _ in 0..max_objects {
        if canvas.painted() >= target {
            break;
        }
        let before = canvas.painted();
        let Some(obj) = next(canvas)? else {
            break;
        };
        let after = canvas.painted();
        if after >= target && after - target > target - before {
            canvas.undo_last();
            break;
        }
        kept.push(obj);
    }
    Ok(kept)
}

/// A mask from a per-voxel rule, z-slices in parallel (the rule sees voxel indices x, y, z).
pub(super) fn fill_parallel(
    shape: [usize; 3],
    is_pore: impl Fn(usize, usize, usize) -> bool + Sync,
) -> PoreMask {
    let [nx, ny, nz] = shape;
    let mut voxels = vec![false; nx * ny * nz];
    voxels
        .par_chunks_mut(nx * ny)
        .enumerate()
        .for_each(|(z, slice)| {
            for y in 0..ny {
                for x in 0..nx {
                    slice[x + nx * y] = is_pore(x, y, z);
                }
            }
        });
    debug_assert_eq!(voxels.len(), nx * ny * nz);
    PoreMask::new(shape, voxels)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sphere_across_the_corner_wraps_to_all_eight_corners() {
        let mut c = Canvas::new([10, 10, 10], false);
        c.stamp_ellipsoid([0.0, 0.0, 0.0], [1.0, 1.0, 1.0]);
        // Centres at distance √3/2 from the origin are the eight corner voxels.
        assert_eq!(c.painted(), 8);
        let m = c.into_mask();
        for &(x, y, z) in &[(0, 0, 0), (9, 9, 9), (0, 9, 0), (9, 0, 9)] {
            assert!(!m.is_pore(x, y, z));
        }
    }

    #[test]
    fn undo_restores_the_previous_state() {
        let mut c = Canvas::new([8, 8, 8], false);
        c.stamp_ellipsoid([4.0, 4.0, 4.0], [2.0, 2.0, 2.0]);
        let n = c.painted();
        c.stamp_ellipsoid([5.0, 4.0, 4.0], [2.0, 2.0, 2.0]);
        assert!(c.painted() > n);
        c.undo_last();
        assert_eq!(c.painted(), n);
        assert_eq!(c.into_mask().len() - n, 512 - n);
    }

    #[test]
    fn capsule_matches_brute_force_distance() {
        let shape = [12, 10, 9];
        let (c, d, half, r) = ([3.0, 8.5, 1.0], [0.48, -0.6, 0.64], 7.0, 1.7);
        let mut cv = Canvas::new(shape, false);
        cv.stamp_capsule(c, d, half, r);
        let m = cv.into_mask();
        let mut solid = 0;
        for z in 0..9 {
            for y in 0..10 {
                for x in 0..12 {
                    // The capsule spans less than one box, so images −1..1 cover it.
                    let mut hit = false;
                    for (ox, oy, oz) in (-1..=1)
                        .flat_map(|a| (-1..=1).flat_map(move |b| (-1..=1).map(move |e| (a, b, e))))
                    {
                        let p = [
                            x as f64 + 0.5 + 12.0 * ox as f64,
                            y as f64 + 0.5 + 10.0 * oy as f64,
                            z as f64 + 0.5 + 9.0 * oz as f64,
                        ];
                        let v: [f64; 3] = std::array::from_fn(|i| p[i] - c[i]);
                        let t = (v[0] * d[0] + v[1] * d[1] + v[2] * d[2]).clamp(-half, half);
                        let q = (0..3).map(|i| (v[i] - t * d[i]).powi(2)).sum::<f64>();
                        hit |= q < r * r;
                    }
                    assert_eq!(!m.is_pore(x, y, z), hit, "voxel {x} {y} {z}");
                    solid += hit as usize;
                }
            }
        }
        assert!(solid > 50);
    }
}
