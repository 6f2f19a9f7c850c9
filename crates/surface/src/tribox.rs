//! Exact triangle / axis-aligned box overlap by the separating-axis test.
//!
//! Follows Akenine-Moller (2001), "Fast 3D triangle-box overlap testing": the triangle and the
//! box overlap unless one of 13 axes separates them (the 3 box normals, the triangle normal and
//! the 9 cross products of box and triangle edges). Boxes are closed: touching counts as overlap.
//!
//! Rounding: each axis test is widened by a margin of about 1e-14 of the coordinates' magnitude
//! (far above the float error of the projections), so the test never reports a separation
//! that rounding could have invented (important for near-zero-area triangles, whose computed
//! normal is noise). Invariant: an overlap is reported whenever the exact inputs overlap; a
//! separation is reported whenever the gap exceeds the margin.

use crate::geom::{Aabb, Vec3};

/// True when the closed triangle `(a, b, c)` and the closed box overlap.
///
/// ```
/// use octocut_surface::{tribox::triangle_box_overlap, Aabb, Vec3};
/// let b = Aabb::new(Vec3::ZERO, Vec3::ONE);
/// let t = [Vec3::new(0.5, 0.5, -1.0), Vec3::new(0.5, 0.5, 2.0), Vec3::new(3.0, 0.5, 0.5)];
/// assert!(triangle_box_overlap(&t, &b));
/// let far = [Vec3::splat(2.0), Vec3::splat(3.0), Vec3::new(2.0, 3.0, 2.0)];
/// assert!(!triangle_box_overlap(&far, &b));
/// ```
pub fn triangle_box_overlap(tri: &[Vec3; 3], b: &Aabb) -> bool {
    let c = b.center();
    let h = 0.5 * b.extent();
    let v0 = tri[0] - c;
    let v1 = tri[1] - c;
    let v2 = tri[2] - c;
    // magnitude of the centred coordinates, for the rounding margin
    let s = v0.abs().max(v1.abs()).max(v2.abs()).max(h).max_element();
    let tol = 1e-14 * s;
    if !tol.is_finite() {
        return false; // NaN or infinite input overlaps nothing
    }
    // 1. box normals: the triangle's bounding box against the box.
    let mn = v0.min(v1).min(v2);
    let mx = v0.max(v1).max(v2);
    let ht = h + tol;
    if mn.x > ht.x || mx.x < -ht.x || mn.y > ht.y || mx.y < -ht.y || mn.z > ht.z || mx.z < -ht.z {
        return false;
    }
    let e0 = v1 - v0;
    let e1 = v2 - v1;
    let e2 = v0 - v2;
    // 2. the nine edge cross products a = axis_i x edge_j.
    for e in [e0, e1, e2] {
        for axis in [Vec3::X, Vec3::Y, Vec3::Z] {
            let a = axis.cross(e);
            if a == Vec3::ZERO {
                continue;
            }
            let p0 = a.dot(v0);
            let p1 = a.dot(v1);
            let p2 = a.dot(v2);
            let r = h.x * a.x.abs()
                + h.y * a.y.abs()
                + h.z * a.z.abs()
                + tol * (a.x.abs() + a.y.abs() + a.z.abs());
            if p0.min(p1).min(p2) > r || p0.max(p1).max(p2) < -r {
                return false;
            }
        }
    }
    // 3. the triangle's plane against the box.
    let n = e0.cross(e1);
    let d = n.dot(v0);
    let l1 = |v: Vec3| v.x.abs() + v.y.abs() + v.z.abs();
    // n's own rounding error is about eps |e0| |e1| per component
    let r = h.x * n.x.abs()
        + h.y * n.y.abs()
        + h.z * n.z.abs()
        + tol * (l1(n) + 16.0 * l1(e0) * l1(e1));
    d.abs() <= r
}

#[cfg(test)]
mod tests {
    use super::*;

    fn unit() -> Aabb {
        Aabb::new(Vec3::ZERO, Vec3::ONE)
    }

    #[test]
    fn touching_counts_as_overlap() {
        // closed boxes by definition: contact at a face, an edge or a corner overlaps
        let b = unit();
        let face = [
            Vec3::new(1.0, 0.2, 0.2),
            Vec3::new(2.0, 0.5, 0.2),
            Vec3::new(2.0, 0.2, 0.8),
        ];
        assert!(triangle_box_overlap(&face, &b));
        let corner = [
            Vec3::ONE,
            Vec3::new(2.0, 1.0, 2.0),
            Vec3::new(1.0, 2.0, 2.0),
        ];
        assert!(triangle_box_overlap(&corner, &b));
        // an edge of the triangle lying on the box edge x = 1, y = 1
        let edge = [
            Vec3::new(1.0, 1.0, 0.3),
            Vec3::new(1.0, 1.0, 0.6),
            Vec3::new(2.0, 2.0, 0.5),
        ];
        assert!(triangle_box_overlap(&edge, &b));
        // the triangle's edge crosses the box edge diagonally, the triangle itself outside
        let diag = [
            Vec3::new(2.0, 0.0, 0.5),
            Vec3::new(0.0, 2.0, 0.5),
            Vec3::new(2.0, 2.0, 0.5),
        ];
        assert!(triangle_box_overlap(&diag, &b));
        let gap = [
            Vec3::new(2.0, 0.01, 0.5),
            Vec3::new(0.01, 2.0, 0.5),
            Vec3::new(2.0, 2.0, 0.5),
        ];
        assert!(!triangle_box_overlap(&gap, &b));
    }

    #[test]
    fn degenerate_triangles_and_boxes() {
        let b = unit();
        // a point, a segment through the box, a segment passing beside it
        assert!(triangle_box_overlap(&[Vec3::splat(0.5); 3], &b));
        assert!(!triangle_box_overlap(&[Vec3::splat(1.5); 3], &b));
        let (p, q) = (Vec3::new(-1.0, 0.5, 0.5), Vec3::new(2.0, 0.5, 0.5));
        assert!(triangle_box_overlap(&[p, q, 0.5 * (p + q)], &b));
        let (p, q) = (Vec3::new(2.2, -0.1, 0.5), Vec3::new(-0.1, 2.2, 0.5)); // x + y = 2.1
        assert!(!triangle_box_overlap(&[p, q, q], &b));
        // a flat box (zero thickness in z) cut by a vertical triangle
        let flat = Aabb::new(Vec3::ZERO, Vec3::new(1.0, 1.0, 0.0));
        let t = [
            Vec3::new(0.5, -1.0, -1.0),
            Vec3::new(0.5, 2.0, -1.0),
            Vec3::new(0.5, 0.5, 1.0),
        ];
        assert!(triangle_box_overlap(&t, &flat));
        assert!(!triangle_box_overlap(&[Vec3::splat(f64::NAN); 3], &b));
    }
}
