//! Exact orientation predicates behind one small interface.
//!
//! Follows Shewchuk (1997), "Adaptive precision floating-point arithmetic and fast robust
//! geometric predicates", through the `robust` crate. Invariant: the sign returned is the sign of
//! the exact determinant of the f64 inputs, so topology decisions taken from it are consistent.

use crate::geom::Vec3;

/// Sign of the volume of tetrahedron `(a, b, c, d)`: positive when `d` lies on the side of the
/// plane `abc` that `(b - a) x (c - a)` points away from (Shewchuk's convention: positive when `d`
/// is below the plane seen with `a, b, c` counter-clockwise). Returns -1, 0 or 1.
///
/// ```
/// use octocut_surface::{predicates::orient3d, Vec3};
/// let (a, b, c) = (Vec3::ZERO, Vec3::X, Vec3::Y);
/// assert_eq!(orient3d(a, b, c, Vec3::Z), -1);
/// assert_eq!(orient3d(a, b, c, -Vec3::Z), 1);
/// assert_eq!(orient3d(a, b, c, Vec3::new(0.3, 0.3, 0.0)), 0);
/// ```
#[inline]
pub fn orient3d(a: Vec3, b: Vec3, c: Vec3, d: Vec3) -> i32 {
    let v = robust::orient3d(co(a), co(b), co(c), co(d));
    sign(v)
}

/// Sign of the signed area of triangle `(a, b, c)` in the plane: positive counter-clockwise.
#[inline]
pub fn orient2d(a: [f64; 2], b: [f64; 2], c: [f64; 2]) -> i32 {
    let p = |q: [f64; 2]| robust::Coord { x: q[0], y: q[1] };
    sign(robust::orient2d(p(a), p(b), p(c)))
}

#[inline]
fn co(p: Vec3) -> robust::Coord3D<f64> {
    robust::Coord3D {
        x: p.x,
        y: p.y,
        z: p.z,
    }
}

#[inline]
fn sign(v: f64) -> i32 {
    if v > 0.0 {
        1
    } else if v < 0.0 {
        -1
    } else {
        0
    }
}
