//! Edge topology of a triangle surface: the undirected edge map, manifold neighbours and
//! connected components across manifold edges.
//!
//! Common practice (half-edge bookkeeping by sorting): every triangle `t` has three half-edges
//! `3t + k` running from corner `k` to corner `k + 1 (mod 3)`. Sorting the half-edges by their
//! undirected vertex pair (a counting sort by the lower vertex, then tiny bucket sorts) groups
//! each edge's incidences (CSR). An edge with one incidence is open
//! (boundary), with two it is manifold and links two neighbours, with more it is non-manifold.
//! Components are the classes of triangles linked across manifold edges, numbered in order of
//! their lowest triangle. Deterministic at any thread count (the sort keys are unique).

use rayon::prelude::*;

/// No neighbour across this half-edge (open or non-manifold edge).
pub const NONE: u32 = u32::MAX;

/// Undirected edges with their incident half-edges.
///
/// ```
/// use octocut_surface::{topology::EdgeMap, Surface};
/// let m = EdgeMap::new(&Surface::unit_cube().triangles);
/// assert_eq!(m.edge_count(), 18); // 12 cube edges + 6 face diagonals
/// assert!(m.incidences_of(0).len() == 2);
/// ```
#[derive(Clone, Debug, Default)]
pub struct EdgeMap {
    /// `(lo << 32) | hi` of each undirected edge, ascending.
    pub keys: Vec<u64>,
    /// CSR offsets into `half_edges`, `keys.len() + 1` entries.
    pub offsets: Vec<u32>,
    /// Half-edge ids `3t + k` grouped by edge, ascending within an edge.
    pub half_edges: Vec<u32>,
}

/// The two vertices of half-edge `h`, in its direction.
#[inline]
pub fn half_edge_vertices(triangles: &[[u32; 3]], h: u32) -> (u32, u32) {
    let t = &triangles[(h / 3) as usize];
    let k = (h % 3) as usize;
    (t[k], t[(k + 1) % 3])
}

impl EdgeMap {
    /// Builds the map of `triangles`: a counting sort of the half-edges by their lower vertex,
    /// then a sort of each (small) bucket by (upper vertex, half-edge), in parallel.
    pub fn new(triangles: &[[u32; 3]]) -> EdgeMap {
        let nv = triangles
            .par_iter()
            .flatten()
            .copied()
            .max()
            .map_or(0, |m| m as usize + 1);
        let lo_hi = |tri: &[u32; 3], k: usize| {
            let (a, b) = (tri[k], tri[(k + 1) % 3]);
            if a < b {
                (a, b)
            } else {
                (b, a)
            }
        };
        let mut start = vec![0u32; nv + 1];
        for tri in triangles {
            for k in 0..3 {
                start[lo_hi(tri, k).0 as usize + 1] += 1;
            }
        }
        for v in 0..nv {
            start[v + 1] += start[v];
        }
        let mut fill = start.clone();
        let mut entries = vec![(0u32, 0u32); 3 * triangles.len()];
        for (t, tri) in triangles.iter().enumerate() {
            for k in 0..3 {
                let (lo, hi) = lo_hi(tri, k);
                entries[fill[lo as usize] as usize] = (hi, (3 * t + k) as u32);
                fill[lo as usize] += 1;
            }
        }
        drop(fill);
        // sort the buckets, split into vertex ranges of disjoint slices
        let pieces = nv.clamp(1, 64);
        let mut slices = Vec::with_capacity(pieces);
        let mut rest: &mut [(u32, u32)] = &mut entries;
        let mut taken = 0usize;
        for p in 0..pieces {
            let (v0, v1) = (p * nv / pieces, (p + 1) * nv / pieces);
            let end = start[v1] as usize;
            let (head, tail) = rest.split_at_mut(end - taken);
            slices.push((v0, v1, head));
            rest = tail;
            taken = end;
        }
        slices.into_par_iter().for_each(|(v0, v1, sl)| {
            let base = start[v0] as usize;
            for v in v0..v1 {
                sl[start[v] as usize - base..start[v + 1] as usize - base].sort_unstable();
            }
        });
        let mut keys = Vec::with_capacity(entries.len() / 2 + 1);
        let mut offsets = Vec::with_capacity(entries.len() / 2 + 2);
        for v in 0..nv {
            let bucket = start[v] as usize..start[v + 1] as usize;
            for i in bucket.clone() {
                if i == bucket.start || entries[i - 1].0 != entries[i].0 {
                    keys.push(((v as u64) << 32) | entries[i].0 as u64);
                    offsets.push(i as u32);
                }
            }
        }
        offsets.push(entries.len() as u32);
        let half_edges = entries.into_iter().map(|e| e.1).collect();
        EdgeMap {
            keys,
            offsets,
            half_edges,
        }
    }

    /// Number of undirected edges.
    pub fn edge_count(&self) -> usize {
        self.keys.len()
    }

    /// The half-edges on edge `e`.
    #[inline]
    pub fn incidences_of(&self, e: usize) -> &[u32] {
        &self.half_edges[self.offsets[e] as usize..self.offsets[e + 1] as usize]
    }

    /// The two vertices of edge `e` (lower id first).
    #[inline]
    pub fn vertices_of(&self, e: usize) -> (u32, u32) {
        ((self.keys[e] >> 32) as u32, self.keys[e] as u32)
    }

    /// For each half-edge, the half-edge across a manifold edge, or [`NONE`].
    pub fn manifold_neighbours(&self, triangle_count: usize) -> Vec<u32> {
        let mut nb = vec![NONE; 3 * triangle_count];
        for e in 0..self.edge_count() {
            if let [a, b] = *self.incidences_of(e) {
                nb[a as usize] = b;
                nb[b as usize] = a;
            }
        }
        nb
    }
}

/// Labels the components linked across manifold edges: `(label per triangle, count)`, labels
/// numbered in order of each component's lowest triangle.
pub fn components(neighbours: &[u32]) -> (Vec<u32>, usize) {
    let n = neighbours.len() / 3;
    let mut label = vec![NONE; n];
    let mut stack = Vec::new();
    let mut count = 0u32;
    for seed in 0..n {
        if label[seed] != NONE {
            continue;
        }
        label[seed] = count;
        stack.push(seed as u32);
        while let Some(t) = stack.pop() {
            for k in 0..3 {
                let h = neighbours[3 * t as usize + k];
                if h != NONE && label[(h / 3) as usize] == NONE {
                    label[(h / 3) as usize] = count;
                    stack.push(h / 3);
                }
            }
        }
        count += 1;
    }
    (label, count as usize)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cube_edges_are_manifold_and_one_component() {
        // exact: a closed triangulated cube has E = 3F/2 = 18 edges, each shared by 2 triangles
        let s = crate::Surface::unit_cube();
        let m = EdgeMap::new(&s.triangles);
        assert_eq!(m.edge_count(), 18);
        assert!((0..18).all(|e| m.incidences_of(e).len() == 2));
        let nb = m.manifold_neighbours(12);
        assert!(nb.iter().all(|&h| h != NONE));
        assert_eq!(components(&nb).1, 1);
    }

    #[test]
    fn open_and_nonmanifold_edges() {
        // three triangles on one edge (0,1): non-manifold; the rest open
        let tris = [[0, 1, 2], [1, 0, 3], [0, 1, 4]];
        let m = EdgeMap::new(&tris);
        let counts: Vec<usize> = (0..m.edge_count())
            .map(|e| m.incidences_of(e).len())
            .collect();
        assert_eq!(counts.iter().filter(|&&c| c == 3).count(), 1);
        assert_eq!(counts.iter().filter(|&&c| c == 1).count(), 6);
        let nb = m.manifold_neighbours(3);
        assert_eq!(components(&nb).1, 3);
    }
}
