//! The pipeline: load a surface once, then mesh it with any number of case specifications.
//!
//! Stages run in order (surface intake, octree refinement and balance, cut cells and assembly,
//! validation, quality); each records its time and peak memory. A mesh is returned only after
//! `VolumeMesh::validate` proved it: a failed validation is an internal error naming the cells.

use crate::report::{MeshReport, Plan};
use crate::spec::{CaseSpec, FluidSpec, RegionShapeSpec};
use crate::stages::{Hooks, Stage, StageClock};
use octocut_octree::{Domain, RefineSpec, RegionShape, SizeRegion, SurfaceRule, TagSel};
use octocut_surface::{HealthReport, RepairOptions, Surface, SurfaceIndex, Vec3};
use octocut_volmesh::VolumeMesh;
use std::path::PathBuf;

/// Why a run stopped.
#[derive(Debug, thiserror::Error)]
pub enum MeshError {
    /// Bad input or configuration (exit code 2 in the CLI).
    #[error(transparent)]
    Spec(#[from] crate::spec::SpecError),
    #[error(transparent)]
    Surface(#[from] octocut_surface::SurfaceError),
    #[error("bad configuration: {0}")]
    Config(String),
    /// A limit refused the run before it started (exit code 3).
    #[error("refused: {0}")]
    Limit(String),
    #[error("cancelled")]
    Cancelled,
    /// A bug: the stages produced something invalid (exit code 1).
    #[error("internal error (this is a bug, please report it with the case): {0}")]
    Internal(String),
    #[error("writing {path}: {message}")]
    Write { path: PathBuf, message: String },
}

impl MeshError {
    /// The CLI exit code for this error: 2 bad input, 3 refused by a limit, 1 internal.
    pub fn exit_code(&self) -> u8 {
        match self {
            MeshError::Spec(_) | MeshError::Surface(_) | MeshError::Config(_) => 2,
            MeshError::Limit(_) => 3,
            MeshError::Cancelled | MeshError::Internal(_) | MeshError::Write { .. } => 1,
        }
    }
}

/// A loaded, repaired and indexed surface, ready to mesh many times.
pub struct Mesher {
    index: SurfaceIndex,
    health: HealthReport,
    files: Vec<PathBuf>,
    load_seconds: f64,
}

/// A finished run: the validated mesh and what was asked and built.
pub struct Outcome {
    pub mesh: VolumeMesh,
    pub report: MeshReport,
}
