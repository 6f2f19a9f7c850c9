//! Gap detection: where two surface sheets face each other across a narrow gap.
//!
//! Method (ray probing along outward normals, common practice for proximity refinement): every
//! triangle is split into `k^2` similar sub-triangles (`k` from its longest edge over half the
//! widest gap looked for, at most [`MAX_SPLIT`]); from each sub-triangle's centroid a segment of
//! length `max_width` is cast along the unit normal, which points into the fluid for an
//! outward-oriented surface. If the first surface it crosses faces back (normals more than 120
//! degrees apart), the crossing distance `w` is a gap width, and the sub-triangle swept by `w`
//! along the normal (kept as its bounding box) asks for cells of edge `w / cells`. Limits: gaps
//! behind the back side of a sheet (inside solids) are not reported; an inward-oriented surface
//! finds no gaps; a slanted gap's box is larger than the swept sub-triangle (conservative); one
//! ray per sub-triangle can miss an opposite sheet smaller than a sub-triangle.

use crate::domain::Domain;
use octocut_surface::{Aabb, SurfaceIndex};
use rayon::prelude::*;

/// Most sub-triangles per triangle edge.
pub const MAX_SPLIT: usize = 32;

/// One sub-triangle's gap region.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GapPrism {
    pub triangle: u32,
    /// Gap width found.
    pub width: f64,
    /// Box of the sub-triangle swept across the gap.
    pub bounds: Aabb,
    /// Level of cell edge `width / cells`, at most the gap's finest level.
    pub level: u8,
}

impl GapPrism {
    /// True when the open boxes overlap.
    #[inline]
    pub fn overlaps(&self, b: &Aabb) -> bool {
        b.min.cmplt(self.bounds.max).all() && self.bounds.min.cmplt(b.max).all()
    }
}

/// The gap prisms of the indexed surface, in triangle order.
///
/// ```
/// use octocut_octree::{gap::find_gaps, Domain};
/// use octocut_surface::{Aabb, Surface, SurfaceIndex, Vec3};
/// // the unit cube's faces point outward: no two face each other from outside
/// let index = SurfaceIndex::new(Surface::unit_cube());
/// let d = Domain::new(Aabb::new(Vec3::splat(-1.0), Vec3::splat(2.0)), 3.0).unwrap();
/// assert!(find_gaps(&index, &d, 4, 2.0, 10).is_empty());
/// ```
pub fn find_gaps(
    index: &SurfaceIndex,
    domain: &Domain,
    cells: u32,
    max_width: f64,
    finest_level: u8,
) -> Vec<GapPrism> {
    let s = index.surface();
    let scale = s.bounding_box().diagonal().max(domain.base_size);
    let eps = 1e-9 * scale;
    let found: Vec<Vec<GapPrism>> = (0..s.triangles.len())
        .into_par_iter()
        .map_init(Vec::new, |hits, t| {
            let mut out = Vec::new();
            let tri = s.corners(t);
            let n = s.area_normal(t);
            let len = n.length();
            if !(len > 0.0 && len.is_finite()) {
                return out;
            }
            let n = n / len;
            let longest = (tri[1] - tri[0])
                .length()
                .max((tri[2] - tri[1]).length())
                .max((tri[0] - tri[2]).length());
            let k = ((2.0 * longest / max_width).ceil() as usize).clamp(1, MAX_SPLIT);
            let (u, v) = ((tri[1] - tri[0]) / k as f64, (tri[2] - tri[0]) / k as f64);
            for i in 0..k {
                for j in 0..k - i {
                    // the upright sub-triangle (i, j) and, where it exists, the inverted one
                    let p0 = tri[0] + i as f64 * u + j as f64 * v;
                    let mut subs = vec![[p0, p0 + u, p0 + v]];
                    if i + j + 1 < k {
                        subs.push([p0 + u, p0 + u + v, p0 + v]);
                    }
                    for sub in subs {
                        let c = (sub[0] + sub[1] + sub[2]) / 3.0;
                        let a = c + eps * n;
                        index.segment_hits(a, a + max_width * n, hits);
                        let Some(h) = hits.iter().find(|h| h.triangle as usize != t) else {
                            continue;
                        };
                        let m = s.area_normal(h.triangle as usize).normalize_or_zero();
                        if m.dot(n) >= -0.5 {
                            continue;
                        }
                        let w = h.t * max_width + eps;
                        let level = domain.level_for_size(w / cells as f64).min(finest_level);
                        if level == 0 {
                            continue;
                        }
                        let mut bounds = Aabb::from_points(sub);
                        for q in sub {
                            bounds.grow(q + w * n);
                        }
                        out.push(GapPrism {
                            triangle: t as u32,
                            width: w,
                            bounds,
                            level,
                        });
                    }
                }
            }
            out
        })
        .collect();
    found.into_iter().flatten().collect()
}
