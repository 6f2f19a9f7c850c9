//! End-to-end and reference checks: one integration binary, one module per topic.
mod cutcell_reference;
mod octree_invariants;
mod pipeline_e2e;
mod spatial_queries;
mod surface_intake;
mod volmesh;
