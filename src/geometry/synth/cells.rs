//! A periodic cell list for neighbour searches among spheres and seeds: the box is cut into
//! cells at least as wide as the interaction range, so every partner lies in the 3×3×3 block
//! around a point's own cell.

/// Minimum-image difference of two coordinates on a periodic axis of length `l`
/// (Allen & Tildesley, Computer Simulation of Liquids, 1987, §1.5).
#[inline]
pub(super) fn min_image(d: f64, l: f64) -> f64 {
    d - l * (d / l).round()
}

/// Minimum-image squared distance between two points in the periodic box.
#[inline]
pub(super) fn dist2(p: [f64; 3], q: [f64; 3], box_len: [f64; 3]) -> f64 {
    (0..3)
        .map(|a| min_image(p[a] - q[a], box_len[a]).powi(2))
        .sum()
}

/// Points binned into a periodic grid of cells.
pub(super) struct CellGrid {
    box_len: [f64; 3],
    m: [usize; 3],
    bins: Vec<Vec<u32>>,
}

impl CellGrid {
    /// Cells no narrower than `range` (at least one cell per axis).
    pub fn new(box_len: [f64; 3], range: f64) -> Self {
        let m = box_len.map(|l| ((l / range).floor() as usize).max(1));
        CellGrid {
            box_len,
            m,
            bins: vec![Vec::new(); m[0] * m[1] * m[2]],
        }
    }

    /// Width of the narrowest cell.
    pub fn min_cell_width(&self) -> f64 {
        (0..3)
            .map(|a| self.box_len[a] / self.m[a] as f64)
            .fold(f64::INFINITY, f64::min)
    }

    /// Cells per axis.
    pub fn dims(&self) -> [usize; 3] {
        self.m
    }

    /// Cell coordinates of a point inside the box.
    pub fn cell_of(&self, p: [f64; 3]) -> [usize; 3] {
        std::array::from_fn(|a| {
            let c = (p[a] / self.box_len[a] * self.m[a] as f64).floor() as i64;
            c.rem_euclid(self.m[a] as i64) as usize
        })
    }

    fn bin_index(&self, c: [usize; 3]) -> usize {
        c[0] + self.m[0] * (c[1] + self.m[1] * c[2])
    }

    pub fn insert(&mut self, p: [f64; 3], id: u32) {
        let i = self.bin_index(self.cell_of(p));
        self.bins[i].push(id);
    }

    pub fn clear(&mut self) {
        self.bins.iter_mut().for_each(Vec::clear);
    }

    /// Ids in the cell at (possibly out-of-range) cell coordinates `c`, wrapped into the grid.
    pub fn bin_at(&self, c: [i64; 3]) -> &[u32] {
        let w: [usize; 3] = std::array::from_fn(|a| c[a].rem_euclid(self.m[a] as i64) as usize);
        &self.bins[self.bin_index(w)]
    }

    /// Calls `f` once for every id in the 3×3×3 block of cells around `p`; with fewer than three
    /// cells along an axis the wrapped block would repeat cells, so repeats are skipped.
    pub fn for_each_near(&self, p: [f64; 3], mut f: impl FnMut(u32)) {
        let c = self.cell_of(p);
        let offsets = |a: usize| -> Vec<usize> {
            let m = self.m[a];
            let mut v: Vec<usize> = [m - 1, 0, 1].iter().map(|&o| (c[a] + o) % m).collect();
            v.sort_unstable();
            v.dedup();
            v
        };
        let (ox, oy, oz) = (offsets(0), offsets(1), offsets(2));
        for &z in &oz {
            for &y in &oy {
                for &x in &ox {
                    for &id in &self.bins[self.bin_index([x, y, z])] {
                        f(id);
                    }
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn neighbours_are_found_across_the_boundary_and_not_repeated() {
        let box_len = [20.0, 20.0, 9.0];
        let mut g = CellGrid::new(box_len, 4.0);
        assert_eq!(g.dims(), [5, 5, 2]);
        g.insert([19.5, 0.5, 8.9], 0);
        g.insert([10.0, 10.0, 4.0], 1);
        let mut seen = Vec::new();
        g.for_each_near([0.2, 19.8, 0.1], |id| seen.push(id));
        assert_eq!(seen, vec![0]);
        assert!((dist2([0.2, 19.8, 0.1], [19.5, 0.5, 8.9], box_len) - 1.02).abs() < 1e-9);
    }
}
