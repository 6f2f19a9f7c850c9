//! The cut-cell stage: classifies octree leaves as fluid, solid or cut, clips the cut ones into
//! polyhedra against the surface and assembles the conforming volume mesh.
