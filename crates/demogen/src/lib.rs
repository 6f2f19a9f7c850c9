//! octocut's own demo data: deterministic generators of the demo surfaces and case files.
//!
//! ```
//! use octocut_demogen::scenarios::{drone, DroneOptions, DRONE_DEFECTS};
//! let d = drone(DroneOptions::default(), DRONE_DEFECTS);
//! assert_eq!(d.parts[0].0, "body");
//! assert!(d.n_triangles() > 5_000);
//! ```

pub mod defects;
pub mod scenarios;
pub mod shapes;
pub mod stl;
