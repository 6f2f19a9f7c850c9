//! The domain: an axis-aligned box tiled by cubic base cells, each the root of one octree.
//!
//! Invariant: the box used is the requested box grown symmetrically on each axis to a whole
//! number of base cells (at least one), at most `2^(COORD_BITS - MAX_DEPTH)` per axis.

use crate::key::{OctKey, COORD_BITS, MAX_DEPTH};
use octocut_surface::{Aabb, Vec3};
use serde::{Deserialize, Serialize};

/// Why a domain cannot be built.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum DomainError {
    #[error("the domain box is empty or not finite: min {min:?}, max {max:?}")]
    EmptyBox { min: [f64; 3], max: [f64; 3] },
    #[error("the base size must be a positive finite length, got {0}")]
    BadBaseSize(f64),
    #[error("{count} base cells along {axis} exceed the limit of {limit}: use a larger base size")]
    TooManyBaseCells { axis: char, count: u64, limit: u64 },
}

/// The box actually meshed and its base-cell grid.
///
/// ```
/// use octocut_octree::Domain;
/// use octocut_surface::{Aabb, Vec3};
/// // 2.5 x 1 x 1 with base size 1 grows symmetrically to 3 x 1 x 1
/// let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::new(2.5, 1.0, 1.0)), 1.0).unwrap();
/// assert_eq!(d.counts, [3, 1, 1]);
/// assert_eq!(d.bounds().min.x, -0.25);
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Domain {
    /// Minimum corner of the box used.
    pub origin: Vec3,
    /// Edge of a base cell (level 0).
    pub base_size: f64,
    /// Base cells along x, y, z.
    pub counts: [u32; 3],
}

impl Domain {
    /// The domain covering `requested` with base cells of edge `base_size`.
    pub fn new(requested: Aabb, base_size: f64) -> Result<Domain, DomainError> {
        if !(base_size.is_finite() && base_size > 0.0) {
            return Err(DomainError::BadBaseSize(base_size));
        }
        let e = requested.extent();
        let finite = requested.min.is_finite() && requested.max.is_finite();
        if !finite || e.x <= 0.0 || e.y <= 0.0 || e.z <= 0.0 {
            return Err(DomainError::EmptyBox {
                min: requested.min.to_array(),
                max: requested.max.to_array(),
            });
        }
        let limit = 1u64 << (COORD_BITS - MAX_DEPTH as u32);
        let mut counts = [0u32; 3];
        let mut origin = requested.min;
        for (axis, name) in ['x', 'y', 'z'].into_iter().enumerate() {
            let ratio = e[axis] / base_size;
            // a tiny relative slack keeps 3.0000000001 from becoming 4 cells
            let n = ((ratio * (1.0 - 1e-12)).ceil().max(1.0)) as u64;
            if ratio > limit as f64 || n > limit {
                return Err(DomainError::TooManyBaseCells {
                    axis: name,
                    count: n.max(ratio as u64),
                    limit,
                });
            }
            counts[axis] = n as u32;
            origin[axis] -= 0.5 * (n as f64 * base_size - e[axis]);
        }
        Ok(Domain {
            origin,
            base_size,
            counts,
        })
    }

    /// The box actually used.
    pub fn bounds(&self) -> Aabb {
        let c = Vec3::new(
            self.counts[0] as f64,
            self.counts[1] as f64,
            self.counts[2] as f64,
        );
        Aabb::new(self.origin, self.origin + c * self.base_size)
    }

    /// Edge length of a cell at `level`.
    pub fn cell_size(&self, level: u8) -> f64 {
        self.base_size / (1u64 << level) as f64
    }

    /// Size of one finest-grid unit.
    pub fn unit(&self) -> f64 {
        self.base_size / (1u64 << MAX_DEPTH) as f64
    }

    /// Extent of the finest grid in units along each axis.
    pub fn grid_extent(&self) -> [u32; 3] {
        self.counts.map(|c| c << MAX_DEPTH)
    }

    /// Position of finest-grid point `g`.
    #[inline]
    pub fn point(&self, g: [u32; 3]) -> Vec3 {
        let u = self.unit();
        self.origin + Vec3::new(g[0] as f64, g[1] as f64, g[2] as f64) * u
    }

    /// The box of node `k`.
    #[inline]
    pub fn key_box(&self, k: OctKey) -> Aabb {
        let a = k.anchor();
        let e = k.edge();
        Aabb::new(self.point(a), self.point([a[0] + e, a[1] + e, a[2] + e]))
    }

    /// The level whose cell size is the largest not above `size` (clamped to `0..=MAX_DEPTH`).
    pub fn level_for_size(&self, size: f64) -> u8 {
        if !(size > 0.0) {
            return MAX_DEPTH;
        }
        let l = (self.base_size / size * (1.0 - 1e-12)).log2().ceil();
        l.clamp(0.0, MAX_DEPTH as f64) as u8
    }

    /// The base cells as level-0 keys, Morton-sorted.
    pub fn base_keys(&self) -> Vec<OctKey> {
        let e = OctKey::edge_at(0);
        let mut keys = Vec::with_capacity(self.counts.iter().map(|&c| c as usize).product());
        for z in 0..self.counts[2] {
            for y in 0..self.counts[1] {
                for x in 0..self.counts[0] {
                    keys.push(OctKey::new([x * e, y * e, z * e], 0));
                }
            }
        }
        keys.sort_unstable();
        keys
    }
}
