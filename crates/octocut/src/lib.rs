//! octocut: from a triangulated surface (STL) to a cut-cell octree volume mesh.
//!
//! This facade wires the stages: surface intake, octree, cut cells, volume mesh, writers.

pub mod hugepage;
pub mod output;
pub mod pipeline;
pub mod report;
pub mod spec;
pub mod stages;

pub use octocut_surface as surface;
pub use spec::{CaseSpec, SpecError};
