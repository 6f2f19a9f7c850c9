//! Closed, outward-oriented triangulations of the primitive solids the demo parts are made of.
//!
//! Method: tensor-product parametrisations (latitude/longitude grids closed by pole fans for
//! superellipsoids, ring strips closed by centre fans for cylinders), as in common practice for
//! tessellating quadrics; superellipsoids follow Barr (1981), "Superquadrics and angle-preserving
//! transformations", IEEE CG&A 1(1), with signed powers of cosines and sines.
//!
//! Invariants: every [`Part`] made here is a closed 2-manifold (each undirected edge in exactly
//! two triangles, used once in each direction) with outward normals, so its signed volume is
//! positive.

use glam::DVec3 as Vec3;

/// A named indexed triangle set (one `solid` of an STL file).
///
/// ```
/// use octocut_demogen::shapes::{cylinder, Part};
/// use glam::DVec3;
/// let c = cylinder(DVec3::ZERO, DVec3::Z, 1.0, 8);
/// assert_eq!(c.triangles.len(), 4 * 8);
/// ```
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Part {
    pub vertices: Vec<Vec3>,
    pub triangles: Vec<[u32; 3]>,
}

impl Part {
    /// Appends `other` (vertex ids shifted).
    pub fn append(&mut self, other: &Part) {
        let v0 = self.vertices.len() as u32;
        self.vertices.extend_from_slice(&other.vertices);
        self.triangles
            .extend(other.triangles.iter().map(|t| t.map(|i| i + v0)));
    }

    /// The corners of triangle `t`.
    pub fn corners(&self, t: usize) -> [Vec3; 3] {
        self.triangles[t].map(|i| self.vertices[i as usize])
    }

    /// Signed enclosed volume by the divergence theorem (sum of signed tetrahedra).
    pub fn signed_volume(&self) -> f64 {
        (0..self.triangles.len())
            .map(|t| {
                let [a, b, c] = self.corners(t);
                a.dot(b.cross(c)) / 6.0
            })
            .sum()
    }

    /// Rounds every coordinate to the nearest `k / steps_per_unit` (an exact division, so the
    /// shortest decimal of the result is short: ASCII output stays small and exact).
    pub fn quantise(&mut self, steps_per_unit: f64) {
        for v in &mut self.vertices {
            *v = (*v * steps_per_unit).round() / steps_per_unit;
        }
    }
}

fn spow(s: f64, e: f64) -> f64 {
    s.signum() * s.abs().powf(e)
}

/// A superellipsoid `|x/a|^(2/e) + |y/b|^(2/e) + |z/c|^(2/e) <= 1`, axes along x, y, z:
/// `exponent = 1` is an ellipsoid, smaller exponents give rounded boxes. `n_u` longitude
/// sectors (>= 3), `n_v` latitude bands (>= 2); longitude 0 lies on the +y side, so the grid
/// seam runs along the +y flank. Triangles: `2 n_u (n_v - 1)`.
pub fn superellipsoid(centre: Vec3, radii: Vec3, exponent: f64, n_u: usize, n_v: usize) -> Part {
    let (n_u, n_v) = (n_u.max(3), n_v.max(2));
    let mut p = Part::default();
    let point = |u: f64, v: f64| {
        let (cu, su) = (u.cos(), u.sin());
        let (cv, sv) = (v.cos(), v.sin());
        // longitude measured from +y: direction (x, y) = (-sin u, cos u)
        let x = radii.x * spow(cv, exponent) * spow(-su, exponent);
        let y = radii.y * spow(cv, exponent) * spow(cu, exponent);
        let z = radii.z * spow(sv, exponent);
        centre + Vec3::new(x, y, z)
    };
    p.vertices.push(centre + Vec3::new(0.0, 0.0, radii.z)); // north pole, id 0
    for i in 1..n_v {
        let v = std::f64::consts::FRAC_PI_2 - std::f64::consts::PI * i as f64 / n_v as f64;
        for j in 0..n_u {
            let u = std::f64::consts::TAU * j as f64 / n_u as f64;
            p.vertices.push(point(u, v));
        }
    }
    let south = p.vertices.len() as u32;
    p.vertices.push(centre - Vec3::new(0.0, 0.0, radii.z));
    let ring = |i: usize, j: usize| (1 + (i - 1) * n_u + j % n_u) as u32;
    // consistent winding over the whole grid; the global sign is fixed by `orient_outward`
    for j in 0..n_u {
        p.triangles.push([0, ring(1, j), ring(1, j + 1)]);
    }
    for i in 1..n_v - 1 {
        for j in 0..n_u {
            let (a, b, c, d) = (
                ring(i, j),
                ring(i, j + 1),
                ring(i + 1, j + 1),
                ring(i + 1, j),
            );
            p.triangles.push([a, d, c]);
            p.triangles.push([a, c, b]);
        }
    }
    for j in 0..n_u {
        p.triangles
            .push([south, ring(n_v - 1, j + 1), ring(n_v - 1, j)]);
    }
    orient_outward(&mut p);
    p
}

/// A closed cylinder (inscribed `n`-gon prism, `n >= 3`) with axis from `a` to `b`, radius `r`;
/// caps are fans around the cap centres. Triangles: `4 n`.
pub fn cylinder(a: Vec3, b: Vec3, r: f64, n: usize) -> Part {
    let n = n.max(3);
    let w = (b - a).normalize();
    let e1 = w.any_orthonormal_vector();
    let e2 = w.cross(e1);
    let mut p = Part::default();
    for base in [a, b] {
        for i in 0..n {
            let t = std::f64::consts::TAU * i as f64 / n as f64;
            p.vertices.push(base + r * (t.cos() * e1 + t.sin() * e2));
        }
    }
    let (ca, cb) = (2 * n as u32, 2 * n as u32 + 1);
    p.vertices.push(a);
    p.vertices.push(b);
    let n32 = n as u32;
    for i in 0..n32 {
        let j = (i + 1) % n32;
        // e1 x e2 = w, so (ring tangent) x w points outward
        p.triangles.push([i, j, n32 + j]);
        p.triangles.push([i, n32 + j, n32 + i]);
        p.triangles.push([ca, j, i]);
        p.triangles.push([cb, n32 + i, n32 + j]);
    }
    orient_outward(&mut p);
    p
}

/// An axis-aligned box as 12 triangles.
pub fn cuboid(min: Vec3, max: Vec3) -> Part {
    let vertices = (0..8)
        .map(|i| {
            Vec3::new(
                if i & 1 == 0 { min.x } else { max.x },
                if i & 2 == 0 { min.y } else { max.y },
                if i & 4 == 0 { min.z } else { max.z },
            )
        })
        .collect();
    let quads = [
        [0, 2, 3, 1],
        [4, 5, 7, 6],
        [0, 1, 5, 4],
        [2, 6, 7, 3],
        [0, 4, 6, 2],
        [1, 3, 7, 5],
    ];
    let triangles = quads
        .iter()
        .flat_map(|q| [[q[0], q[1], q[2]], [q[0], q[2], q[3]]])
        .collect();
    Part {
        vertices,
        triangles,
    }
}

/// Reverses every triangle when the signed volume is negative (the parametrisations above are
/// consistently oriented, so this fixes the global sign only).
fn orient_outward(p: &mut Part) {
    let c = p.vertices.iter().copied().sum::<Vec3>() / p.vertices.len().max(1) as f64;
    let vol: f64 = (0..p.triangles.len())
        .map(|t| {
            let [a, b, d] = p.corners(t);
            (a - c).dot((b - c).cross(d - c))
        })
        .sum();
    if vol < 0.0 {
        for t in &mut p.triangles {
            t.swap(1, 2);
        }
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use std::collections::HashMap;

    /// Every directed edge used once and its reverse once: closed, consistently oriented.
    pub(crate) fn is_closed_oriented(p: &Part) -> bool {
        let mut directed: HashMap<(u32, u32), u32> = HashMap::new();
        for t in &p.triangles {
            for k in 0..3 {
                *directed.entry((t[k], t[(k + 1) % 3])).or_default() += 1;
            }
        }
        directed
            .iter()
            .all(|(&(a, b), &n)| n == 1 && directed.get(&(b, a)) == Some(&1))
    }

    #[test]
    fn cylinder_volume_is_the_inscribed_prism() {
        let (r, h, n) = (0.3, 2.0, 17);
        let c = cylinder(
            Vec3::new(1.0, -2.0, 0.5),
            Vec3::new(
                1.0 + h / 3f64.sqrt(),
                -2.0 + h / 3f64.sqrt(),
                0.5 + h / 3f64.sqrt(),
            ),
            r,
            n,
        );
        assert!(is_closed_oriented(&c));
        // exact: prism over a regular n-gon inscribed in radius r, area (n/2) r^2 sin(2 pi/n)
        let exact = 0.5 * n as f64 * r * r * (std::f64::consts::TAU / n as f64).sin() * h;
        assert!(
            (c.signed_volume() - exact).abs() < 1e-12 * exact.max(1.0),
            "{} vs {exact}",
            c.signed_volume()
        );
    }

    #[test]
    fn ellipsoid_volume_converges_to_four_thirds_pi_abc() {
        let r = Vec3::new(0.13, 0.075, 0.05);
        let e = superellipsoid(Vec3::new(0.2, 0.1, -0.3), r, 1.0, 64, 32);
        assert!(is_closed_oriented(&e));
        assert_eq!(e.triangles.len(), 2 * 64 * 31);
        // exact: ellipsoid volume 4/3 pi a b c; the inscribed polyhedron is slightly smaller
        let exact = 4.0 / 3.0 * std::f64::consts::PI * r.x * r.y * r.z;
        let v = e.signed_volume();
        assert!(v < exact && v > 0.99 * exact, "{v} vs {exact}");
    }

    #[test]
    fn rounded_box_lies_between_ellipsoid_and_box() {
        let r = Vec3::new(0.07, 0.045, 0.028);
        let s = superellipsoid(Vec3::ZERO, r, 0.4, 48, 24);
        assert!(is_closed_oriented(&s));
        let v = s.signed_volume();
        // exact: the ellipsoid (exponent 1) and the circumscribed box 8abc bound it
        assert!(
            v > 4.0 / 3.0 * std::f64::consts::PI * r.x * r.y * r.z && v < 8.0 * r.x * r.y * r.z
        );
    }

    #[test]
    fn cuboid_volume() {
        let b = cuboid(Vec3::new(-1.0, 0.0, 2.0), Vec3::new(2.0, 0.5, 4.0));
        assert!(is_closed_oriented(&b));
        // exact: box volume 3 * 0.5 * 2
        assert!((b.signed_volume() - 3.0).abs() < 1e-12);
    }
}
