//! Pore-cluster labelling and percolation along a flow axis.
//!
//! Two pore voxels belong to one cluster when a chain of D3Q19 links joins them: the 6 face and
//! 12 edge neighbours, not the 8 corner neighbours. That is the connectivity the lattice-Boltzmann
//! solver sees, so a cluster the solver could push fluid through is never split here, and two
//! pores meeting only at a corner (which the solver cannot pass) are never merged.
//!
//! Labelling is a single raster scan with union–find over provisional labels (the scheme of
//! Hoshen & Kopelman 1976, Phys. Rev. B 14, 3438, from memory), then one pass over the periodic
//! faces to join clusters across the wrap, then a relabelling pass. No recursion, so deep or long
//! clusters cannot overflow the stack. Percolation labels the voxels once with every axis cut and
//! gets each boundary mode by merging those clusters across the periodic faces, so three axes
//! and any boundary mode cost one voxel pass.
//!
//! With periodic ends a cluster carries flow only if it winds round the flow axis (a loop that
//! crosses its wrap a non-zero net number of times), which the merge detects by tracking, per
//! cut cluster, which periodic copy it lies in (Newman & Ziff 2001; see [`percolating`]). That
//! costs an i32 and a flag per cut cluster, nothing per voxel.

use super::{Axis, PoreMask};
use crate::{Error, Result};

/// Largest voxel count the u32 labels can address (label 0 is reserved for solid).
const MAX_VOXELS: usize = u32::MAX as usize - 1;

/// The 9 D3Q19 neighbours visited before a voxel in x-fastest raster order, as (dx, dy, dz).
/// The other 9 links point to voxels visited later and are seen from their side.
const BACKWARD: [(isize, isize, isize); 9] = [
    (-1, 0, 0),
    (0, -1, 0),
    (-1, -1, 0),
    (1, -1, 0),
    (0, 0, -1),
    (-1, 0, -1),
    (1, 0, -1),
    (0, -1, -1),
    (0, 1, -1),
];

/// Indices into [`BACKWARD`]: all but the left neighbour (index 0), which is looked at first.
const ALL_BACKWARD: [usize; 8] = [1, 2, 3, 4, 5, 6, 7, 8];

/// The face neighbours among [`BACKWARD`] other than the left one: (0, −1, 0) and (0, 0, −1).
/// Neither is a face neighbour of the left neighbour, so both are needed after it too.
const FACE_BACKWARD: [usize; 2] = [1, 4];

/// Which voxel pairs count as joined.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Links {
    /// The 18 D3Q19 links (faces and edges): what the solver passes fluid through.
    Lattice,
    /// The 6 face links only: a path that needs no voxel edge, so one-voxel diagonal gaps in a
    /// wall (which pass flow along edge links) do not count.
    Faces,
}

/// Indices into [`BACKWARD`] that are *not* D3Q19 backward neighbours of the left neighbour
/// (x − 1, y, z); the others ((0,−1,0), (−1,−1,0), (0,0,−1), (−1,0,−1)) were joined to it when it
/// was scanned.
const AFTER_LEFT: [usize; 4] = [3, 6, 7, 8];

/// Connected pore clusters of a mask: one label per voxel, 0 for solid, 1..=count for pores.
///
/// Labels are numbered in order of each cluster's first voxel in x-fastest order, so the result
/// does not depend on how the scan was scheduled.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Clusters {
    shape: [usize; 3],
    periodic: [bool; 3],
    links: Links,
    labels: Vec<u32>,
    sizes: Vec<usize>,
}

impl Clusters {
    /// Grid size `[nx, ny, nz]`.
    pub fn shape(&self) -> [usize; 3] {
        self.shape
    }

    /// Which axes were treated as periodic (wrapping) when labelling.
    pub fn periodic(&self) -> [bool; 3] {
        self.periodic
    }

    /// Label of every voxel, x fastest; 0 = solid.
    pub fn labels(&self) -> &[u32] {
        &self.labels
    }

    /// Label of voxel (x, y, z); 0 = solid.
    pub fn label(&self, x: usize, y: usize, z: usize) -> u32 {
        self.labels[x + self.shape[0] * (y + self.shape[1] * z)]
    }

    /// Number of pore clusters.
    pub fn count(&self) -> usize {
        self.sizes.len()
    }

    /// Voxel counts of clusters 1..=count (entry `k` belongs to label `k + 1`).
    pub fn sizes(&self) -> &[usize] {
        &self.sizes
    }

    /// Voxel count of cluster `label`; 0 for label 0 (solid) or a label that does not exist.
    pub fn size(&self, label: u32) -> usize {
        match label {
            0 => 0,
            l => self.sizes.get(l as usize - 1).copied().unwrap_or(0),
        }
    }

    /// The largest cluster as (label, voxel count); the lowest label wins a tie. None if no pores.
    pub fn largest(&self) -> Option<(u32, usize)> {
        let mut best: Option<(u32, usize)> = None;
        for (k, &s) in self.sizes.iter().enumerate() {
            if best.is_none_or(|(_, b)| s > b) {
                best = Some((k as u32 + 1, s));
            }
        }
        best
    }
}

/// Union–find root with path halving.
#[inline]
fn find(parent: &mut [u32], mut x: u32) -> u32 {
    while parent[x as usize] != x {
        let up = parent[parent[x as usize] as usize];
        parent[x as usize] = up;
        x = up;
    }
    x
}

/// Joins the sets of `a` and `b`; the smaller root survives, so every root is the minimum
/// provisional label of its set (the relabelling pass relies on that). Returns the root.
#[inline]
fn union(parent: &mut [u32], a: u32, b: u32) -> u32 {
    let ra = find(parent, a);
    let rb = find(parent, b);
    if ra < rb {
        parent[rb as usize] = ra;
        ra
    } else {
        parent[ra as usize] = rb;
        rb
    }
}

/// Renumbers union–find sets 1, 2, … in ascending order of their root and leaves in
/// `parent[l]` the new number of label `l`; returns the number of sets. Roots are set minima
/// (see [`union`]), so when labels grow in scan order the numbering follows first appearance.
fn compact(parent: &mut [u32]) -> u32 {
    // Two separate passes: numbering overwrites parent links that `find` would still follow.
    for l in 1..parent.len() as u32 {
        parent[l as usize] = find(parent, l);
    }
    let mut count = 0u32;
    for l in 1..parent.len() {
        let r = parent[l] as usize;
        if r == l {
            count += 1;
            parent[l] = count;
        } else {
            parent[l] = parent[r];
        }
    }
    count
}

/// Union–find root of `x` and the periodic copy of `x` relative to its root, with path halving.
///
/// `shift[l]` is the copy index of set member `l` minus that of `parent[l]`, along one axis (0
/// for a root): the number of times a chain of links from `parent[l]` to `l` crosses that
/// axis's wrap, counted +1 forwards and −1 backwards. Sums wrap on overflow (arithmetic modulo
/// 2³²), which is exact here: the only question asked of them is whether the loop a link closes
/// winds, and that loop is the link plus the path between its ends through the links that merged
/// sets so far (a forest, so the path meets each cluster once); its winding is at most the number
/// of clusters, below 2³², in size, so it is zero exactly when it is zero modulo 2³².
#[inline]
fn find_shifted(parent: &mut [u32], shift: &mut [i32], mut x: u32) -> (u32, i32) {
    let mut total = 0i32;
    loop {
        let p = parent[x as usize];
        if p == x {
            return (x, total);
        }
        let g = parent[p as usize];
        shift[x as usize] = shift[x as usize].wrapping_add(shift[p as usize]);
        parent[x as usize] = g;
        total = total.wrapping_add(shift[x as usize]);
        x = g;
    }
}

/// Records a link from a voxel of set member `a` to one of member `b` that lies `d` periodic
/// copies further along the tracked axis. Joins the two sets (the smaller root survives, as in
/// [`union`]); if they already were one set and the link disagrees with the copies recorded so
/// far, the set contains a loop that winds round the axis and is marked in `winds` (at its root).
///
/// This is the wrapping test of Newman & Ziff 2001 (Phys. Rev. E 64, 016706, the section on
/// detecting wrapping, from memory): each site carries its displacement from the root of its
/// cluster, and a bond between two sites of one cluster whose displacements differ by other
/// than the bond's own step closes a loop round the periodic system.
#[inline]
fn union_shifted(
    parent: &mut [u32],
    shift: &mut [i32],
    winds: &mut [bool],
    a: u32,
    b: u32,
    d: i32,
) {
    let (ra, sa) = find_shifted(parent, shift, a);
    let (rb, sb) = find_shifted(parent, shift, b);
    // Copies relative to ra: copy(b) = copy(a) + d = sa + d, and copy(rb) = copy(b) − sb.
    let rb_from_ra = sa.wrapping_add(d).wrapping_sub(sb);
    if ra == rb {
        if rb_from_ra != 0 {
            winds[ra as usize] = true;
        }
    } else if ra < rb {
        parent[rb as usize] = ra;
        shift[rb as usize] = rb_from_ra;
        winds[ra as usize] |= winds[rb as usize];
    } else {
        parent[ra as usize] = rb;
        shift[ra as usize] = rb_from_ra.wrapping_neg();
        winds[rb as usize] |= winds[ra as usize];
    }
}

/// The clusters of a cut labelling joined across the wraps of the `periodic` axes, kept at the
/// cluster level (no per-voxel labels), so one voxel labelling serves every boundary mode.
struct Merged {
    /// `map[l]` is the merged cluster of cut cluster `l`; `map[0] = 0` (solid).
    map: Vec<u32>,
    /// Voxel counts of merged clusters 1..=count (entry k belongs to merged label k + 1).
    sizes: Vec<usize>,
}

impl Clusters {
    /// Joins these clusters (labelled with no periodic axis) across the wraps of `periodic`.
    /// Costs one pass over the periodic faces plus work per cluster, not per voxel.
    fn merged(&self, periodic: [bool; 3]) -> Merged {
        debug_assert_eq!(
            self.periodic, [false; 3],
            "merging starts from a cut labelling"
        );
        let mut map: Vec<u32> = (0..=self.count() as u32).collect();
        join_across_wrap(self.shape, periodic, self.links, &self.labels, &mut map);
        let count = compact(&mut map);
        let mut sizes = vec![0usize; count as usize];
        for (k, &s) in self.sizes.iter().enumerate() {
            sizes[map[k + 1] as usize - 1] += s;
        }
        Merged { map, sizes }
    }

    /// [`Clusters::merged`], plus which merged clusters wind round `axis` (periodic in
    /// `periodic`): `winds[m]` is true when merged cluster `m` contains a loop that crosses the
    /// wrap of `axis` a non-zero net number of times, the only kind of cluster that can carry a
    /// net flow along a periodic axis. Its loops may cross the other periodic axes' wraps too;
    /// only the net crossings of `axis` count.
    ///
    /// Every voxel of a cut cluster lies in the same periodic copy, so the copies are tracked per
    /// cut cluster (an i32 and a flag each, with the union–find parent as the map), not per
    /// voxel; the cost is the same face pass as [`Clusters::merged`].
    fn merged_winding(&self, periodic: [bool; 3], axis: Axis) -> (Merged, Vec<bool>) {
        debug_assert_eq!(
            self.periodic, [false; 3],
            "merging starts from a cut labelling"
        );
        let a = axis.index();
        debug_assert!(periodic[a], "winding is asked of a periodic axis");
        let n = self.count() + 1;
        let mut map: Vec<u32> = (0..n as u32).collect();
        let mut shift = vec![0i32; n];
        let mut winds = vec![false; n];
        for_each_wrap_link(
            self.shape,
            periodic,
            self.links,
            &self.labels,
            |li, lj, wraps| {
                union_shifted(&mut map, &mut shift, &mut winds, li, lj, wraps[a] as i32);
            },
        );
        drop(shift);
        let count = compact(&mut map);
        let mut sizes = vec![0usize; count as usize];
        for (k, &s) in self.sizes.iter().enumerate() {
            sizes[map[k + 1] as usize - 1] += s;
        }
        // A flag may sit on a label that stopped being a root after it was set; its merged
        // cluster is the same either way.
        let mut merged_winds = vec![false; count as usize + 1];
        for l in 1..n {
            if winds[l] {
                merged_winds[map[l] as usize] = true;
            }
        }
        (Merged { map, sizes }, merged_winds)
    }
}

/// Labels the pore clusters of `mask` along D3Q19 links.
///
/// `periodic[a]` makes axis `a` wrap: voxels on the last layer along `a` are linked to those on
/// the first layer (face and edge links, with the other coordinates wrapped too where their axis
/// is periodic). Non-periodic axes are cut at the grid faces.
///
/// Fails only when the grid has more voxels than u32 labels can address (about 4.3 × 10⁹).
pub fn label_clusters(mask: &PoreMask, periodic: [bool; 3]) -> Result<Clusters> {
    label_clusters_by(mask, periodic, Links::Lattice)
}

/// [`label_clusters`] with the choice of which neighbours join.
pub fn label_clusters_by(mask: &PoreMask, periodic: [bool; 3], links: Links) -> Result<Clusters> {
    let shape = mask.shape();
    let [nx, ny, nz] = shape;
    if mask.len() > MAX_VOXELS {
        return Err(Error::BadVolume(format!(
            "volume of {nx}×{ny}×{nz} voxels is too large to label clusters (at most {MAX_VOXELS} voxels)"
        )));
    }
    let pore = mask.as_slice();
    let mut labels = vec![0u32; pore.len()];
    // parent[0] is a dummy so that provisional label l lives at index l.
    let mut parent: Vec<u32> = vec![0];

    let sx = 1isize;
    let sy = nx as isize;
    let sz = (nx * ny) as isize;
    let offsets: [isize; 9] = BACKWARD.map(|(dx, dy, dz)| dx * sx + dy * sy + dz * sz);

    for z in 0..nz {
        for y in 0..ny {
            let row = nx * (y + ny * z);
            // Which backward neighbours exist for the interior of this row; x at the ends is
            // handled per voxel below.
            let row_ok: [bool; 9] = BACKWARD.map(|(_, dy, dz)| {
                (dz >= 0 || z > 0) && (dy >= 0 || y > 0) && (dy <= 0 || y + 1 < ny)
            });
            for x in 0..nx {
                let i = row + x;
                if !pore[i] {
                    continue;
                }
                // When the left neighbour is pore, four of the other backward neighbours are
                // its own backward neighbours and already share its set: only the rest need a
                // union. This halves the union–find work in dense pore space.
                let left = if x > 0 { labels[i - 1] } else { 0 };
                let (mut l, todo) = match (left != 0, links) {
                    (_, Links::Faces) => (
                        if left != 0 {
                            find(&mut parent, left)
                        } else {
                            0
                        },
                        &FACE_BACKWARD[..],
                    ),
                    (true, Links::Lattice) => (find(&mut parent, left), &AFTER_LEFT[..]),
                    (false, Links::Lattice) => (0u32, &ALL_BACKWARD[..]),
                };
                for &k in todo {
                    let dx = BACKWARD[k].0;
                    if !row_ok[k] || (dx < 0 && x == 0) || (dx > 0 && x + 1 == nx) {
                        continue;
                    }
                    let m = labels[(i as isize + offsets[k]) as usize];
                    if m != 0 {
                        l = if l == 0 {
                            find(&mut parent, m)
                        } else {
                            union(&mut parent, l, m)
                        };
                    }
                }
                if l == 0 {
                    l = parent.len() as u32;
                    parent.push(l);
                }
                labels[i] = l;
            }
        }
    }

    join_across_wrap(shape, periodic, links, &labels, &mut parent);

    let count = compact(&mut parent);
    let mut sizes = vec![0usize; count as usize];
    for l in labels.iter_mut() {
        if *l != 0 {
            *l = parent[*l as usize];
            sizes[*l as usize - 1] += 1;
        }
    }

    Ok(Clusters {
        shape,
        periodic,
        links,
        labels,
        sizes,
    })
}

/// Unions provisional labels across every periodic face (see [`for_each_wrap_link`]).
fn join_across_wrap(
    shape: [usize; 3],
    periodic: [bool; 3],
    links: Links,
    labels: &[u32],
    parent: &mut [u32],
) {
    for_each_wrap_link(shape, periodic, links, labels, |li, lj, _| {
        union(parent, li, lj);
    });
}

/// Calls `f(li, lj, wraps)` for every link of kind `links` between pore voxels that crosses the wrap of a
/// `periodic` axis, with the labels `li`, `lj` of its two ends and, per axis, the number of times
/// the link crosses that axis's wrap going from the `li` end to the `lj` end: +1 from the last
/// layer to the first, −1 from the first to the last, 0 if it stays inside (so the `lj` voxel
/// lies in the periodic copy `wraps` away from the `li` voxel's).
///
/// Every link that crosses the wrap of axis `a` leaves a voxel on the last layer along `a` with
/// step +1 along `a`, so scanning that layer with the 5 D3Q19 links having +1 along `a` (the
/// face link alone for [`Links::Faces`]) finds each crossing link; a link that also crosses the
/// wrap of a second periodic axis is found once from each axis's layer, with the same `wraps`.
fn for_each_wrap_link(
    shape: [usize; 3],
    periodic: [bool; 3],
    links: Links,
    labels: &[u32],
    mut f: impl FnMut(u32, u32, [i8; 3]),
) {
    if shape.contains(&0) {
        return;
    }
    for a in 0..3 {
        if !periodic[a] {
            continue;
        }
        let (b, c) = ((a + 1) % 3, (a + 2) % 3);
        // Steps along (b, c) for the 5 links with +1 along a: face link and 4 edge links.
        const TRANSVERSE: [(isize, isize); 5] = [(0, 0), (1, 0), (-1, 0), (0, 1), (0, -1)];
        let transverse = match links {
            Links::Lattice => &TRANSVERSE[..],
            Links::Faces => &TRANSVERSE[..1],
        };
        for ib in 0..shape[b] {
            for ic in 0..shape[c] {
                let mut p = [0usize; 3];
                p[a] = shape[a] - 1;
                p[b] = ib;
                p[c] = ic;
                let i = p[0] + shape[0] * (p[1] + shape[1] * p[2]);
                let li = labels[i];
                if li == 0 {
                    continue;
                }
                for &(db, dc) in transverse {
                    let (Some(qb), Some(qc)) = (
                        step(ib, db, shape[b], periodic[b]),
                        step(ic, dc, shape[c], periodic[c]),
                    ) else {
                        continue;
                    };
                    let mut q = [0usize; 3];
                    q[a] = 0;
                    q[b] = qb;
                    q[c] = qc;
                    let j = q[0] + shape[0] * (q[1] + shape[1] * q[2]);
                    let lj = labels[j];
                    if lj != 0 {
                        let mut wraps = [0i8; 3];
                        wraps[a] = 1;
                        wraps[b] = crossing(ib, db, shape[b]);
                        wraps[c] = crossing(ic, dc, shape[c]);
                        f(li, lj, wraps);
                    }
                }
            }
        }
    }
}

/// How often the step `d` (−1, 0 or +1) from coordinate `i` crosses the wrap of an axis of
/// length `n`: +1 past the last layer, −1 before the first, else 0.
fn crossing(i: usize, d: isize, n: usize) -> i8 {
    let j = i as isize + d;
    if j >= n as isize {
        1
    } else if j < 0 {
        -1
    } else {
        0
    }
}

/// Coordinate `i + d` on an axis of length `n`, wrapped if `periodic`, None if it leaves a cut axis.
fn step(i: usize, d: isize, n: usize, periodic: bool) -> Option<usize> {
    let j = i as isize + d;
    if (0..n as isize).contains(&j) {
        Some(j as usize)
    } else if periodic {
        Some(j.rem_euclid(n as isize) as usize)
    } else {
        None
    }
}

/// Calls `f(index)` for every voxel whose coordinate along `axis` equals `layer`.
fn for_each_in_layer(shape: [usize; 3], axis: Axis, layer: usize, mut f: impl FnMut(usize)) {
    let a = axis.index();
    let (b, c) = ((a + 1) % 3, (a + 2) % 3);
    for ib in 0..shape[b] {
        for ic in 0..shape[c] {
            let mut p = [0usize; 3];
            p[a] = layer;
            p[b] = ib;
            p[c] = ic;
            f(p[0] + shape[0] * (p[1] + shape[1] * p[2]));
        }
    }
}

/// The pore space that can carry flow along one axis, and how much of the pore space that is.
#[derive(Clone, Debug, PartialEq)]
pub struct Percolation {
    /// The flow axis this was computed for.
    pub axis: Axis,
    /// Pore voxels of the clusters that carry flow along `axis`; every other voxel is solid.
    pub mask: PoreMask,
    /// True when at least one cluster carries flow (`connected_pore_voxels > 0`).
    pub percolates: bool,
    /// Pore voxels kept in `mask`.
    pub connected_pore_voxels: usize,
    /// Pore voxels of the input mask.
    pub total_pore_voxels: usize,
    /// Clusters of the deciding labelling (see [`percolating`]).
    pub clusters_total: usize,
    /// Of those, the clusters kept.
    pub clusters_kept: usize,
}

impl Percolation {
    /// Kept pore voxels over all voxels of the grid (0 for an empty grid).
    pub fn connected_porosity(&self) -> f64 {
        fraction(self.connected_pore_voxels, self.mask.len())
    }

    /// Pore voxels dropped because their cluster carries no flow along the axis.
    pub fn isolated_pore_voxels(&self) -> usize {
        self.total_pore_voxels - self.connected_pore_voxels
    }

    /// The counts without the mask.
    pub fn summary(&self) -> AxisPercolation {
        AxisPercolation::new(
            self.axis,
            self.mask.len(),
            self.total_pore_voxels,
            self.connected_pore_voxels,
            self.clusters_total,
            self.clusters_kept,
        )
    }
}

/// Percolation counts along one axis, without the mask (see [`percolation_by_axis`]).
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct AxisPercolation {
    /// Flow axis.
    pub axis: Axis,
    /// True when some pore cluster carries flow along the axis.
    pub percolates: bool,
    /// Pore voxels in clusters that carry flow along the axis.
    pub connected_pore_voxels: usize,
    /// All pore voxels.
    pub total_pore_voxels: usize,
    /// Clusters of the deciding labelling (see [`percolating`]).
    pub clusters_total: usize,
    /// Of those, the clusters kept.
    pub clusters_kept: usize,
    /// Connected pore voxels over all voxels.
    pub connected_porosity: f64,
}

impl AxisPercolation {
    fn new(
        axis: Axis,
        voxels: usize,
        total_pore_voxels: usize,
        connected_pore_voxels: usize,
        clusters_total: usize,
        clusters_kept: usize,
    ) -> Self {
        AxisPercolation {
            axis,
            percolates: connected_pore_voxels > 0,
            connected_pore_voxels,
            total_pore_voxels,
            clusters_total,
            clusters_kept,
            connected_porosity: fraction(connected_pore_voxels, voxels),
        }
    }
}

fn fraction(part: usize, whole: usize) -> f64 {
    if whole == 0 {
        0.0
    } else {
        part as f64 / whole as f64
    }
}

/// Labelling flags for the cut labelling along `axis`: transverse axes wrap iff `sides_periodic`,
/// the flow axis never does.
fn cut_flags(axis: Axis, sides_periodic: bool) -> [bool; 3] {
    let mut p = [sides_periodic; 3];
    p[axis.index()] = false;
    p
}

/// Labelling flags with the flow axis wrapping too.
fn wrapped_flags(axis: Axis, sides_periodic: bool) -> [bool; 3] {
    let mut p = [sides_periodic; 3];
    p[axis.index()] = true;
    p
}

/// Which clusters carry flow along one axis, and the counts.
struct Decision {
    /// Indexed by label of the cut base labelling; `keep[0]` (solid) is false.
    keep: Vec<bool>,
    connected_pore_voxels: usize,
    clusters_total: usize,
    clusters_kept: usize,
}

/// Applies the definition of [`percolating`] to `base`, a labelling with no periodic axis: the
/// cut and wrapped labellings are obtained by merging its clusters across the periodic faces.
fn decide(base: &Clusters, axis: Axis, sides_periodic: bool, ends_periodic: bool) -> Decision {
    let (map, sizes, keep_merged) = if ends_periodic {
        let (w, winds) = base.merged_winding(wrapped_flags(axis, sides_periodic), axis);
        (w.map, w.sizes, winds)
    } else {
        let cut = base.merged(cut_flags(axis, sides_periodic));
        let spans = spanning(base, axis, &cut);
        (cut.map, cut.sizes, spans)
    };
    let keep: Vec<bool> = map.iter().map(|&m| keep_merged[m as usize]).collect();
    let mut connected_pore_voxels = 0;
    let mut clusters_kept = 0;
    for (k, &s) in sizes.iter().enumerate() {
        if keep_merged[k + 1] {
            connected_pore_voxels += s;
            clusters_kept += 1;
        }
    }
    Decision {
        keep,
        connected_pore_voxels,
        clusters_total: sizes.len(),
        clusters_kept,
    }
}

/// Which clusters of `cut` (merged from `base`) have a voxel on both the inlet and the outlet
/// layer along `axis`; indexed by merged label, entry 0 (solid) false.
fn spanning(base: &Clusters, axis: Axis, cut: &Merged) -> Vec<bool> {
    let shape = base.shape();
    let labels = base.labels();
    let mut inlet = vec![false; cut.sizes.len() + 1];
    let mut spans = vec![false; cut.sizes.len() + 1];
    let n = shape[axis.index()];
    if !shape.contains(&0) {
        for_each_in_layer(shape, axis, 0, |i| {
            inlet[cut.map[labels[i] as usize] as usize] = true;
        });
        for_each_in_layer(shape, axis, n - 1, |i| {
            let l = cut.map[labels[i] as usize] as usize;
            spans[l] = inlet[l];
        });
    }
    spans[0] = false;
    spans
}

/// The pore clusters that carry flow along `axis`.
///
/// Definition:
/// 1. Label the pore space along D3Q19 links with the two transverse axes periodic iff
///    `sides_periodic` and the flow axis cut at the grid faces ("cut clusters").
/// 2. A cut cluster *spans* when it has a voxel on the inlet layer (coordinate 0 along `axis`)
///    and one on the outlet layer (coordinate n − 1).
/// 3. If `ends_periodic` is false, keep exactly the spanning cut clusters.
/// 4. If `ends_periodic` is true, label again with the flow axis periodic as well ("periodic
///    clusters"), and keep every periodic cluster that *winds* round the flow axis: it contains a
///    loop that crosses the wrap of the flow axis a non-zero net number of times (it may cross
///    the wraps of periodic sides too; those crossings do not count). Only such a cluster can
///    carry a net flow along a periodic axis; any other is a closed pocket of the periodic
///    domain however far it reaches. Pieces joined to a winding cluster only through the wrap
///    of the flow axis are kept as the dead ends they are in the periodic domain. Spanning the
///    cut is necessary but not sufficient: a Z-shaped channel whose two ends do not meet across
///    the wrap spans the cut and does not wind, and an open chain that reaches round the wrap
///    does not wind either. Winding is detected as in Newman & Ziff 2001 (see
///    [`union_shifted`]).
///
/// `clusters_total`/`clusters_kept` count clusters of the labelling that decides the mask: the
/// cut labelling in case 3, the periodic one in case 4. A mirrored-ends sample behaves as case 3
/// (a piece on an end face only meets its own mirror image there).
///
/// Fails only when the grid is too large for u32 labels (see [`label_clusters`]).
pub fn percolating(
    mask: &PoreMask,
    axis: Axis,
    sides_periodic: bool,
    ends_periodic: bool,
) -> Result<Percolation> {
    percolating_by(mask, axis, sides_periodic, ends_periodic, Links::Lattice)
}

/// [`percolating`] with voxels joined along `links`: [`Links::Faces`] for a solve whose edge
/// gaps are walls (`SolverSettings::seal_edge_gaps`).
pub fn percolating_by(
    mask: &PoreMask,
    axis: Axis,
    sides_periodic: bool,
    ends_periodic: bool,
    links: Links,
) -> Result<Percolation> {
    let base = label_clusters_by(mask, [false; 3], links)?;
    let d = decide(&base, axis, sides_periodic, ends_periodic);
    let kept: Vec<bool> = base.labels().iter().map(|&l| d.keep[l as usize]).collect();
    Ok(Percolation {
        axis,
        mask: PoreMask::new(mask.shape(), kept),
        percolates: d.connected_pore_voxels > 0,
        connected_pore_voxels: d.connected_pore_voxels,
        total_pore_voxels: mask.pore_count(),
        clusters_total: d.clusters_total,
        clusters_kept: d.clusters_kept,
    })
}

/// Pore voxels that carry flow along `axis` by the definition of [`percolating`] when only
/// face links join voxels ([`Links::Faces`]). Zero while [`percolating`] finds a path means
/// every path from inlet to outlet crosses a voxel edge: a gap between two solid voxels that
/// meet only along their edge, which the solver's edge links pass and the image does not
/// resolve. Costs one more voxel labelling.
pub fn face_connected_pore_voxels(
    mask: &PoreMask,
    axis: Axis,
    sides_periodic: bool,
    ends_periodic: bool,
) -> Result<usize> {
    let base = label_clusters_by(mask, [false; 3], Links::Faces)?;
    Ok(decide(&base, axis, sides_periodic, ends_periodic).connected_pore_voxels)
}

/// [`face_connected_pore_voxels`] along x, y and z from one voxel labelling.
pub fn face_connected_by_axis(
    mask: &PoreMask,
    sides_periodic: bool,
    ends_periodic: bool,
) -> Result<[usize; 3]> {
    let base = label_clusters_by(mask, [false; 3], Links::Faces)?;
    Ok(Axis::ALL
        .map(|axis| decide(&base, axis, sides_periodic, ends_periodic).connected_pore_voxels))
}

/// [`percolating`] along x, y and z, counts only (no masks are built).
///
/// The voxels are labelled once with all axes cut; every boundary mode and axis is then decided
/// by merging those clusters across the periodic faces, which costs work per face voxel and per
/// cluster, not per voxel.
pub fn percolation_by_axis(
    mask: &PoreMask,
    sides_periodic: bool,
    ends_periodic: bool,
) -> Result<[AxisPercolation; 3]> {
    let base = label_clusters(mask, [false; 3])?;
    let total = mask.pore_count();
    Ok(Axis::ALL.map(|axis| {
        let d = decide(&base, axis, sides_periodic, ends_periodic);
        AxisPercolation::new(
            axis,
            mask.len(),
            total,
            d.connected_pore_voxels,
            d.clusters_total,
            d.clusters_kept,
        )
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Whether the step (dx, dy, dz) is a link of kind `links`.
    fn is_link(links: Links, m: isize) -> bool {
        match links {
            Links::Lattice => m == 1 || m == 2,
            Links::Faces => m == 1,
        }
    }

    /// Reference labelling by breadth-first search over all 18 D3Q19 links (or the 6 face
    /// links), written independently of the raster scan (explicit queue, explicit wrap per link).
    fn bfs_labels(mask: &PoreMask, periodic: [bool; 3], links: Links) -> Vec<u32> {
        let s = mask.shape();
        let mut lab = vec![0u32; mask.len()];
        let mut next = 0u32;
        let mut queue = std::collections::VecDeque::new();
        for start in 0..mask.len() {
            if !mask.as_slice()[start] || lab[start] != 0 {
                continue;
            }
            next += 1;
            lab[start] = next;
            queue.push_back(start);
            while let Some(i) = queue.pop_front() {
                let p = [i % s[0], (i / s[0]) % s[1], i / (s[0] * s[1])];
                for dx in -1isize..=1 {
                    for dy in -1isize..=1 {
                        for dz in -1isize..=1 {
                            if !is_link(links, dx.abs() + dy.abs() + dz.abs()) {
                                continue;
                            }
                            let d = [dx, dy, dz];
                            let mut q = [0usize; 3];
                            let mut ok = true;
                            for a in 0..3 {
                                match step(p[a], d[a], s[a], periodic[a]) {
                                    Some(v) => q[a] = v,
                                    None => ok = false,
                                }
                            }
                            if !ok {
                                continue;
                            }
                            let j = q[0] + s[0] * (q[1] + s[1] * q[2]);
                            if mask.as_slice()[j] && lab[j] == 0 {
                                lab[j] = next;
                                queue.push_back(j);
                            }
                        }
                    }
                }
            }
        }
        lab
    }

    /// Small deterministic pseudo-random masks (splitmix64 of the voxel index) so the unit test
    /// needs no crate.
    fn random_mask(shape: [usize; 3], porosity: f64, seed: u64) -> PoreMask {
        let n = shape[0] * shape[1] * shape[2];
        let pore = (0..n as u64)
            .map(|i| {
                let mut h = (i ^ seed.rotate_left(32)).wrapping_add(0x9E37_79B9_7F4A_7C15);
                h = (h ^ (h >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
                h = (h ^ (h >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
                h ^= h >> 31;
                ((h >> 11) as f64 / (1u64 << 53) as f64) < porosity
            })
            .collect();
        PoreMask::new(shape, pore)
    }

    #[test]
    fn raster_scan_matches_breadth_first_search() {
        // Both number clusters by first voxel in index order, so labels must agree exactly.
        // Porosities straddle the D3Q19 site-percolation threshold (≈0.14, from memory), where
        // cluster shapes are most tangled; shapes include length-1 and length-2 axes.
        let shapes = [[7, 5, 6], [1, 9, 8], [2, 2, 11], [9, 1, 1], [4, 6, 2]];
        let mut seed = 1;
        for shape in shapes {
            for porosity in [0.1, 0.15, 0.25, 0.5] {
                for bits in 0..8u32 {
                    let periodic = [bits & 1 != 0, bits & 2 != 0, bits & 4 != 0];
                    seed += 1;
                    let m = random_mask(shape, porosity, seed);
                    for links in [Links::Lattice, Links::Faces] {
                        let c = label_clusters_by(&m, periodic, links).unwrap();
                        let reference = bfs_labels(&m, periodic, links);
                        assert_eq!(
                            c.labels(),
                            &reference[..],
                            "{shape:?} {porosity} {periodic:?} {links:?}"
                        );
                        assert_eq!(c.sizes().iter().sum::<usize>(), m.pore_count());
                    }
                }
            }
        }
    }

    #[test]
    fn merging_a_cut_labelling_equals_labelling_with_wrap() {
        let mut seed = 1000;
        for shape in [[6, 7, 5], [1, 4, 9], [8, 2, 2]] {
            for porosity in [0.12, 0.2, 0.4] {
                seed += 1;
                let m = random_mask(shape, porosity, seed);
                for links in [Links::Lattice, Links::Faces] {
                    let base = label_clusters_by(&m, [false; 3], links).unwrap();
                    for bits in 0..8u32 {
                        let periodic = [bits & 1 != 0, bits & 2 != 0, bits & 4 != 0];
                        let direct = label_clusters_by(&m, periodic, links).unwrap();
                        let merged = base.merged(periodic);
                        let relabelled: Vec<u32> = base
                            .labels()
                            .iter()
                            .map(|&l| merged.map[l as usize])
                            .collect();
                        assert_eq!(relabelled, direct.labels(), "{shape:?} {periodic:?}");
                        assert_eq!(merged.sizes, direct.sizes());
                    }
                }
            }
        }
    }

    /// Reference for periodic ends, written independently of the merge: breadth-first search
    /// over the periodic grid (flow axis and, if `sides`, the other axes wrapping) that gives
    /// every voxel its unwrapped periodic copy along `axis` (i64) and marks a cluster as winding
    /// when a link reaches an already visited voxel of it in another copy than the link implies.
    /// Returns the kept mask.
    fn bfs_winding(mask: &PoreMask, axis: Axis, sides: bool, links: Links) -> Vec<bool> {
        let s = mask.shape();
        let a = axis.index();
        let mut periodic = [sides; 3];
        periodic[a] = true;
        let mut lab = vec![0usize; mask.len()];
        let mut copy = vec![0i64; mask.len()];
        let mut winds = vec![false];
        let mut queue = std::collections::VecDeque::new();
        for start in 0..mask.len() {
            if !mask.as_slice()[start] || lab[start] != 0 {
                continue;
            }
            winds.push(false);
            let id = winds.len() - 1;
            lab[start] = id;
            queue.push_back(start);
            while let Some(i) = queue.pop_front() {
                let p = [i % s[0], (i / s[0]) % s[1], i / (s[0] * s[1])];
                for d in (0..27).map(|k| [k % 3 - 1, (k / 3) % 3 - 1, k / 9 - 1]) {
                    if !is_link(links, d.iter().map(|v: &isize| v.abs()).sum()) {
                        continue;
                    }
                    let mut q = [0usize; 3];
                    let mut ok = true;
                    let mut shift = 0i64;
                    for b in 0..3 {
                        let v = p[b] as isize + d[b];
                        let n = s[b] as isize;
                        if (0..n).contains(&v) {
                            q[b] = v as usize;
                        } else if periodic[b] {
                            q[b] = v.rem_euclid(n) as usize;
                            if b == a {
                                shift = if v < 0 { -1 } else { 1 };
                            }
                        } else {
                            ok = false;
                        }
                    }
                    let j = q[0] + s[0] * (q[1] + s[1] * q[2]);
                    if !ok || !mask.as_slice()[j] {
                        continue;
                    }
                    if lab[j] == 0 {
                        lab[j] = id;
                        copy[j] = copy[i] + shift;
                        queue.push_back(j);
                    } else if copy[j] != copy[i] + shift {
                        winds[id] = true;
                    }
                }
            }
        }
        lab.iter().map(|&l| l != 0 && winds[l]).collect()
    }

    #[test]
    fn periodic_ends_keep_exactly_the_clusters_a_search_finds_winding() {
        // Porosities around the D3Q19 site-percolation threshold (≈0.14, from memory), where
        // clusters that reach round the wrap without winding are common; shapes include
        // length-1 and length-2 axes.
        let shapes = [[9, 7, 6], [1, 8, 9], [2, 10, 3], [12, 2, 2], [6, 6, 6]];
        let mut seed = 5000;
        let mut differs_from_spanning = 0;
        for shape in shapes {
            for porosity in [0.1, 0.14, 0.18, 0.25, 0.4] {
                seed += 1;
                let m = random_mask(shape, porosity, seed);
                for axis in Axis::ALL {
                    for sides in [false, true] {
                        let want = bfs_winding(&m, axis, sides, Links::Lattice);
                        let got = percolating(&m, axis, sides, true).unwrap();
                        let faces = bfs_winding(&m, axis, sides, Links::Faces);
                        assert_eq!(
                            face_connected_pore_voxels(&m, axis, sides, true).unwrap(),
                            faces.iter().filter(|&&k| k).count(),
                            "faces {shape:?} {porosity} {axis} sides {sides}"
                        );
                        assert_eq!(
                            got.mask.as_slice(),
                            &want[..],
                            "{shape:?} {porosity} {axis} sides {sides}"
                        );
                        // Winding implies spanning the cut (a winding loop has a stretch from
                        // the inlet layer to the outlet layer), never the other way round.
                        let cut = percolating(&m, axis, sides, false).unwrap();
                        if got.percolates {
                            assert!(cut.percolates, "{shape:?} {porosity} {axis} {sides}");
                        }
                        differs_from_spanning += usize::from(cut.percolates != got.percolates);
                    }
                }
            }
        }
        // The masks must exercise the difference, or this test checks little.
        assert!(differs_from_spanning > 0);
    }

    #[test]
    fn face_links_with_cut_ends_keep_the_spanning_face_clusters() {
        // The cut-ends branch of `decide` for face links, and `face_connected_by_axis` for both
        // end modes, against a breadth-first search: keep a face cluster (flow axis cut, sides
        // wrapping iff `sides`) that has a voxel on the inlet and on the outlet layer.
        let shapes = [[7, 6, 5], [1, 8, 9], [2, 9, 3], [10, 2, 1]];
        let mut seed = 9000;
        let mut faces_differ = 0;
        for shape in shapes {
            for porosity in [0.2, 0.35, 0.5, 0.7] {
                seed += 1;
                let m = random_mask(shape, porosity, seed);
                for sides in [false, true] {
                    let by_axis = face_connected_by_axis(&m, sides, false).unwrap();
                    let by_axis_periodic = face_connected_by_axis(&m, sides, true).unwrap();
                    for axis in Axis::ALL {
                        let a = axis.index();
                        let lab = bfs_labels(&m, cut_flags(axis, sides), Links::Faces);
                        let n = shape[a];
                        let on_layer = |layer: usize| {
                            let mut s = std::collections::HashSet::new();
                            for (i, &l) in lab.iter().enumerate() {
                                let p = [
                                    i % shape[0],
                                    (i / shape[0]) % shape[1],
                                    i / (shape[0] * shape[1]),
                                ];
                                if l != 0 && p[a] == layer {
                                    s.insert(l);
                                }
                            }
                            s
                        };
                        let (inlet, outlet) = (on_layer(0), on_layer(n - 1));
                        let want = lab
                            .iter()
                            .filter(|l| inlet.contains(l) && outlet.contains(l))
                            .count();
                        let got = face_connected_pore_voxels(&m, axis, sides, false).unwrap();
                        assert_eq!(got, want, "{shape:?} {porosity} {axis} sides {sides}");
                        assert_eq!(by_axis[a], want, "{shape:?} {porosity} {axis} {sides}");
                        assert_eq!(
                            by_axis_periodic[a],
                            face_connected_pore_voxels(&m, axis, sides, true).unwrap(),
                            "{shape:?} {porosity} {axis} {sides} periodic ends"
                        );
                        let lattice = percolating(&m, axis, sides, false).unwrap();
                        assert!(want <= lattice.connected_pore_voxels);
                        faces_differ += usize::from(want != lattice.connected_pore_voxels);
                    }
                }
            }
        }
        // The masks must separate face from lattice connectivity, or this checks little.
        assert!(faces_differ > 0);
    }

    #[test]
    fn empty_and_solid_grids_have_no_clusters() {
        let empty = PoreMask::new([0, 4, 4], vec![]);
        let c = label_clusters(&empty, [true; 3]).unwrap();
        assert_eq!(c.count(), 0);
        assert_eq!(c.largest(), None);
        let solid = PoreMask::from_fn([3, 3, 3], |_, _, _| false);
        let c = label_clusters(&solid, [true; 3]).unwrap();
        assert_eq!(c.count(), 0);
        let p = percolating(&empty, Axis::X, true, true).unwrap();
        assert!(!p.percolates);
        assert_eq!(p.connected_porosity(), 0.0);
    }

    #[test]
    fn size_and_largest_report_the_right_cluster() {
        // Two blobs: a 2-voxel one first in scan order and a 3-voxel one later.
        let m = PoreMask::from_fn([8, 1, 1], |x, _, _| matches!(x, 0 | 1 | 4 | 5 | 6));
        let c = label_clusters(&m, [false; 3]).unwrap();
        assert_eq!(c.count(), 2);
        assert_eq!((c.size(0), c.size(1), c.size(2), c.size(3)), (0, 2, 3, 0));
        assert_eq!(c.largest(), Some((2, 3)));
        assert_eq!(c.label(5, 0, 0), 2);
    }
}
