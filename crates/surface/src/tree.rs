//! Binary radix tree over triangle centroids in Morton (Z-order) order.
//!
//! Follows the linear BVH of Lauterbach, Garland, Sengupta, Luebke, Manocha (2009), "Fast BVH
//! construction on GPUs": centroids are quantized to 21 bits per axis, sorted by their
//! interleaved 63-bit Morton key, and a range is split where the highest differing key bit
//! flips (ranges of equal keys are halved). Built top-down, nodes stored in preorder.
//!
//! Invariants: `order` is a permutation of the triangle ids; node `i` covers the sorted positions
//! `start..end`; an inner node's left child is `i + 1`, its right child `right > i + 1`, and the
//! two children split its range; a leaf (`right == 0`) holds at most `leaf_size` triangles
//! (except for none). The result depends only on the input, not on the thread count.

use crate::geom::{Aabb, Vec3};
use crate::surface::Surface;
use rayon::prelude::*;

/// One node of the tree: the sorted positions `start..end`, and the right child (0 for a leaf).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct TreeNode {
    pub start: u32,
    pub end: u32,
    pub right: u32,
}

impl TreeNode {
    #[inline]
    pub fn is_leaf(&self) -> bool {
        self.right == 0
    }
}

/// Triangles in Morton order and the radix tree over them.
///
/// ```
/// use octocut_surface::{tree::RadixTree, Surface};
/// let t = RadixTree::build(&Surface::unit_cube(), 2);
/// assert_eq!(t.order.len(), 12);
/// assert_eq!((t.nodes[0].start, t.nodes[0].end), (0, 12));
/// assert!(t.nodes.iter().filter(|n| n.is_leaf()).all(|n| n.end - n.start <= 2));
/// ```
#[derive(Clone, Debug, Default)]
pub struct RadixTree {
    /// Triangle ids in Morton order of their centroids.
    pub order: Vec<u32>,
    /// Nodes in preorder; empty for an empty surface.
    pub nodes: Vec<TreeNode>,
}

impl RadixTree {
    /// Builds the tree over all triangles of `surface` with leaves of at most `leaf_size` (>= 1).
    pub fn build(surface: &Surface, leaf_size: u32) -> RadixTree {
        let leaf_size = leaf_size.max(1);
        let n = surface.triangles.len();
        if n == 0 {
            return RadixTree::default();
        }
        let centroids: Vec<Vec3> = (0..n)
            .into_par_iter()
            .map(|t| {
                let [a, b, c] = surface.corners(t);
                (a + b + c) / 3.0
            })
            .collect();
        let keyed = morton_sorted(&centroids);
        drop(centroids);
        let keys: Vec<u64> = keyed.iter().map(|k| k.0).collect();
        let order: Vec<u32> = keyed.into_iter().map(|k| k.1).collect();
        let mut nodes = Vec::with_capacity(2 * n / leaf_size as usize + 1);
        split(&keys, 0, n as u32, leaf_size, &mut nodes);
        RadixTree { order, nodes }
    }
}

/// `(Morton key, index)` of every point, sorted: keys on a 2^21 grid over the points' bounding
/// cube (non-finite points get key 0). Deterministic: the pairs are unique.
pub(crate) fn morton_sorted(points: &[Vec3]) -> Vec<(u64, u32)> {
    let bounds = points
        .par_iter()
        .fold(Aabb::empty, |mut b, &p| {
            if p.is_finite() {
                b.grow(p);
            }
            b
        })
        .reduce(Aabb::empty, |a, b| a.union(&b));
    let ext = bounds.extent().max_element();
    let scale = if ext > 0.0 && ext.is_finite() {
        ((1u64 << 21) - 1) as f64 / ext
    } else {
        0.0
    };
    let mut keyed: Vec<(u64, u32)> = points
        .par_iter()
        .enumerate()
        .map(|(t, &p)| (morton_key(p, bounds.min, scale), t as u32))
        .collect();
    keyed.par_sort_unstable();
    keyed
}

fn split(keys: &[u64], start: u32, end: u32, leaf_size: u32, nodes: &mut Vec<TreeNode>) {
    let id = nodes.len();
    nodes.push(TreeNode {
        start,
        end,
        right: 0,
    });
    if end - start <= leaf_size {
        return;
    }
    let (k0, k1) = (keys[start as usize], keys[end as usize - 1]);
    let mid = if k0 == k1 {
        start + (end - start) / 2
    } else {
        let bit = 63 - (k0 ^ k1).leading_zeros();
        let range = &keys[start as usize..end as usize];
        start + range.partition_point(|k| k & (1u64 << bit) == 0) as u32
    };
    split(keys, start, mid, leaf_size, nodes);
    nodes[id].right = nodes.len() as u32;
    split(keys, mid, end, leaf_size, nodes);
}

/// 63-bit Morton key of `p` quantized on the grid `origin + i / scale`, 21 bits per axis.
fn morton_key(p: Vec3, origin: Vec3, scale: f64) -> u64 {
    let q = |v: f64, o: f64| -> u64 {
        let x = (v - o) * scale;
        // NaN and negative map to 0, too large to the top cell.
        if x >= 0.0 {
            (x as u64).min((1 << 21) - 1)
        } else {
            0
        }
    };
    spread(q(p.x, origin.x)) | (spread(q(p.y, origin.y)) << 1) | (spread(q(p.z, origin.z)) << 2)
}

/// Spreads the low 21 bits of `v` to every third bit.
fn spread(v: u64) -> u64 {
    let mut x = v & 0x1f_ffff;
    x = (x | (x << 32)) & 0x1f00000000ffff;
    x = (x | (x << 16)) & 0x1f0000ff0000ff;
    x = (x | (x << 8)) & 0x100f00f00f00f00f;
    x = (x | (x << 4)) & 0x10c30c30c30c30c3;
    x = (x | (x << 2)) & 0x1249249249249249;
    x
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spread_interleaves_bits() {
        // definition of the Morton key: bit i of x goes to bit 3 i.
        for i in 0..21 {
            assert_eq!(spread(1 << i), 1 << (3 * i));
        }
        assert_eq!(spread(0x1f_ffff), 0x1249249249249249);
    }

    #[test]
    fn tree_invariants_hold() {
        let mut s = Surface::unit_cube();
        for k in 1..20 {
            let mut c = Surface::unit_cube();
            c.vertices
                .iter_mut()
                .for_each(|v| *v += Vec3::new(k as f64 * 0.37, 0.0, 0.1 * k as f64));
            s.append(c);
        }
        let t = RadixTree::build(&s, 3);
        let mut seen = t.order.clone();
        seen.sort_unstable();
        assert_eq!(seen, (0..s.triangles.len() as u32).collect::<Vec<_>>());
        for (i, n) in t.nodes.iter().enumerate() {
            if n.is_leaf() {
                assert!(n.end > n.start && n.end - n.start <= 3);
            } else {
                let (l, r) = (t.nodes[i + 1], t.nodes[n.right as usize]);
                assert_eq!((l.start, l.end, r.end), (n.start, r.start, n.end));
            }
        }
    }
}
