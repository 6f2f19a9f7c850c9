//! Exact intersection test of two closed triangles, with the adjacency rule for mesh triangles.
//!
//! Follows the structure of Moller (1997), "A fast triangle-triangle intersection test": reject
//! when all corners of one triangle lie strictly on one side of the other's plane; otherwise the
//! triangles meet the line of their two planes in two intervals, and these overlap iff an
//! interval end, a point where an edge of one triangle crosses the other's plane, lies in the
//! other triangle. So the test becomes "some edge of one meets the other", decided by the signs
//! of `orient3d` (Shewchuk 1997, via [`crate::predicates`]) as in Guigue and Devillers (2003):
//! a segment crossing a plane meets the triangle iff the three `orient3d(a, b, t_i, t_j)` agree.
//! Coplanar configurations are decided by `orient2d` in a coordinate projection, which is exact
//! and preserves incidence. Closed triangles: touching counts as intersecting. Inputs must be
//! non-degenerate (repair removes collinear triangles); a degenerate input gets some answer, no
//! panic.
//!
//! Adjacency rule ([`mesh_triangles_intersect`]): triangles of one mesh that share vertex ids
//! intersect only if they meet beyond the shared feature:
//! - shared edge `ab` (third corners `c`, `d`): iff `d` is coplanar with `abc` and on the same
//!   side of `ab` as `c` (a fold-over); otherwise they meet in exactly `ab`;
//! - shared vertex `a` (`abc`, `ade`): iff segment `bc` meets `ade` or segment `de` meets `abc`
//!   (the intersection is convex and holds `a`; its far end lies on `bc` or on `de`);
//! - all three shared (a duplicate): always.

use crate::geom::Vec3;
use crate::predicates::{orient2d, orient3d};

/// True when the closed triangles `p` and `q` share a point (exact).
///
/// ```
/// use octocut_surface::{tritri::triangles_intersect, Vec3};
/// let p = [Vec3::ZERO, Vec3::X, Vec3::Y];
/// let q = [Vec3::new(0.2, 0.2, -1.0), Vec3::new(0.2, 0.2, 1.0), Vec3::new(2.0, 2.0, 0.0)];
/// assert!(triangles_intersect(&p, &q));
/// let far = q.map(|v| v + Vec3::Z * 3.0);
/// assert!(!triangles_intersect(&p, &far));
/// ```
pub fn triangles_intersect(p: &[Vec3; 3], q: &[Vec3; 3]) -> bool {
    intersect(p, q, false).is_some()
}

/// An approximate point of `p` and `q` in common when they intersect (floating-point, for
/// reports); `None` exactly when [`triangles_intersect`] is false.
pub fn intersection_point(p: &[Vec3; 3], q: &[Vec3; 3]) -> Option<Vec3> {
    intersect(p, q, true)
}

/// [`triangles_intersect`] for triangles `t1`, `t2` (vertex ids into `v`) under the adjacency
/// rule of the module doc.
///
/// ```
/// use octocut_surface::{tritri::mesh_triangles_intersect, Surface};
/// let c = Surface::unit_cube();
/// // neighbouring cube triangles share an edge or a vertex only
/// assert!(!mesh_triangles_intersect(&c.vertices, c.triangles[0], c.triangles[1]));
/// assert!(!mesh_triangles_intersect(&c.vertices, c.triangles[0], c.triangles[4]));
/// ```
pub fn mesh_triangles_intersect(v: &[Vec3], t1: [u32; 3], t2: [u32; 3]) -> bool {
    mesh_intersect(v, t1, t2, false).is_some()
}

/// [`mesh_triangles_intersect`] with an approximate common point beyond the shared feature (for
/// a fold-over across a shared edge, the edge's midpoint).
pub fn mesh_intersection_point(v: &[Vec3], t1: [u32; 3], t2: [u32; 3]) -> Option<Vec3> {
    mesh_intersect(v, t1, t2, true)
}

fn mesh_intersect(v: &[Vec3], t1: [u32; 3], t2: [u32; 3], want: bool) -> Option<Vec3> {
    let pos = |i: u32| v[i as usize];
    let mut s = [(0usize, 0usize); 3];
    let mut ns = 0;
    for (i, &a) in t1.iter().enumerate() {
        for (j, &b) in t2.iter().enumerate() {
            if a == b && ns < 3 {
                s[ns] = (i, j);
                ns += 1;
            }
        }
    }
    let p = t1.map(pos);
    let q = t2.map(pos);
    match ns {
        0 => intersect(&p, &q, want),
        1 => {
            // shared vertex a = p[i] = q[j]; opposite edges bc of p and de of q
            let (i, j) = s[0];
            let (b, c) = (p[(i + 1) % 3], p[(i + 2) % 3]);
            let (d, e) = (q[(j + 1) % 3], q[(j + 2) % 3]);
            let pd = |x: Vec3| orient3d(p[0], p[1], p[2], x);
            let qd = |x: Vec3| orient3d(q[0], q[1], q[2], x);
            segment_triangle(b, c, qd(b), qd(c), &q, want)
                .or_else(|| segment_triangle(d, e, pd(d), pd(e), &p, want))
        }
        2 => {
            let (i0, j0) = s[0];
            let (i1, _) = s[1];
            let ic = 3 - i0 - i1;
            let jd = (0..3).find(|&k| k != j0 && k != s[1].1).unwrap_or(0);
            let (a, b, c, d) = (p[i0], p[i1], p[ic], q[jd]);
            if orient3d(a, b, c, d) != 0 {
                return None;
            }
            let k = projection_axis(&p).or_else(|| projection_axis(&q))?;
            let (pa, pb) = (proj(a, k), proj(b, k));
            let sc = orient2d(pa, pb, proj(c, k));
            let sd = orient2d(pa, pb, proj(d, k));
            (sc != 0 && sc == sd).then_some(0.5 * (a + b))
        }
        _ => Some((p[0] + p[1] + p[2]) / 3.0),
    }
}

fn intersect(p: &[Vec3; 3], q: &[Vec3; 3], want: bool) -> Option<Vec3> {
    let dq = q.map(|x| orient3d(p[0], p[1], p[2], x));
    if one_side(dq) {
        return None;
    }
    let dp = p.map(|x| orient3d(q[0], q[1], q[2], x));
    if one_side(dp) {
        return None;
    }
    if dq == [0; 3] && dp == [0; 3] {
        let k = projection_axis(p).or_else(|| projection_axis(q))?;
        // coplanar: an edge of p meets q, or q lies inside p
        for e in 0..3 {
            if let Some(x) = segment_triangle_2d(p[e], p[(e + 1) % 3], q, k, want) {
                return Some(x);
            }
        }
        return point_in_triangle_2d(q[0], p, k).then_some(q[0]);
    }
    for e in 0..3 {
        let (a, b) = (e, (e + 1) % 3);
        if let Some(x) = segment_triangle(p[a], p[b], dp[a], dp[b], q, want) {
            return Some(x);
        }
        if let Some(x) = segment_triangle(q[a], q[b], dq[a], dq[b], p, want) {
            return Some(x);
        }
    }
    None
}

/// All three signs equal and nonzero.
#[inline]
fn one_side(d: [i32; 3]) -> bool {
    d[0] != 0 && d[0] == d[1] && d[1] == d[2]
}

/// Closed segment `ab` against closed triangle `t`, given `sa`, `sb` = orient3d of `t` with `a`,
/// `b`. Returns a point (approximate; `Vec3::ZERO` unless `want`) when they meet.
fn segment_triangle(a: Vec3, b: Vec3, sa: i32, sb: i32, t: &[Vec3; 3], want: bool) -> Option<Vec3> {
    if sa == sb && sa != 0 {
        return None;
    }
    if sa == 0 && sb == 0 {
        let k = projection_axis(t)?;
        return segment_triangle_2d(a, b, t, k, want);
    }
    let s0 = orient3d(a, b, t[0], t[1]);
    let s1 = orient3d(a, b, t[1], t[2]);
    let s2 = orient3d(a, b, t[2], t[0]);
    let hit = (s0 >= 0 && s1 >= 0 && s2 >= 0) || (s0 <= 0 && s1 <= 0 && s2 <= 0);
    if !hit {
        return None;
    }
    if !want {
        return Some(Vec3::ZERO);
    }
    let n = (t[1] - t[0]).cross(t[2] - t[0]);
    let (da, db) = (n.dot(a - t[0]), n.dot(b - t[0]));
    let s = if da == db {
        0.0
    } else {
        (da / (da - db)).clamp(0.0, 1.0)
    };
    Some(a + s * (b - a))
}

/// A coordinate axis along which the projection of `t` is exactly non-degenerate: the one of the
/// largest normal component first.
fn projection_axis(t: &[Vec3; 3]) -> Option<usize> {
    let n = (t[1] - t[0]).cross(t[2] - t[0]).abs();
    let first = if n.x >= n.y && n.x >= n.z {
        0
    } else if n.y >= n.z {
        1
    } else {
        2
    };
    [first, (first + 1) % 3, (first + 2) % 3]
        .into_iter()
        .find(|&k| orient2d(proj(t[0], k), proj(t[1], k), proj(t[2], k)) != 0)
}

/// Drops coordinate `k`.
#[inline]
fn proj(v: Vec3, k: usize) -> [f64; 2] {
    match k {
        0 => [v.y, v.z],
        1 => [v.z, v.x],
        _ => [v.x, v.y],
    }
}

fn point_in_triangle_2d(x: Vec3, t: &[Vec3; 3], k: usize) -> bool {
    let [a, b, c] = t.map(|v| proj(v, k));
    let x = proj(x, k);
    let (o0, o1, o2) = (orient2d(a, b, x), orient2d(b, c, x), orient2d(c, a, x));
    (o0 >= 0 && o1 >= 0 && o2 >= 0) || (o0 <= 0 && o1 <= 0 && o2 <= 0)
}

/// Closed segments `ab`, `cd` in the plane meet (exact, collinear overlaps included).
fn segments_meet_2d(a: [f64; 2], b: [f64; 2], c: [f64; 2], d: [f64; 2]) -> bool {
    let (o1, o2) = (orient2d(a, b, c), orient2d(a, b, d));
    let (o3, o4) = (orient2d(c, d, a), orient2d(c, d, b));
    let within = |p: [f64; 2], q: [f64; 2], x: [f64; 2]| {
        x[0] >= p[0].min(q[0])
            && x[0] <= p[0].max(q[0])
            && x[1] >= p[1].min(q[1])
            && x[1] <= p[1].max(q[1])
    };
    (o1 * o2 < 0 && o3 * o4 < 0)
        || (o1 == 0 && within(a, b, c))
        || (o2 == 0 && within(a, b, d))
        || (o3 == 0 && within(c, d, a))
        || (o4 == 0 && within(c, d, b))
}

/// Coplanar closed segment `ab` against closed triangle `t` in projection `k`.
fn segment_triangle_2d(a: Vec3, b: Vec3, t: &[Vec3; 3], k: usize, want: bool) -> Option<Vec3> {
    let hit = point_in_triangle_2d(a, t, k)
        || point_in_triangle_2d(b, t, k)
        || (0..3).any(|e| {
            segments_meet_2d(
                proj(a, k),
                proj(b, k),
                proj(t[e], k),
                proj(t[(e + 1) % 3], k),
            )
        });
    if !hit {
        return None;
    }
    if !want {
        return Some(Vec3::ZERO);
    }
    // Midpoint of the part of ab inside t: clip the parameter range by the three edge lines.
    let [p0, p1, p2] = t.map(|v| proj(v, k));
    let (pa, pb) = (proj(a, k), proj(b, k));
    let area = (p1[0] - p0[0]) * (p2[1] - p0[1]) - (p1[1] - p0[1]) * (p2[0] - p0[0]);
    let side = |u: [f64; 2], v: [f64; 2], x: [f64; 2]| {
        area.signum() * ((v[0] - u[0]) * (x[1] - u[1]) - (v[1] - u[1]) * (x[0] - u[0]))
    };
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    for (u, v) in [(p0, p1), (p1, p2), (p2, p0)] {
        let (fa, fb) = (side(u, v, pa), side(u, v, pb));
        if fa < 0.0 && fb >= 0.0 {
            lo = lo.max(fa / (fa - fb));
        } else if fb < 0.0 && fa >= 0.0 {
            hi = hi.min(fa / (fa - fb));
        }
    }
    let s = if lo <= hi { 0.5 * (lo + hi) } else { lo };
    Some(a + s * (b - a))
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    fn v(x: f64, y: f64, z: f64) -> Vec3 {
        Vec3::new(x, y, z)
    }

    #[test]
    fn crossing_touching_and_separate() {
        let p = [v(0., 0., 0.), v(1., 0., 0.), v(0., 1., 0.)];
        // pierces the interior
        assert!(triangles_intersect(
            &p,
            &[v(0.2, 0.2, -1.), v(0.3, 0.2, 1.), v(0.2, 0.4, 1.)]
        ));
        // touches p with one corner exactly on its edge: closed triangles meet
        assert!(triangles_intersect(
            &p,
            &[v(0.5, 0., 0.), v(0.5, -1., 1.), v(0.5, -1., -1.)]
        ));
        // same plane, disjoint
        assert!(!triangles_intersect(
            &p,
            &[v(2., 2., 0.), v(3., 2., 0.), v(2., 3., 0.)]
        ));
        // same plane, overlapping, and q inside p
        assert!(triangles_intersect(
            &p,
            &[v(0.5, 0.5, 0.), v(-1., 0.2, 0.), v(0.2, -1., 0.)]
        ));
        assert!(triangles_intersect(
            &p,
            &[v(0.1, 0.1, 0.), v(0.2, 0.1, 0.), v(0.1, 0.2, 0.)]
        ));
        // planes cross but the intervals on the common line are disjoint
        assert!(!triangles_intersect(
            &p,
            &[v(2., 0., -1.), v(2., 0., 1.), v(3., 1., 0.)]
        ));
    }

    #[test]
    fn adjacency_rule() {
        let verts = vec![
            v(0., 0., 0.),
            v(1., 0., 0.),
            v(0., 1., 0.),
            v(0.5, -1., 0.),
            v(0.5, 0.5, 0.),
            v(0.5, 0.3, 1.),
        ];
        // shared edge 0-1, other corners on opposite sides in the plane: only the edge
        assert!(!mesh_triangles_intersect(&verts, [0, 1, 2], [1, 0, 3]));
        // shared edge, coplanar fold-over (vertex 4 on the same side as 2)
        assert!(mesh_triangles_intersect(&verts, [0, 1, 2], [0, 1, 4]));
        // shared edge, not coplanar: only the edge
        assert!(!mesh_triangles_intersect(&verts, [0, 1, 2], [0, 1, 5]));
        // shared vertex 0, second triangle pierces the first beyond it
        let mut w = verts.clone();
        w.extend([v(0.3, 0.3, -1.0), v(0.3, 0.2, 1.0)]);
        assert!(mesh_triangles_intersect(&w, [0, 1, 2], [0, 6, 7]));
        // shared vertex 0, second triangle away from the first
        w.extend([v(-1.0, -0.5, 0.5), v(-0.5, -1.0, 0.5)]);
        assert!(!mesh_triangles_intersect(&w, [0, 1, 2], [0, 8, 9]));
        assert!(mesh_intersection_point(&w, [0, 1, 2], [0, 6, 7]).is_some());
    }

    #[test]
    fn agrees_with_parry_on_random_pairs() {
        // reference: parry3d's GJK-based intersection test for convex shapes (float; random
        // configurations avoid the near-touching cases where floating point may disagree)
        use parry3d_f64::math::Pose;
        use parry3d_f64::query::intersection_test;
        use parry3d_f64::shape::Triangle;
        let mut rng = ChaCha8Rng::seed_from_u64(7);
        let mut r = || Vec3::new(rng.random(), rng.random(), rng.random());
        let (mut agree, mut hits) = (0, 0);
        for _ in 0..2000 {
            let p = [r(), r(), r()];
            let q = [r(), r(), r()];
            let pt = Triangle::new(p[0], p[1], p[2]);
            let qt = Triangle::new(q[0], q[1], q[2]);
            let id = Pose::identity();
            let reference = intersection_test(&id, &pt, &id, &qt).unwrap().intersecting;
            let ours = triangles_intersect(&p, &q);
            agree += (reference == ours) as usize;
            hits += ours as usize;
            if let Some(x) = intersection_point(&p, &q) {
                // the witness lies (up to rounding) on both triangles
                let d1 = (crate::index::closest_point_on_triangle(x, &p) - x).length();
                let d2 = (crate::index::closest_point_on_triangle(x, &q) - x).length();
                assert!(d1 < 1e-9 && d2 < 1e-9, "{d1} {d2}");
            }
        }
        assert!(hits > 100, "{hits}");
        assert!(agree >= 1995, "{agree} of 2000");
    }
}
