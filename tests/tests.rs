//! End-to-end and reference checks: one integration binary, one module per topic.
mod volmesh;
