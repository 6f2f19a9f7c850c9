//! Where a grid edge between a fluid and a solid vertex crosses the surface.
//!
//! The crossing is the true intersection of the edge with the surface (exact crossings of
//! [`SurfaceIndex::segment_crossings`], which merges hits on shared edges and vertices; hits of
//! coincident sheets at the same parameter count once here). With exactly one
//! distinct hit it is taken; otherwise (an edge through a hole, or crossed several times) the
//! class change is located by bisection on the winding-number class (Jacobson et al. 2013) and
//! snapped to the nearest hit if there is one. Invariant: the parameter is clamped into
//! `[T_EPS, 1 - T_EPS]`, so a crossing never coincides with a grid vertex.

use octocut_surface::crossing::segment_crossing;
use octocut_surface::{SegmentHit, SurfaceIndex, Vec3};
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

/// Surface crossings of a set of elementary edges, keyed by the edges' point ids.
pub(crate) struct EdgeHits {
    /// Sorted keys `lo << 32 | hi` of the queried edges.
    pub keys: Vec<u64>,
    /// Whether the edge was queried (false: known uncrossed).
    pub need: Vec<bool>,
    /// CSR offsets into `hits` per edge.
    pub off: Vec<u32>,
    /// Distinct crossings per edge, sorted by `t` (from the `lo` end).
    pub hits: Vec<SegmentHit>,
    /// Signed crossing count from `lo` to `hi`: +1 per crossing from the front of a triangle
    /// to its back (the change of the winding number along the edge on a closed surface).
    pub delta: Vec<i32>,
}

impl EdgeHits {
    /// Queries every edge in `keys` (any order, duplicates allowed), each with a flag "may be
    /// crossed": an edge listed once with the flag false is known to be uncrossed and is not
    /// queried.
    pub fn query(
        index: &SurfaceIndex,
        pos: &(dyn Fn(u32) -> Vec3 + Sync),
        mut flagged: Vec<(u64, bool)>,
    ) -> EdgeHits {
        // false sorts first: the first of equal keys carries the conjunction of the flags
        flagged.par_sort_unstable();
        flagged.dedup_by_key(|x| x.0);
        let keys: Vec<u64> = flagged.iter().map(|x| x.0).collect();
        let need: Vec<bool> = flagged.iter().map(|x| x.1).collect();
        drop(flagged);
        let s = index.surface();
        let parts: Vec<(Vec<u32>, Vec<SegmentHit>, Vec<i32>)> = keys
            .par_chunks(1024)
            .zip(need.par_chunks(1024))
            .map_init(Vec::new, |buf, (ks, nd)| {
                let mut n = Vec::with_capacity(ks.len());
                let mut hits = Vec::new();
                let mut delta = Vec::with_capacity(ks.len());
                for (&k, &may) in ks.iter().zip(nd) {
                    let (p, q) = ((k >> 32) as u32, k as u32);
                    let (a, b) = (pos(p), pos(q));
                    buf.clear();
                    if may {
                        index.segment_crossings(a, b, buf);
                    }
                    let before = hits.len();
                    let mut d = 0i32;
                    for h in buf.iter() {
                        if let Some(c) = segment_crossing(a, b, &s.corners(h.triangle as usize)) {
                            d += c.direction as i32;
                        }
                        // coincident sheets (a doubled facet) cross at the very same place
                        if hits.len() > before {
                            let last: &SegmentHit = &hits[hits.len() - 1];
                            if last.t == h.t {
                                continue;
                            }
                        }
                        hits.push(*h);
                    }
                    n.push((hits.len() - before) as u32);
                    delta.push(d);
                }
                (n, hits, delta)
            })
            .collect();
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
            need,
            off,
            hits,
            delta,
        }
    }

    #[inline]
    pub fn of(&self, e: usize) -> &[SegmentHit] {
        &self.hits[self.off[e] as usize..self.off[e + 1] as usize]
    }
}

/// Crossings of every elementary edge the clipping may need, keyed by the edge's point ids.
pub(crate) struct EdgeTable {
    /// Sorted keys `lo << 32 | hi` of the queried edges.
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
        // edges whose end classes differ, then their crossings in that order
        let crossed: Vec<u32> = (0..eh.keys.len() as u32)
            .filter(|&e| {
                let k = eh.keys[e as usize];
                fluid[(k >> 32) as usize] != fluid[(k as u32) as usize]
            })
            .collect();
        let crossings: Vec<Crossing> = crossed
            .par_iter()
            .with_min_len(512)
            .map(|&e| {
                let k = eh.keys[e as usize];
                let (p, q) = ((k >> 32) as u32, k as u32);
                let fa = fluid[p as usize];
                edge_crossing(index, pos(p), pos(q), fa, fluid_inside, eh.of(e as usize))
            })
            .collect();
        let hits = (0..eh.keys.len())
            .map(|e| (eh.off[e + 1] - eh.off[e]).min(255) as u8)
            .collect();
        let mut cross = vec![u32::MAX; eh.keys.len()];
        for (c, &e) in crossed.iter().enumerate() {
            cross[e as usize] = c as u32;
        }
        EdgeTable {
            keys: eh.keys,
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
