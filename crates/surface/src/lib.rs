//! Surface intake: the first stage of the octocut pipeline.
//!
//! A [`Surface`] is a tagged triangle set (f64 vertices, `u32` indices, one surface tag per
//! triangle). Intake runs in three steps:
//! - [`load_stl`] / [`load_stl_files`] / [`parse_stl`] ([`stl`]): binary and ASCII STL, one tag
//!   per ASCII `solid` block (or per binary file), typed [`SurfaceError`]s naming the file and
//!   the position;
//! - [`repair`] ([`repair`](mod@repair)): weld, drop degenerate and duplicate triangles, orient
//!   components consistently and closed ones outward, with a [`RepairReport`];
//! - [`health`] ([`health`](mod@health)): the [`HealthReport`]: open edge loops, non-manifold
//!   edges, enclosed volumes, self-intersections ([`tritri`], exact), edge extremes, tags.
//!
//! [`topology`] holds the shared edge map. A [`SurfaceIndex`] owns a surface and answers the
//! geometric questions every later stage asks: which triangles overlap a box, the closest
//! surface point, where a segment crosses the surface, and whether a point is fluid or solid
//! (generalized winding number).
//!
//! Spatial index layout ([`SurfaceIndex`], `Send + Sync`): triangles sorted along a Morton
//! radix tree ([`tree`]); its leaves (runs of at most 8 triangles) are the leaves of a parry3d
//! BVH ([`bvh`]) serving box, closest-point and segment queries with exact narrow phases
//! ([`tribox`], [`crossing`]); its nodes carry the second-order far-field expansions of the fast
//! winding number ([`winding_tree`], Barill et al. 2018; exact sum in [`winding`]).
//! [`SurfaceIndex::segment_hits`] returns raw per-triangle hits, and
//! [`SurfaceIndex::segment_crossings`] one crossing per passage through the surface (shared
//! edges and vertices merged), the one to count for parity.
//!
//! ```
//! use octocut_surface::{health, parse_stl, repair, RepairOptions, Surface, SurfaceIndex, Vec3, Aabb};
//! // read, repair and check a cube written as binary STL
//! let bytes = octocut_surface::stl::to_binary_stl(&Surface::unit_cube(), "cube");
//! let mut s = parse_stl(&bytes, "cube.stl").unwrap();
//! let report = repair(&mut s, &RepairOptions::default());
//! assert_eq!(s.vertices.len(), 8);
//! assert!(health(&s, &report).is_watertight());
//! // a unit cube made of 12 triangles, outward oriented
//! let index = SurfaceIndex::new(s);
//! assert!(index.winding_number(Vec3::splat(0.5)) > 0.99);
//! assert!(index.winding_number(Vec3::splat(2.0)).abs() < 1e-9);
//! let mut hits = Vec::new();
//! index.triangles_in_box(&Aabb::new(Vec3::splat(-0.1), Vec3::splat(0.1)), &mut hits);
//! assert!(!hits.is_empty());
//! ```

pub mod bvh;
pub mod crossing;
pub mod error;
pub mod geom;
pub mod hash;
pub mod health;
pub mod index;
pub mod predicates;
pub mod repair;
pub mod shapes;
pub mod stl;
pub mod surface;
pub mod topology;
pub mod tree;
pub mod tribox;
pub mod tritri;
pub mod winding;
pub mod winding_tree;

pub use error::{Position, SurfaceError};
pub use geom::{Aabb, Vec3};
pub use health::{health, HealthReport};
pub use index::{IndexOptions, SegmentHit, SurfaceIndex, SurfacePoint};
pub use repair::{repair, RepairOptions, RepairReport};
pub use stl::{load_stl, load_stl_files, parse_stl};
pub use surface::{Surface, TagId};
