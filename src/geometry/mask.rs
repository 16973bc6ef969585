//! The segmented pore space: one boolean per voxel, x fastest, then y, then z.

/// A 3D pore/solid mask. `true` marks a pore (fluid) voxel.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct PoreMask {
    shape: [usize; 3],
    pore: Vec<bool>,
}

impl PoreMask {
    /// Wraps a voxel vector (x fastest). Panics if the length does not match the shape: callers
    /// build both together, so a mismatch is a bug, not bad input.
    pub fn new(shape: [usize; 3], pore: Vec<bool>) -> Self {
        assert_eq!(
            pore.len(),
            shape[0] * shape[1] * shape[2],
            "PoreMask: voxel count does not match shape {shape:?}"
        );
        PoreMask { shape, pore }
    }

    /// Builds a mask by evaluating `is_pore(x, y, z)` at every voxel.
    pub fn from_fn(shape: [usize; 3], is_pore: impl Fn(usize, usize, usize) -> bool) -> Self {
        let [nx, ny, nz] = shape;
        let mut pore = Vec::with_capacity(nx * ny * nz);
        for z in 0..nz {
            for y in 0..ny {
                for x in 0..nx {
                    pore.push(is_pore(x, y, z));
                }
            }
        }
        PoreMask { shape, pore }
    }

    /// Grid size `[nx, ny, nz]`.
    pub fn shape(&self) -> [usize; 3] {
        self.shape
    }

    /// Number of voxels.
    pub fn len(&self) -> usize {
        self.pore.len()
    }

    /// True when the grid has no voxels.
    pub fn is_empty(&self) -> bool {
        self.pore.is_empty()
    }

    /// Linear index of voxel (x, y, z).
    #[inline]
    pub fn index(&self, x: usize, y: usize, z: usize) -> usize {
        x + self.shape[0] * (y + self.shape[1] * z)
    }

    /// True when voxel (x, y, z) is pore.
    #[inline]
    pub fn is_pore(&self, x: usize, y: usize, z: usize) -> bool {
        self.pore[self.index(x, y, z)]
    }

    /// The voxels, x fastest.
    pub fn as_slice(&self) -> &[bool] {
        &self.pore
    }

    /// Mutable access to the voxels, x fastest.
    pub fn as_mut_slice(&mut self) -> &mut [bool] {
        &mut self.pore
    }

    /// Number of pore voxels.
    pub fn pore_count(&self) -> usize {
        self.pore.iter().filter(|&&p| p).count()
    }

    /// Pore fraction of all voxels (0 for an empty grid).
    pub fn porosity(&self) -> f64 {
        if self.pore.is_empty() {
            0.0
        } else {
            self.pore_count() as f64 / self.pore.len() as f64
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn index_is_x_fastest() {
        let m = PoreMask::from_fn([3, 4, 5], |x, y, z| x == 2 && y == 1 && z == 4);
        assert_eq!(m.index(2, 1, 4), 2 + 3 * (1 + 4 * 4));
        assert!(m.as_slice()[m.index(2, 1, 4)]);
        assert_eq!(m.pore_count(), 1);
        assert!((m.porosity() - 1.0 / 60.0).abs() < 1e-15);
    }
}
