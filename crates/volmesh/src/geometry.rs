//! Face and cell geometry of a [`VolumeMesh`]: face area vectors and centroids, cell volumes and
//! centroids, and the cell -> faces CSR.
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

/// The faces of every cell, as CSR: cell `c` has faces `faces[offsets[c]..offsets[c + 1]]`,
/// in increasing face order.
#[derive(Clone, Debug, Default)]
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

/// Volume and centroid of cell `c`, its faces `faces` oriented outward when `owner[f] == c`
/// and inward otherwise. Also returns the sum of the outward face area vectors and the sum of
/// the face area magnitudes (the closure residual and its scale).
pub fn cell_volume_centroid(mesh: &VolumeMesh, c: u32, faces: &[u32]) -> CellGeom {
    let pts = &mesh.points;
    // reference point: average of the face vertex averages
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
    let mut vol = 0.0;
    let mut cen = Vec3::ZERO;
    let mut area_sum = Vec3::ZERO;
    let mut area_mag = 0.0;
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
