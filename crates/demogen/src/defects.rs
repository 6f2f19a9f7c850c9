//! Deliberate export defects, the way CAD exports arrive: missing facets (open gaps), flipped
//! facets (reversed vertex order) and duplicated facets.
//!
//! Method: plain index edits on a [`Part`]; which facets are hit is chosen by the caller (a seeded
//! ChaCha8 stream via [`pick_distinct`], so the output is the same on every run).
//! Invariant: each function changes exactly the facets it is given and returns how many.

use crate::shapes::Part;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// `count` distinct indices below `n`, sorted, drawn from a ChaCha8 stream seeded with `seed`.
///
/// ```
/// let a = octocut_demogen::defects::pick_distinct(100, 5, 7);
/// assert_eq!(a, octocut_demogen::defects::pick_distinct(100, 5, 7));
/// assert_eq!(a.len(), 5);
/// ```
pub fn pick_distinct(n: usize, count: usize, seed: u64) -> Vec<usize> {
    let count = count.min(n);
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut picked = Vec::with_capacity(count);
    while picked.len() < count {
        let i = rng.random_range(0..n);
        if !picked.contains(&i) {
            picked.push(i);
        }
    }
    picked.sort_unstable();
    picked
}

/// Removes the facets `ids` (out-of-range ids ignored); returns how many were removed.
pub fn remove_facets(p: &mut Part, ids: &[usize]) -> usize {
    let before = p.triangles.len();
    let mut t = 0;
    p.triangles.retain(|_| {
        t += 1;
        !ids.contains(&(t - 1))
    });
    before - p.triangles.len()
}

/// Reverses the vertex order of the facets `ids`; returns how many were flipped.
pub fn flip_facets(p: &mut Part, ids: &[usize]) -> usize {
    let mut n = 0;
    for &i in ids {
        if let Some(t) = p.triangles.get_mut(i) {
            t.swap(1, 2);
            n += 1;
        }
    }
    n
}

/// Appends a second copy of each facet in `ids` (same vertices, same order); returns the count.
pub fn duplicate_facets(p: &mut Part, ids: &[usize]) -> usize {
    let copies: Vec<[u32; 3]> = ids
        .iter()
        .filter_map(|&i| p.triangles.get(i).copied())
        .collect();
    p.triangles.extend_from_slice(&copies);
    copies.len()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::shapes::cuboid;
    use glam::DVec3;

    #[test]
    fn edits_count_and_volume() {
        let mut b = cuboid(DVec3::ZERO, DVec3::ONE);
        assert_eq!(flip_facets(&mut b, &[0, 1]), 2);
        // exact (divergence theorem, tetrahedra to the origin): the z = 0 face carries no volume
        assert!((b.signed_volume() - 1.0).abs() < 1e-12);
        assert_eq!(flip_facets(&mut b, &[2, 3]), 2);
        // exact: the z = 1 face carries the pyramid volume 1/3; flipped it gives 1 - 2/3
        assert!((b.signed_volume() - 1.0 / 3.0).abs() < 1e-12);
        assert_eq!(duplicate_facets(&mut b, &[5, 99]), 1);
        assert_eq!(b.triangles.len(), 13);
        assert_eq!(remove_facets(&mut b, &[0, 12]), 2);
        assert_eq!(b.triangles.len(), 11);
    }
}
