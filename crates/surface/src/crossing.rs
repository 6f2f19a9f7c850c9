//! Exact segment / triangle crossing classification, and the merge of crossings that meet the
//! surface on a shared edge or vertex.
//!
//! The decision uses only the signs of exact orientation predicates (Shewchuk 1997, through
//! [`crate::predicates::orient3d`]), the classic segment-triangle test by signed volumes
//! (scalar triple products; e.g. Ericson 2005, "Real-Time Collision Detection", chapter 5,
//! section number from memory not given): the segment `ab` crosses the
//! triangle `pqr` when `a` and `b` are not strictly on one side of its plane and the three
//! volumes `[a b p q]`, `[a b q r]`, `[a b r p]` do not have opposite signs. A zero volume puts
//! the crossing exactly on that edge, two zeros on their common vertex. Because the signs are
//! exact, the two triangles of an edge see the same zero: a segment passing near (not on) an
//! edge crosses exactly one of them, and one passing through it crosses both, flagged.
//!
//! Invariants: a segment lying in a triangle's plane, or a zero-area triangle, gives no
//! crossing; the parameter `t` is a float estimate, the crossing decision is exact.

use crate::geom::Vec3;
use crate::index::SegmentHit;
use crate::predicates::orient3d;

/// Where a crossing meets its triangle.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Feature {
    /// Strictly inside the triangle.
    Interior,
    /// On the edge from corner `i` to corner `(i + 1) % 3`.
    Edge(u8),
    /// At corner `i`.
    Vertex(u8),
}

/// One exact crossing of a segment with a triangle.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Crossing {
    /// Parameter along the segment, in `[0, 1]`.
    pub t: f64,
    /// +1 when the segment goes from the triangle's front (the side `(q - p) x (r - p)` points
    /// to) to its back, -1 the other way.
    pub direction: i8,
    pub feature: Feature,
}

/// Exact crossing of segment `a`-`b` with triangle `tri`, if any.
///
/// ```
/// use octocut_surface::{crossing::{segment_crossing, Feature}, Vec3};
/// let tri = [Vec3::ZERO, Vec3::X, Vec3::Y];
/// let c = segment_crossing(Vec3::new(0.2, 0.2, 1.0), Vec3::new(0.2, 0.2, -1.0), &tri).unwrap();
/// assert_eq!((c.t, c.direction, c.feature), (0.5, 1, Feature::Interior));
/// // through the edge x + y = 1, exactly
/// let c = segment_crossing(Vec3::new(0.5, 0.5, 1.0), Vec3::new(0.5, 0.5, -1.0), &tri).unwrap();
/// assert_eq!(c.feature, Feature::Edge(1));
/// ```
pub fn segment_crossing(a: Vec3, b: Vec3, tri: &[Vec3; 3]) -> Option<Crossing> {
    let [p, q, r] = *tri;
    // orient3d > 0: the point is behind the plane (opposite to the normal).
    let sa = orient3d(p, q, r, a);
    let sb = orient3d(p, q, r, b);
    if sa == sb {
        return None; // both strictly on one side, or coplanar (including degenerate triangles)
    }
    let e = [
        orient3d(a, b, p, q),
        orient3d(a, b, q, r),
        orient3d(a, b, r, p),
    ];
    let pos = e.iter().any(|&s| s > 0);
    let neg = e.iter().any(|&s| s < 0);
    if pos && neg || !(pos || neg) {
        return None;
    }
    let zeros = [e[0] == 0, e[1] == 0, e[2] == 0];
    let feature = match zeros {
        [false, false, false] => Feature::Interior,
        [true, false, false] => Feature::Edge(0),
        [false, true, false] => Feature::Edge(1),
        [false, false, true] => Feature::Edge(2),
        [true, true, false] => Feature::Vertex(1),
        [false, true, true] => Feature::Vertex(2),
        _ => Feature::Vertex(0),
    };
    let t = if sa == 0 {
        0.0
    } else if sb == 0 {
        1.0
    } else {
        let n = (q - p).cross(r - p);
        let (da, db) = (n.dot(a - p), n.dot(b - p));
        let t = da / (da - db);
        if t.is_finite() {
            t.clamp(0.0, 1.0)
        } else {
            0.5
        }
    };
    Some(Crossing {
        t,
        direction: (sb - sa).signum() as i8,
        feature,
    })
}

/// Bit pattern of a point (with -0 and +0 identified), the key of a shared feature.
pub(crate) type PointKey = [u64; 3];

#[inline]
pub(crate) fn point_key(p: Vec3) -> PointKey {
    [
        (p.x + 0.0).to_bits(),
        (p.y + 0.0).to_bits(),
        (p.z + 0.0).to_bits(),
    ]
}

/// The shared-feature key of a crossing on triangle `tri`: `None` for an interior crossing, the
/// ordered end points of the edge, or the vertex twice.
pub(crate) fn feature_key(tri: &[Vec3; 3], f: Feature) -> Option<[PointKey; 2]> {
    match f {
        Feature::Interior => None,
        Feature::Edge(i) => {
            let (u, v) = (
                point_key(tri[i as usize]),
                point_key(tri[(i as usize + 1) % 3]),
            );
            Some(if u <= v { [u, v] } else { [v, u] })
        }
        Feature::Vertex(i) => {
            let u = point_key(tri[i as usize]);
            Some([u, u])
        }
    }
}

/// The crossings of one segment with a set of triangles, merged where they meet the surface
/// on a shared edge or vertex: such a crossing counts once (the hit of the lowest triangle
/// id), and not at all when the triangles there disagree on the direction (the segment grazes
/// a fold). Interior crossings pass straight through. Reusable scratch: [`CrossingMerge::add`]
/// every candidate triangle, then [`CrossingMerge::finish`].
///
/// ```
/// use octocut_surface::crossing::CrossingMerge;
/// use octocut_surface::{Surface, Vec3};
/// let s = Surface::unit_cube();
/// // through the diagonal edge shared by the two triangles of the faces z = 0 and z = 1
/// let (a, b) = (Vec3::new(0.5, 0.5, -1.0), Vec3::new(0.5, 0.5, 2.0));
/// let mut merge = CrossingMerge::default();
/// let mut hits = Vec::new();
/// for t in 0..s.triangles.len() as u32 {
///     merge.add(a, b, t, &s.corners(t as usize), |h, dir| hits.push((h, dir)));
/// }
/// merge.finish(|h, dir| hits.push((h, dir)));
/// assert_eq!(hits.len(), 2); // exact: the segment enters and leaves the cube once each
/// ```
#[derive(Default)]
pub struct CrossingMerge {
    pending: Vec<([PointKey; 2], i8, SegmentHit)>,
}

impl CrossingMerge {
    /// Tests triangle `t` (corners `tri`) against segment `a`-`b`: an interior crossing goes to
    /// `push(hit, direction)` at once, one on an edge or vertex waits for [`Self::finish`].
    #[inline]
    pub fn add(
        &mut self,
        a: Vec3,
        b: Vec3,
        t: u32,
        tri: &[Vec3; 3],
        mut push: impl FnMut(SegmentHit, i8),
    ) {
        let Some(c) = segment_crossing(a, b, tri) else {
            return;
        };
        let hit = SegmentHit {
            t: c.t,
            point: a + c.t * (b - a),
            triangle: t,
        };
        match feature_key(tri, c.feature) {
            None => push(hit, c.direction),
            Some(key) => self.pending.push((key, c.direction, hit)),
        }
    }

    /// Hands the merged edge and vertex crossings to `push` (ordered by feature, then lowest
    /// triangle) and empties the scratch.
    pub fn finish(&mut self, mut push: impl FnMut(SegmentHit, i8)) {
        self.pending
            .sort_unstable_by(|x, y| x.0.cmp(&y.0).then(x.2.triangle.cmp(&y.2.triangle)));
        for group in self.pending.chunk_by(|x, y| x.0 == y.0) {
            if group.iter().all(|g| g.1 == group[0].1) {
                push(group[0].2, group[0].1);
            }
        }
        self.pending.clear();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shared_edge_seen_by_both_and_near_edge_by_one() {
        // two triangles sharing the edge (0,0,0)-(1,1,0), consistently oriented (normal +z)
        let t1 = [Vec3::ZERO, Vec3::X, Vec3::new(1.0, 1.0, 0.0)];
        let t2 = [Vec3::ZERO, Vec3::new(1.0, 1.0, 0.0), Vec3::Y];
        let (a, b) = (Vec3::new(0.5, 0.5, 1.0), Vec3::new(0.5, 0.5, -1.0));
        let c1 = segment_crossing(a, b, &t1).unwrap();
        let c2 = segment_crossing(a, b, &t2).unwrap();
        assert_eq!(
            (c1.feature, c2.feature),
            (Feature::Edge(2), Feature::Edge(0))
        );
        assert_eq!(feature_key(&t1, c1.feature), feature_key(&t2, c2.feature));
        assert_eq!((c1.direction, c2.direction), (1, 1)); // front (+z) to back
                                                          // exact predicates: a nudge by one ulp picks exactly one side
        for dx in [1e-16, -1e-16, 3e-16] {
            let a = Vec3::new(0.5 + dx, 0.5, 1.0);
            let b = Vec3::new(0.5 + dx, 0.5, -1.0);
            let n = [t1, t2]
                .iter()
                .filter(|t| segment_crossing(a, b, t).is_some())
                .count();
            assert_eq!(n, 1, "dx = {dx}");
        }
    }

    #[test]
    fn vertex_endpoint_and_coplanar_cases() {
        let tri = [Vec3::ZERO, Vec3::X, Vec3::Y];
        let c =
            segment_crossing(Vec3::new(0.0, 0.0, 1.0), Vec3::new(0.0, 0.0, -3.0), &tri).unwrap();
        assert_eq!((c.feature, c.t), (Feature::Vertex(0), 0.25));
        // the segment ends on the triangle: t = 1, direction from the front
        let c = segment_crossing(Vec3::new(0.2, 0.2, 1.0), Vec3::new(0.2, 0.2, 0.0), &tri).unwrap();
        assert_eq!((c.t, c.direction), (1.0, 1));
        // in the plane: none; zero-area triangle: none
        assert!(
            segment_crossing(Vec3::new(-1.0, 0.2, 0.0), Vec3::new(2.0, 0.2, 0.0), &tri).is_none()
        );
        let flat = [Vec3::ZERO, Vec3::X, Vec3::new(2.0, 0.0, 0.0)];
        assert!(
            segment_crossing(Vec3::new(0.5, 0.0, 1.0), Vec3::new(0.5, 0.0, -1.0), &flat).is_none()
        );
        // missing
        assert!(
            segment_crossing(Vec3::new(0.8, 0.8, 1.0), Vec3::new(0.8, 0.8, -1.0), &tri).is_none()
        );
    }
}
