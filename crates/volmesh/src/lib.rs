//! The volume mesh: a conforming, face-based unstructured mesh (points, polygonal faces with
//! owner and neighbour cells, cells with tags), the proof of its validity and its quality figures.
//!
//! The cut-cell stage fills a [`VolumeMesh`]; writers read it.
//!
//! - [`mesh`]: storage ([`VolumeMesh`], [`Patch`]).
//! - [`geometry`]: face area vectors and centroids, cell volumes and centroids, cell -> faces.
//! - [`validation`]: [`VolumeMesh::validate`], the validity proof as a [`ValidationReport`].
//! - [`quality`]: non-orthogonality, skewness, volume ratio, cut fraction, aspect ratio.
//! - [`testmesh`]: hand-made good and broken meshes for tests and benchmarks.

pub mod geometry;
pub mod mesh;
pub mod quality;
pub mod testmesh;
pub mod validation;

pub use mesh::{Patch, PatchKind, VolumeMesh, NO_REGION};

pub use quality::{quality, quality_with, QualityReport};
pub use validation::{Problem, ValidationReport};
