//! The pipeline: load a surface once, then mesh it with any number of case specifications.
//!
//! Stages run in order (octree refinement and balance, cut cells and assembly, validation,
//! quality); each records its time and peak memory. A mesh is returned only after
//! `VolumeMesh::validate` proved it: a failed validation is an internal error naming the cells.

use crate::report::{CellCounts, MeshReport, PatchFigures, Plan, PlannedSize};
use crate::spec::{CaseSpec, FluidSpec, RegionShapeSpec};
use crate::stages::{Hooks, Stage, StageClock, StageFigures};
use octocut_cutcell::{cut_cells_with_regions, CutOptions, FluidSide};
use octocut_octree::{
    estimate::DRY_RUN_LEAVES, estimate_kept, leaf_regions, refine, Domain, GapSpec, LevelPlan,
    OctreeError, RefineSpec, RegionShape, SizeRegion, SurfaceRule, TagSel,
};
use octocut_surface::{
    health, load_stl_files, repair, HealthReport, RepairOptions, Surface, SurfaceIndex, Vec3,
};
use octocut_volmesh::{quality_with, PatchKind, QualityReport, VolumeMesh, NO_REGION};
use std::path::PathBuf;
use std::time::Instant;

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
    #[error("cancelled by the caller")]
    Cancelled,
    /// A bug: the stages produced something invalid (exit code 1).
    #[error("internal error, this is a bug (please report it with the case): {0}")]
    Internal(String),
    #[error("cannot write {path}: {message}")]
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

/// A loaded, repaired and indexed surface, ready to mesh many times: the BVH and the winding
/// tree are built once here and shared by every [`Mesher::mesh`] call.
pub struct Mesher {
    index: SurfaceIndex,
    health: HealthReport,
    files: Vec<String>,
    load_seconds: f64,
    /// Peak resident memory of the process up to the end of loading, bytes.
    load_peak: u64,
}

/// A finished run: the validated mesh, its quality and the report.
pub struct Outcome {
    pub mesh: VolumeMesh,
    pub quality: QualityReport,
    pub report: MeshReport,
    /// The domain actually meshed.
    pub domain: Domain,
    /// Bounding box of the surface.
    pub bodies: octocut_surface::Aabb,
}

impl Mesher {
    /// Loads, repairs and indexes the surface files of `spec`.
    pub fn load(spec: &CaseSpec) -> Result<Mesher, MeshError> {
        let paths = spec.surface_paths();
        if paths.is_empty() {
            return Err(MeshError::Config(
                "no surface files given (surfaces.files or --surface)".into(),
            ));
        }
        let t0 = Instant::now();
        let surface = load_stl_files(&paths)?;
        let mut opts = RepairOptions::default();
        if let Some(w) = spec.surfaces.weld_tolerance {
            opts.weld_tolerance = w;
        }
        let mut m = Mesher::from_surface(surface, &opts);
        m.files = paths.iter().map(|p| p.display().to_string()).collect();
        m.load_seconds = t0.elapsed().as_secs_f64();
        m.load_peak = crate::stages::peak_memory_bytes();
        Ok(m)
    }

    /// Repairs and indexes a surface already in memory.
    ///
    /// ```
    /// use octocut::pipeline::Mesher;
    /// use octocut_surface::{RepairOptions, Surface};
    /// let m = Mesher::from_surface(Surface::unit_cube(), &RepairOptions::default());
    /// assert!(m.health().is_watertight());
    /// ```
    pub fn from_surface(mut surface: Surface, opts: &RepairOptions) -> Mesher {
        let t0 = Instant::now();
        let rep = repair(&mut surface, opts);
        let health = health(&surface, &rep);
        let index = SurfaceIndex::new(surface);
        Mesher {
            index,
            health,
            files: Vec::new(),
            load_seconds: t0.elapsed().as_secs_f64(),
            load_peak: crate::stages::peak_memory_bytes(),
        }
    }

    pub fn index(&self) -> &SurfaceIndex {
        &self.index
    }

    pub fn health(&self) -> &HealthReport {
        &self.health
    }

    /// One line about the loaded surface.
    pub fn load_summary(&self) -> String {
        let h = &self.health;
        format!(
            "surface: {} triangles, {} tags, {} components ({} closed), {} open edges, {} intersecting pairs; repaired: {} welded vertices, {} re-oriented, {} duplicates, {} degenerates ({:.2} s)",
            h.triangles,
            self.index.surface().tag_names.len(),
            h.components,
            h.closed_component_count,
            h.open_edges,
            h.intersecting_pairs,
            h.vertices_welded,
            h.reoriented,
            h.duplicates_removed,
            h.degenerates_removed,
            self.load_seconds
        )
    }

    fn domain(&self, spec: &CaseSpec) -> Result<Domain, MeshError> {
        let bodies = self.index.surface().bounding_box();
        let requested = spec.requested_box(&bodies);
        let mut d = Domain::new(requested, spec.domain.base_size)
            .map_err(|e| MeshError::Config(e.to_string()))?;
        if let crate::spec::BoxPlacement::Around(a) = &spec.domain.placement {
            if a.floor {
                // the floor stays at the bodies' lowest point: grow the box upward only
                d.origin.z = requested.min.z;
            }
        }
        Ok(d)
    }

    /// The refinement settings `spec` asks for.
    pub fn refine_spec(&self, spec: &CaseSpec) -> RefineSpec {
        let s = &spec.surfaces;
        let mut r = RefineSpec::default();
        r.surface.push(SurfaceRule {
            tag: TagSel::All,
            size: s.size,
            finest_size: s.finest_size,
        });
        for (name, size) in &s.sizes {
            let finest = s.finest_size.map(|f| f.min(*size));
            r.surface.push(SurfaceRule {
                tag: TagSel::Name(name.clone()),
                size: *size,
                finest_size: finest,
            });
        }
        r.feature_angle_deg = s.finest_size.map(|_| s.feature_angle);
        r.gap = spec.gaps.as_ref().map(|g| GapSpec {
            cells: g.cells,
            finest_size: g.finest_size,
            max_width: None,
        });
        r.regions = spec
            .regions
            .iter()
            .map(|g| {
                let v = |a: [f64; 3]| Vec3::from_array(a);
                let shape = match &g.shape {
                    RegionShapeSpec::Box { min, max } => RegionShape::Box {
                        min: v(*min),
                        max: v(*max),
                    },
                    RegionShapeSpec::Sphere { center, radius } => RegionShape::Sphere {
                        center: v(*center),
                        radius: *radius,
                    },
                    RegionShapeSpec::Cylinder { a, b, radius } => RegionShape::Cylinder {
                        a: v(*a),
                        b: v(*b),
                        radius: *radius,
                    },
                };
                SizeRegion {
                    name: g.name.clone(),
                    shape,
                    size: g.size,
                    grow_distance: g.grow,
                }
            })
            .collect();
        r.transition_layers = spec.transition_layers;
        r.max_leaves = Some(spec.limits.max_cells.saturating_mul(2));
        r
    }

    /// What a run of `spec` will build: the box, the levels and the estimated size.
    pub fn plan(&self, spec: &CaseSpec) -> Result<Plan, MeshError> {
        let domain = self.domain(spec)?;
        let rspec = self.refine_spec(spec);
        let levels = LevelPlan::new(&domain, self.index.surface(), &rspec).map_err(octree_error)?;
        let mut rspec_est = rspec.clone();
        rspec_est.max_leaves = None;
        // A leaf becomes a cell when its centre is on the fluid side: a cut leaf whose centre is
        // solid holds mostly solid and its fluid part is merged into a neighbour (fraction 1/2).
        let fluid_inside = matches!(spec.fluid, FluidSpec::Inside);
        let index = &self.index;
        let keep = |b: &octocut_surface::Aabb| index.is_inside(b.center()) == fluid_inside;
        let est = estimate_kept(&domain, index, &rspec_est, DRY_RUN_LEAVES, Some(&keep))
            .map_err(octree_error)?;
        let b = domain.bounds();
        Ok(Plan {
            domain_box: [b.min.x, b.min.y, b.min.z, b.max.x, b.max.y, b.max.z],
            base_cells: domain.counts,
            base_size: domain.base_size,
            levels: levels
                .entries
                .iter()
                .map(|e| PlannedSize {
                    request: e.request.clone(),
                    size: e.size,
                    level: e.level,
                    cell_size: e.cell_size,
                })
                .collect(),
            estimated_leaves: est.leaves,
            estimated_cells: (est.leaves as f64 * est.kept_fraction).ceil() as u64,
            // the whole process: measured peak RSS of 293, 247, 239 and 260 bytes a planned
            // leaf at 0.91M, 3.57M, 14.0M and 54.7M planned leaves (the sphere case of
            // benches/README.md, "Plan against the run"; the leaf estimate is 1-8% low there);
            // 300 a leaf plus 64 MiB is 16-29% above those peaks
            estimated_memory_bytes: est
                .memory_bytes
                .max((64 << 20) + est.leaves.saturating_mul(300)),
            max_cells: spec.limits.max_cells,
            max_memory_bytes: spec.limits.max_memory_bytes,
        })
    }

    /// Refuses a plan that exceeds the case's limits.
    pub fn check_limits(&self, plan: &Plan) -> Result<(), MeshError> {
        if plan.estimated_cells > plan.max_cells {
            return Err(MeshError::Limit(format!(
                "the mesh would have about {} cells, above the limit of {} (limits.max_cells): use larger sizes or raise the limit",
                plan.estimated_cells, plan.max_cells
            )));
        }
        if plan.estimated_memory_bytes > plan.max_memory_bytes {
            return Err(MeshError::Limit(format!(
                "the run would need about {:.1} GiB, above the limit of {:.1} GiB (limits.max_memory_gb): use larger sizes or raise the limit",
                plan.estimated_memory_bytes as f64 / (1u64 << 30) as f64,
                plan.max_memory_bytes as f64 / (1u64 << 30) as f64
            )));
        }
        Ok(())
    }

    fn fluid_side(&self, spec: &CaseSpec, domain: &Domain) -> Result<FluidSide, MeshError> {
        Ok(match &spec.fluid {
            FluidSpec::Outside => FluidSide::Outside,
            FluidSpec::Inside => FluidSide::Inside,
            FluidSpec::Point(p, span) => {
                let p = Vec3::from_array(*p);
                if !domain.bounds().contains_point(p) {
                    return Err(crate::spec::SpecError {
                        pos: spec.pos_of(span.as_ref()),
                        message: format!("fluid.point {p:?} lies outside the domain box"),
                    }
                    .into());
                }
                let w = self.index.winding_number(p);
                if w >= 0.5 {
                    return Err(crate::spec::SpecError {
                        pos: spec.pos_of(span.as_ref()),
                        message: format!("fluid.point {p:?} lies inside the body (winding number {w:.3}); give a point in the fluid"),
                    }
                    .into());
                }
                FluidSide::Point(p)
            }
        })
    }

    /// Meshes the loaded surface by `spec` (its surface files are not read again).
    ///
    /// # Errors
    /// Configuration problems, a refused limit, cancellation through `hooks`, or an internal
    /// error when the built mesh fails validation.
    pub fn mesh(&self, spec: &CaseSpec, hooks: &Hooks) -> Result<Outcome, MeshError> {
        let plan = self.plan(spec)?;
        self.mesh_planned(spec, plan, hooks)
    }

    /// As [`Mesher::mesh`], with the plan of `spec` already made by [`Mesher::plan`] (a caller
    /// that prints the plan first does not pay for the estimate twice). `plan` must be the plan
    /// of `spec`; one that visibly belongs to another case (another box, base grid or limits)
    /// is made again.
    ///
    /// # Errors
    /// As [`Mesher::mesh`].
    pub fn mesh_planned(
        &self,
        spec: &CaseSpec,
        plan: Plan,
        hooks: &Hooks,
    ) -> Result<Outcome, MeshError> {
        let domain = self.domain(spec)?;
        let fluid = self.fluid_side(spec, &domain)?;
        let b = domain.bounds();
        let fits = plan.domain_box == [b.min.x, b.min.y, b.min.z, b.max.x, b.max.y, b.max.z]
            && plan.base_cells == domain.counts
            && plan.max_cells == spec.limits.max_cells
            && plan.max_memory_bytes == spec.limits.max_memory_bytes;
        let plan = if fits { plan } else { self.plan(spec)? };
        self.check_limits(&plan)?;
        let rspec = self.refine_spec(spec);
        let mut clock = StageClock::default();
        let check = || {
            if hooks.cancelled() {
                Err(MeshError::Cancelled)
            } else {
                Ok(())
            }
        };

        check()?;
        let refined = clock.run(hooks, Stage::Refine, "leaves", || {
            // refinement runs faster and smaller without huge pages (benches/README.md)
            let _plain = crate::hugepage::AdvicePaused::new();
            let r = refine(&domain, &self.index, &rspec).map_err(octree_error)?;
            let n = r.tree.leaves().len() as u64;
            Ok::<_, MeshError>((r, n))
        })?;
        check()?;
        let opts = CutOptions {
            fluid,
            small_cell_fraction: spec.small_cell_fraction,
            feature_angle_deg: spec.surfaces.feature_angle,
            pierce_points: true,
            side_names: spec.side_names.clone(),
        };
        let cut = clock.run(hooks, Stage::Cut, "cells", || {
            // no per-leaf array without size regions (2 bytes a leaf through the cut stage)
            let regions: Option<Vec<u16>> = (!rspec.regions.is_empty()).then(|| {
                leaf_regions(&refined.tree, &rspec.regions)
                    .into_iter()
                    .map(|r| r.unwrap_or(NO_REGION))
                    .collect()
            });
            let mut out =
                cut_cells_with_regions(&refined.tree, &self.index, &opts, regions.as_deref())
                    .map_err(|e| match e {
                        octocut_cutcell::CutError::PointNotInFluid(_)
                        | octocut_cutcell::CutError::PointOutsideDomain(_) => {
                            MeshError::Config(e.to_string())
                        }
                        other => MeshError::Internal(other.to_string()),
                    })?;
            out.mesh.region_names = rspec.regions.iter().map(|r| r.name.clone()).collect();
            let n = out.mesh.n_cells() as u64;
            Ok::<_, MeshError>((out, n))
        })?;
        let leaves = refined.tree.leaves().len() as u64;
        drop(refined);
        release_free_memory();
        check()?;
        let mesh = cut.mesh;
        // the cell geometry the proof computes (cell -> faces, volumes, centroids) goes on to
        // quality instead of being computed again
        let (validation, geometry) = clock.run(hooks, Stage::Validate, "cells", || {
            let (v, g) = mesh.validate_keeping_geometry();
            release_free_memory();
            let n = v.n_cells as u64;
            Ok::<_, MeshError>(((v, g), n))
        })?;
        if !validation.is_valid() {
            let first: Vec<String> = validation
                .problems
                .iter()
                .take(5)
                .map(|p| format!("{p:?}"))
                .collect();
            return Err(MeshError::Internal(format!(
                "the built mesh failed validation with {} problem(s); first: {}",
                validation.problems.len(),
                first.join("; ")
            )));
        }
        check()?;
        let geometry = geometry.ok_or_else(|| {
            MeshError::Internal("validation kept no cell geometry of a valid mesh".into())
        })?;
        let q = clock.run(hooks, Stage::Quality, "faces", || {
            let q = quality_with(&mesh, geometry, |l| domain.cell_size(l));
            release_free_memory();
            Ok::<_, MeshError>((q, mesh.n_faces() as u64))
        })?;

        let report = self.report(
            spec,
            plan,
            leaves,
            &mesh,
            &validation,
            &q,
            &cut.report,
            clock,
        );
        Ok(Outcome {
            mesh,
            quality: q,
            report,
            domain,
            bodies: self.index.surface().bounding_box(),
        })
    }

    #[allow(clippy::too_many_arguments)]
    fn report(
        &self,
        _spec: &CaseSpec,
        plan: Plan,
        leaves: u64,
        mesh: &VolumeMesh,
        validation: &octocut_volmesh::ValidationReport,
        q: &QualityReport,
        cut: &octocut_cutcell::CutReport,
        clock: StageClock,
    ) -> MeshReport {
        let mut cells = CellCounts {
            total: mesh.n_cells() as u64,
            ..Default::default()
        };
        cells.hexahedra = crate::report::count_hexahedra(mesh);
        cells.polyhedra = cells.total - cells.hexahedra;
        cells.cut = mesh.cell_cut.iter().filter(|&&c| c != 0).count() as u64;
        for &l in &mesh.cell_level {
            if cells.by_level.len() <= l as usize {
                cells.by_level.resize(l as usize + 1, 0);
            }
            cells.by_level[l as usize] += 1;
        }
        for (i, name) in mesh.region_names.iter().enumerate() {
            let n = mesh
                .cell_region
                .iter()
                .filter(|&&r| r as usize == i)
                .count() as u64;
            cells.by_region.push((name.clone(), n));
        }
        let patches = mesh
            .patches
            .iter()
            .zip(&validation.patch_areas)
            .map(|(p, a)| PatchFigures {
                name: p.name.clone(),
                kind: match p.kind {
                    PatchKind::Wall { .. } => "wall".into(),
                    PatchKind::Side { .. } => "side".into(),
                },
                faces: p.count as u64,
                area: a.area,
            })
            .collect();
        let mut warnings = Vec::new();
        if cut.warnings_total > 0 {
            let w = &cut.warnings[0];
            warnings.push(format!(
                "{} cell(s) hold surface detail below the cell size (first at {:?}, level {}: {}); refine there or accept the approximation",
                cut.warnings_total, w.centre, w.level, w.reason
            ));
        }
        for d in &cut.dropped_regions {
            warnings.push(format!("dropped a fluid region of volume {:.6e} ({} cells) not holding the fluid point; a point inside it: {:?}", d.volume, d.cells, d.point));
        }
        if !cut.dropped_pieces.is_empty() {
            let v: f64 = cut.dropped_pieces.iter().map(|d| d.volume).sum();
            warnings.push(format!(
                "dropped {} tiny fluid piece(s) without a fluid neighbour, total volume {v:.3e}",
                cut.dropped_pieces.len()
            ));
        }
        let h = &self.health;
        if !h.is_watertight() {
            warnings.push(format!(
                "surface: {} open edges ({} loops), {} non-manifold edges, {} intersecting triangle pairs; the winding number bridges them",
                h.open_edges, h.open_loops, h.non_manifold_edges, h.intersecting_pairs
            ));
        }
        MeshReport {
            octocut_version: env!("CARGO_PKG_VERSION").to_string(),
            surfaces: self.files.clone(),
            plan,
            leaves,
            cells,
            faces: mesh.n_faces() as u64,
            interior_faces: mesh.n_interior_faces() as u64,
            points: mesh.points.len() as u64,
            fluid_volume: validation.cells_volume,
            patches,
            valid: validation.is_valid(),
            validation: serde_json::to_value(validation).unwrap_or_default(),
            quality: serde_json::to_value(q).unwrap_or_default(),
            cut: serde_json::to_value(cut).unwrap_or_default(),
            surface_health: serde_json::to_value(&self.health).unwrap_or_default(),
            warnings,
            // loading happened once, before this run (a Mesher meshes several specs)
            stages: std::iter::once(StageFigures {
                stage: Stage::Load,
                seconds: self.load_seconds,
                items: self.index.surface().triangles.len() as u64,
                unit: "triangles".into(),
                peak_memory_bytes: self.load_peak,
            })
            .chain(clock.figures.iter().cloned())
            .collect(),
            mesh_bytes: crate::report::mesh_bytes(mesh),
        }
    }
}

/// Hands the heap's free pages back to the kernel: glibc keeps memory freed by a big stage
/// resident, so it would count in the next stages' peak memory and the process's. A no-op
/// elsewhere than Linux with glibc.
pub fn release_free_memory() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    {
        // SAFETY: glibc's malloc_trim(3) takes a byte count and has no other precondition
        unsafe {
            libc::malloc_trim(0);
        }
    }
}

fn octree_error(e: OctreeError) -> MeshError {
    match e {
        OctreeError::TooManyLeaves { .. } => MeshError::Limit(e.to_string()),
        other => MeshError::Config(other.to_string()),
    }
}
