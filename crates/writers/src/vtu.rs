//! The volume mesh as a VTK XML UnstructuredGrid (`.vtu`), following the XML part of the VTK
//! User's Guide chapter "VTK File Formats".
//!
//! Cells whose six faces are quads forming an axis-aligned box are written as hexahedra (VTK
//! type 12, VTK's vertex order: the bottom face counter-clockwise seen from above, then the top
//! face); all others as polyhedra (type 42) with the `faces` stream (per polyhedron: the face
//! count, then for every face its point count and point ids, oriented out of the cell) and
//! `faceoffsets` (the end of each cell's stream, -1 for a non-polyhedron); a polyhedron's
//! `connectivity` lists its distinct points in order of first use. Points are Float64, ids
//! Int32 (Int64 when a point id or an offset exceeds 2^31 - 1), types UInt8. Cell data: `level` (UInt8), `cut` (UInt8, 0/1), `region` (Int32, -1
//! for none), `volume` (Float64) and any extra arrays; FieldData `region_names` (String).

use crate::atomic::{write_atomically, WriteError};
use crate::vtkxml::{
    id_kind, push_id, put_ids, put_le, put_par, write_string_array, Encoding, Kind, StreamArray,
    Values, ValuesRef, XmlArrays,
};
use octocut_volmesh::geometry::{cell_volume_centroid, CellFaces};
use octocut_volmesh::quality::CellQuality;
use octocut_volmesh::{VolumeMesh, NO_REGION};
use rayon::prelude::*;
use std::io::Write;
use std::path::Path;

/// VTK cell type of a hexahedron.
pub const VTK_HEXAHEDRON: u8 = 12;
/// VTK cell type of a polyhedron.
pub const VTK_POLYHEDRON: u8 = 42;

/// An extra cell-data array.
///
/// ```
/// use octocut_writers::CellArray;
/// let a = CellArray::f64("skewness", vec![0.0, 0.1]);
/// assert_eq!(a.values.len(), 2);
/// ```
#[derive(Clone, Debug, PartialEq)]
pub struct CellArray {
    pub name: String,
    pub values: Values,
}

impl CellArray {
    pub fn f64(name: &str, v: Vec<f64>) -> Self {
        CellArray {
            name: name.into(),
            values: Values::F64(v),
        }
    }
    pub fn i32(name: &str, v: Vec<i32>) -> Self {
        CellArray {
            name: name.into(),
            values: Values::I32(v),
        }
    }
    pub fn u8(name: &str, v: Vec<u8>) -> Self {
        CellArray {
            name: name.into(),
            values: Values::U8(v),
        }
    }
    /// The per-cell quality arrays.
    pub fn from_quality(q: &CellQuality) -> Vec<CellArray> {
        q.named()
            .iter()
            .map(|(n, v)| CellArray::f64(n, v.to_vec()))
            .collect()
    }
}

/// The `Cells` arrays of a mesh, as the VTK XML format defines them.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct VtuCells {
    pub connectivity: Vec<i64>,
    /// End offset of each cell in `connectivity`.
    pub offsets: Vec<i64>,
    pub types: Vec<u8>,
    /// Face streams of the polyhedra (empty when there is none).
    pub faces: Vec<i64>,
    /// End of each cell's face stream, -1 for non-polyhedra (empty when there is no polyhedron).
    pub faceoffsets: Vec<i64>,
}

/// Checks what the writers index: face offsets, vertex and cell ids.
pub(crate) fn check_writable(mesh: &VolumeMesh) -> Result<(), WriteError> {
    let bad = |s: String| Err(WriteError::InvalidMesh(s));
    if mesh.face_offsets.len() != mesh.n_faces() + 1 || mesh.neighbour.len() > mesh.owner.len() {
        return bad("face arrays of inconsistent lengths".into());
    }
    if mesh.face_offsets.windows(2).any(|w| w[1] < w[0])
        || *mesh.face_offsets.last().unwrap() as usize != mesh.face_vertices.len()
    {
        return bad("face offsets not monotone or not ending at the vertex count".into());
    }
    // the largest id of each array in parallel; only a bad mesh is scanned for the first
    // offending id
    let max = |ids: &[u32]| {
        ids.par_chunks(1 << 16)
            .map(|c| c.iter().copied().max().unwrap_or(0))
            .max()
    };
    let np = mesh.points.len();
    if max(&mesh.face_vertices).is_some_and(|m| m as usize >= np) {
        let v = mesh.face_vertices.iter().find(|&&v| v as usize >= np);
        return bad(format!("vertex id {} out of range", v.unwrap()));
    }
    let nc = mesh.n_cells();
    if max(&mesh.owner)
        .max(max(&mesh.neighbour))
        .is_some_and(|m| m as usize >= nc)
    {
        let c = mesh
            .owner
            .iter()
            .chain(&mesh.neighbour)
            .find(|&&c| c as usize >= nc);
        return bad(format!("cell id {} out of range", c.unwrap()));
    }
    if mesh.cell_cut.len() != nc || mesh.cell_region.len() != nc {
        return bad("cell tag arrays of the wrong length".into());
    }
    Ok(())
}

/// If the cell with `faces` is an axis-aligned box of six quads, its eight points in VTK
/// hexahedron order.
///
/// One pass over the 24 corner uses: the box of their points, then each use's corner from
/// which box side it lies on in every axis (a point strictly between the sides means no box);
/// exactly eight distinct points, one at each corner, and every face on one side of the box.
pub fn hexahedron(mesh: &VolumeMesh, faces: &[u32]) -> Option<[u32; 8]> {
    if faces.len() != 6 || faces.iter().any(|&f| mesh.face(f as usize).len() != 4) {
        return None;
    }
    let p = |v: u32| mesh.points[v as usize];
    let first = p(mesh.face(faces[0] as usize)[0]);
    let (mut lo, mut hi) = (first, first);
    for &f in faces {
        for &v in mesh.face(f as usize) {
            lo = lo.min(p(v));
            hi = hi.max(p(v));
        }
    }
    if !(lo.x < hi.x && lo.y < hi.y && lo.z < hi.z) {
        return None;
    }
    let mut corner = [u32::MAX; 8];
    for &f in faces {
        // sides shared by all the face's points: bit a of `at_hi` (`at_lo`) when every point
        // has coordinate a at the high (low) side
        let (mut at_hi, mut at_lo) = (7u8, 7u8);
        for &v in mesh.face(f as usize) {
            let q = p(v);
            let mut bits = 0u8;
            for a in 0..3 {
                if q[a] == hi[a] {
                    bits |= 1 << a;
                } else if q[a] != lo[a] {
                    return None;
                }
            }
            // VTK order: (0,0,0) (1,0,0) (1,1,0) (0,1,0), then the same at z = 1
            let k = [0, 1, 3, 2][(bits & 3) as usize] + 4 * (bits >> 2) as usize;
            if corner[k] == u32::MAX {
                corner[k] = v;
            } else if corner[k] != v {
                return None; // two points at one corner
            }
            at_hi &= bits;
            at_lo &= !bits & 7;
        }
        if at_hi == 0 && at_lo == 0 {
            return None; // the face leaves the box sides
        }
    }
    // all eight corners used, each by one point: exactly eight distinct points
    if corner.contains(&u32::MAX) {
        return None;
    }
    Some(corner)
}

/// Builds the `Cells` arrays of `mesh` (which must be writable).
pub fn vtu_cells(mesh: &VolumeMesh, cf: &CellFaces) -> VtuCells {
    let mut out = VtuCells::default();
    let mut any_poly = false;
    let mut seen: Vec<u32> = Vec::new();
    for c in 0..mesh.n_cells() {
        let faces = cf.of(c);
        if let Some(h) = hexahedron(mesh, faces) {
            out.connectivity.extend(h.iter().map(|&v| v as i64));
            out.types.push(VTK_HEXAHEDRON);
            out.faceoffsets.push(-1);
        } else {
            any_poly = true;
            out.types.push(VTK_POLYHEDRON);
            seen.clear();
            out.faces.push(faces.len() as i64);
            for &f in faces {
                let vs = mesh.face(f as usize);
                out.faces.push(vs.len() as i64);
                let outward = mesh.owner[f as usize] == c as u32;
                let mut push = |v: u32| {
                    out.faces.push(v as i64);
                    if !seen.contains(&v) {
                        seen.push(v);
                    }
                };
                if outward {
                    vs.iter().for_each(|&v| push(v));
                } else {
                    vs.iter().rev().for_each(|&v| push(v));
                }
            }
            out.connectivity.extend(seen.iter().map(|&v| v as i64));
            out.faceoffsets.push(out.faces.len() as i64);
        }
        out.offsets.push(out.connectivity.len() as i64);
    }
    if !any_poly {
        out.faceoffsets.clear();
    }
    out
}

/// Writes `mesh` with its tags and `cell_data` to `path` (atomically).
///
/// ```
/// use octocut_writers::{write_vtu, read_vtu, Encoding};
/// let m = octocut_volmesh::testmesh::block(2, 1.0);
/// let dir = tempfile::tempdir().unwrap();
/// let p = dir.path().join("mesh.vtu");
/// write_vtu(&m, &[], &p, Encoding::Appended).unwrap();
/// assert_eq!(read_vtu(&p).unwrap().n_cells(), 8);
/// ```
pub fn write_vtu(
    mesh: &VolumeMesh,
    cell_data: &[CellArray],
    path: &Path,
    encoding: Encoding,
) -> Result<(), WriteError> {
    let refs: Vec<(&str, ValuesRef)> = cell_data
        .iter()
        .map(|a| (a.name.as_str(), a.values.as_ref()))
        .collect();
    write_vtu_refs(mesh, &refs, path, encoding)
}

/// Cells per unit of parallel work of the writer.
const CHUNK: usize = 4096;

/// [`write_vtu`] with borrowed cell-data arrays `(name, values)`. Streams every array into
/// the file (no copy of the mesh's arrays is built): a parallel pass sorts the cells into
/// hexahedra and polyhedra and counts their connectivity and face-stream lengths, from which
/// the appended offsets follow; the big arrays are then made in parallel a few chunks of cells
/// at a time and written in order. The bytes are those of [`vtu_cells`]' arrays.
pub fn write_vtu_refs(
    mesh: &VolumeMesh,
    cell_data: &[(&str, ValuesRef)],
    path: &Path,
    encoding: Encoding,
) -> Result<(), WriteError> {
    write_vtu_streamed(mesh, None, cell_data, path, encoding)
}

/// [`write_vtu_refs`] with the cell volumes already computed (e.g.
/// `QualityReport::per_cell.volume`), written as the `volume` array instead of computing them
/// again. The caller vouches that they are `geometry::cell_volume_centroid`'s volumes.
pub fn write_vtu_with_volumes(
    mesh: &VolumeMesh,
    volume: &[f64],
    cell_data: &[(&str, ValuesRef)],
    path: &Path,
    encoding: Encoding,
) -> Result<(), WriteError> {
    write_vtu_streamed(mesh, Some(volume), cell_data, path, encoding)
}

fn write_vtu_streamed(
    mesh: &VolumeMesh,
    given_volume: Option<&[f64]>,
    cell_data: &[(&str, ValuesRef)],
    path: &Path,
    encoding: Encoding,
) -> Result<(), WriteError> {
    check_writable(mesh)?;
    let nc = mesh.n_cells();
    if let Some(v) = given_volume {
        if v.len() != nc {
            return Err(WriteError::CellArrayLength {
                name: "volume".into(),
                expected: nc,
                found: v.len(),
            });
        }
    }
    let mut names = vec!["level", "cut", "region", "volume"];
    for &(name, values) in cell_data {
        if names.contains(&name) {
            return Err(WriteError::DuplicateArray(name.into()));
        }
        names.push(name);
        if values.len() != nc {
            return Err(WriteError::CellArrayLength {
                name: name.into(),
                expected: nc,
                found: values.len(),
            });
        }
    }
    let cf = CellFaces::new(mesh);
    // per cell: type, connectivity length, face-stream length (0 for a hexahedron); the
    // connectivity itself kept per chunk of cells (4 bytes an id), so that the hexahedron test
    // and the distinct points run once a cell
    let mut types = vec![0u8; nc];
    let mut conn_len = vec![0u32; nc];
    let mut stream_len = vec![0u32; nc];
    let conn_chunks: Vec<Vec<u32>> = (
        types.par_chunks_mut(CHUNK),
        conn_len.par_chunks_mut(CHUNK),
        stream_len.par_chunks_mut(CHUNK),
    )
        .into_par_iter()
        .enumerate()
        .map(|(k, (t, cl, sl))| {
            let (mut seen, mut table) = (Vec::new(), Vec::new());
            let mut conn = Vec::with_capacity(8 * t.len());
            for i in 0..t.len() {
                let c = k * CHUNK + i;
                let faces = cf.of(c);
                if let Some(h) = hexahedron(mesh, faces) {
                    (t[i], cl[i], sl[i]) = (VTK_HEXAHEDRON, 8, 0);
                    conn.extend_from_slice(&h);
                } else {
                    distinct_points(mesh, c, faces, &mut seen, &mut table);
                    let s: usize = faces.iter().map(|&f| 1 + mesh.face(f as usize).len()).sum();
                    (t[i], cl[i], sl[i]) = (VTK_POLYHEDRON, seen.len() as u32, 1 + s as u32);
                    conn.extend_from_slice(&seen);
                }
            }
            conn
        })
        .collect();
    let n_conn: usize = conn_len.iter().map(|&n| n as usize).sum();
    let n_stream: usize = stream_len.iter().map(|&n| n as usize).sum();
    let has_poly = types.contains(&VTK_POLYHEDRON);
    let (cf, types, conn_len, stream_len) = (&cf, &types, &conn_len, &stream_len);
    let kind = id_kind(ids_max(mesh.points.len(), n_conn, n_stream));
    let wide = kind == Kind::I64;
    let le = |b: &mut Vec<u8>, v: i64| push_id(b, wide, v);

    write_atomically(path, |w| {
        writeln!(w, "<?xml version=\"1.0\"?>")?;
        writeln!(
            w,
            "<VTKFile type=\"UnstructuredGrid\" version=\"1.0\" byte_order=\"LittleEndian\" \
             header_type=\"UInt64\">"
        )?;
        writeln!(w, "  <UnstructuredGrid>")?;
        writeln!(w, "    <FieldData>")?;
        write_string_array(w, "      ", "region_names", &mesh.region_names)?;
        writeln!(w, "    </FieldData>")?;
        writeln!(
            w,
            "    <Piece NumberOfPoints=\"{}\" NumberOfCells=\"{}\">",
            mesh.points.len(),
            nc
        )?;
        let mut xa = XmlArrays::new(encoding);
        let ind = "        ";
        writeln!(w, "      <Points>")?;
        let pts = StreamArray::from_values("Points", 3, Kind::F64, 3 * mesh.points.len(), |w| {
            put_le(
                w,
                mesh.points
                    .iter()
                    .flat_map(|p| p.to_array())
                    .map(f64::to_le_bytes),
            )
        });
        xa.write_stream(w, ind, pts)?;
        writeln!(w, "      </Points>")?;
        writeln!(w, "      <Cells>")?;
        let conn_chunks = &conn_chunks;
        let connectivity = StreamArray::from_values("connectivity", 1, kind, n_conn, |w| {
            // put_par's ranges start at multiples of CHUNK and span at most CHUNK cells: each
            // is one chunk of the first pass
            put_par(w, nc, CHUNK, |cells, b| {
                debug_assert_eq!(cells.start % CHUNK, 0);
                conn_chunks[cells.start / CHUNK]
                    .iter()
                    .for_each(|&v| le(b, v as i64));
            })
        });
        xa.write_stream(w, ind, connectivity)?;
        let offsets = StreamArray::from_values("offsets", 1, kind, nc, |w| {
            let mut end = 0i64;
            put_ids(
                w,
                wide,
                conn_len.iter().map(|&n| {
                    end += n as i64;
                    end
                }),
            )
        });
        xa.write_stream(w, ind, offsets)?;
        xa.write_stream(
            w,
            ind,
            StreamArray::borrowed("types", 1, ValuesRef::U8(types)),
        )?;
        if has_poly {
            let faces = StreamArray::from_values("faces", 1, kind, n_stream, |w| {
                put_par(w, nc, CHUNK, |cells, b| {
                    for c in cells {
                        if types[c] != VTK_POLYHEDRON {
                            continue;
                        }
                        let faces = cf.of(c);
                        le(b, faces.len() as i64);
                        for &f in faces {
                            let vs = mesh.face(f as usize);
                            le(b, vs.len() as i64);
                            if mesh.owner[f as usize] == c as u32 {
                                vs.iter().for_each(|&v| le(b, v as i64));
                            } else {
                                vs.iter().rev().for_each(|&v| le(b, v as i64));
                            }
                        }
                    }
                })
            });
            xa.write_stream(w, ind, faces)?;
            let faceoffsets = StreamArray::from_values("faceoffsets", 1, kind, nc, |w| {
                let mut end = 0i64;
                put_ids(
                    w,
                    wide,
                    (0..nc).map(|c| {
                        if types[c] == VTK_POLYHEDRON {
                            end += stream_len[c] as i64;
                            end
                        } else {
                            -1
                        }
                    }),
                )
            });
            xa.write_stream(w, ind, faceoffsets)?;
        }
        writeln!(w, "      </Cells>")?;
        writeln!(w, "      <CellData Scalars=\"level\">")?;
        let u8s = |name: &str, v| StreamArray::borrowed(name, 1, ValuesRef::U8(v));
        xa.write_stream(w, ind, u8s("level", &mesh.cell_level))?;
        xa.write_stream(w, ind, u8s("cut", &mesh.cell_cut))?;
        let region = StreamArray::from_values("region", 1, Kind::I32, nc, |w| {
            put_le(
                w,
                mesh.cell_region.iter().map(|&r| {
                    let r = if r == NO_REGION { -1 } else { r as i32 };
                    r.to_le_bytes()
                }),
            )
        });
        xa.write_stream(w, ind, region)?;
        match given_volume {
            Some(v) => xa.write_stream(
                w,
                ind,
                StreamArray::borrowed("volume", 1, ValuesRef::F64(v)),
            )?,
            None => {
                let volume = StreamArray::from_values("volume", 1, Kind::F64, nc, |w| {
                    put_par(w, nc, CHUNK, |cells, b| {
                        for c in cells {
                            let v = cell_volume_centroid(mesh, c as u32, cf.of(c)).volume;
                            b.extend_from_slice(&v.to_le_bytes());
                        }
                    })
                });
                xa.write_stream(w, ind, volume)?;
            }
        }
        for &(name, values) in cell_data {
            xa.write_stream(w, ind, StreamArray::borrowed(name, 1, values))?;
        }
        writeln!(w, "      </CellData>")?;
        writeln!(w, "    </Piece>")?;
        writeln!(w, "  </UnstructuredGrid>")?;
        xa.finish(w)?;
        writeln!(w, "</VTKFile>")
    })
}

/// The largest value an id array of a file holds: a point id, an offset into the
/// connectivity or into the face stream (face and vertex counts are smaller).
fn ids_max(points: usize, n_conn: usize, n_stream: usize) -> usize {
    points.max(n_conn).max(n_stream)
}

/// The distinct points of cell `c`'s outward face streams, in order of first use (`table` is
/// scratch: an open-addressing set of the points seen, at least twice the uses in size, so a
/// cell costs time linear in its point uses).
fn distinct_points(
    mesh: &VolumeMesh,
    c: usize,
    faces: &[u32],
    seen: &mut Vec<u32>,
    table: &mut Vec<u32>,
) {
    seen.clear();
    let uses: usize = faces.iter().map(|&f| mesh.face(f as usize).len()).sum();
    let size = (2 * uses).next_power_of_two().max(16);
    table.clear();
    table.resize(size, EMPTY);
    let mask = size - 1;
    let mut push = |v: u32| {
        // Fibonacci hashing (Knuth, TAOCP vol. 3, 6.4): the high bits of v times 2^32/phi
        let mut h = ((v as u64).wrapping_mul(0x9e37_79b9_7f4a_7c15) >> 32) as usize & mask;
        loop {
            let t = table[h];
            if t == v {
                return;
            }
            if t == EMPTY {
                table[h] = v;
                seen.push(v);
                return;
            }
            h = (h + 1) & mask;
        }
    };
    for &f in faces {
        let vs = mesh.face(f as usize);
        if mesh.owner[f as usize] == c as u32 {
            vs.iter().for_each(|&v| push(v));
        } else {
            vs.iter().rev().for_each(|&v| push(v));
        }
    }
}

/// An empty slot of [`distinct_points`]' table (no point has this id: ids are below the point
/// count, which is at most `u32::MAX`).
const EMPTY: u32 = u32::MAX;

#[cfg(test)]
mod tests {
    use super::*;
    use octocut_volmesh::testmesh;

    #[test]
    fn repeated_array_names_are_refused() {
        // VTK 9.5's XML reader crashed on a file holding two `volume` cell arrays
        let m = testmesh::block(1, 1.0);
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("mesh.vtu");
        let twice = [CellArray::f64("volume", vec![1.0])];
        assert!(matches!(
            write_vtu(&m, &twice, &p, Encoding::Appended),
            Err(WriteError::DuplicateArray(_))
        ));
        assert!(!p.exists());
    }

    #[test]
    fn hexahedra_are_detected() {
        let m = testmesh::block(2, 1.0);
        let cf = CellFaces::new(&m);
        let c = vtu_cells(&m, &cf);
        assert!(c.types.iter().all(|&t| t == VTK_HEXAHEDRON));
        assert!(c.faces.is_empty() && c.faceoffsets.is_empty());
        // VTK hexahedron order (VTK File Formats, linear cell types): corner k of cell 0 is
        // (k&1 ^ (k>>1)&1, (k>>1)&1, k>>2) for the unit cube at the origin
        let expect = [
            [0., 0., 0.],
            [1., 0., 0.],
            [1., 1., 0.],
            [0., 1., 0.],
            [0., 0., 1.],
            [1., 0., 1.],
            [1., 1., 1.],
            [0., 1., 1.],
        ];
        for (&v, want) in c.connectivity.iter().zip(&expect) {
            assert_eq!(m.points[v as usize].to_array(), *want);
        }
        // one refined cell: 8 fine hexahedra, the far coarse corner cell is a hexahedron, the
        // six coarse cells touching the refined one by a side or an edge carry split faces or
        // edge midpoints and are polyhedra
        let m = testmesh::refined_block(2, 1.0, &[[0, 0, 0]]);
        let c = vtu_cells(&m, &CellFaces::new(&m));
        let hex = c.types.iter().filter(|&&t| t == VTK_HEXAHEDRON).count();
        assert_eq!((hex, c.types.len() - hex), (9, 6));
        assert_eq!(c.faceoffsets.iter().filter(|&&o| o == -1).count(), 9);
    }

    /// The hexahedron test as first written (sort the 24 uses, eight distinct points, corners,
    /// faces on sides): the reference the one-pass test must agree with on every cell.
    fn hexahedron_former(mesh: &VolumeMesh, faces: &[u32]) -> Option<[u32; 8]> {
        if faces.len() != 6 || faces.iter().any(|&f| mesh.face(f as usize).len() != 4) {
            return None;
        }
        let mut all = [0u32; 24];
        for (i, &f) in faces.iter().enumerate() {
            all[4 * i..4 * i + 4].copy_from_slice(mesh.face(f as usize));
        }
        all.sort_unstable();
        let mut ids = [0u32; 8];
        let mut n = 0;
        for (i, &v) in all.iter().enumerate() {
            if i == 0 || v != all[i - 1] {
                if n == 8 {
                    return None;
                }
                ids[n] = v;
                n += 1;
            }
        }
        if n != 8 {
            return None;
        }
        let p = |v: u32| mesh.points[v as usize];
        let (mut lo, mut hi) = (p(ids[0]), p(ids[0]));
        for &v in &ids[1..] {
            lo = lo.min(p(v));
            hi = hi.max(p(v));
        }
        if !(lo.x < hi.x && lo.y < hi.y && lo.z < hi.z) {
            return None;
        }
        let mut corner = [u32::MAX; 8];
        for &v in &ids {
            let q = p(v);
            let mut bits = [0usize; 3];
            for a in 0..3 {
                bits[a] = if q[a] == lo[a] {
                    0
                } else if q[a] == hi[a] {
                    1
                } else {
                    return None;
                };
            }
            let k = [0, 1, 3, 2][bits[0] + 2 * bits[1]] + 4 * bits[2];
            if corner[k] != u32::MAX {
                return None;
            }
            corner[k] = v;
        }
        for &f in faces {
            let vs = mesh.face(f as usize);
            let on_side = (0..3).any(|a| {
                vs.iter().all(|&v| p(v)[a] == lo[a]) || vs.iter().all(|&v| p(v)[a] == hi[a])
            });
            if !on_side {
                return None;
            }
        }
        Some(corner)
    }

    #[test]
    fn one_pass_hexahedron_test_agrees_with_the_former_one() {
        // hexahedra and polyhedra of a refined block, the same with one point moved off its
        // corner (a cell no longer a box), with a face's vertices replaced by another cell's
        // (a face off the box sides), and the clipped cube
        let mut moved = testmesh::refined_block(3, 1.0, &[[1, 1, 1]]);
        moved.points[0].x += 0.25;
        let mut swapped = testmesh::block(2, 1.0);
        let f = swapped.n_faces() - 1;
        let a = swapped.face_offsets[f] as usize;
        swapped.face_vertices[a] = swapped.face(0)[0];
        let mut flat = testmesh::block(1, 1.0);
        for p in flat.points.iter_mut() {
            p.z = 0.0; // a degenerate box
        }
        let (mut hexes, mut others) = (0, 0);
        for m in [
            testmesh::refined_block(3, 1.0, &[[1, 1, 1], [0, 0, 0]]),
            moved,
            swapped,
            flat,
            testmesh::clipped_cube(),
        ] {
            let cf = CellFaces::new(&m);
            for c in 0..m.n_cells() {
                let h = hexahedron(&m, cf.of(c));
                assert_eq!(h, hexahedron_former(&m, cf.of(c)), "cell {c}");
                hexes += h.is_some() as usize;
                others += h.is_none() as usize;
            }
        }
        // both answers were given many times (the cells next to refined ones, the moved and
        // swapped cells, the flat box and the clipped cube are no hexahedra)
        assert!(hexes > 20 && others > 20, "{hexes} {others}");
    }

    #[test]
    fn polyhedron_arrays_match_hand_worked_ones() {
        // the clipped cube: faces as built in testmesh::clipped_cube, all owned by cell 0
        let m = testmesh::clipped_cube();
        let c = vtu_cells(&m, &CellFaces::new(&m));
        // by hand from the format description: face count, then (count, ids) per face
        let faces = vec![
            7, 4, 0, 2, 4, 1, 4, 0, 3, 6, 2, 4, 0, 1, 5, 3, 5, 1, 4, 9, 8, 5, 5, 2, 6, 7, 9, 4, 5,
            3, 5, 8, 7, 6, 3, 7, 8, 9,
        ];
        assert_eq!(c.types, vec![VTK_POLYHEDRON]);
        assert_eq!(c.faces, faces);
        assert_eq!(c.faceoffsets, vec![38]); // end of the cell's stream
        assert_eq!(c.connectivity, vec![0, 2, 4, 1, 3, 6, 5, 9, 8, 7]); // distinct, first use
        assert_eq!(c.offsets, vec![10]);
    }

    #[test]
    fn neighbour_faces_are_reversed() {
        // two cubes, cell 1 made a polyhedron by splitting nothing: force the polyhedron path
        // by checking the stream of a coarse cell that is the neighbour of its hanging faces
        let m = testmesh::refined_block(2, 1.0, &[[1, 0, 0]]);
        let cf = CellFaces::new(&m);
        let c = vtu_cells(&m, &cf);
        // rebuild each polyhedron's outward area sum from the stream: must vanish
        let mut pos = 0usize;
        for (cell, &t) in c.types.iter().enumerate() {
            if t != VTK_POLYHEDRON {
                continue;
            }
            let n = c.faces[pos] as usize;
            let mut k = pos + 1;
            let mut sum = octocut_surface::Vec3::ZERO;
            for _ in 0..n {
                let cnt = c.faces[k] as usize;
                let ids: Vec<u32> = c.faces[k + 1..k + 1 + cnt]
                    .iter()
                    .map(|&v| v as u32)
                    .collect();
                sum += octocut_volmesh::geometry::polygon_area_centroid(&m.points, &ids).0;
                k += 1 + cnt;
            }
            assert!(sum.length() < 1e-12, "cell {cell}"); // exact: closed surface
            pos = k;
            assert_eq!(c.faceoffsets[cell], pos as i64);
        }
    }

    use crate::vtkxml::Array;

    /// The writer as it was before streaming: every array built in memory first.
    fn write_vtu_held(
        mesh: &VolumeMesh,
        cell_data: &[CellArray],
        path: &Path,
        encoding: Encoding,
    ) -> Result<(), WriteError> {
        check_writable(mesh)?;
        let nc = mesh.n_cells();
        let mut names = vec!["level", "cut", "region", "volume"];
        for a in cell_data {
            if names.contains(&a.name.as_str()) {
                return Err(WriteError::DuplicateArray(a.name.clone()));
            }
            names.push(&a.name);
            if a.values.len() != nc {
                return Err(WriteError::CellArrayLength {
                    name: a.name.clone(),
                    expected: nc,
                    found: a.values.len(),
                });
            }
        }
        let cf = CellFaces::new(mesh);
        let cells = vtu_cells(mesh, &cf);
        let volume: Vec<f64> = (0..nc)
            .map(|c| cell_volume_centroid(mesh, c as u32, cf.of(c)).volume)
            .collect();
        write_atomically(path, |w| {
            writeln!(w, "<?xml version=\"1.0\"?>")?;
            writeln!(
                w,
                "<VTKFile type=\"UnstructuredGrid\" version=\"1.0\" byte_order=\"LittleEndian\" \
                 header_type=\"UInt64\">"
            )?;
            writeln!(w, "  <UnstructuredGrid>")?;
            writeln!(w, "    <FieldData>")?;
            write_string_array(w, "      ", "region_names", &mesh.region_names)?;
            writeln!(w, "    </FieldData>")?;
            writeln!(
                w,
                "    <Piece NumberOfPoints=\"{}\" NumberOfCells=\"{}\">",
                mesh.points.len(),
                nc
            )?;
            let mut xa = XmlArrays::new(encoding);
            let arr = |name: &str, components, values| Array {
                name: name.into(),
                components,
                values,
            };
            let pts: Vec<f64> = mesh.points.iter().flat_map(|p| p.to_array()).collect();
            writeln!(w, "      <Points>")?;
            xa.write(w, "        ", arr("Points", 3, Values::F64(pts)))?;
            writeln!(w, "      </Points>")?;
            writeln!(w, "      <Cells>")?;
            let VtuCells {
                connectivity,
                offsets,
                types,
                faces,
                faceoffsets,
            } = cells;
            let has_poly = !faceoffsets.is_empty();
            let max = ids_max(mesh.points.len(), connectivity.len(), faces.len());
            let ids = |v: Vec<i64>| crate::vtkxml::id_values(v, max);
            xa.write(w, "        ", arr("connectivity", 1, ids(connectivity)))?;
            xa.write(w, "        ", arr("offsets", 1, ids(offsets)))?;
            xa.write(w, "        ", arr("types", 1, Values::U8(types)))?;
            if has_poly {
                xa.write(w, "        ", arr("faces", 1, ids(faces)))?;
                xa.write(w, "        ", arr("faceoffsets", 1, ids(faceoffsets)))?;
            }
            writeln!(w, "      </Cells>")?;
            writeln!(w, "      <CellData Scalars=\"level\">")?;
            let region: Vec<i32> = mesh
                .cell_region
                .iter()
                .map(|&r| if r == NO_REGION { -1 } else { r as i32 })
                .collect();
            xa.write(
                w,
                "        ",
                arr("level", 1, Values::U8(mesh.cell_level.clone())),
            )?;
            xa.write(
                w,
                "        ",
                arr("cut", 1, Values::U8(mesh.cell_cut.clone())),
            )?;
            xa.write(w, "        ", arr("region", 1, Values::I32(region)))?;
            xa.write(w, "        ", arr("volume", 1, Values::F64(volume)))?;
            for a in cell_data {
                xa.write(w, "        ", arr(&a.name, 1, a.values.clone()))?;
            }
            writeln!(w, "      </CellData>")?;
            writeln!(w, "    </Piece>")?;
            writeln!(w, "  </UnstructuredGrid>")?;
            xa.finish(w)?;
            writeln!(w, "</VTKFile>")
        })
    }

    #[test]
    fn streamed_file_equals_the_held_arrays_file() {
        let dir = tempfile::tempdir().unwrap();
        let (a, b) = (dir.path().join("a.vtu"), dir.path().join("b.vtu"));
        let mut refined = testmesh::refined_block(3, 1.0, &[[1, 1, 1], [0, 0, 0]]);
        refined.region_names = vec!["r0".into()];
        refined.cell_region[3] = 0;
        for m in [testmesh::block(2, 0.5), refined, testmesh::clipped_cube()] {
            let n = m.n_cells();
            let extra = [
                CellArray::f64("x", (0..n).map(|i| i as f64 / 7.0).collect()),
                CellArray::i32("k", (0..n).map(|i| i as i32 - 3).collect()),
            ];
            for enc in [Encoding::Appended, Encoding::Base64, Encoding::Ascii] {
                write_vtu(&m, &extra, &a, enc).unwrap();
                write_vtu_held(&m, &extra, &b, enc).unwrap();
                assert_eq!(
                    std::fs::read(&a).unwrap(),
                    std::fs::read(&b).unwrap(),
                    "{enc:?}"
                );
            }
        }
    }

    #[test]
    fn given_volumes_write_the_same_file() {
        let dir = tempfile::tempdir().unwrap();
        let (a, b) = (dir.path().join("a.vtu"), dir.path().join("b.vtu"));
        let m = testmesh::refined_block(2, 1.0, &[[1, 0, 0]]);
        let cf = CellFaces::new(&m);
        let vol: Vec<f64> = (0..m.n_cells())
            .map(|c| cell_volume_centroid(&m, c as u32, cf.of(c)).volume)
            .collect();
        write_vtu_refs(&m, &[], &a, Encoding::Appended).unwrap();
        write_vtu_with_volumes(&m, &vol, &[], &b, Encoding::Appended).unwrap();
        assert_eq!(std::fs::read(&a).unwrap(), std::fs::read(&b).unwrap());
        let r = write_vtu_with_volumes(&m, &vol[1..], &[], &b, Encoding::Appended);
        assert!(matches!(r, Err(WriteError::CellArrayLength { .. })));
    }

    #[test]
    fn bad_input_is_an_error() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("m.vtu");
        let mut m = testmesh::block(1, 1.0);
        let r = write_vtu(&m, &[CellArray::f64("x", vec![])], &p, Encoding::Ascii);
        assert!(matches!(r, Err(WriteError::CellArrayLength { .. })));
        m.face_vertices[0] = 99;
        assert!(matches!(
            write_vtu(&m, &[], &p, Encoding::Ascii),
            Err(WriteError::InvalidMesh(_))
        ));
        assert!(!p.exists());
    }
}
