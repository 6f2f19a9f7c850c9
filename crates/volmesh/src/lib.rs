//! The volume mesh: a conforming, face-based unstructured mesh (points, polygonal faces with
//! owner and neighbour cells, cells with tags), the proof of its validity and its quality figures.
//!
//! The cut-cell stage fills a [`VolumeMesh`]; writers read it.

pub mod mesh;

pub use mesh::{Patch, PatchKind, VolumeMesh, NO_REGION};
