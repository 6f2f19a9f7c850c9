//! The spatial index over a surface: box overlap, closest point, segment crossings, winding number.
//!
//! Invariant: every query answers exactly as the brute-force loop over all triangles would
//! (the winding number within the configured accuracy).

use crate::geom::{Aabb, Vec3};
use crate::surface::Surface;
use crate::tribox::triangle_box_overlap;
use crate::winding::winding_number_direct;

/// The closest surface point to a query point.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SurfacePoint {
    pub point: Vec3,
    pub distance: f64,
    pub triangle: u32,
}

/// A crossing of a segment `a + t (b - a)`, `t` in `[0, 1]`, with triangle `triangle`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SegmentHit {
    pub t: f64,
    pub point: Vec3,
    pub triangle: u32,
}

/// A surface with its spatial index.
///
/// ```
/// use octocut_surface::{Surface, SurfaceIndex, Vec3};
/// let index = SurfaceIndex::new(Surface::unit_cube());
/// let c = index.closest_point(Vec3::new(0.5, 0.5, 3.0)).unwrap();
/// assert!((c.distance - 2.0).abs() < 1e-12);
/// let mut hits = Vec::new();
/// index.segment_hits(Vec3::new(0.3, 0.6, -1.0), Vec3::new(0.3, 0.6, 2.0), &mut hits);
/// assert_eq!(hits.len(), 2);
/// ```
#[derive(Clone, Debug)]
pub struct SurfaceIndex {
    surface: Surface,
    boxes: Vec<Aabb>,
}

impl SurfaceIndex {
    /// Indexes `surface`.
    pub fn new(surface: Surface) -> Self {
        let boxes = (0..surface.triangles.len())
            .map(|t| Aabb::from_points(surface.corners(t)))
            .collect();
        SurfaceIndex { surface, boxes }
    }

    /// The indexed surface.
    pub fn surface(&self) -> &Surface {
        &self.surface
    }

    /// Clears `out` and fills it with the triangles overlapping the closed box `b` (exact
    /// triangle-box test), in ascending order.
    pub fn triangles_in_box(&self, b: &Aabb, out: &mut Vec<u32>) {
        out.clear();
        for (t, tb) in self.boxes.iter().enumerate() {
            if tb.intersects(b) && triangle_box_overlap(&self.surface.corners(t), b) {
                out.push(t as u32);
            }
        }
    }

    /// True when some triangle overlaps the closed box `b`.
    pub fn any_triangle_in_box(&self, b: &Aabb) -> bool {
        self.boxes
            .iter()
            .enumerate()
            .any(|(t, tb)| tb.intersects(b) && triangle_box_overlap(&self.surface.corners(t), b))
    }

    /// The closest surface point to `p` (None for an empty surface).
    pub fn closest_point(&self, p: Vec3) -> Option<SurfacePoint> {
        let mut best: Option<SurfacePoint> = None;
        for t in 0..self.surface.triangles.len() {
            let q = closest_point_on_triangle(p, &self.surface.corners(t));
            let d = (q - p).length();
            if best.is_none_or(|b| d < b.distance) {
                best = Some(SurfacePoint { point: q, distance: d, triangle: t as u32 });
            }
        }
        best
    }

    /// Clears `out` and fills it with every crossing of segment `a`-`b` with the surface, sorted
    /// by `t` (ties by triangle id).
    pub fn segment_hits(&self, a: Vec3, b: Vec3, out: &mut Vec<SegmentHit>) {
        out.clear();
        let sb = Aabb::from_points([a, b]);
        for (t, tb) in self.boxes.iter().enumerate() {
            if !tb.intersects(&sb) {
                continue;
            }
            if let Some(s) = segment_triangle(a, b, &self.surface.corners(t)) {
                out.push(SegmentHit { t: s, point: a + s * (b - a), triangle: t as u32 });
            }
        }
        out.sort_by(|x, y| x.t.total_cmp(&y.t).then(x.triangle.cmp(&y.triangle)));
    }

    /// Generalized winding number at `p`.
    pub fn winding_number(&self, p: Vec3) -> f64 {
        self.winding_number_exact(p)
    }

    /// Generalized winding number at `p` by the direct sum over all triangles.
    pub fn winding_number_exact(&self, p: Vec3) -> f64 {
        winding_number_direct(p, (0..self.surface.triangles.len()).map(|t| self.surface.corners(t)))
    }

    /// True when `p` is inside the surface (winding number at least 1/2).
    pub fn is_inside(&self, p: Vec3) -> bool {
        self.winding_number(p) >= 0.5
    }
}

/// Closest point of triangle `tri` to `p` (Ericson 2005, "Real-Time Collision Detection", 5.1.5).
pub fn closest_point_on_triangle(p: Vec3, tri: &[Vec3; 3]) -> Vec3 {
    let [a, b, c] = *tri;
    let ab = b - a;
    let ac = c - a;
    let ap = p - a;
    let d1 = ab.dot(ap);
    let d2 = ac.dot(ap);
    if d1 <= 0.0 && d2 <= 0.0 {
        return a;
    }
    let bp = p - b;
    let d3 = ab.dot(bp);
    let d4 = ac.dot(bp);
    if d3 >= 0.0 && d4 <= d3 {
        return b;
    }
    let vc = d1 * d4 - d3 * d2;
    if vc <= 0.0 && d1 >= 0.0 && d3 <= 0.0 {
        let v = d1 / (d1 - d3);
        return a + v * ab;
    }
    let cp = p - c;
    let d5 = ab.dot(cp);
    let d6 = ac.dot(cp);
    if d6 >= 0.0 && d5 <= d6 {
        return c;
    }
    let vb = d5 * d2 - d1 * d6;
    if vb <= 0.0 && d2 >= 0.0 && d6 <= 0.0 {
        let w = d2 / (d2 - d6);
        return a + w * ac;
    }
    let va = d3 * d6 - d5 * d4;
    if va <= 0.0 && (d4 - d3) >= 0.0 && (d5 - d6) >= 0.0 {
        let w = (d4 - d3) / ((d4 - d3) + (d5 - d6));
        return b + w * (c - b);
    }
    let denom = 1.0 / (va + vb + vc);
    let v = vb * denom;
    let w = vc * denom;
    a + ab * v + ac * w
}

/// Parameter `t` in `[0, 1]` where segment `a`-`b` crosses the closed triangle, if it does
/// (Moller and Trumbore 1997, two-sided; a segment lying in the triangle's plane gives None).
pub fn segment_triangle(a: Vec3, b: Vec3, tri: &[Vec3; 3]) -> Option<f64> {
    let d = b - a;
    let e1 = tri[1] - tri[0];
    let e2 = tri[2] - tri[0];
    let pv = d.cross(e2);
    let det = e1.dot(pv);
    if det == 0.0 {
        return None;
    }
    let inv = 1.0 / det;
    let tv = a - tri[0];
    let u = tv.dot(pv) * inv;
    if !(0.0..=1.0).contains(&u) {
        return None;
    }
    let qv = tv.cross(e1);
    let v = d.dot(qv) * inv;
    if v < 0.0 || u + v > 1.0 {
        return None;
    }
    let t = e2.dot(qv) * inv;
    (0.0..=1.0).contains(&t).then_some(t)
}
