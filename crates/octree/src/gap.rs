//! Gap detection: where two surface sheets face each other across a narrow gap.
//!
//! Method (ray probing along outward normals, common practice for proximity refinement): from
//! four sample points of every triangle (its centroid and the midpoints between centroid and
//! corners) a segment of length `max_width` is cast along the unit normal, which points into the
//! fluid for an outward-oriented surface. If the first surface it crosses faces back (normals
//! more than 120 degrees apart), the crossing distance is a gap width. Each triangle with a gap
//! yields a prism: the triangle swept along its normal to the widest width found, asking for
//! cells of edge `narrowest width / cells`. Limits: a gap narrower than the triangle is sampled at
//! only four points; gaps behind the back side of a sheet (inside solids) are not reported; an
//! inward-oriented surface finds no gaps; prisms are tested against cells by bounding box and the
//! slab between the triangle's plane and `depth` along its normal (conservative).

use crate::domain::Domain;
use octocut_surface::{Aabb, SurfaceIndex, Vec3};
use rayon::prelude::*;

/// One triangle's gap region.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GapPrism {
    pub triangle: u32,
    pub normal: Vec3,
    /// `normal . x` on the triangle's plane.
    pub offset: f64,
    /// Widest gap width found (the prism's height).
    pub depth: f64,
    /// Narrowest gap width found.
    pub width: f64,
    pub bounds: Aabb,
    /// Level of cell edge `width / cells`, at most the gap's finest level.
    pub level: u8,
}

impl GapPrism {
    /// True when the open box may overlap the prism.
    #[inline]
    pub fn overlaps(&self, b: &Aabb) -> bool {
        if !(b.min.cmplt(self.bounds.max).all() && self.bounds.min.cmplt(b.max).all()) {
            return false;
        }
        let c = self.normal.dot(b.center());
        let h = 0.5 * b.extent();
        let r = h.x * self.normal.x.abs() + h.y * self.normal.y.abs() + h.z * self.normal.z.abs();
        c + r > self.offset && c - r < self.offset + self.depth
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
pub fn find_gaps(index: &SurfaceIndex, domain: &Domain, cells: u32, max_width: f64, finest_level: u8) -> Vec<GapPrism> {
    let s = index.surface();
    let scale = s.bounding_box().diagonal().max(domain.base_size);
    let eps = 1e-9 * scale;
    let found: Vec<Option<GapPrism>> = (0..s.triangles.len())
        .into_par_iter()
        .map_init(Vec::new, |hits, t| {
            let tri = s.corners(t);
            let n = s.area_normal(t);
            let len = n.length();
            if !(len > 0.0 && len.is_finite()) {
                return None;
            }
            let n = n / len;
            let c = (tri[0] + tri[1] + tri[2]) / 3.0;
            let samples = [c, 0.5 * (c + tri[0]), 0.5 * (c + tri[1]), 0.5 * (c + tri[2])];
            let (mut lo, mut hi) = (f64::INFINITY, 0.0f64);
            for p in samples {
                let a = p + eps * n;
                index.segment_hits(a, a + max_width * n, hits);
                let first = hits.iter().find(|h| h.triangle as usize != t);
                if let Some(h) = first {
                    let m = s.area_normal(h.triangle as usize).normalize_or_zero();
                    if m.dot(n) < -0.5 {
                        let w = h.t * max_width + eps;
                        lo = lo.min(w);
                        hi = hi.max(w);
                    }
                }
            }
            if !lo.is_finite() {
                return None;
            }
            let level = domain.level_for_size(lo / cells as f64).min(finest_level);
            if level == 0 {
                return None;
            }
            let mut bounds = Aabb::from_points(tri);
            for q in tri {
                bounds.grow(q + hi * n);
            }
            Some(GapPrism { triangle: t as u32, normal: n, offset: n.dot(tri[0]), depth: hi, width: lo, bounds, level })
        })
        .collect();
    found.into_iter().flatten().collect()
}
