//! Storage of the face-based volume mesh.
//!
//! Invariants (proved by the validation module): faces `0..n_interior` are interior, each with an
//! owner and a neighbour cell; boundary faces follow, grouped into [`Patch`]es in patch order;
//! every face's vertices run counter-clockwise seen from outside its owner (its area vector points
//! out of the owner, into the neighbour).

use octocut_surface::Vec3;
use serde::{Deserialize, Serialize};

/// Region tag of a cell lying in no size region.
pub const NO_REGION: u16 = u16::MAX;

/// What a boundary patch lies on.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum PatchKind {
    /// The body surface: faces lying on triangles of surface tag `tag`.
    Wall { tag: u32 },
    /// A side of the domain box: 0 xmin, 1 xmax, 2 ymin, 3 ymax, 4 zmin, 5 zmax.
    Side { side: u8 },
}

/// A named, contiguous range of boundary faces.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Patch {
    pub name: String,
    pub kind: PatchKind,
    /// First face of the patch.
    pub start: u32,
    /// Number of faces.
    pub count: u32,
}

/// A face-based volume mesh.
#[derive(Clone, Debug, Default, Serialize, Deserialize)]
pub struct VolumeMesh {
    pub points: Vec<Vec3>,
    /// CSR offsets into `face_vertices`, one more than the number of faces.
    pub face_offsets: Vec<u32>,
    pub face_vertices: Vec<u32>,
    /// Owner cell of every face.
    pub owner: Vec<u32>,
    /// Neighbour cell of every interior face (`neighbour.len()` is the number of interior faces).
    pub neighbour: Vec<u32>,
    /// Boundary faces grouped by tag, in face order after the interior faces.
    pub patches: Vec<Patch>,
    /// Octree level of each cell (of the leaf it came from; the coarsest of merged leaves).
    pub cell_level: Vec<u8>,
    /// 1 for a cell clipped by the surface, else 0.
    pub cell_cut: Vec<u8>,
    /// Size-region tag of each cell, or [`NO_REGION`].
    pub cell_region: Vec<u16>,
    /// Names of the size regions, indexed by region tag.
    pub region_names: Vec<String>,
}

impl VolumeMesh {
    pub fn n_cells(&self) -> usize {
        self.cell_level.len()
    }

    pub fn n_faces(&self) -> usize {
        self.owner.len()
    }

    pub fn n_interior_faces(&self) -> usize {
        self.neighbour.len()
    }

    /// The vertex ids of face `f`.
    #[inline]
    pub fn face(&self, f: usize) -> &[u32] {
        &self.face_vertices[self.face_offsets[f] as usize..self.face_offsets[f + 1] as usize]
    }
}
