//! Basic geometry types shared by every octocut crate.
//!
//! The project's one vector type is [`Vec3`] (glam's `DVec3`, f64). parry3d speaks the same glam
//! type; conversions to other libraries (nalgebra for dense linear algebra) happen at the call site.

use serde::{Deserialize, Serialize};

/// The project's 3-vector and point type (f64).
pub type Vec3 = glam::DVec3;

/// An axis-aligned box, `min <= max` componentwise for a non-empty box.
///
/// ```
/// use octocut_surface::{Aabb, Vec3};
/// let b = Aabb::new(Vec3::ZERO, Vec3::new(2.0, 1.0, 1.0));
/// assert_eq!(b.volume(), 2.0);
/// assert!(b.contains_point(Vec3::new(1.0, 0.5, 0.5)));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Aabb {
    pub min: Vec3,
    pub max: Vec3,
}

impl Aabb {
    /// A box from its two corners.
    pub fn new(min: Vec3, max: Vec3) -> Self {
        Aabb { min, max }
    }

    /// The empty box: `min = +inf`, `max = -inf`, the identity of [`Aabb::union`].
    pub fn empty() -> Self {
        Aabb {
            min: Vec3::splat(f64::INFINITY),
            max: Vec3::splat(f64::NEG_INFINITY),
        }
    }

    /// The smallest box holding all `points` (empty for none).
    pub fn from_points(points: impl IntoIterator<Item = Vec3>) -> Self {
        let mut b = Aabb::empty();
        for p in points {
            b.grow(p);
        }
        b
    }

    /// Grows the box to hold `p`.
    pub fn grow(&mut self, p: Vec3) {
        self.min = self.min.min(p);
        self.max = self.max.max(p);
    }

    /// The smallest box holding both.
    pub fn union(&self, o: &Aabb) -> Aabb {
        Aabb {
            min: self.min.min(o.min),
            max: self.max.max(o.max),
        }
    }

    /// True when `min > max` on some axis.
    pub fn is_empty(&self) -> bool {
        self.min.x > self.max.x || self.min.y > self.max.y || self.min.z > self.max.z
    }

    pub fn center(&self) -> Vec3 {
        0.5 * (self.min + self.max)
    }

    pub fn extent(&self) -> Vec3 {
        self.max - self.min
    }

    /// Length of the diagonal (0 for an empty box).
    pub fn diagonal(&self) -> f64 {
        if self.is_empty() {
            0.0
        } else {
            self.extent().length()
        }
    }

    pub fn volume(&self) -> f64 {
        if self.is_empty() {
            0.0
        } else {
            let e = self.extent();
            e.x * e.y * e.z
        }
    }

    /// Closed-box containment.
    pub fn contains_point(&self, p: Vec3) -> bool {
        p.cmpge(self.min).all() && p.cmple(self.max).all()
    }

    /// Closed-box overlap (touching boxes overlap).
    pub fn intersects(&self, o: &Aabb) -> bool {
        self.min.cmple(o.max).all() && o.min.cmple(self.max).all()
    }

    /// The box grown by `d` on every side.
    pub fn inflated(&self, d: f64) -> Aabb {
        Aabb {
            min: self.min - Vec3::splat(d),
            max: self.max + Vec3::splat(d),
        }
    }

    /// Squared distance from `p` to the box (0 inside).
    pub fn distance_squared(&self, p: Vec3) -> f64 {
        let q = p.clamp(self.min, self.max);
        (p - q).length_squared()
    }
}
