//! Face and cell geometry of a [`VolumeMesh`]: face area vectors and centroids, cell volumes and
//! centroids, the cell -> faces CSR, and [`CellGeometry`] (the per-cell part, computed once and
//! shared by validation and quality).
//!
//! Method (common practice in finite-volume codes, see Moukalled, Mangani and Darwish 2016, "The
//! Finite Volume Method in Computational Fluid Dynamics", chapter on the mesh's geometric
//! quantities): a polygon is split into the fan of triangles about its vertex average; the area
//! vector is the sum of the triangle area vectors (equal to the polygon's vector area
//! `1/2 sum v_i x v_(i+1)` whatever the fan centre, so it also suits non-planar faces) and the
//! centroid is the triangle centroids weighted by their area projected on the face normal.
//! A cell is split into the tetrahedra joining a reference point (the average of its face
//! centroids, to limit round-off) to every fan triangle of its faces, oriented outward; the
//! volume is the sum of the signed tetrahedron volumes (divergence theorem) and the centroid the
//! volume-weighted tetrahedron centroids.
//!
//! Invariant: a face's area vector points out of its owner; a closed cell's outward area vectors
//! sum to zero.

use crate::mesh::VolumeMesh;
use octocut_surface::Vec3;
use rayon::prelude::*;

/// Area vector and centroid of the polygon `verts` (indices into `points`).
///
/// ```
/// use octocut_volmesh::geometry::polygon_area_centroid;
/// use octocut_surface::Vec3;
/// let p = [Vec3::ZERO, Vec3::X, Vec3::new(1.0, 1.0, 0.0), Vec3::Y];
/// let (a, c) = polygon_area_centroid(&p, &[0, 1, 2, 3]);
/// assert_eq!(a, Vec3::Z); // exact: unit square, counter-clockwise about +z
/// assert_eq!(c, Vec3::new(0.5, 0.5, 0.0));
/// ```
pub fn polygon_area_centroid(points: &[Vec3], verts: &[u32]) -> (Vec3, Vec3) {
    let n = verts.len();
    if n == 0 {
        return (Vec3::ZERO, Vec3::ZERO);
    }
    let mut c0 = Vec3::ZERO;
    for &v in verts {
        c0 += points[v as usize];
    }
    c0 /= n as f64;
    // the fan edges (a, b) = (v_i, v_(i+1 mod n)), each end point's offset from c0 computed
    // once and carried to the next edge (the same operations as recomputing it)
    let first = points[verts[0] as usize];
    let mut area = Vec3::ZERO;
    let mut ra = first - c0;
    for i in 0..n {
        let rb = match verts.get(i + 1) {
            Some(&v) => points[v as usize] - c0,
            None => first - c0,
        };
        area += 0.5 * ra.cross(rb);
        ra = rb;
    }
    let len = area.length();
    if len == 0.0 {
        return (area, c0);
    }
    let nrm = area / len;
    let mut wsum = 0.0;
    let mut csum = Vec3::ZERO;
    let (mut a, mut ra) = (first, first - c0);
    for i in 0..n {
        let b = match verts.get(i + 1) {
            Some(&v) => points[v as usize],
            None => first,
        };
        let rb = b - c0;
        let w = 0.5 * ra.cross(rb).dot(nrm);
        wsum += w;
        csum += w * (c0 + a + b) / 3.0;
        (a, ra) = (b, rb);
    }
    if wsum.abs() <= f64::EPSILON * len {
        return (area, c0);
    }
    (area, csum / wsum)
}

/// The faces of every cell, as CSR: cell `c` has faces `faces[offsets[c]..offsets[c + 1]]`,
/// in increasing face order.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct CellFaces {
    pub offsets: Vec<u32>,
    pub faces: Vec<u32>,
}

impl CellFaces {
    /// Builds the CSR from the owner and neighbour arrays; faces naming a cell out of range are
    /// skipped (validation reports them).
    pub fn new(mesh: &VolumeMesh) -> CellFaces {
        let nc = mesh.n_cells();
        let mut count = vec![0u32; nc + 1];
        let ni = mesh.n_interior_faces();
        let cells = mesh.owner.iter().chain(mesh.neighbour.iter());
        for &c in cells {
            if (c as usize) < nc {
                count[c as usize + 1] += 1;
            }
        }
        for i in 0..nc {
            count[i + 1] += count[i];
        }
        let mut next = count.clone();
        let mut faces = vec![0u32; count[nc] as usize];
        // face order within each cell: every face in increasing id (owner and neighbour merged)
        let mut push = |c: u32, f: u32| {
            if (c as usize) < nc {
                faces[next[c as usize] as usize] = f;
                next[c as usize] += 1;
            }
        };
        for f in 0..mesh.n_faces() {
            push(mesh.owner[f], f as u32);
            if f < ni {
                push(mesh.neighbour[f], f as u32);
            }
        }
        CellFaces {
            offsets: count,
            faces,
        }
    }

    /// The faces of cell `c`.
    #[inline]
    pub fn of(&self, c: usize) -> &[u32] {
        &self.faces[self.offsets[c] as usize..self.offsets[c + 1] as usize]
    }
}

/// Volume and centroid of every cell, with the cell -> faces CSR they were computed from: the
/// per-cell geometry that validation computes anyway ([`VolumeMesh::validate_keeping_geometry`])
/// and quality needs ([`crate::quality::quality_with`]), so it is computed once per run.
///
/// ```
/// use octocut_volmesh::{geometry::CellGeometry, testmesh};
/// let m = testmesh::block(2, 0.5);
/// let g = CellGeometry::new(&m);
/// // exact: cubes of edge 1/2, the first at the origin (to round-off)
/// assert!(g.volume.iter().all(|v| (v - 0.125).abs() < 1e-15));
/// assert!((g.centroid[0] - octocut_surface::Vec3::splat(0.25)).length() < 1e-15);
/// ```
#[derive(Clone, Debug, Default, PartialEq)]
pub struct CellGeometry {
    pub faces: CellFaces,
    /// [`cell_volume_centroid`]'s volume of each cell.
    pub volume: Vec<f64>,
    /// [`cell_volume_centroid`]'s centroid of each cell.
    pub centroid: Vec<Vec3>,
}

impl CellGeometry {
    /// Computes the CSR and every cell's volume and centroid, in parallel chunks (the values do
    /// not depend on the thread count: each cell is computed alone).
    pub fn new(mesh: &VolumeMesh) -> CellGeometry {
        let faces = CellFaces::new(mesh);
        let nc = mesh.n_cells();
        let mut volume = vec![0.0f64; nc];
        let mut centroid = vec![Vec3::ZERO; nc];
        volume
            .par_chunks_mut(GEOMETRY_CHUNK)
            .zip(centroid.par_chunks_mut(GEOMETRY_CHUNK))
            .enumerate()
            .for_each(|(k, (vs, cs))| {
                let mut averages = Vec::new();
                for (i, (v, x)) in vs.iter_mut().zip(cs.iter_mut()).enumerate() {
                    let c = k * GEOMETRY_CHUNK + i;
                    let g = cell_volume_centroid_with(mesh, c as u32, faces.of(c), &mut averages);
                    (*v, *x) = (g.volume, g.centroid);
                }
            });
        CellGeometry {
            faces,
            volume,
            centroid,
        }
    }
}

/// Cells per unit of parallel work of [`CellGeometry::new`].
const GEOMETRY_CHUNK: usize = 4096;

/// Volume and centroid of cell `c`, its faces `faces` oriented outward when `owner[f] == c`
/// and inward otherwise. Also returns the sum of the outward face area vectors and the sum of
/// the face area magnitudes (the closure residual and its scale).
pub fn cell_volume_centroid(mesh: &VolumeMesh, c: u32, faces: &[u32]) -> CellGeom {
    cell_volume_centroid_with(mesh, c, faces, &mut Vec::new())
}

/// [`cell_volume_centroid`] with a scratch buffer for the face vertex averages (reused across
/// calls, so a pass over many cells allocates once). Same operations in the same order, so the
/// same bits.
pub fn cell_volume_centroid_with(
    mesh: &VolumeMesh,
    c: u32,
    faces: &[u32],
    averages: &mut Vec<Vec3>,
) -> CellGeom {
    let pts = &mesh.points;
    // reference point: average of the face vertex averages
    averages.clear();
    let mut r = Vec3::ZERO;
    for &f in faces {
        let vs = mesh.face(f as usize);
        let mut c0 = Vec3::ZERO;
        for &v in vs {
            c0 += pts[v as usize];
        }
        let c0 = c0 / vs.len().max(1) as f64;
        averages.push(c0);
        r += c0;
    }
    r /= faces.len().max(1) as f64;
    let mut vol = 0.0;
    let mut cen = Vec3::ZERO;
    let mut area_sum = Vec3::ZERO;
    let mut area_mag = 0.0;
    for (&f, &c0) in faces.iter().zip(averages.iter()) {
        let vs = mesh.face(f as usize);
        if vs.is_empty() {
            continue;
        }
        let sign = if mesh.owner[f as usize] == c {
            1.0
        } else {
            -1.0
        };
        // fan edges (a, b) = (v_i, v_(i+1 mod n)); each end point's offsets from r and c0 are
        // computed once and carried to the next edge
        let first = pts[vs[0] as usize];
        let p = c0 - r;
        let (mut qa, mut ca) = (first - r, first - c0);
        let mut fa = Vec3::ZERO;
        for i in 0..vs.len() {
            let b = match vs.get(i + 1) {
                Some(&v) => pts[v as usize],
                None => first,
            };
            let (s, cb) = (b - r, b - c0);
            let tv = sign * p.dot(qa.cross(s)) / 6.0;
            vol += tv;
            cen += tv * (p + qa + s) / 4.0;
            fa += 0.5 * ca.cross(cb);
            (qa, ca) = (s, cb);
        }
        area_sum += sign * fa;
        area_mag += fa.length();
    }
    let centroid = if vol != 0.0 { r + cen / vol } else { r };
    CellGeom {
        volume: vol,
        centroid,
        area_sum,
        area_mag,
    }
}

/// Geometry of one cell.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct CellGeom {
    pub volume: f64,
    pub centroid: Vec3,
    /// Sum of the outward face area vectors (zero for a closed cell).
    pub area_sum: Vec3,
    /// Sum of the face area magnitudes.
    pub area_mag: f64,
}

/// All face and cell geometry of a structurally valid mesh.
///
/// ```
/// use octocut_volmesh::{geometry::MeshGeometry, testmesh};
/// let m = testmesh::block(2, 0.5);
/// let g = MeshGeometry::new(&m);
/// assert!((g.cell_volume.iter().sum::<f64>() - 1.0).abs() < 1e-12); // exact: unit cube
/// ```
#[derive(Clone, Debug, Default)]
pub struct MeshGeometry {
    pub face_area: Vec<Vec3>,
    pub face_centroid: Vec<Vec3>,
    pub cell_volume: Vec<f64>,
    pub cell_centroid: Vec<Vec3>,
    pub cell_faces: CellFaces,
}

impl MeshGeometry {
    /// Computes everything in parallel (results independent of the thread count).
    pub fn new(mesh: &VolumeMesh) -> MeshGeometry {
        let (face_area, face_centroid): (Vec<Vec3>, Vec<Vec3>) = (0..mesh.n_faces())
            .into_par_iter()
            .map(|f| polygon_area_centroid(&mesh.points, mesh.face(f)))
            .unzip();
        let cell_faces = CellFaces::new(mesh);
        let (cell_volume, cell_centroid): (Vec<f64>, Vec<Vec3>) = (0..mesh.n_cells())
            .into_par_iter()
            .map(|c| {
                let g = cell_volume_centroid(mesh, c as u32, cell_faces.of(c));
                (g.volume, g.centroid)
            })
            .unzip();
        MeshGeometry {
            face_area,
            face_centroid,
            cell_volume,
            cell_centroid,
            cell_faces,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testmesh;
    use rand::{RngExt, SeedableRng};

    /// The polygon formula as first written (modulo indexing, every offset recomputed): the
    /// reference the faster loop must reproduce bit for bit.
    fn polygon_area_centroid_former(points: &[Vec3], verts: &[u32]) -> (Vec3, Vec3) {
        let n = verts.len();
        if n == 0 {
            return (Vec3::ZERO, Vec3::ZERO);
        }
        let mut c0 = Vec3::ZERO;
        for &v in verts {
            c0 += points[v as usize];
        }
        c0 /= n as f64;
        let mut area = Vec3::ZERO;
        for i in 0..n {
            let a = points[verts[i] as usize];
            let b = points[verts[(i + 1) % n] as usize];
            area += 0.5 * (a - c0).cross(b - c0);
        }
        let len = area.length();
        if len == 0.0 {
            return (area, c0);
        }
        let nrm = area / len;
        let mut wsum = 0.0;
        let mut csum = Vec3::ZERO;
        for i in 0..n {
            let a = points[verts[i] as usize];
            let b = points[verts[(i + 1) % n] as usize];
            let w = 0.5 * (a - c0).cross(b - c0).dot(nrm);
            wsum += w;
            csum += w * (c0 + a + b) / 3.0;
        }
        if wsum.abs() <= f64::EPSILON * len {
            return (area, c0);
        }
        (area, csum / wsum)
    }

    /// The cell formula as first written (see [`polygon_area_centroid_former`]).
    fn cell_volume_centroid_former(mesh: &VolumeMesh, c: u32, faces: &[u32]) -> CellGeom {
        let pts = &mesh.points;
        let mut r = Vec3::ZERO;
        for &f in faces {
            let vs = mesh.face(f as usize);
            let mut c0 = Vec3::ZERO;
            for &v in vs {
                c0 += pts[v as usize];
            }
            r += c0 / vs.len().max(1) as f64;
        }
        r /= faces.len().max(1) as f64;
        let (mut vol, mut cen, mut area_sum, mut area_mag) = (0.0, Vec3::ZERO, Vec3::ZERO, 0.0);
        for &f in faces {
            let vs = mesh.face(f as usize);
            let n = vs.len();
            if n == 0 {
                continue;
            }
            let sign = if mesh.owner[f as usize] == c {
                1.0
            } else {
                -1.0
            };
            let mut c0 = Vec3::ZERO;
            for &v in vs {
                c0 += pts[v as usize];
            }
            c0 /= n as f64;
            let mut fa = Vec3::ZERO;
            for i in 0..n {
                let a = pts[vs[i] as usize];
                let b = pts[vs[(i + 1) % n] as usize];
                let (p, q, s) = (c0 - r, a - r, b - r);
                let tv = sign * p.dot(q.cross(s)) / 6.0;
                vol += tv;
                cen += tv * (p + q + s) / 4.0;
                fa += 0.5 * (a - c0).cross(b - c0);
            }
            area_sum += sign * fa;
            area_mag += fa.length();
        }
        let centroid = if vol != 0.0 { r + cen / vol } else { r };
        CellGeom {
            volume: vol,
            centroid,
            area_sum,
            area_mag,
        }
    }

    #[test]
    fn faster_loops_give_the_former_bits() {
        // hanging faces (5- and 8-vertex polygons), a clipped cell, an L cell, and the refined
        // block with every point moved at random (non-planar faces, no exact cancellations)
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let mut jittered = testmesh::refined_block(3, 1.0, &[[1, 1, 1], [0, 2, 0]]);
        for p in jittered.points.iter_mut() {
            *p += Vec3::new(
                rng.random_range(-0.05..0.05),
                rng.random_range(-0.05..0.05),
                rng.random_range(-0.05..0.05),
            );
        }
        for m in [
            testmesh::refined_block(3, 1.0, &[[1, 1, 1], [0, 0, 0]]),
            testmesh::clipped_cube(),
            testmesh::l_cell(),
            jittered,
        ] {
            for f in 0..m.n_faces() {
                let (a, c) = polygon_area_centroid(&m.points, m.face(f));
                let (a0, c0) = polygon_area_centroid_former(&m.points, m.face(f));
                assert_eq!((a.to_array(), c.to_array()), (a0.to_array(), c0.to_array()));
            }
            let g = CellGeometry::new(&m);
            for c in 0..m.n_cells() {
                let new = cell_volume_centroid(&m, c as u32, g.faces.of(c));
                let old = cell_volume_centroid_former(&m, c as u32, g.faces.of(c));
                assert_eq!(new.volume.to_bits(), old.volume.to_bits());
                assert_eq!(new.centroid.to_array(), old.centroid.to_array());
                assert_eq!(new.area_sum.to_array(), old.area_sum.to_array());
                assert_eq!(new.area_mag.to_bits(), old.area_mag.to_bits());
                assert_eq!(g.volume[c].to_bits(), old.volume.to_bits());
                assert_eq!(g.centroid[c].to_array(), old.centroid.to_array());
            }
        }
    }
}
