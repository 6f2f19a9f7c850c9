//! The octree stage: a forest of linear octrees over the domain box.
//!
//! Map: [`Domain`] (the box and its cubic base cells), [`OctKey`] (one leaf: level and anchor in a
//! Morton-ordered `u128`), [`Octree`] (the sorted leaf array; point location and neighbours),
//! [`refine()`] (surface size, curvature, gap and region criteria; then [`balance()`]),
//! [`estimate()`] (leaf count and memory before refining), [`LevelPlan`] (which level each
//! request became).
//!
//! ```
//! use octocut_octree::{refine, Domain, RefineSpec, SurfaceRule, TagSel};
//! use octocut_surface::{Aabb, Surface, SurfaceIndex, Vec3};
//! let index = SurfaceIndex::new(Surface::unit_cube());
//! let d = Domain::new(Aabb::new(Vec3::splat(-1.0), Vec3::splat(2.0)), 1.0).unwrap();
//! let mut spec = RefineSpec::default();
//! spec.surface.push(SurfaceRule { tag: TagSel::All, size: 0.25, finest_size: None });
//! let r = refine(&d, &index, &spec).unwrap();
//! r.tree.check_tiling().unwrap();
//! assert_eq!(r.plan.tag_level, vec![2]);
//! ```

pub mod balance;
pub mod domain;
pub mod estimate;
pub mod feature;
pub mod gap;
pub mod key;
pub mod refine;
pub mod region;
pub mod spec;
pub mod tree;

pub use balance::balance;
pub use domain::{Domain, DomainError};
pub use estimate::{estimate, estimate_kept, estimate_with_budget, Estimate, KEEP_SAMPLES};
pub use key::{OctKey, MAX_DEPTH};
pub use refine::{leaf_regions, refine, refine_unbalanced, RefineStats, Refined};
pub use region::{RegionShape, SizeRegion};
pub use spec::{
    BalanceMode, GapSpec, LevelPlan, OctreeError, PlannedLevel, RefineSpec, SurfaceRule, TagSel,
};
pub use tree::{Octree, DIRECTIONS};
