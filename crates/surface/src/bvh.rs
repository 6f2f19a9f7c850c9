//! Broad phase of the spatial index: a bounding volume hierarchy over small triangle clusters.
//!
//! The clusters are the leaves of the Morton radix tree ([`crate::tree`]): runs of at most
//! `leaf_size` triangles, consecutive in Morton order. Their boxes, padded by a tiny absolute
//! margin, are the leaves of parry3d's binned SAH tree (`parry3d_f64::partitioning::Bvh`,
//! after Wald 2007, "On fast construction of SAH-based bounding volume hierarchies").
//!
//! Invariants: every triangle lies in its cluster's box shrunk by the margin, so every box,
//! segment or distance test done here is conservative; the exact decision is the caller's
//! narrow phase. Leaf id `k` of the BVH is cluster `k`.

use crate::geom::{Aabb, Vec3};
use crate::surface::Surface;
use crate::tree::RadixTree;
use parry3d_f64::bounding_volume::Aabb as PAabb;
use parry3d_f64::partitioning::{Bvh, BvhBuildStrategy, BvhNode, TraversalAction};
use rayon::prelude::*;

/// The cluster BVH.
#[derive(Clone, Debug, Default)]
pub struct ClusterBvh {
    bvh: Bvh,
    /// Sorted-position range `[start, end)` of each cluster.
    clusters: Vec<[u32; 2]>,
}

impl ClusterBvh {
    /// Builds the BVH over the leaves of `tree` (built over `surface`).
    pub fn build(surface: &Surface, tree: &RadixTree) -> ClusterBvh {
        let clusters: Vec<[u32; 2]> = tree
            .nodes
            .iter()
            .filter(|n| n.is_leaf())
            .map(|n| [n.start, n.end])
            .collect();
        let pad = pad_for(&surface.bounding_box());
        let boxes: Vec<PAabb> = clusters
            .par_iter()
            .map(|&[s, e]| {
                let mut b = Aabb::empty();
                for &t in &tree.order[s as usize..e as usize] {
                    for v in surface.corners(t as usize) {
                        b.grow(v);
                    }
                }
                let b = b.inflated(pad);
                PAabb::new(b.min, b.max)
            })
            .collect();
        let bvh = Bvh::from_leaves(BvhBuildStrategy::Binned, &boxes);
        ClusterBvh { bvh, clusters }
    }

    /// Sorted-position range of cluster `k`.
    #[inline]
    pub fn cluster(&self, k: u32) -> std::ops::Range<usize> {
        let [s, e] = self.clusters[k as usize];
        s as usize..e as usize
    }

    /// Calls `f` with every cluster whose padded box meets the closed box `b`.
    pub fn for_each_in_box(&self, b: &Aabb, mut f: impl FnMut(u32) -> bool) {
        let (bmin, bmax) = (b.min, b.max);
        self.bvh.traverse(|node: &BvhNode| {
            if !(node.mins().cmple(bmax).all() && bmin.cmple(node.maxs()).all()) {
                return TraversalAction::Prune;
            }
            match node.leaf_data() {
                Some(k) if !f(k) => TraversalAction::EarlyExit,
                _ => TraversalAction::Continue,
            }
        });
    }

    /// Calls `f` with every cluster whose padded box meets the segment `a`-`b`.
    pub fn for_each_on_segment(&self, a: Vec3, b: Vec3, mut f: impl FnMut(u32)) {
        let d = b - a;
        let inv = d.recip();
        self.bvh.traverse(|node: &BvhNode| {
            if !segment_meets_box(a, d, inv, node.mins(), node.maxs()) {
                return TraversalAction::Prune;
            }
            if let Some(k) = node.leaf_data() {
                f(k);
            }
            TraversalAction::Continue
        });
    }

    /// Branch-and-bound search of the least leaf cost: `leaf(k, best)` gives cluster `k`'s best
    /// squared distance and payload; boxes farther than the best so far are skipped.
    pub fn find_nearest<T>(
        &self,
        p: Vec3,
        leaf: impl Fn(u32, f64) -> Option<(f64, T)>,
    ) -> Option<(f64, T)> {
        self.bvh
            .find_best(
                f64::MAX,
                |node: &BvhNode, _| {
                    let q = p.clamp(node.mins(), node.maxs());
                    (p - q).length_squared()
                },
                leaf,
            )
            .map(|(_, v)| v)
    }

    /// Heap bytes held (BVH and cluster table).
    pub fn heap_bytes(&self) -> usize {
        self.bvh.heap_memory_size() + self.clusters.capacity() * 8
    }
}

/// The absolute box margin: far above the rounding of coordinates of size `bounds`.
fn pad_for(bounds: &Aabb) -> f64 {
    let s = bounds.min.abs().max(bounds.max.abs()).max_element();
    if s.is_finite() {
        1e-12 * s + f64::MIN_POSITIVE
    } else {
        0.0
    }
}

/// Slab test of the closed segment `a + t d`, `t` in `[0, 1]`, against the closed box.
#[inline]
fn segment_meets_box(a: Vec3, d: Vec3, inv: Vec3, mn: Vec3, mx: Vec3) -> bool {
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    for i in 0..3 {
        if d[i] == 0.0 {
            if a[i] < mn[i] || a[i] > mx[i] {
                return false;
            }
        } else {
            let ta = (mn[i] - a[i]) * inv[i];
            let tb = (mx[i] - a[i]) * inv[i];
            t0 = t0.max(ta.min(tb));
            t1 = t1.min(ta.max(tb));
            if t0 > t1 {
                return false;
            }
        }
    }
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn slab_test_closed_box() {
        let (mn, mx) = (Vec3::ZERO, Vec3::ONE);
        let t = |a: Vec3, b: Vec3| segment_meets_box(a, b - a, (b - a).recip(), mn, mx);
        assert!(t(Vec3::new(-1.0, 0.5, 0.5), Vec3::new(2.0, 0.5, 0.5)));
        // touching the face x = 1 at its end: closed box
        assert!(t(Vec3::new(2.0, 0.5, 0.5), Vec3::new(1.0, 0.5, 0.5)));
        assert!(!t(Vec3::new(2.0, 0.5, 0.5), Vec3::new(1.5, 0.5, 0.5)));
        // along an edge of the box
        assert!(t(Vec3::new(-1.0, 0.0, 1.0), Vec3::new(2.0, 0.0, 1.0)));
        assert!(!t(Vec3::new(-1.0, 0.0, 1.5), Vec3::new(2.0, 0.0, 1.5)));
        // diagonal missing the corner
        assert!(!t(
            Vec3::new(1.5, 0.0, 0.5),
            Vec3::new(0.0, 1.6, 0.5) + Vec3::new(3.0, 0.0, 0.0)
        ));
    }
}
