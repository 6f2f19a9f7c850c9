//! Safe file writes: the bytes go to a temporary file in the target's directory, are flushed
//! and synced to disk, and the temporary is renamed over the target (a rename within one
//! directory is atomic on POSIX file systems). A reader therefore sees the old file or the
//! whole new one, never a partial file; on any error the temporary is removed.

use std::fs::{self, File};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};

/// Why a file could not be written.
#[derive(Debug, thiserror::Error)]
pub enum WriteError {
    #[error("cannot write {path}: {source}")]
    Io { path: PathBuf, source: io::Error },
    #[error("the mesh cannot be written: {0}")]
    InvalidMesh(String),
    #[error("cell array `{name}` has {found} values, the mesh has {expected} cells")]
    CellArrayLength {
        name: String,
        expected: usize,
        found: usize,
    },
    #[error("cell array `{0}` is given twice (or repeats a built-in array); VTK readers reject repeated names")]
    DuplicateArray(String),
}

/// Writes `path` through `f` atomically (temporary `.<name>.tmp-<pid>` in the same directory,
/// fsync, rename).
///
/// ```
/// use std::io::Write;
/// let dir = tempfile::tempdir().unwrap();
/// let p = dir.path().join("a.txt");
/// octocut_writers::write_atomically(&p, |w| w.write_all(b"hello")).unwrap();
/// assert_eq!(std::fs::read(&p).unwrap(), b"hello");
/// ```
pub fn write_atomically(
    path: &Path,
    f: impl FnOnce(&mut BufWriter<File>) -> io::Result<()>,
) -> Result<(), WriteError> {
    let err = |source| WriteError::Io {
        path: path.to_path_buf(),
        source,
    };
    let name = path
        .file_name()
        .ok_or_else(|| err(io::Error::new(io::ErrorKind::InvalidInput, "no file name")))?;
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let tmp = dir.join(format!(
        ".{}.tmp-{}",
        name.to_string_lossy(),
        std::process::id()
    ));
    let result = (|| {
        let file = File::create(&tmp)?;
        let mut w = BufWriter::with_capacity(1 << 20, file);
        f(&mut w)?;
        w.flush()?;
        let file = w.into_inner().map_err(|e| e.into_error())?;
        file.sync_all()?;
        drop(file);
        fs::rename(&tmp, path)?;
        // make the rename itself durable (best effort: not every platform opens directories)
        if let Ok(d) = File::open(&dir) {
            let _ = d.sync_all();
        }
        Ok(())
    })();
    if let Err(e) = result {
        let _ = fs::remove_file(&tmp);
        return Err(err(e));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn failing_closure_leaves_no_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("mesh.vtu");
        let r = write_atomically(&p, |w| {
            w.write_all(&[7u8; 100_000])?;
            Err(io::Error::other("disk full"))
        });
        assert!(matches!(r, Err(WriteError::Io { .. })));
        assert!(!p.exists());
        assert_eq!(
            fs::read_dir(dir.path()).unwrap().count(),
            0,
            "temporary left behind"
        );
    }

    #[test]
    fn failing_closure_keeps_old_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("mesh.vtu");
        write_atomically(&p, |w| w.write_all(b"old")).unwrap();
        let _ = write_atomically(&p, |w| {
            w.write_all(b"partial new")?;
            Err(io::Error::other("interrupted"))
        });
        assert_eq!(fs::read(&p).unwrap(), b"old");
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[test]
    fn missing_directory_is_an_error() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("no/such/dir/a.vtu");
        assert!(write_atomically(&p, |w| w.write_all(b"x")).is_err());
    }
}
