//! Exact triangle / axis-aligned box overlap by the separating-axis test.
//!
//! Follows Akenine-Moller (2001), "Fast 3D triangle-box overlap testing": the triangle and the
//! box overlap unless one of 13 axes separates them (the 3 box normals, the triangle normal and
//! the 9 cross products of box and triangle edges). Boxes are closed: touching counts as overlap.

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
    // 1. box normals: the triangle's bounding box against the box.
    let mn = v0.min(v1).min(v2);
    let mx = v0.max(v1).max(v2);
    if mn.x > h.x || mx.x < -h.x || mn.y > h.y || mx.y < -h.y || mn.z > h.z || mx.z < -h.z {
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
            let r = h.x * a.x.abs() + h.y * a.y.abs() + h.z * a.z.abs();
            if p0.min(p1).min(p2) > r || p0.max(p1).max(p2) < -r {
                return false;
            }
        }
    }
    // 3. the triangle's plane against the box.
    let n = e0.cross(e1);
    let d = n.dot(v0);
    let r = h.x * n.x.abs() + h.y * n.y.abs() + h.z * n.z.abs();
    d.abs() <= r
}
