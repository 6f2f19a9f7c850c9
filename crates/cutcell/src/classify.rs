//! Fluid/solid classification of mesh vertices by the generalized winding number.
//!
//! Follows Jacobson, Kavan, Sorkine-Hornung (2013): a point is inside when its winding number is
//! at least 1/2. On a closed, consistently oriented surface (every edge used as often in one
//! direction as in the other) the winding number is an integer that changes by exactly the
//! signed count of surface crossings along any segment, so the vertices of the queried edges
//! (all edges of leaves the surface touches) take their winding number from one evaluation per
//! connected set of edges plus the signed crossings (exact, `crate::crossing::EdgeHits`). A
//! set whose crossings disagree around some cycle (a vertex on the surface, a defect), or any
//! vertex of a surface that is not closed, is evaluated directly, in one batch. Every connected
//! run of untouched leaves (face adjacency) takes one class, read from an already classified
//! corner of the run or from one winding-number evaluation at its first leaf's centre.
//! Invariant: for a closed surface every vertex gets its exact class, since the winding number
//! is constant on each connected surface-free region.

use crate::crossing::{edge_key, EdgeHits};
use crate::topology::Topology;
use crate::util::UnionFind;
use octocut_octree::{Domain, OctKey, Octree};
use octocut_surface::tribox::triangle_box_overlap;
use octocut_surface::{Surface, SurfaceIndex, Vec3};
use rayon::prelude::*;
use std::sync::atomic::Ordering::Relaxed;
use std::sync::atomic::{AtomicU32, AtomicU8};

pub(crate) struct Classes {
    /// Fluid flag per mesh vertex (point id).
    pub fluid: Vec<bool>,
    /// Winding-number evaluations spent.
    pub evaluations: usize,
}

/// The triangles overlapping each leaf's slightly inflated box (exact triangle-box test), as
/// CSR lists over all leaves; a leaf is touched when its list is not empty.
pub(crate) struct Touched {
    off: Vec<u32>,
    tris: Vec<u32>,
}

impl Touched {
    #[inline]
    pub fn of(&self, leaf: u32) -> &[u32] {
        &self.tris[self.off[leaf as usize] as usize..self.off[leaf as usize + 1] as usize]
    }
    #[inline]
    pub fn is(&self, leaf: u32) -> bool {
        self.off[leaf as usize] != self.off[leaf as usize + 1]
    }
    /// True when some triangle of `leaf`'s list has a bounding box meeting segment `a`-`b`'s
    /// (necessary for the triangle to cross the segment when the segment lies in the leaf).
    pub fn may_cross(&self, s: &Surface, leaf: u32, a: Vec3, b: Vec3) -> bool {
        let (lo, hi) = (a.min(b), a.max(b));
        self.of(leaf).iter().any(|&t| {
            let c = s.corners(t as usize);
            let (tlo, thi) = (c[0].min(c[1]).min(c[2]), c[0].max(c[1]).max(c[2]));
            tlo.cmple(hi).all() && thi.cmpge(lo).all()
        })
    }
}

/// Leaves whose (slightly inflated) box the surface touches, with their triangles.
///
/// Top-down over the octree: each base cell takes its triangles from the index, and every
/// node passes the triangles whose bounding box meets its own inflated box to its children,
/// so a leaf tests only its parent's few candidates and a surface-free node settles all its
/// leaves at once. Leaves use the exact test; a node's inflated box contains its children's,
/// so the lists equal one exact query per leaf.
pub(crate) fn touched_leaves(tree: &Octree, d: &Domain, index: &SurfaceIndex) -> Touched {
    let leaves = tree.leaves();
    // runs of leaves per base cell
    let mut runs: Vec<(OctKey, usize, usize)> = Vec::new();
    let mut i = 0;
    while i < leaves.len() {
        let root = base_cell(leaves[i]);
        let end = root.last_descendant_morton();
        let j = i + leaves[i..].partition_point(|k| k.morton() <= end);
        runs.push((root, i, j));
        i = j;
    }
    let walk = Walk {
        leaves,
        d,
        s: index.surface(),
    };
    let parts: Vec<Vec<(u32, u32)>> = runs
        .par_iter()
        .map_init(Vec::new, |tris, &(root, lo, hi)| {
            index.triangles_in_box(&walk.inflated(root), tris);
            let mut out = Vec::new();
            walk.descend(root, tris, lo, hi, &mut out);
            out
        })
        .collect();
    // (leaf, triangle) pairs come in leaf order
    let n: usize = parts.iter().map(|p| p.len()).sum();
    let mut off = vec![0u32; leaves.len() + 1];
    let mut tris = Vec::with_capacity(n);
    for p in parts {
        for (l, t) in p {
            off[l as usize + 1] += 1;
            tris.push(t);
        }
    }
    for l in 0..leaves.len() {
        off[l + 1] += off[l];
    }
    Touched { off, tris }
}

fn base_cell(k: OctKey) -> OctKey {
    let e = OctKey::edge_at(0);
    OctKey::new(k.anchor().map(|c| c & !(e - 1)), 0)
}

struct Walk<'a> {
    leaves: &'a [OctKey],
    d: &'a Domain,
    s: &'a Surface,
}

impl Walk<'_> {
    fn inflated(&self, k: OctKey) -> octocut_surface::Aabb {
        self.d
            .key_box(k)
            .inflated(1e-7 * self.d.cell_size(k.level()))
    }

    /// Node `k` holds leaves `lo..hi`; `cand` holds every triangle that may touch it. Appends
    /// the (leaf, triangle) pairs of its leaves, in leaf order.
    fn descend(&self, k: OctKey, cand: &[u32], lo: usize, hi: usize, out: &mut Vec<(u32, u32)>) {
        if lo >= hi || cand.is_empty() {
            return;
        }
        let b = self.inflated(k);
        if hi - lo == 1 && self.leaves[lo] == k {
            for &t in cand {
                if triangle_box_overlap(&self.s.corners(t as usize), &b) {
                    out.push((lo as u32, t));
                }
            }
            return;
        }
        // inner node: bounding boxes suffice to narrow the candidates
        let mine: Vec<u32> = cand
            .iter()
            .copied()
            .filter(|&t| {
                let c = self.s.corners(t as usize);
                let (tlo, thi) = (c[0].min(c[1]).min(c[2]), c[0].max(c[1]).max(c[2]));
                tlo.cmple(b.max).all() && thi.cmpge(b.min).all()
            })
            .collect();
        if mine.is_empty() {
            return;
        }
        // children's leaf ranges, in Morton order
        let mut ranges = [(OctKey::default(), 0usize, 0usize); 8];
        let mut start = lo;
        for (c, ch) in k.children().into_iter().enumerate() {
            let end = ch.last_descendant_morton();
            let stop = start + self.leaves[start..hi].partition_point(|x| x.morton() <= end);
            ranges[c] = (ch, start, stop);
            start = stop;
        }
        if mine.len() > 256 {
            let parts: Vec<Vec<(u32, u32)>> = ranges
                .par_iter()
                .map(|&(ch, a, z)| {
                    let mut v = Vec::new();
                    self.descend(ch, &mine, a, z, &mut v);
                    v
                })
                .collect();
            for p in parts {
                out.extend(p);
            }
        } else {
            for &(ch, a, z) in &ranges {
                self.descend(ch, &mine, a, z, out);
            }
        }
    }
}

/// True when every undirected edge of `s` is used equally often in each direction (the
/// oriented boundary of the triangle chain is zero), by vertex index.
pub(crate) fn is_closed(s: &Surface) -> bool {
    let mut e: Vec<u64> = Vec::with_capacity(3 * s.triangles.len());
    for t in &s.triangles {
        for i in 0..3 {
            let (a, b) = (t[i], t[(i + 1) % 3]);
            if a != b {
                // low bit: direction, so equal keys sort together
                let (lo, hi, dir) = if a < b { (a, b, 0) } else { (b, a, 1) };
                e.push((lo as u64) << 33 | (hi as u64) << 1 | dir);
            }
        }
    }
    e.par_sort_unstable();
    e.chunk_by(|x, y| x >> 1 == y >> 1).all(|g| {
        let fwd = g.iter().filter(|&&k| k & 1 == 0).count();
        2 * fwd == g.len()
    })
}

const NONE: u32 = u32::MAX;

/// The queried edges (sorted keys, see [`edge_key`]) with the winding-number change along
/// each: `w(q) = w(p) + delta` for the key `(p, q)`.
struct Graph<'a> {
    keys: &'a [u64],
    delta: &'a [i32],
}

/// Connected components of the graph without the `skip` vertices: each vertex's component and
/// winding number relative to the component's root; a component is bad when its crossings
/// disagree around a cycle, or when the surface is not closed.
struct Components {
    comp: Vec<u32>,
    rel: Vec<i32>,
    roots: Vec<u32>,
    bad: Vec<bool>,
}

/// Root of `p` and `w(p) - w(root)` in a union-find whose `off[x]` is `w(x) - w(parent[x])`,
/// compressing the path (each node then points at the root with its full offset).
fn find_rel(parent: &mut [u32], off: &mut [i32], p: u32) -> (u32, i32) {
    let (mut r, mut o) = (p, 0i32);
    while parent[r as usize] != r {
        o += off[r as usize];
        r = parent[r as usize];
    }
    let (mut x, mut ox) = (p, o);
    while parent[x as usize] != x {
        let next = parent[x as usize];
        let o_next = ox - off[x as usize];
        parent[x as usize] = r;
        off[x as usize] = ox;
        x = next;
        ox = o_next;
    }
    (r, o)
}

impl Graph<'_> {
    /// By a union-find (Galler and Fischer 1964; path compression, Tarjan 1975) that carries
    /// each vertex's winding-number offset to its parent (common practice, a "union-find with
    /// potentials"), the smaller root always kept: components come out numbered by their
    /// smallest vertex and rooted there, as a search from the smallest unvisited vertex numbers
    /// them. A component is consistent iff no edge closes a cycle with a different offset.
    fn components(&self, skip: &[bool], closed: bool) -> Components {
        let np = skip.len();
        let mut parent: Vec<u32> = (0..np as u32).collect();
        let mut off = vec![0i32; np];
        let mut bad_root = vec![false; np];
        let mut linked = vec![false; np];
        for (&k, &d) in self.keys.iter().zip(self.delta) {
            let (p, q) = ((k >> 32) as u32, k as u32);
            // a vertex with an edge is in a component (alone when its edges all lead to
            // skipped vertices)
            linked[p as usize] |= !skip[p as usize];
            linked[q as usize] |= !skip[q as usize];
            if skip[p as usize] || skip[q as usize] {
                continue;
            }
            let (rp, op) = find_rel(&mut parent, &mut off, p);
            let (rq, oq) = find_rel(&mut parent, &mut off, q);
            if rp == rq {
                if op + d != oq {
                    bad_root[rp as usize] = true;
                }
                continue;
            }
            // w(rq) - w(rp) = op + d - oq
            let rel = op + d - oq;
            let (lo, hi) = if rp < rq {
                off[rq as usize] = rel;
                (rp, rq)
            } else {
                off[rp as usize] = -rel;
                (rq, rp)
            };
            parent[hi as usize] = lo;
            bad_root[lo as usize] |= bad_root[hi as usize];
        }
        let mut comp = vec![NONE; np];
        let mut rel = vec![0i32; np];
        let mut roots: Vec<u32> = Vec::new();
        let mut bad: Vec<bool> = Vec::new();
        for p in 0..np as u32 {
            if !linked[p as usize] {
                continue;
            }
            let (r, o) = find_rel(&mut parent, &mut off, p);
            if r == p {
                comp[p as usize] = roots.len() as u32;
                roots.push(p);
                bad.push(!closed || bad_root[p as usize]);
            } else {
                // r < p: numbered already
                comp[p as usize] = comp[r as usize];
            }
            rel[p as usize] = o;
        }
        Components {
            comp,
            rel,
            roots,
            bad,
        }
    }
}

pub(crate) fn classify(
    tree: &Octree,
    d: &Domain,
    index: &SurfaceIndex,
    topo: &Topology,
    fluid_inside: bool,
    touched: &Touched,
    eh: &EdgeHits,
) -> Classes {
    let leaves = tree.leaves();
    let np = topo.grid.len();
    let gpos = |p: u32| d.point(topo.grid[p as usize]);
    let closed = is_closed(index.surface());
    let graph = Graph {
        keys: &eh.keys,
        delta: &eh.delta,
    };
    let mut skip = vec![false; np];
    let mut comps = graph.components(&skip, closed);
    if closed && comps.bad.iter().any(|&b| b) {
        // A grid vertex on the surface (or a defect) makes some crossing counts ambiguous. Such
        // an edge unbalances the faces it bounds: the signed crossings around a face polygon sum
        // to zero on a closed surface. The vertices of unbalanced faces are evaluated directly
        // and leave the graph; the rest keeps one evaluation per consistent component.
        let unbalanced: Vec<u32> = (0..topo.faces.len() as u32)
            .into_par_iter()
            .with_min_len(1024)
            .filter(|&f| {
                let pts = topo.face(f);
                let n = pts.len();
                let mut sum = 0i32;
                for i in 0..n {
                    let (p, q) = (pts[i], pts[(i + 1) % n]);
                    match eh.keys.binary_search(&edge_key(p, q)) {
                        Ok(e) => sum += if p < q { eh.delta[e] } else { -eh.delta[e] },
                        Err(_) => return false,
                    }
                }
                sum != 0
            })
            .collect();
        for f in unbalanced {
            for &p in topo.face(f) {
                skip[p as usize] = true;
            }
        }
        comps = graph.components(&skip, closed);
    }
    crate::tmark("cls.comps");
    let Components {
        comp,
        rel,
        roots,
        mut bad,
    } = comps;
    let mut evaluations = 0;
    // one winding number per consistent component, rounded to its integer value
    let seeds: Vec<u32> = roots
        .iter()
        .zip(&bad)
        .filter(|x| !*x.1)
        .map(|x| *x.0)
        .collect();
    let sw = index.winding_numbers(&seeds.iter().map(|&p| gpos(p)).collect::<Vec<_>>());
    evaluations += seeds.len();
    let mut base = vec![0i32; roots.len()];
    {
        let mut si = 0;
        for c in 0..roots.len() {
            if bad[c] {
                continue;
            }
            let w = sw[si];
            si += 1;
            let r = w.round();
            if (w - r).abs() > 0.25 || r.abs() > 1e6 {
                bad[c] = true;
            } else {
                base[c] = r as i32;
            }
        }
    }
    let mut fluid = vec![false; np];
    let mut known = vec![false; np];
    let direct: Vec<u32> = (0..np as u32)
        .filter(|&p| {
            let c = comp[p as usize];
            (c == NONE && skip[p as usize]) || (c != NONE && bad[c as usize])
        })
        .collect();
    let dw = index.winding_numbers(&direct.iter().map(|&p| gpos(p)).collect::<Vec<_>>());
    evaluations += direct.len();
    for (&p, &w) in direct.iter().zip(&dw) {
        fluid[p as usize] = (w >= 0.5) == fluid_inside;
        known[p as usize] = true;
    }
    for p in 0..np {
        let c = comp[p];
        if c != NONE {
            known[p] = true;
            if !bad[c as usize] {
                fluid[p] = (base[c as usize] + rel[p] >= 1) == fluid_inside;
            }
        }
    }
    crate::tmark("cls.points");
    // runs of untouched leaves
    let mut uf = UnionFind::new(leaves.len());
    for f in &topo.faces {
        if !f.is_boundary() && !touched.is(f.e()) && !touched.is(f.n) {
            uf.union(f.e(), f.n);
        }
    }
    crate::tmark("cls.uf");
    let root = uf.into_roots();
    // the untouched leaf beside face `f`, if any (both sides untouched are one run); a leaf's
    // corners are vertices of its faces, and every vertex of its faces lies in its closed,
    // surface-free box
    let untouched_side = |f: &crate::topology::EFace| {
        if !touched.is(f.e()) {
            Some(f.e())
        } else if !f.is_boundary() && !touched.is(f.n) {
            Some(f.n)
        } else {
            None
        }
    };
    // `g(face, its untouched side's run, the face polygon)` for every face with such a side,
    // in parallel
    let each_untouched_face = |g: &(dyn Fn(u32, u32, &[u32]) + Sync)| {
        topo.faces
            .par_iter()
            .enumerate()
            .with_min_len(4096)
            .for_each(|(i, f)| {
                if let Some(l) = untouched_side(f) {
                    g(i as u32, root[l as usize], topo.face(i as u32));
                }
            });
    };
    // each run's class from a known vertex of its first face (in face order) that has one:
    // the first such face found in parallel by an atomic minimum, so any thread count agrees
    let first: Vec<AtomicU32> = (0..leaves.len())
        .into_par_iter()
        .map(|_| AtomicU32::new(u32::MAX))
        .collect();
    each_untouched_face(&|i, r, pts| {
        let r = &first[r as usize];
        if r.load(Relaxed) > i && pts.iter().any(|&p| known[p as usize]) {
            r.fetch_min(i, Relaxed);
        }
    });
    let first: Vec<u32> = first.into_iter().map(AtomicU32::into_inner).collect();
    const UNKNOWN: u8 = 2;
    let mut run_class = vec![UNKNOWN; leaves.len()];
    for (r, &f) in first.iter().enumerate() {
        if f != u32::MAX {
            let p = topo.face(f).iter().find(|&&p| known[p as usize]).unwrap();
            run_class[r] = fluid[*p as usize] as u8;
        }
    }
    drop(first);
    let run_roots: Vec<u32> = (0..leaves.len() as u32)
        .filter(|&l| !touched.is(l) && root[l as usize] == l && run_class[l as usize] == UNKNOWN)
        .collect();
    let centres: Vec<Vec3> = run_roots
        .iter()
        .map(|&l| d.key_box(leaves[l as usize]).center())
        .collect();
    let rv = index.winding_numbers(&centres);
    evaluations += run_roots.len();
    for (&l, &w) in run_roots.iter().zip(&rv) {
        run_class[l as usize] = ((w >= 0.5) == fluid_inside) as u8;
    }
    // vertices still unknown lie on no touched leaf, so every leaf around one is untouched
    // and the leaves around a point are face-connected: one run, one class, whichever face
    // writes it (the parallel writes agree)
    let assigned: Vec<AtomicU8> = (0..np).into_par_iter().map(|_| AtomicU8::new(0)).collect();
    each_untouched_face(&|_, r, pts| {
        let c = 1 + run_class[r as usize];
        for &p in pts {
            if !known[p as usize] {
                assigned[p as usize].store(c, Relaxed);
            }
        }
    });
    fluid
        .par_iter_mut()
        .zip(assigned)
        .with_min_len(4096)
        .for_each(|(x, a)| match a.into_inner() {
            1 => *x = false,
            2 => *x = true,
            _ => {}
        });
    Classes { fluid, evaluations }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn components_match_a_search_of_the_edge_graph() {
        // reference: the definition, a depth-first search from each smallest unvisited vertex
        // over the non-skipped edges, offsets summed along the search tree, a component bad when
        // an edge disagrees with them
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        for round in 0..40 {
            let np = 60;
            // potentials with a few edges off by one (inconsistent cycles), vertices skipped
            let w: Vec<i32> = (0..np).map(|_| rng.random_range(-3..4)).collect();
            let mut e: Vec<(u64, i32)> = Vec::new();
            for _ in 0..rng.random_range(20..90) {
                let (p, q) = (rng.random_range(0..np), rng.random_range(0..np));
                if p != q {
                    let (p, q) = (p.min(q) as u32, p.max(q) as u32);
                    let bump = (rng.random_range(0..25) == 0) as i32;
                    e.push((edge_key(p, q), w[q as usize] - w[p as usize] + bump));
                }
            }
            e.sort_by_key(|x| x.0);
            e.dedup_by_key(|x| x.0);
            let skip: Vec<bool> = (0..np).map(|_| rng.random_range(0..10) == 0).collect();
            let closed = round % 7 != 0;
            let keys: Vec<u64> = e.iter().map(|x| x.0).collect();
            let delta: Vec<i32> = e.iter().map(|x| x.1).collect();
            let got = Graph {
                keys: &keys,
                delta: &delta,
            }
            .components(&skip, closed);
            // the reference
            let mut adj = vec![Vec::new(); np];
            for (&k, &d) in keys.iter().zip(&delta) {
                let (p, q) = ((k >> 32) as usize, (k as u32) as usize);
                adj[p].push((q, d));
                adj[q].push((p, -d));
            }
            let mut comp = vec![NONE; np];
            let mut rel = vec![0i32; np];
            let (mut roots, mut bad) = (Vec::new(), Vec::new());
            for r in 0..np {
                if comp[r] != NONE || skip[r] || adj[r].is_empty() {
                    continue;
                }
                let c = roots.len() as u32;
                roots.push(r as u32);
                bad.push(!closed);
                comp[r] = c;
                let mut stack = vec![r];
                while let Some(p) = stack.pop() {
                    for &(q, d) in &adj[p] {
                        if skip[q] {
                            continue;
                        }
                        if comp[q] == NONE {
                            comp[q] = c;
                            rel[q] = rel[p] + d;
                            stack.push(q);
                        } else if rel[q] != rel[p] + d {
                            bad[c as usize] = true;
                        }
                    }
                }
            }
            assert_eq!(got.comp, comp, "round {round}");
            assert_eq!(got.roots, roots, "round {round}");
            assert_eq!(got.bad, bad, "round {round}");
            for p in 0..np {
                // offsets are path-independent only in consistent components
                if comp[p] != NONE && !bad[comp[p] as usize] {
                    assert_eq!(got.rel[p], rel[p], "round {round}, vertex {p}");
                }
            }
        }
    }

    #[test]
    fn touched_lists_equal_one_query_per_leaf() {
        // reference: the index's exact triangles-in-box query on every leaf's inflated box
        use crate::test_support::{icosphere, refined_tree};
        let index = SurfaceIndex::new(icosphere(Vec3::new(0.51, 0.48, 0.5), 0.3, 2));
        let d = Domain::new(
            octocut_surface::Aabb::new(Vec3::ZERO, Vec3::new(2.0, 1.0, 1.0)),
            1.0,
        )
        .unwrap();
        let tree = refined_tree(d, &index, 5);
        let t = touched_leaves(&tree, &tree.domain, &index);
        let mut want = Vec::new();
        let mut n_touched = 0;
        for (l, &k) in tree.leaves().iter().enumerate() {
            let b = tree.domain.key_box(k);
            index.triangles_in_box(
                &b.inflated(1e-7 * tree.domain.cell_size(k.level())),
                &mut want,
            );
            assert_eq!(t.of(l as u32), &want[..], "leaf {l}");
            n_touched += t.is(l as u32) as usize;
        }
        assert!(n_touched > 0 && n_touched < tree.leaves().len());
    }

    #[test]
    fn closedness_by_edge_balance() {
        // exact: the unit cube's 12 triangles use each edge once each way
        let mut s = Surface::unit_cube();
        assert!(is_closed(&s));
        s.triangles[0].swap(1, 2);
        assert!(!is_closed(&s));
        s.triangles.pop();
        s.tags.pop();
        let mut t = Surface::unit_cube();
        t.triangles.pop();
        t.tags.pop();
        assert!(!is_closed(&t));
    }
}
