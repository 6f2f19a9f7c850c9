//! The run report: what was asked (the plan) and what was built, serialisable to `report.json`.

use crate::stages::StageFigures;
use serde::{Deserialize, Serialize};

/// One size request and the octree level it became.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PlannedSize {
    pub request: String,
    pub size: f64,
    pub level: u8,
    pub cell_size: f64,
}

/// What a run will do, known before any refinement.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Plan {
    /// The box actually meshed `[xmin, ymin, zmin, xmax, ymax, zmax]` (grown to whole base cells).
    pub domain_box: [f64; 6],
    pub base_cells: [u32; 3],
    pub base_size: f64,
    pub levels: Vec<PlannedSize>,
    pub estimated_cells: u64,
    pub estimated_memory_bytes: u64,
    pub max_cells: u64,
    pub max_memory_bytes: u64,
}

/// Cell counts of the built mesh.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct CellCounts {
    pub total: u64,
    pub hexahedra: u64,
    pub polyhedra: u64,
    pub cut: u64,
    /// Cells per octree level, index = level.
    pub by_level: Vec<u64>,
    /// Cells per size region (name, count); cells outside every region are not listed.
    pub by_region: Vec<(String, u64)>,
}

/// Per-patch figures.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PatchFigures {
    pub name: String,
    pub kind: String,
    pub faces: u64,
    pub area: f64,
}

/// The full report of a run.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct MeshReport {
    pub octocut_version: String,
    pub surfaces: Vec<String>,
    pub plan: Plan,
    pub leaves: u64,
    pub cells: CellCounts,
    pub faces: u64,
    pub interior_faces: u64,
    pub points: u64,
    pub fluid_volume: f64,
    pub patches: Vec<PatchFigures>,
    /// True when `validate()` found no problem; the problems otherwise.
    pub valid: bool,
    pub validation: serde_json::Value,
    pub quality: serde_json::Value,
    pub cut: serde_json::Value,
    pub surface_health: serde_json::Value,
    pub warnings: Vec<String>,
    pub stages: Vec<StageFigures>,
    pub mesh_bytes: u64,
}
