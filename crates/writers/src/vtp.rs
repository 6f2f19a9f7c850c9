//! The boundary of the volume mesh as a VTK XML PolyData file (`.vtp`): one polygon per
//! boundary face, in face order, with the face's own vertex order (counter-clockwise seen from
//! outside the owner, so normals point out of the fluid).
//!
//! Only points used by boundary faces are written, renumbered in order of first use, with their
//! exact f64 coordinates (Float64). Cell data `tag` (Int32) is the patch index; the patch names
//! are the FieldData String array `tag_names`, entry `i` naming tag `i` (a reader takes
//! `GetFieldData().GetAbstractArray("tag_names").GetValue(tag)`); FieldData `tag_kinds` gives
//! each patch's kind (`wall:<surface tag>` or `side:<0..5>`). Cell data `face` is the
//! mesh face id of each polygon. Ids and offsets are Int32, or Int64 where a value exceeds
//! 2^31 - 1.

use crate::atomic::{write_atomically, WriteError};
use crate::vtkxml::{
    id_kind, put_ids, put_le, write_string_array, Encoding, Kind, StreamArray, ValuesRef, XmlArrays,
};
use crate::vtu::check_writable;
use octocut_volmesh::{PatchKind, VolumeMesh};
use std::io::Write;
use std::path::Path;

/// Writes the boundary faces of `mesh` to `path` (atomically).
///
/// ```
/// use octocut_writers::{write_vtp, read_vtp, Encoding};
/// let m = octocut_volmesh::testmesh::block(2, 1.0);
/// let dir = tempfile::tempdir().unwrap();
/// let p = dir.path().join("boundary.vtp");
/// write_vtp(&m, &p, Encoding::Base64).unwrap();
/// let b = read_vtp(&p).unwrap();
/// assert_eq!(b.n_polys(), 24); // exact: 6 sides x 4 squares
/// ```
pub fn write_vtp(mesh: &VolumeMesh, path: &Path, encoding: Encoding) -> Result<(), WriteError> {
    check_writable(mesh)?;
    let ni = mesh.n_interior_faces();
    let nf = mesh.n_faces();
    // patch of each boundary face (-1 for none), as runs: (first face, end, tag)
    let mut tag = vec![-1i32; nf - ni];
    for (i, p) in mesh.patches.iter().enumerate() {
        let lo = (p.start as usize).clamp(ni, nf) - ni;
        let hi = (p.start as usize + p.count as usize).clamp(ni, nf) - ni;
        tag[lo..hi.max(lo)].iter_mut().for_each(|t| *t = i as i32);
    }
    // boundary points renumbered in order of first use
    let mut new_id = vec![u32::MAX; mesh.points.len()];
    let mut used: Vec<u32> = Vec::new();
    let mut n_conn = 0usize;
    for f in ni..nf {
        for &v in mesh.face(f) {
            if new_id[v as usize] == u32::MAX {
                new_id[v as usize] = used.len() as u32;
                used.push(v);
            }
        }
        n_conn += mesh.face(f).len();
    }
    let (new_id, used, tag) = (&new_id, &used, &tag);
    let kind = id_kind(used.len().max(n_conn));
    let wide = kind == Kind::I64;
    let face_kind = id_kind(nf);
    let names: Vec<String> = mesh.patches.iter().map(|p| p.name.clone()).collect();
    let kinds: Vec<String> = mesh
        .patches
        .iter()
        .map(|p| match p.kind {
            PatchKind::Wall { tag } => format!("wall:{tag}"),
            PatchKind::Side { side } => format!("side:{side}"),
        })
        .collect();
    write_atomically(path, |w| {
        writeln!(w, "<?xml version=\"1.0\"?>")?;
        writeln!(
            w,
            "<VTKFile type=\"PolyData\" version=\"1.0\" byte_order=\"LittleEndian\" \
             header_type=\"UInt64\">"
        )?;
        writeln!(w, "  <PolyData>")?;
        writeln!(w, "    <FieldData>")?;
        write_string_array(w, "      ", "tag_names", &names)?;
        write_string_array(w, "      ", "tag_kinds", &kinds)?;
        writeln!(w, "    </FieldData>")?;
        writeln!(
            w,
            "    <Piece NumberOfPoints=\"{}\" NumberOfVerts=\"0\" NumberOfLines=\"0\" \
             NumberOfStrips=\"0\" NumberOfPolys=\"{}\">",
            used.len(),
            nf - ni
        )?;
        let mut xa = XmlArrays::new(encoding);
        let ind = "        ";
        writeln!(w, "      <Points>")?;
        let pts = StreamArray::from_values("Points", 3, Kind::F64, 3 * used.len(), |w| {
            put_le(
                w,
                used.iter()
                    .flat_map(|&v| mesh.points[v as usize].to_array())
                    .map(f64::to_le_bytes),
            )
        });
        xa.write_stream(w, ind, pts)?;
        writeln!(w, "      </Points>")?;
        writeln!(w, "      <Polys>")?;
        let conn = StreamArray::from_values("connectivity", 1, kind, n_conn, |w| {
            put_ids(
                w,
                wide,
                (ni..nf)
                    .flat_map(|f| mesh.face(f))
                    .map(|&v| new_id[v as usize] as i64),
            )
        });
        xa.write_stream(w, ind, conn)?;
        let offs = StreamArray::from_values("offsets", 1, kind, nf - ni, |w| {
            let mut end = 0i64;
            put_ids(
                w,
                wide,
                (ni..nf).map(|f| {
                    end += mesh.face(f).len() as i64;
                    end
                }),
            )
        });
        xa.write_stream(w, ind, offs)?;
        writeln!(w, "      </Polys>")?;
        writeln!(w, "      <CellData Scalars=\"tag\">")?;
        xa.write_stream(w, ind, StreamArray::borrowed("tag", 1, ValuesRef::I32(tag)))?;
        let face_ids = StreamArray::from_values("face", 1, face_kind, nf - ni, |w| {
            put_ids(w, face_kind == Kind::I64, (ni..nf).map(|f| f as i64))
        });
        xa.write_stream(w, ind, face_ids)?;
        writeln!(w, "      </CellData>")?;
        writeln!(w, "    </Piece>")?;
        writeln!(w, "  </PolyData>")?;
        xa.finish(w)?;
        writeln!(w, "</VTKFile>")
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::vtkxml::{Array, Values};
    use octocut_volmesh::testmesh;

    /// The writer as it was before streaming: every array built in memory first.
    fn write_vtp_held(
        mesh: &VolumeMesh,
        path: &Path,
        encoding: Encoding,
    ) -> Result<(), WriteError> {
        check_writable(mesh)?;
        let ni = mesh.n_interior_faces();
        let nf = mesh.n_faces();
        let mut tag = vec![-1i32; nf - ni];
        for (i, p) in mesh.patches.iter().enumerate() {
            let lo = (p.start as usize).clamp(ni, nf) - ni;
            let hi = (p.start as usize + p.count as usize).clamp(ni, nf) - ni;
            tag[lo..hi.max(lo)].iter_mut().for_each(|t| *t = i as i32);
        }
        let mut new_id = vec![u32::MAX; mesh.points.len()];
        let mut used: Vec<u32> = Vec::new();
        let mut conn: Vec<i64> = Vec::new();
        let mut offs: Vec<i64> = Vec::with_capacity(nf - ni);
        for f in ni..nf {
            for &v in mesh.face(f) {
                if new_id[v as usize] == u32::MAX {
                    new_id[v as usize] = used.len() as u32;
                    used.push(v);
                }
                conn.push(new_id[v as usize] as i64);
            }
            offs.push(conn.len() as i64);
        }
        let pts: Vec<f64> = used
            .iter()
            .flat_map(|&v| mesh.points[v as usize].to_array())
            .collect();
        let names: Vec<String> = mesh.patches.iter().map(|p| p.name.clone()).collect();
        let kinds: Vec<String> = mesh
            .patches
            .iter()
            .map(|p| match p.kind {
                PatchKind::Wall { tag } => format!("wall:{tag}"),
                PatchKind::Side { side } => format!("side:{side}"),
            })
            .collect();
        let face_ids: Vec<i64> = (ni..nf).map(|f| f as i64).collect();
        write_atomically(path, |w| {
            writeln!(w, "<?xml version=\"1.0\"?>")?;
            writeln!(
                w,
                "<VTKFile type=\"PolyData\" version=\"1.0\" byte_order=\"LittleEndian\" \
                 header_type=\"UInt64\">"
            )?;
            writeln!(w, "  <PolyData>")?;
            writeln!(w, "    <FieldData>")?;
            write_string_array(w, "      ", "tag_names", &names)?;
            write_string_array(w, "      ", "tag_kinds", &kinds)?;
            writeln!(w, "    </FieldData>")?;
            writeln!(
                w,
                "    <Piece NumberOfPoints=\"{}\" NumberOfVerts=\"0\" NumberOfLines=\"0\" \
                 NumberOfStrips=\"0\" NumberOfPolys=\"{}\">",
                used.len(),
                nf - ni
            )?;
            let mut xa = XmlArrays::new(encoding);
            let arr = |name: &str, components, values| Array {
                name: name.into(),
                components,
                values,
            };
            writeln!(w, "      <Points>")?;
            xa.write(w, "        ", arr("Points", 3, Values::F64(pts)))?;
            writeln!(w, "      </Points>")?;
            writeln!(w, "      <Polys>")?;
            let ids = crate::vtkxml::id_values;
            let max = used.len().max(conn.len());
            xa.write(w, "        ", arr("connectivity", 1, ids(conn, max)))?;
            xa.write(w, "        ", arr("offsets", 1, ids(offs, max)))?;
            writeln!(w, "      </Polys>")?;
            writeln!(w, "      <CellData Scalars=\"tag\">")?;
            xa.write(w, "        ", arr("tag", 1, Values::I32(tag)))?;
            xa.write(w, "        ", arr("face", 1, ids(face_ids, nf)))?;
            writeln!(w, "      </CellData>")?;
            writeln!(w, "    </Piece>")?;
            writeln!(w, "  </PolyData>")?;
            xa.finish(w)?;
            writeln!(w, "</VTKFile>")
        })
    }

    #[test]
    fn streamed_file_equals_the_held_arrays_file() {
        let dir = tempfile::tempdir().unwrap();
        let (a, b) = (dir.path().join("a.vtp"), dir.path().join("b.vtp"));
        let refined = testmesh::refined_block(3, 1.0, &[[1, 1, 1], [0, 0, 0]]);
        for m in [testmesh::block(2, 0.5), refined, testmesh::clipped_cube()] {
            for enc in [Encoding::Appended, Encoding::Base64, Encoding::Ascii] {
                write_vtp(&m, &a, enc).unwrap();
                write_vtp_held(&m, &b, enc).unwrap();
                assert_eq!(
                    std::fs::read(&a).unwrap(),
                    std::fs::read(&b).unwrap(),
                    "{enc:?}"
                );
            }
        }
    }
}
