//! Size regions: boxes, spheres and finite cylinders with a cell size inside and an optional
//! distance over which the size grows linearly back to the base size.
//!
//! Relation of a cell box to a shape: `inside` when the interiors overlap, else a lower bound
//! `d` on the distance. Box and sphere distances are exact (Ericson 2005, "Real-Time Collision
//! Detection", 5.1.3 point-box distance); the cylinder uses the conservative bound
//! `max(d(centre, cylinder) - half diagonal, d(box, cylinder bounding box))`, since the distance
//! to a convex set is 1-Lipschitz. Invariant: `inside` never misses an overlapping box.

use octocut_surface::{Aabb, Vec3};
use serde::{Deserialize, Serialize};

/// The shape of a size region (model units).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum RegionShape {
    Box {
        min: Vec3,
        max: Vec3,
    },
    Sphere {
        center: Vec3,
        radius: f64,
    },
    /// A finite cylinder with axis from `a` to `b` (flat end caps).
    Cylinder {
        a: Vec3,
        b: Vec3,
        radius: f64,
    },
}

/// A named region where cells are at most `size`.
///
/// ```
/// use octocut_octree::{RegionShape, SizeRegion};
/// use octocut_surface::Vec3;
/// let r = SizeRegion::new("wake", RegionShape::Sphere { center: Vec3::ZERO, radius: 1.0 }, 0.1);
/// assert!(r.shape.contains(Vec3::new(0.5, 0.0, 0.0)));
/// ```
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SizeRegion {
    pub name: String,
    pub shape: RegionShape,
    /// Largest cell edge inside the region.
    pub size: f64,
    /// Distance outside the region over which the size grows linearly to the base size.
    #[serde(default)]
    pub grow_distance: Option<f64>,
}

impl SizeRegion {
    /// A region without grading.
    pub fn new(name: &str, shape: RegionShape, size: f64) -> SizeRegion {
        SizeRegion {
            name: name.to_string(),
            shape,
            size,
            grow_distance: None,
        }
    }

    /// The largest cell edge wanted in `b`, if the region asks for one there.
    pub fn size_for_box(&self, b: &Aabb, base_size: f64) -> Option<f64> {
        let (inside, d) = self.shape.relation(b);
        if inside {
            return Some(self.size);
        }
        match self.grow_distance {
            Some(g) if d < g && g > 0.0 => {
                Some(self.size + (base_size - self.size).max(0.0) * d / g)
            }
            _ => None,
        }
    }

    /// Checks that sizes and the shape are finite and positive.
    pub fn validate(&self) -> Result<(), String> {
        let ok = |v: Vec3| v.is_finite();
        if !(self.size.is_finite() && self.size > 0.0) {
            return Err(format!(
                "region `{}`: size must be positive, got {}",
                self.name, self.size
            ));
        }
        if let Some(g) = self.grow_distance {
            if !(g.is_finite() && g >= 0.0) {
                return Err(format!(
                    "region `{}`: grow distance must be >= 0, got {g}",
                    self.name
                ));
            }
        }
        let good = match &self.shape {
            RegionShape::Box { min, max } => ok(*min) && ok(*max) && min.cmplt(*max).all(),
            RegionShape::Sphere { center, radius } => {
                ok(*center) && radius.is_finite() && *radius > 0.0
            }
            RegionShape::Cylinder { a, b, radius } => {
                ok(*a) && ok(*b) && (*b - *a).length() > 0.0 && radius.is_finite() && *radius > 0.0
            }
        };
        if good {
            Ok(())
        } else {
            Err(format!(
                "region `{}`: degenerate or non-finite shape",
                self.name
            ))
        }
    }
}

impl RegionShape {
    /// True when `p` lies in the closed shape.
    pub fn contains(&self, p: Vec3) -> bool {
        match self {
            RegionShape::Box { min, max } => Aabb::new(*min, *max).contains_point(p),
            RegionShape::Sphere { center, radius } => {
                (p - *center).length_squared() <= radius * radius
            }
            RegionShape::Cylinder { a, b, radius } => cylinder_distance(p, *a, *b, *radius) <= 0.0,
        }
    }

    /// The shape's bounding box.
    pub fn bounds(&self) -> Aabb {
        match self {
            RegionShape::Box { min, max } => Aabb::new(*min, *max),
            RegionShape::Sphere { center, radius } => Aabb::new(*center, *center).inflated(*radius),
            RegionShape::Cylinder { a, b, radius } => cylinder_bounds(*a, *b, *radius),
        }
    }

    /// `(inside, d)`: `inside` when the box interior may overlap the shape's interior, else `d`
    /// is a lower bound on the distance from the box to the shape.
    pub fn relation(&self, bx: &Aabb) -> (bool, f64) {
        match self {
            RegionShape::Box { min, max } => {
                let inside = bx.min.cmplt(*max).all() && min.cmplt(bx.max).all();
                (inside, box_box_distance(bx, &Aabb::new(*min, *max)))
            }
            RegionShape::Sphere { center, radius } => {
                let d = bx.distance_squared(*center).sqrt();
                (d < *radius, (d - radius).max(0.0))
            }
            RegionShape::Cylinder { a, b, radius } => {
                let half = 0.5 * bx.diagonal();
                let dc = cylinder_distance(bx.center(), *a, *b, *radius);
                let lower =
                    (dc - half).max(box_box_distance(bx, &cylinder_bounds(*a, *b, *radius)));
                if lower > 0.0 {
                    (false, lower)
                } else {
                    (true, 0.0)
                }
            }
        }
    }
}

fn box_box_distance(p: &Aabb, q: &Aabb) -> f64 {
    let gap = (q.min - p.max).max(p.min - q.max).max(Vec3::ZERO);
    gap.length()
}

/// Signed-ish distance from `p` to the solid cylinder (0 inside).
fn cylinder_distance(p: Vec3, a: Vec3, b: Vec3, r: f64) -> f64 {
    let axis = b - a;
    let len = axis.length();
    let u = axis / len;
    let t = (p - a).dot(u);
    let radial = ((p - a) - t * u).length();
    let dr = (radial - r).max(0.0);
    let dt = if t < 0.0 {
        -t
    } else if t > len {
        t - len
    } else {
        0.0
    };
    (dr * dr + dt * dt).sqrt()
}

fn cylinder_bounds(a: Vec3, b: Vec3, r: f64) -> Aabb {
    let u = (b - a).normalize();
    // the end discs reach r * sqrt(1 - u_i^2) along axis i
    let e = Vec3::new(
        (1.0 - u.x * u.x).max(0.0).sqrt(),
        (1.0 - u.y * u.y).max(0.0).sqrt(),
        (1.0 - u.z * u.z).max(0.0).sqrt(),
    ) * r;
    Aabb::new(a.min(b) - e, a.max(b) + e)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sphere_relation_is_exact_distance() {
        let s = RegionShape::Sphere {
            center: Vec3::ZERO,
            radius: 1.0,
        };
        // exact: the box [2,3]x[0,1]x[0,1] is 2 from the centre, 1 from the sphere
        let (inside, d) = s.relation(&Aabb::new(
            Vec3::new(2.0, 0.0, 0.0),
            Vec3::new(3.0, 1.0, 1.0),
        ));
        assert!(!inside);
        assert!((d - 1.0).abs() < 1e-15);
        assert!(s.relation(&Aabb::new(Vec3::splat(0.5), Vec3::splat(0.6))).0);
    }

    #[test]
    fn cylinder_bound_never_misses_an_overlap() {
        let c = RegionShape::Cylinder {
            a: Vec3::ZERO,
            b: Vec3::new(1.0, 1.0, 0.0),
            radius: 0.2,
        };
        // boxes around points of the axis must be inside
        for i in 0..=10 {
            let p = Vec3::new(0.1 * i as f64, 0.1 * i as f64, 0.0);
            assert!(c.relation(&Aabb::new(p, p).inflated(1e-3)).0);
            assert!(c.contains(p));
        }
        // exact: a point 1 unit past the cap along the axis is 1 away
        let far = Vec3::new(1.0, 1.0, 0.0) + Vec3::new(1.0, 1.0, 0.0).normalize();
        assert!(
            (cylinder_distance(far, Vec3::ZERO, Vec3::new(1.0, 1.0, 0.0), 0.2) - 1.0).abs() < 1e-12
        );
        let (inside, d) = c.relation(&Aabb::new(far, far).inflated(1e-3));
        assert!(!inside && d <= 1.0);
    }

    #[test]
    fn grading_grows_linearly_to_base_size() {
        let mut r = SizeRegion::new(
            "b",
            RegionShape::Box {
                min: Vec3::ZERO,
                max: Vec3::ONE,
            },
            0.1,
        );
        r.grow_distance = Some(1.0);
        // box 0.5 away along x: size 0.1 + (1 - 0.1) * 0.5
        let b = Aabb::new(Vec3::new(1.5, 0.0, 0.0), Vec3::new(1.6, 0.1, 0.1));
        assert!((r.size_for_box(&b, 1.0).unwrap() - 0.55).abs() < 1e-12);
        let far = Aabb::new(Vec3::new(2.5, 0.0, 0.0), Vec3::new(2.6, 0.1, 0.1));
        assert_eq!(r.size_for_box(&far, 1.0), None);
        // touching only is not inside
        let touch = Aabb::new(Vec3::new(1.0, 0.0, 0.0), Vec3::new(1.1, 0.1, 0.1));
        assert!(!r.shape.relation(&touch).0);
    }
}
