//! The octree stage: a forest of linear octrees over the domain box.
//!
//! The [`Domain`] covers the box with cubic base cells; every leaf is an [`OctKey`] (level and
//! anchor on the finest grid) and an [`Octree`] is the Morton-sorted array of its leaves.
//!
//! ```
//! use octocut_octree::{Domain, Octree};
//! use octocut_surface::{Aabb, Vec3};
//! let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::new(2.0, 1.0, 1.0)), 1.0).unwrap();
//! let t = Octree::uniform(d, 1);
//! assert_eq!(t.leaves().len(), 16);
//! ```

pub mod domain;
pub mod key;
pub mod tree;

pub use domain::{Domain, DomainError};
pub use key::{OctKey, MAX_DEPTH};
pub use tree::Octree;
