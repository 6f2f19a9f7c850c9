//! Size estimate before refining: leaves and memory, so a caller can refuse a run early.
//!
//! Method: refine and balance with every level capped at `c = 0, 1, 2, ...` (small, cheap trees)
//! until the cap reaches the deepest requested level (then the count is exact) or the tree
//! exceeds [`DRY_RUN_LEAVES`]; the count is then extrapolated geometrically with the growth
//! ratio of the last two caps, `N(L) = N(c) * (N(c) / N(c-1))^(L - c)` (ratio clamped to 1..8:
//! about 4 per level for surface refinement, 8 for volume regions). Limits: the ratio is taken
//! at coarse levels and can be off when criteria stop at different levels; criteria finishing
//! early make it an overestimate.

use crate::balance::balance;
use crate::domain::Domain;
use crate::key::OctKey;
use crate::refine::refine_leaves;
use crate::spec::{LevelPlan, OctreeError, RefineSpec};
use octocut_surface::{Aabb, SurfaceIndex};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// Dry runs stop once a capped tree holds this many leaves.
pub const DRY_RUN_LEAVES: u64 = 200_000;

/// Peak bytes per leaf while refining and balancing (leaf array, its rebuilt copy and requests).
pub const PEAK_BYTES_PER_LEAF: u64 = 48;

/// Predicted size of a refinement.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Estimate {
    /// Predicted leaves after balance.
    pub leaves: u64,
    /// Predicted peak memory of refinement and balance, bytes.
    pub memory_bytes: u64,
    /// True when no extrapolation was needed (`leaves` is the exact count).
    pub exact: bool,
    /// Deepest cap actually built.
    pub measured_level: u8,
    /// Deepest requested level.
    pub max_level: u8,
    /// Share of the deepest capped tree's leaves that the caller's `keep` test accepted (on an
    /// evenly strided sample of at most [`KEEP_SAMPLES`] leaves); 1 without a test.
    pub kept_fraction: f64,
}

/// Most leaves of the capped tree handed to the `keep` test of [`estimate_kept`].
pub const KEEP_SAMPLES: usize = 20_000;

/// Estimates the leaves and memory `refine(domain, index, spec)` would need.
///
/// ```
/// use octocut_octree::{estimate, refine, Domain, RefineSpec, SurfaceRule, TagSel};
/// use octocut_surface::{Aabb, Surface, SurfaceIndex, Vec3};
/// let index = SurfaceIndex::new(Surface::unit_cube());
/// let d = Domain::new(Aabb::new(Vec3::splat(-1.0), Vec3::splat(2.0)), 1.0).unwrap();
/// let mut spec = RefineSpec::default();
/// spec.surface.push(SurfaceRule { tag: TagSel::All, size: 0.125, finest_size: None });
/// let e = estimate(&d, &index, &spec).unwrap();
/// assert!(e.exact);
/// assert_eq!(e.leaves, refine(&d, &index, &spec).unwrap().stats.leaves);
/// ```
pub fn estimate(
    domain: &Domain,
    index: &SurfaceIndex,
    spec: &RefineSpec,
) -> Result<Estimate, OctreeError> {
    estimate_with_budget(domain, index, spec, DRY_RUN_LEAVES)
}

/// [`estimate`] with dry runs stopping at `dry_run_leaves` leaves instead of [`DRY_RUN_LEAVES`].
pub fn estimate_with_budget(
    domain: &Domain,
    index: &SurfaceIndex,
    spec: &RefineSpec,
    dry_run_leaves: u64,
) -> Result<Estimate, OctreeError> {
    estimate_kept(domain, index, spec, dry_run_leaves, None)
}

/// [`estimate_with_budget`] that also measures which share of the leaves will become cells:
/// `keep(leaf box)` runs on an evenly strided sample of the deepest capped tree (e.g. "the
/// leaf is fluid or cut"), and the share is returned as [`Estimate::kept_fraction`]. Limit:
/// the share is that of the capped tree, whose coarse leaves away from the surface weigh more
/// than in the finished tree.
///
/// ```
/// use octocut_octree::{estimate_kept, Domain, RefineSpec, SurfaceRule, TagSel};
/// use octocut_surface::{Aabb, Surface, SurfaceIndex, Vec3};
/// let index = SurfaceIndex::new(Surface::unit_cube());
/// let d = Domain::new(Aabb::new(Vec3::splat(-1.0), Vec3::splat(2.0)), 1.0).unwrap();
/// let mut spec = RefineSpec::default();
/// spec.surface.push(SurfaceRule { tag: TagSel::All, size: 0.25, finest_size: None });
/// // keep the leaves whose centre lies outside the unit cube
/// let keep = |b: &Aabb| !Aabb::new(Vec3::ZERO, Vec3::ONE).contains_point(b.center());
/// let e = estimate_kept(&d, &index, &spec, 200_000, Some(&keep)).unwrap();
/// assert!(e.kept_fraction > 0.5 && e.kept_fraction < 1.0);
/// ```
pub fn estimate_kept(
    domain: &Domain,
    index: &SurfaceIndex,
    spec: &RefineSpec,
    dry_run_leaves: u64,
    keep: Option<&(dyn Fn(&Aabb) -> bool + Sync)>,
) -> Result<Estimate, OctreeError> {
    let budget = dry_run_leaves.max(1);
    let plan = LevelPlan::new(domain, index.surface(), spec)?;
    let lmax = plan.max_level;
    let mut prev: Option<u64> = None;
    let mut cap = 0u8;
    loop {
        let (leaves, balanced) =
            match refine_leaves(domain, index, spec, &plan, cap, Some(8 * budget)) {
                Ok((l, _)) => {
                    let b = balance(domain, l, spec.balance, spec.transition_layers)?;
                    (b.len() as u64, Some(b))
                }
                // the capped tree alone is large: it bounds the answer from below
                Err(OctreeError::TooManyLeaves { .. }) => (8 * budget, None),
                Err(e) => return Err(e),
            };
        if cap >= lmax || leaves >= budget {
            // the keep test runs on the final capped tree only (it costs a winding number each)
            let kept_fraction = match (keep, &balanced) {
                (Some(k), Some(b)) => kept_share(domain, b, k),
                _ => 1.0,
            };
            let (n, exact) = if cap >= lmax {
                (leaves, true)
            } else {
                let ratio = prev.map_or(8.0, |p| (leaves as f64 / p.max(1) as f64).clamp(1.0, 8.0));
                (
                    (leaves as f64 * ratio.powi((lmax - cap) as i32)).min(u64::MAX as f64) as u64,
                    false,
                )
            };
            return Ok(Estimate {
                leaves: n,
                memory_bytes: n
                    .saturating_mul(PEAK_BYTES_PER_LEAF)
                    .saturating_add(index.surface().triangles.len() as u64 * 256),
                exact,
                measured_level: cap,
                max_level: lmax,
                kept_fraction,
            });
        }
        prev = Some(leaves);
        cap += 1;
    }
}

/// Share of an evenly strided sample of `leaves` that `keep` accepts.
fn kept_share(domain: &Domain, leaves: &[OctKey], keep: &(dyn Fn(&Aabb) -> bool + Sync)) -> f64 {
    if leaves.is_empty() {
        return 1.0;
    }
    let stride = leaves.len().div_ceil(KEEP_SAMPLES);
    let sample: Vec<OctKey> = leaves.iter().step_by(stride).copied().collect();
    let kept = sample
        .par_iter()
        .filter(|&&k| keep(&domain.key_box(k)))
        .count();
    kept as f64 / sample.len() as f64
}

const _: () = assert!(std::mem::size_of::<OctKey>() == 16);
