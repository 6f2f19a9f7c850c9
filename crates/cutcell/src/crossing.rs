//! Where a grid edge between a fluid and a solid vertex crosses the surface.
//!
//! The crossing is the true intersection of the edge with the surface (exact crossings of
//! [`SurfaceIndex::segment_crossings`], which merges hits on shared edges and vertices; hits of
//! coincident sheets at the same parameter count once here). With exactly one
//! distinct hit it is taken; otherwise (an edge through a hole, or crossed several times) the
//! class change is located by bisection on the winding-number class (Jacobson et al. 2013) and
//! snapped to the nearest hit if there is one. Invariant: the parameter is clamped into
//! `[T_EPS, 1 - T_EPS]`, so a crossing never coincides with a grid vertex.

use crate::classify::Touched;
use crate::concat::filter_map_sized;
use octocut_surface::crossing::{segment_crossing, CrossingMerge};
use octocut_surface::{SegmentHit, Surface, SurfaceIndex, Vec3};
use rayon::prelude::*;

/// Relative margin keeping crossings strictly inside their edge.
pub const T_EPS: f64 = 1e-4;

#[derive(Clone, Copy, Debug)]
pub(crate) struct Crossing {
    pub point: Vec3,
    /// Unit normal of the surface triangle crossed (zero if unknown).
    pub normal: Vec3,
    pub triangle: u32,
}

/// The crossing on edge `a`-`b` whose end classes differ (`fluid_a` is the class of `a`), given
/// its distinct `hits`.
pub(crate) fn edge_crossing(
    index: &SurfaceIndex,
    a: Vec3,
    b: Vec3,
    fluid_a: bool,
    fluid_inside: bool,
    hits: &[SegmentHit],
) -> Crossing {
    let t = if hits.len() == 1 {
        hits[0].t
    } else {
        let (mut lo, mut hi) = (0.0f64, 1.0f64);
        for _ in 0..30 {
            let m = 0.5 * (lo + hi);
            let fm = index.is_inside(a + m * (b - a)) == fluid_inside;
            if fm == fluid_a {
                lo = m;
            } else {
                hi = m;
            }
        }
        let tb = 0.5 * (lo + hi);
        hits.iter()
            .map(|h| h.t)
            .min_by(|x, y| (x - tb).abs().total_cmp(&(y - tb).abs()))
            .unwrap_or(tb)
    };
    let t = t.clamp(T_EPS, 1.0 - T_EPS);
    let point = a + t * (b - a);
    let triangle = match hits
        .iter()
        .min_by(|x, y| (x.t - t).abs().total_cmp(&(y.t - t).abs()))
    {
        Some(h) if (h.t - t).abs() < 1e-3 => h.triangle,
        _ => index.closest_point(point).map(|c| c.triangle).unwrap_or(0),
    };
    let s = index.surface();
    let normal = if (triangle as usize) < s.triangles.len() {
        s.area_normal(triangle as usize).normalize_or_zero()
    } else {
        Vec3::ZERO
    };
    Crossing {
        point,
        normal,
        triangle,
    }
}

/// [`EdgeHits::query`] code of an edge known to be uncrossed.
pub(crate) const UNCROSSED: u32 = 0;
/// [`EdgeHits::query`] code of an edge to test against the whole surface (its spatial index).
pub(crate) const WHOLE: u32 = u32::MAX;

/// Scratch of [`crossings_in`].
#[derive(Default)]
pub(crate) struct HitScratch {
    merge: CrossingMerge,
    hits: Vec<(SegmentHit, i8)>,
}

/// The crossings of segment `a`-`b` with the candidate triangles `cands` (a superset of the
/// triangles it crosses), with their directions, sorted by (t, triangle) into `s.hits`: the
/// same set as [`SurfaceIndex::segment_crossings`] gives (both merge through
/// [`CrossingMerge`]: exact crossings, one per shared surface edge or vertex).
fn crossings_in(surf: &Surface, a: Vec3, b: Vec3, cands: &[u32], s: &mut HitScratch) {
    s.hits.clear();
    let (lo, hi) = (a.min(b), a.max(b));
    let hits = &mut s.hits;
    for &t in cands {
        let tri = surf.corners(t as usize);
        let (tlo, thi) = (
            tri[0].min(tri[1]).min(tri[2]),
            tri[0].max(tri[1]).max(tri[2]),
        );
        if !(tlo.cmple(hi).all() && thi.cmpge(lo).all()) {
            continue;
        }
        s.merge.add(a, b, t, &tri, |h, d| hits.push((h, d)));
    }
    s.merge.finish(|h, d| hits.push((h, d)));
    hits.sort_unstable_by(|x, y| {
        x.0.t
            .total_cmp(&y.0.t)
            .then(x.0.triangle.cmp(&y.0.triangle))
    });
}

/// Surface crossings of a set of elementary edges, keyed by the edges' point ids.
pub(crate) struct EdgeHits {
    /// Sorted keys `lo << 32 | hi` of the queried edges.
    pub keys: Vec<u64>,
    /// How each edge was queried: [`UNCROSSED`], [`WHOLE`] or `1 + leaf` (see
    /// [`EdgeHits::query`]).
    pub code: Vec<u32>,
    /// CSR offsets into `hits` per edge.
    pub off: Vec<u32>,
    /// Distinct crossings per edge, sorted by `t` (from the `lo` end).
    pub hits: Vec<SegmentHit>,
    /// Signed crossing count from `lo` to `hi`: +1 per crossing from the front of a triangle
    /// to its back (the change of the winding number along the edge on a closed surface).
    pub delta: Vec<i32>,
}

impl EdgeHits {
    /// Queries every edge in `coded` (any order, duplicates allowed), each with a code:
    /// [`UNCROSSED`] (known uncrossed: an edge listed once so is not queried), `1 + leaf` for
    /// an edge lying in the closed box of `leaf`, tested against `touched`'s triangle list of
    /// that leaf (it holds every triangle meeting the box), or [`WHOLE`].
    pub fn query(
        index: &SurfaceIndex,
        pos: &(dyn Fn(u32) -> Vec3 + Sync),
        touched: &Touched,
        mut coded: Vec<(u64, u32)>,
    ) -> EdgeHits {
        // UNCROSSED sorts first: the first of equal keys carries the proof
        coded.par_sort_unstable();
        crate::tmark("eh.sort");
        // the first of each run of equal keys, split into keys and codes, in parallel
        let first = |i: usize| i == 0 || coded[i - 1].0 != coded[i].0;
        let (keys, code): (Vec<u64>, Vec<u32>) = rayon::join(
            || filter_map_sized(coded.len(), |i| first(i).then(|| coded[i].0)),
            || filter_map_sized(coded.len(), |i| first(i).then(|| coded[i].1)),
        );
        drop(coded);
        crate::tmark("eh.split");
        let s = index.surface();
        let parts: Vec<(Vec<u32>, Vec<SegmentHit>, Vec<i32>)> = keys
            .par_chunks(1024)
            .zip(code.par_chunks(1024))
            .map_init(
                || (Vec::new(), HitScratch::default()),
                |(buf, sc), (ks, cs)| {
                    let mut n = Vec::with_capacity(ks.len());
                    let mut hits = Vec::new();
                    let mut delta = Vec::with_capacity(ks.len());
                    for (&k, &c) in ks.iter().zip(cs) {
                        let (p, q) = ((k >> 32) as u32, k as u32);
                        let (a, b) = (pos(p), pos(q));
                        sc.hits.clear();
                        if c == WHOLE {
                            index.segment_crossings(a, b, buf);
                            for h in buf.iter() {
                                let tri = s.corners(h.triangle as usize);
                                let dir = segment_crossing(a, b, &tri).map_or(0, |x| x.direction);
                                sc.hits.push((*h, dir));
                            }
                        } else if c != UNCROSSED {
                            crossings_in(s, a, b, touched.of(c - 1), sc);
                        }
                        let before = hits.len();
                        let mut d = 0i32;
                        for &(h, dir) in sc.hits.iter() {
                            d += dir as i32;
                            // coincident sheets (a doubled facet) cross at the very same place
                            if hits.len() > before {
                                let last: &SegmentHit = &hits[hits.len() - 1];
                                if last.t == h.t {
                                    continue;
                                }
                            }
                            hits.push(h);
                        }
                        n.push((hits.len() - before) as u32);
                        delta.push(d);
                    }
                    (n, hits, delta)
                },
            )
            .collect();
        crate::tmark("eh.hits");
        let mut off = Vec::with_capacity(keys.len() + 1);
        off.push(0u32);
        let mut hits = Vec::with_capacity(parts.iter().map(|p| p.1.len()).sum());
        let mut delta = Vec::with_capacity(keys.len());
        for (n, h, d) in parts {
            for c in n {
                off.push(off.last().unwrap() + c);
            }
            hits.extend(h);
            delta.extend(d);
        }
        EdgeHits {
            keys,
            code,
            off,
            hits,
            delta,
        }
    }
}

/// Crossings of every elementary edge the clipping may need, keyed by the edge's point ids.
pub(crate) struct EdgeTable {
    /// Sorted keys `lo << 32 | hi` of the queried edges that the surface meets or whose end
    /// classes differ (`find` gives `None` for any other edge).
    pub keys: Vec<u64>,
    /// Distinct surface hits per edge (saturating at 255).
    pub hits: Vec<u8>,
    /// Crossing index per edge, or `u32::MAX` when its end classes agree.
    pub cross: Vec<u32>,
    pub crossings: Vec<Crossing>,
}

#[inline]
pub(crate) fn edge_key(p: u32, q: u32) -> u64 {
    let (a, b) = if p < q { (p, q) } else { (q, p) };
    (a as u64) << 32 | b as u64
}

impl EdgeTable {
    /// The crossing of every edge of `eh` whose end classes differ.
    pub fn build(
        index: &SurfaceIndex,
        pos: &(dyn Fn(u32) -> Vec3 + Sync),
        fluid: &[bool],
        fluid_inside: bool,
        eh: EdgeHits,
    ) -> EdgeTable {
        // the query codes and the signed counts are not read here (memory at the phase's peak)
        let EdgeHits {
            keys: all_keys,
            off,
            hits: seg,
            ..
        } = eh;
        // edges whose end classes differ, then their crossings in that order
        let crossed: Vec<u32> = (0..all_keys.len() as u32)
            .filter(|&e| {
                let k = all_keys[e as usize];
                fluid[(k >> 32) as usize] != fluid[(k as u32) as usize]
            })
            .collect();
        let crossings: Vec<Crossing> = crossed
            .par_iter()
            .with_min_len(512)
            .map(|&e| {
                let k = all_keys[e as usize];
                let (p, q) = ((k >> 32) as u32, k as u32);
                let fa = fluid[p as usize];
                let hits = &seg[off[e as usize] as usize..off[e as usize + 1] as usize];
                edge_crossing(index, pos(p), pos(q), fa, fluid_inside, hits)
            })
            .collect();
        drop(seg);
        // only edges that the surface meets or whose classes differ are ever looked up (a
        // crossing, a poke, a warning): the others leave the table (peak memory); `crossed`
        // is increasing, so one walk pairs it with the edges
        let hits_of = |e: usize| (off[e + 1] - off[e]).min(255) as u8;
        let (mut keys, mut hits, mut cross) = (Vec::new(), Vec::new(), Vec::new());
        let mut next = crossed.iter().copied().enumerate().peekable();
        for (e, &k) in all_keys.iter().enumerate() {
            let c = match next.peek() {
                Some(&(c, x)) if x as usize == e => {
                    next.next();
                    c as u32
                }
                _ => u32::MAX,
            };
            let h = hits_of(e);
            if c != u32::MAX || h > 0 {
                keys.push(k);
                hits.push(h);
                cross.push(c);
            }
        }
        EdgeTable {
            keys,
            hits,
            cross,
            crossings,
        }
    }

    #[inline]
    pub fn find(&self, p: u32, q: u32) -> Option<usize> {
        self.keys.binary_search(&edge_key(p, q)).ok()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_support::icosphere;

    #[test]
    fn candidate_list_crossings_match_the_index_and_count_shared_edges_once() {
        let index = SurfaceIndex::new(icosphere(Vec3::ZERO, 1.0, 2));
        let s = index.surface();
        let all: Vec<u32> = (0..s.triangles.len() as u32).collect();
        let mut sc = HitScratch::default();
        let mut buf = Vec::new();
        // through the centre and through surface vertices (every crossing on a shared vertex)
        let mut segs: Vec<(Vec3, Vec3)> = s.vertices.iter().map(|&v| (-1.5 * v, 1.5 * v)).collect();
        segs.push((Vec3::new(-2.0, 0.1, 0.2), Vec3::new(2.0, 0.1, 0.2)));
        for (a, b) in segs {
            crossings_in(s, a, b, &all, &mut sc);
            index.segment_crossings(a, b, &mut buf);
            let mine: Vec<u32> = sc.hits.iter().map(|h| h.0.triangle).collect();
            let theirs: Vec<u32> = buf.iter().map(|h| h.triangle).collect();
            assert_eq!(mine, theirs);
            // exact: a line through a closed convex surface's interior crosses it twice, once
            // entering and once leaving, with opposite directions
            assert_eq!(sc.hits.len(), 2, "{a:?} {b:?}");
            assert_eq!(sc.hits.iter().map(|h| h.1 as i32).sum::<i32>(), 0);
        }
    }
}
