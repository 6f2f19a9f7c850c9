//! Writers: the last stage of the pipeline, turning a volume mesh into files.

pub mod histogram;
mod picture;
pub mod slice;
