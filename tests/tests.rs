//! End-to-end and reference checks: one integration binary, one module per topic.
mod spatial_queries;
mod pipeline_e2e;
mod surface_intake;
mod cutcell_reference;
mod octree_invariants;
mod volmesh;
