//! Writers: the last stage of the pipeline, turning a volume mesh into files.
//!
//! - [`atomic`]: [`write_atomically`], never a partial file at the final name.
//! - [`vtkxml`]: VTK XML data arrays in the three [`Encoding`]s.
//! - [`vtu`]: [`write_vtu`], the volume mesh as an UnstructuredGrid (hexahedra + polyhedra).
//! - [`vtp`]: [`write_vtp`], the boundary faces as PolyData with patch tags and names.
//! - [`vtkread`]: [`read_vtu`] / [`read_vtp`], reading back what we write.
//! - [`slice`]: axis-plane cuts of polyhedral cells and their PNG pictures.
//! - [`histogram`]: PNG histograms of quality measures.

pub mod atomic;
pub mod histogram;
mod picture;
pub mod slice;
pub mod vtkread;
pub mod vtkxml;
pub mod vtp;
pub mod vtu;

pub use atomic::{write_atomically, WriteError};
pub use vtkread::{read_vtp, read_vtu, ReadArray, ReadError, ReadMesh, ReadPolyData};
pub use vtkxml::Encoding;
pub use vtp::write_vtp;
pub use vtu::{write_vtu, CellArray};
