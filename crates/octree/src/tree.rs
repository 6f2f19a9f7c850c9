//! The linear octree forest: a Morton-sorted array of leaves and point / neighbour location.
//!
//! Invariants (checked by [`Octree::check_tiling`]): leaves are strictly sorted, no leaf is an
//! ancestor of another, and they tile the domain box exactly (volumes sum to the box volume in
//! integer arithmetic).

use crate::balance::last_le;
use crate::domain::Domain;
use crate::key::{OctKey, MAX_DEPTH};

/// The 26 face, edge and corner directions, faces first (in [`Octree::face_neighbours`] order).
pub const DIRECTIONS: [[i32; 3]; 26] = {
    let mut d = [[0i32; 3]; 26];
    let faces = [
        [-1, 0, 0],
        [1, 0, 0],
        [0, -1, 0],
        [0, 1, 0],
        [0, 0, -1],
        [0, 0, 1],
    ];
    let mut i = 0;
    while i < 6 {
        d[i] = faces[i];
        i += 1;
    }
    let mut n = 6;
    let mut c = 0;
    while c < 27 {
        let v = [c % 3 - 1, (c / 3) % 3 - 1, c / 9 - 1];
        let nz = (v[0] != 0) as i32 + (v[1] != 0) as i32 + (v[2] != 0) as i32;
        if nz >= 2 {
            d[n] = v;
            n += 1;
        }
        c += 1;
    }
    d
};

/// Leaves of the forest over a [`Domain`], sorted along the Morton curve.
///
/// ```
/// use octocut_octree::{Domain, Octree};
/// use octocut_surface::{Aabb, Vec3};
/// let t = Octree::uniform(Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap(), 2);
/// let mut n = Vec::new();
/// t.neighbours(0, [1, 0, 0], &mut n);
/// assert_eq!(n.len(), 1);
/// t.check_tiling().unwrap();
/// ```
#[derive(Clone, Debug)]
pub struct Octree {
    pub domain: Domain,
    leaves: Vec<OctKey>,
}

impl Octree {
    /// Every base cell refined uniformly to `level`.
    pub fn uniform(domain: Domain, level: u8) -> Octree {
        let mut leaves = domain.base_keys();
        for _ in 0..level {
            leaves = leaves.iter().flat_map(|k| k.children()).collect();
        }
        Octree { domain, leaves }
    }

    /// A forest from leaves that already satisfy the invariants (sorted, tiling).
    pub fn from_sorted_leaves(domain: Domain, leaves: Vec<OctKey>) -> Octree {
        Octree { domain, leaves }
    }

    pub fn leaves(&self) -> &[OctKey] {
        &self.leaves
    }

    pub fn into_leaves(self) -> Vec<OctKey> {
        self.leaves
    }

    /// Index of the leaf containing finest-grid cell `g` (the unit cube anchored at `g`), if `g`
    /// lies inside the domain.
    pub fn locate(&self, g: [u32; 3]) -> Option<u32> {
        let ext = self.domain.grid_extent();
        if (0..3).any(|i| g[i] >= ext[i]) {
            return None;
        }
        let probe = OctKey::new(g, MAX_DEPTH);
        // the last leaf whose key is <= probe: its range starts at or before g
        let i = self.leaves.partition_point(|k| *k <= probe);
        if i == 0 {
            return None;
        }
        let k = self.leaves[i - 1];
        (k == probe || k.is_ancestor_of(&probe)).then_some((i - 1) as u32)
    }

    /// Clears `out` and fills it with the leaves that touch leaf `leaf` across the face, edge or
    /// corner given by `dir` (each component -1, 0 or 1, not all 0), in Morton order: the leaves
    /// overlapping the same-size box across `dir` that touch `leaf` (one coarser leaf, the leaf
    /// of the same size, or the finer leaves on the shared feature). A coarser leaf may appear
    /// for several directions. Searches gallop from `leaf`'s own index, so nearby neighbours are
    /// found in a few steps.
    pub fn neighbours(&self, leaf: u32, dir: [i32; 3], out: &mut Vec<u32>) {
        out.clear();
        let k = self.leaves[leaf as usize];
        let e = k.edge() as i64;
        let a = k.anchor().map(|c| c as i64);
        let ext = self.domain.grid_extent();
        // anchor of the same-size box across `dir`
        let mut b = [0u32; 3];
        for i in 0..3 {
            let v = a[i] + dir[i] as i64 * e;
            if v < 0 || v >= ext[i] as i64 {
                return;
            }
            b[i] = v as u32;
        }
        let region = OctKey::new(b, k.level());
        // the leaf holding the region's anchor cell
        let probe = OctKey::new(b, MAX_DEPTH);
        let c = last_le(&self.leaves, probe, leaf as usize);
        let ck = self.leaves[c];
        if ck.level() <= k.level() {
            // the same-size box or a coarser leaf holding it
            out.push(c as u32);
            return;
        }
        // finer: `c` holds the region's minimum corner, so it is the first leaf in the region
        let lo = c;
        let end = region.last_descendant_morton();
        let mut i = lo;
        while i < self.leaves.len() && self.leaves[i].morton() <= end {
            let n = self.leaves[i];
            let na = n.anchor();
            let ne = n.edge();
            let touches = (0..3).all(|ax| match dir[ax] {
                1 => na[ax] == b[ax],
                -1 => na[ax] + ne == b[ax] + e as u32,
                _ => true,
            });
            if touches {
                out.push(i as u32);
            }
            i += 1;
        }
    }

    /// The leaves across face `face` of leaf `leaf` (0..6 = -x, +x, -y, +y, -z, +z), like
    /// [`Octree::neighbours`].
    #[inline]
    pub fn face_neighbours(&self, leaf: u32, face: u8, out: &mut Vec<u32>) {
        let mut dir = [0; 3];
        dir[(face / 2) as usize % 3] = if face % 2 == 0 { -1 } else { 1 };
        self.neighbours(leaf, dir, out)
    }

    /// Index of the leaf holding finest-grid cell `g`, searched by galloping from leaf `hint`.
    pub fn locate_from(&self, g: [u32; 3], hint: u32) -> Option<u32> {
        let ext = self.domain.grid_extent();
        if self.leaves.is_empty() || (0..3).any(|i| g[i] >= ext[i]) {
            return None;
        }
        Some(last_le(&self.leaves, OctKey::new(g, MAX_DEPTH), hint as usize) as u32)
    }

    /// Checks sortedness, no overlap and exact tiling; returns the first violation.
    pub fn check_tiling(&self) -> Result<(), String> {
        for (i, w) in self.leaves.windows(2).enumerate() {
            if w[0] >= w[1] {
                return Err(format!("leaves {i} and {} are not strictly sorted", i + 1));
            }
            if w[0].is_ancestor_of(&w[1]) || w[1].morton() <= w[0].last_descendant_morton() {
                return Err(format!("leaf {i} overlaps leaf {}", i + 1));
            }
        }
        let vol: u128 = self
            .leaves
            .iter()
            .map(|k| 1u128 << (3 * (MAX_DEPTH - k.level()) as u32))
            .sum();
        let want: u128 = self
            .domain
            .counts
            .iter()
            .map(|&c| c as u128)
            .product::<u128>()
            << (3 * MAX_DEPTH as u32);
        if vol != want {
            return Err(format!(
                "leaf volumes sum to {vol} finest cells, the box holds {want}"
            ));
        }
        Ok(())
    }
}
