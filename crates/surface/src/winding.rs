//! Generalized winding number of a triangle surface at a point.
//!
//! Follows Jacobson, Kavan, Sorkine-Hornung (2013), "Robust inside-outside segmentation using
//! generalized winding numbers": w(p) = sum of signed solid angles of the triangles seen from p,
//! divided by 4 pi. Each solid angle is computed by the formula of Van Oosterom and Strackee
//! (1983). Properties: w = 1 inside and 0 outside a closed outward surface, about 1/2 on it, and
//! it degrades gracefully (stays near 0 or 1 away from the defects) for open, overlapping or
//! inconsistently oriented surfaces.

use crate::geom::Vec3;

/// Signed solid angle of triangle `(a, b, c)` seen from `p`, in steradians, positive when the
/// triangle is seen counter-clockwise (its normal faces away from `p`). A point in the
/// triangle's plane (zero triple product) gets the principal value 0: the mean of the limits
/// from both sides (+-2 pi on the triangle, 0 beside it), which makes w = 1/2 on a flat face.
///
/// ```
/// use octocut_surface::{winding::solid_angle, Vec3};
/// // One face of the cube [-1,1]^3 seen from the centre covers 4 pi / 6.
/// let (a, b, c, d) = (Vec3::new(-1.,-1.,1.), Vec3::new(1.,-1.,1.), Vec3::new(1.,1.,1.), Vec3::new(-1.,1.,1.));
/// let w = solid_angle(Vec3::ZERO, a, b, c) + solid_angle(Vec3::ZERO, a, c, d);
/// assert!((w - 4.0 * std::f64::consts::PI / 6.0).abs() < 1e-12);
/// ```
#[inline]
pub fn solid_angle(p: Vec3, a: Vec3, b: Vec3, c: Vec3) -> f64 {
    let a = a - p;
    let b = b - p;
    let c = c - p;
    let la = a.length();
    let lb = b.length();
    let lc = c.length();
    let det = a.dot(b.cross(c));
    if det == 0.0 {
        return 0.0;
    }
    let div = la * lb * lc + a.dot(b) * lc + a.dot(c) * lb + b.dot(c) * la;
    2.0 * det.atan2(div)
}

/// Exact (direct sum) generalized winding number of the triangles `tris` at `p`.
pub fn winding_number_direct(p: Vec3, tris: impl Iterator<Item = [Vec3; 3]>) -> f64 {
    let s: f64 = tris.map(|[a, b, c]| solid_angle(p, a, b, c)).sum();
    s / (4.0 * std::f64::consts::PI)
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    #[test]
    fn solid_angle_of_octant_triangle() {
        // exact: the triangle (X, Y, Z) seen from the origin covers one octant, 4 pi / 8.
        let w = solid_angle(Vec3::ZERO, Vec3::X, Vec3::Y, Vec3::Z);
        assert!((w - PI / 2.0).abs() < 1e-14);
        // reversed orientation flips the sign (definition, Van Oosterom and Strackee 1983)
        assert!((solid_angle(Vec3::ZERO, Vec3::X, Vec3::Z, Vec3::Y) + PI / 2.0).abs() < 1e-14);
        // principal value in the plane
        let p = Vec3::new(0.25, 0.25, 0.0);
        assert_eq!(solid_angle(p, Vec3::ZERO, Vec3::X, Vec3::Y), 0.0);
    }
}
