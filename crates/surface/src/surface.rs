//! The tagged triangle surface: shared vertices, index triples and one surface tag per triangle.
//!
//! Invariants (checked by [`Surface::check`]): every index is below `vertices.len()`, `tags` has
//! one entry per triangle, and every tag is below `tag_names.len()`.

use crate::geom::{Aabb, Vec3};
use serde::{Deserialize, Serialize};

/// Id of a surface tag (a named part: one ASCII `solid` block or one unnamed file).
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[repr(transparent)]
pub struct TagId(pub u32);

/// A triangle surface with one tag per triangle.
///
/// ```
/// use octocut_surface::Surface;
/// let s = Surface::unit_cube();
/// assert_eq!(s.triangles.len(), 12);
/// assert!((s.enclosed_volume() - 1.0).abs() < 1e-12);
/// ```
#[derive(Clone, Debug, Default, Serialize, Deserialize)]
pub struct Surface {
    pub vertices: Vec<Vec3>,
    pub triangles: Vec<[u32; 3]>,
    /// One tag per triangle.
    pub tags: Vec<TagId>,
    /// Name of each tag, indexed by `TagId.0`.
    pub tag_names: Vec<String>,
}

impl Surface {
    /// The three corners of triangle `t`.
    #[inline]
    pub fn corners(&self, t: usize) -> [Vec3; 3] {
        let [a, b, c] = self.triangles[t];
        [
            self.vertices[a as usize],
            self.vertices[b as usize],
            self.vertices[c as usize],
        ]
    }

    /// Area-weighted normal (cross product of two edges, length twice the area).
    #[inline]
    pub fn area_normal(&self, t: usize) -> Vec3 {
        let [a, b, c] = self.corners(t);
        (b - a).cross(c - a)
    }

    /// Bounding box of all referenced vertices.
    pub fn bounding_box(&self) -> Aabb {
        Aabb::from_points(
            self.triangles
                .iter()
                .flatten()
                .map(|&i| self.vertices[i as usize]),
        )
    }

    /// Signed enclosed volume by the divergence theorem (sum of signed tetrahedra to the origin).
    /// Positive for a closed outward-oriented surface.
    pub fn enclosed_volume(&self) -> f64 {
        let c = self.bounding_box().center();
        (0..self.triangles.len())
            .map(|t| {
                let [a, b, d] = self.corners(t);
                (a - c).dot((b - c).cross(d - c)) / 6.0
            })
            .sum()
    }

    /// Total surface area.
    pub fn area(&self) -> f64 {
        (0..self.triangles.len())
            .map(|t| 0.5 * self.area_normal(t).length())
            .sum()
    }

    /// Appends `other`, keeping its tags distinct (its tag ids are shifted past ours).
    pub fn append(&mut self, other: Surface) {
        let v0 = self.vertices.len() as u32;
        let t0 = self.tag_names.len() as u32;
        self.vertices.extend(other.vertices);
        self.triangles
            .extend(other.triangles.into_iter().map(|t| t.map(|i| i + v0)));
        self.tags
            .extend(other.tags.into_iter().map(|t| TagId(t.0 + t0)));
        self.tag_names.extend(other.tag_names);
    }

    /// Checks the structural invariants, returning a description of the first violation.
    pub fn check(&self) -> Result<(), String> {
        if self.tags.len() != self.triangles.len() {
            return Err(format!(
                "{} tags for {} triangles",
                self.tags.len(),
                self.triangles.len()
            ));
        }
        let n = self.vertices.len() as u32;
        for (t, tri) in self.triangles.iter().enumerate() {
            if tri.iter().any(|&i| i >= n) {
                return Err(format!("triangle {t} indexes past {n} vertices"));
            }
        }
        if let Some((t, tag)) = self
            .tags
            .iter()
            .enumerate()
            .find(|(_, g)| g.0 as usize >= self.tag_names.len())
        {
            return Err(format!(
                "triangle {t} has tag {} of {}",
                tag.0,
                self.tag_names.len()
            ));
        }
        Ok(())
    }

    /// A triangle soup (three fresh vertices a triangle) under one tag; repair welds it.
    pub fn from_soup(triangles: &[[Vec3; 3]], tag_name: &str) -> Surface {
        Surface {
            vertices: triangles.iter().flatten().copied().collect(),
            triangles: (0..triangles.len() as u32)
                .map(|t| [3 * t, 3 * t + 1, 3 * t + 2])
                .collect(),
            tags: vec![TagId(0); triangles.len()],
            tag_names: vec![tag_name.to_string()],
        }
    }

    /// The cube `[0,1]^3` as 12 outward triangles, tag `cube` (for examples and tests).
    pub fn unit_cube() -> Surface {
        let v: Vec<Vec3> = (0..8)
            .map(|i| Vec3::new((i & 1) as f64, ((i >> 1) & 1) as f64, ((i >> 2) & 1) as f64))
            .collect();
        let quads = [
            [0, 2, 3, 1], // z = 0, normal -z
            [4, 5, 7, 6], // z = 1
            [0, 1, 5, 4], // y = 0
            [2, 6, 7, 3], // y = 1
            [0, 4, 6, 2], // x = 0
            [1, 3, 7, 5], // x = 1
        ];
        let triangles = quads
            .iter()
            .flat_map(|q| [[q[0], q[1], q[2]], [q[0], q[2], q[3]]])
            .collect();
        Surface {
            vertices: v,
            triangles,
            tags: vec![TagId(0); 12],
            tag_names: vec!["cube".into()],
        }
    }

    /// A UV sphere: `rings >= 2` latitude bands, `segments >= 3` longitudes, one vertex at each
    /// pole; closed, manifold and outward, tag `sphere` (for tests and benchmarks).
    ///
    /// ```
    /// use octocut_surface::{Surface, Vec3};
    /// let s = Surface::uv_sphere(Vec3::ZERO, 1.0, 8, 16);
    /// assert_eq!(s.triangles.len(), 2 * 16 * (8 - 1));
    /// assert!(s.enclosed_volume() > 0.0);
    /// ```
    pub fn uv_sphere(center: Vec3, radius: f64, rings: u32, segments: u32) -> Surface {
        crate::shapes::uv_sphere(center, radius, segments, rings, "sphere")
    }

    /// A torus around the z axis, tube centre radius `major`, tube radius `minor`, with
    /// `nu x nv` quads split in two; closed, manifold and outward, tag `torus`.
    ///
    /// ```
    /// use octocut_surface::Surface;
    /// let t = Surface::torus(2.0, 0.5, 24, 12);
    /// assert_eq!(t.triangles.len(), 2 * 24 * 12);
    /// assert!(t.enclosed_volume() > 0.0);
    /// ```
    pub fn torus(major: f64, minor: f64, nu: u32, nv: u32) -> Surface {
        crate::shapes::torus(Vec3::ZERO, major, minor, nu, nv, "torus")
    }

    /// The same triangles with three fresh vertices each (what an STL file holds).
    pub fn to_soup(&self) -> Surface {
        let tris: Vec<[Vec3; 3]> = (0..self.triangles.len()).map(|t| self.corners(t)).collect();
        let mut s = Surface::from_soup(&tris, "");
        s.tags = self.tags.clone();
        s.tag_names = self.tag_names.clone();
        s
    }
}
