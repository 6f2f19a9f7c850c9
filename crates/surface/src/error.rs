//! Typed errors of surface intake. Every variant names the file and, where the input is at
//! fault, the position: a byte offset for binary STL, a line and column for ASCII STL.

use std::fmt;
use std::path::PathBuf;

/// Where in a file an error was found.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Position {
    /// Byte offset from the start of the file (binary STL).
    Byte(u64),
    /// One-based line and column (ASCII STL).
    Line { line: u32, column: u32 },
}

impl fmt::Display for Position {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Position::Byte(o) => write!(f, "byte offset {o}"),
            Position::Line { line, column } => write!(f, "line {line}, column {column}"),
        }
    }
}

/// An error reading a surface.
///
/// ```
/// use octocut_surface::{parse_stl, SurfaceError};
/// let e = parse_stl(b"", "empty.stl").unwrap_err();
/// assert!(matches!(e, SurfaceError::Empty { .. }));
/// assert!(e.to_string().contains("empty.stl"));
/// ```
#[derive(Debug, thiserror::Error)]
pub enum SurfaceError {
    /// The file could not be opened or read.
    #[error("{}: cannot read: {error}", path.display())]
    Io {
        path: PathBuf,
        error: std::io::Error,
    },
    /// The file holds no bytes (or only white space).
    #[error("{file}: empty file")]
    Empty { file: String },
    /// A binary file whose triangle count disagrees with its size.
    #[error(
        "{file}: binary STL triangle count {count} at byte offset 80 needs a file of {expected} bytes, the file has {actual}"
    )]
    CountMismatch {
        file: String,
        count: u32,
        expected: u64,
        actual: u64,
    },
    /// The data ends before a complete header or facet.
    #[error("{file}: truncated at {at}: expected {expected}")]
    Truncated {
        file: String,
        at: Position,
        expected: String,
    },
    /// ASCII STL that does not follow the grammar.
    #[error("{file}: syntax error at {at}: expected {expected}, found {found}")]
    Syntax {
        file: String,
        at: Position,
        expected: String,
        found: String,
    },
    /// A coordinate that is NaN or infinite.
    #[error("{file}: non-finite coordinate {value} at {at}")]
    NonFinite {
        file: String,
        at: Position,
        value: String,
    },
    /// More triangles than `u32` vertex ids can address (three fresh vertices a triangle).
    #[error("{file}: {triangles} triangles exceed the supported {max}")]
    TooLarge {
        file: String,
        triangles: u64,
        max: u64,
    },
    /// A well-formed file without a single triangle.
    #[error("{file}: no triangles")]
    NoTriangles { file: String },
}

impl SurfaceError {
    /// The position in the file the error refers to, if any.
    pub fn position(&self) -> Option<Position> {
        match self {
            SurfaceError::Truncated { at, .. }
            | SurfaceError::Syntax { at, .. }
            | SurfaceError::NonFinite { at, .. } => Some(*at),
            SurfaceError::CountMismatch { .. } => Some(Position::Byte(80)),
            _ => None,
        }
    }
}
