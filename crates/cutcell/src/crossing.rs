//! Where a grid edge between a fluid and a solid vertex crosses the surface.
//!
//! The crossing is the true intersection of the edge with the surface (Moller-Trumbore segment
//! hits, duplicates at shared triangle edges merged by near-equal parameter). With exactly one
//! distinct hit it is taken; otherwise (an edge through a hole, or crossed several times) the
//! class change is located by bisection on the winding-number class (Jacobson et al. 2013) and
//! snapped to the nearest hit if there is one. Invariant: the parameter is clamped into
//! `[T_EPS, 1 - T_EPS]`, so a crossing never coincides with a grid vertex.

use octocut_surface::{SegmentHit, SurfaceIndex, Vec3};

/// Relative margin keeping crossings strictly inside their edge.
pub const T_EPS: f64 = 1e-4;

#[derive(Clone, Copy, Debug)]
pub(crate) struct Crossing {
    pub point: Vec3,
    /// Unit normal of the surface triangle crossed (zero if unknown).
    pub normal: Vec3,
    pub triangle: u32,
}

/// Distinct hits of segment `a`-`b` into `hits` (sorted by `t`, near-equal `t` merged).
pub(crate) fn distinct_hits(index: &SurfaceIndex, a: Vec3, b: Vec3, hits: &mut Vec<SegmentHit>) {
    index.segment_hits(a, b, hits);
    let mut w = 0;
    for r in 0..hits.len() {
        if w > 0 && hits[r].t - hits[w - 1].t <= 1e-9 {
            continue;
        }
        hits[w] = hits[r];
        w += 1;
    }
    hits.truncate(w);
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
    /// Queries every edge in `keys` (any order, duplicates allowed).
    pub fn build(
        index: &SurfaceIndex,
        pos: &(dyn Fn(u32) -> Vec3 + Sync),
        fluid: &[bool],
        fluid_inside: bool,
        mut keys: Vec<u64>,
    ) -> EdgeTable {
        use rayon::prelude::*;
        keys.par_sort_unstable();
        keys.dedup();
        let res: Vec<(u8, Option<Crossing>)> = keys
            .par_iter()
            .map_init(Vec::new, |hits, &k| {
                let (p, q) = ((k >> 32) as u32, k as u32);
                let (a, b) = (pos(p), pos(q));
                distinct_hits(index, a, b, hits);
                let n = hits.len().min(255) as u8;
                let fa = fluid[p as usize];
                let c = (fa != fluid[q as usize])
                    .then(|| edge_crossing(index, a, b, fa, fluid_inside, hits));
                (n, c)
            })
            .collect();
        let mut hits = Vec::with_capacity(keys.len());
        let mut cross = Vec::with_capacity(keys.len());
        let mut crossings = Vec::new();
        for (n, c) in res {
            hits.push(n);
            match c {
                Some(c) => {
                    cross.push(crossings.len() as u32);
                    crossings.push(c);
                }
                None => cross.push(u32::MAX),
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
