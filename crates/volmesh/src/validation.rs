//! The validity proof of a [`VolumeMesh`]: every defect found is returned as data with its ids
//! and a location.
//!
//! What is proved (each a [`Problem`] variant when it fails):
//! - the arrays are consistent: offsets monotone and ending at the vertex count, ids in range,
//!   faces with at least three distinct vertices and no repeats, owner != neighbour, no face
//!   listed twice (same vertex set), patches contiguous after the interior faces and covering
//!   every boundary face;
//! - no two points share coordinates (sorting, exact comparison);
//! - every cell is closed: its outward face area vectors sum to zero within
//!   `1e-9 * sum |A_f|` (a closed surface has zero vector area), and every cell volume is
//!   positive (divergence theorem, see [`crate::geometry`]);
//! - no T-junctions: combinatorially, every directed edge of a cell's outward faces is matched
//!   by its reverse in the same cell (a closed oriented 2-manifold, common practice); and
//!   geometrically, no mesh vertex lies inside an edge of a face (points binned on a uniform
//!   grid, relative tolerance `1e-9` of the edge length);
//! - the sum of cell volumes equals the volume enclosed by the boundary faces (divergence
//!   theorem over the boundary) within `1e-9` relative.
//!
//! When the arrays are inconsistent the geometric checks are skipped (`geometry_checked` is
//! false). Lean and parallel: nothing is stored per face but u32 CSR buckets (faces by smallest
//! vertex for duplicates; edges by lower end point, a slab at a time, for T-junctions); cells,
//! faces and points are checked in fixed chunks of [`CHUNK`] and sums are taken per chunk, then
//! over the chunks in order, so the report is identical at any thread count.
//! [`VolumeMesh::validate_keeping_geometry`] also returns the cell geometry the cell pass
//! computed ([`CellGeometry`]) for quality.

use crate::geometry::{cell_volume_centroid_with, polygon_area_centroid, CellFaces, CellGeometry};
use crate::mesh::VolumeMesh;
use octocut_surface::hash::mix;
use octocut_surface::{Aabb, Vec3};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::sync::atomic::{AtomicU32, Ordering};

/// Relative tolerance of the closure, volume and on-edge checks.
pub const REL_TOL: f64 = 1e-9;

/// Items (faces, cells, points) per unit of parallel work; sums are taken per chunk, then over
/// the chunks in order, so the report does not depend on the thread count.
pub const CHUNK: usize = 4096;

/// Edge occurrences held at once by the T-junction check (4 bytes each: 256 MiB), or a
/// quarter of all when that is more. Validation is not the run's memory peak (the cut stage
/// is), so one pass covers meshes up to about 3M cells.
const SLAB: usize = 1 << 26;

/// One defect of a mesh.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Problem {
    /// An array has the wrong length.
    ArrayLength {
        array: String,
        expected: usize,
        found: usize,
    },
    /// Face offsets decrease or run past the vertex array.
    FaceOffsets { face: u32, start: u32, end: u32 },
    /// A face names a point that does not exist.
    VertexOutOfRange { face: u32, vertex: u32 },
    /// A face names a cell that does not exist.
    CellOutOfRange { face: u32, cell: u32 },
    /// A face with fewer than three distinct vertices or a repeated vertex.
    DegenerateFace {
        face: u32,
        vertices: u32,
        distinct: u32,
        at: Vec3,
    },
    /// An interior face whose owner is its neighbour.
    OwnerIsNeighbour { face: u32, cell: u32, at: Vec3 },
    /// Two faces with the same vertex set.
    DuplicateFace { face: u32, other: u32, at: Vec3 },
    /// A patch that does not start where the previous one (or the interior faces) ended.
    PatchLayout {
        patch: u32,
        start: u32,
        count: u32,
        expected_start: u32,
    },
    /// Boundary faces `first..first + count` belong to no patch.
    BoundaryNotCovered { first: u32, count: u32 },
    /// A cell without faces.
    EmptyCell { cell: u32 },
    /// A cell whose outward face area vectors do not sum to zero.
    OpenCell {
        cell: u32,
        residual: f64,
        area: f64,
        at: Vec3,
    },
    /// A cell of zero or negative volume.
    NonPositiveVolume { cell: u32, volume: f64, at: Vec3 },
    /// Point `point` has the coordinates of the lower-numbered point `other`.
    DuplicatePoint { point: u32, other: u32, at: Vec3 },
    /// The directed edge `from -> to` of cell `cell`'s outward faces has no reverse.
    UnmatchedEdge {
        cell: u32,
        from: u32,
        to: u32,
        at: Vec3,
    },
    /// Mesh vertex `vertex` lies inside edge `edge` of face `face` (a T-junction).
    VertexOnEdge {
        vertex: u32,
        face: u32,
        edge: [u32; 2],
        at: Vec3,
    },
    /// The cells' volumes do not add up to the volume the boundary encloses.
    VolumeMismatch { cells: f64, boundary: f64 },
}

/// Boundary area of one patch.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PatchArea {
    pub name: String,
    pub faces: u32,
    pub area: f64,
}

/// The outcome of [`VolumeMesh::validate`].
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ValidationReport {
    pub n_points: usize,
    pub n_cells: usize,
    pub n_faces: usize,
    pub n_interior_faces: usize,
    pub n_boundary_faces: usize,
    /// Sum of the cell volumes.
    pub cells_volume: f64,
    /// Volume enclosed by the boundary faces.
    pub boundary_volume: f64,
    pub patch_areas: Vec<PatchArea>,
    /// False when inconsistent arrays stopped the geometric checks.
    pub geometry_checked: bool,
    /// Every defect found, grouped by check in a fixed order, ascending ids within a check.
    pub problems: Vec<Problem>,
}

impl ValidationReport {
    /// True when no problem was found.
    pub fn is_valid(&self) -> bool {
        self.problems.is_empty() && self.geometry_checked
    }
}

impl VolumeMesh {
    /// Proves the mesh valid or lists every defect.
    ///
    /// ```
    /// use octocut_volmesh::testmesh;
    /// let r = testmesh::block(3, 1.0).validate();
    /// assert!(r.is_valid());
    /// assert!((r.cells_volume - 27.0).abs() < 1e-12); // exact: 3^3
    /// ```
    pub fn validate(&self) -> ValidationReport {
        self.validate_impl(false).0
    }

    /// [`VolumeMesh::validate`], also returning the cell geometry the proof computed (the
    /// cell -> faces CSR, every cell's volume and centroid) for [`crate::quality::quality_with`],
    /// so that quality does not compute it again. `None` when inconsistent arrays stopped the
    /// geometric checks. The report is the one `validate` gives.
    ///
    /// ```
    /// use octocut_volmesh::{geometry::CellGeometry, testmesh};
    /// let m = testmesh::refined_block(2, 1.0, &[[0, 0, 0]]);
    /// let (r, g) = m.validate_keeping_geometry();
    /// assert_eq!(r, m.validate());
    /// assert_eq!(g.unwrap(), CellGeometry::new(&m));
    /// ```
    pub fn validate_keeping_geometry(&self) -> (ValidationReport, Option<CellGeometry>) {
        self.validate_impl(true)
    }

    fn validate_impl(&self, keep: bool) -> (ValidationReport, Option<CellGeometry>) {
        let mut rep = ValidationReport {
            n_points: self.points.len(),
            n_cells: self.n_cells(),
            n_faces: self.n_faces(),
            n_interior_faces: self.n_interior_faces(),
            n_boundary_faces: self.n_faces().saturating_sub(self.n_interior_faces()),
            cells_volume: 0.0,
            boundary_volume: 0.0,
            patch_areas: Vec::new(),
            geometry_checked: false,
            problems: Vec::new(),
        };
        if !self.check_arrays(&mut rep.problems) {
            return (rep, None);
        }
        self.check_faces(&mut rep.problems);
        if rep.problems.iter().any(|p| {
            matches!(
                p,
                Problem::VertexOutOfRange { .. } | Problem::CellOutOfRange { .. }
            )
        }) {
            return (rep, None);
        }
        rep.geometry_checked = true;
        self.check_patches(&mut rep.problems);
        self.check_duplicate_faces(&mut rep.problems);
        self.check_duplicate_points(&mut rep.problems);

        // T-junctions first (their problems are reported after the cells'): the point bins and
        // edge slabs are freed before the cell pass keeps its geometry, so the two working sets
        // are never held at once
        let mut on_edges = Vec::new();
        self.check_vertices_on_edges(&mut on_edges);

        // per cell: closure, volume, directed edges; volumes summed per chunk, chunks in order;
        // each cell's volume and centroid kept when asked
        let cf = CellFaces::new(self);
        let nc = self.n_cells();
        let n_chunks = nc.div_ceil(CHUNK);
        let (mut volume, mut centroid) = if keep {
            (vec![0.0f64; nc], vec![Vec3::ZERO; nc])
        } else {
            (Vec::new(), Vec::new())
        };
        let mut outs: Vec<(&mut [f64], &mut [Vec3])> = if keep {
            volume
                .chunks_mut(CHUNK)
                .zip(centroid.chunks_mut(CHUNK))
                .collect()
        } else {
            (0..n_chunks).map(|_| (&mut [][..], &mut [][..])).collect()
        };
        let per_chunk: Vec<(f64, Vec<Problem>)> = outs
            .par_iter_mut()
            .enumerate()
            .map(|(k, (vs, cs))| {
                let (mut edges, mut probs, mut vol) = ((Vec::new(), Vec::new()), Vec::new(), 0.0);
                let mut averages = Vec::new();
                for c in k * CHUNK..((k + 1) * CHUNK).min(nc) {
                    let (v, x) =
                        self.check_cell(c as u32, cf.of(c), &mut averages, &mut edges, &mut probs);
                    vol += v;
                    if let (Some(vo), Some(xo)) =
                        (vs.get_mut(c - k * CHUNK), cs.get_mut(c - k * CHUNK))
                    {
                        (*vo, *xo) = (v, x);
                    }
                }
                (vol, probs)
            })
            .collect();
        drop(outs);
        for (v, probs) in per_chunk {
            rep.cells_volume += v;
            rep.problems.extend(probs);
        }
        rep.problems.extend(on_edges);
        let geometry = keep.then_some(CellGeometry {
            faces: cf,
            volume,
            centroid,
        });

        // boundary: enclosed volume and patch areas, summed per chunk of faces, chunks in order
        let bbox = Aabb::from_points(self.points.iter().copied());
        let r = if bbox.is_empty() {
            Vec3::ZERO
        } else {
            bbox.center()
        };
        let nb = self.n_interior_faces()..self.n_faces();
        rep.boundary_volume =
            chunked_sum(nb.clone(), |f| fan_volume(&self.points, self.face(f), r));
        for p in &self.patches {
            let lo = (p.start as usize).clamp(nb.start, nb.end);
            let hi = (p.start as usize + p.count as usize).clamp(nb.start, nb.end);
            let area = chunked_sum(lo..hi.max(lo), |f| {
                polygon_area_centroid(&self.points, self.face(f)).0.length()
            });
            rep.patch_areas.push(PatchArea {
                name: p.name.clone(),
                faces: p.count,
                area,
            });
        }
        let scale = rep.boundary_volume.abs().max(rep.cells_volume.abs());
        if (rep.cells_volume - rep.boundary_volume).abs() > REL_TOL * scale {
            rep.problems.push(Problem::VolumeMismatch {
                cells: rep.cells_volume,
                boundary: rep.boundary_volume,
            });
        }
        (rep, geometry)
    }

    /// Lengths and offsets; false when the face arrays cannot be read.
    fn check_arrays(&self, out: &mut Vec<Problem>) -> bool {
        fn len(out: &mut Vec<Problem>, array: &str, expected: usize, found: usize) -> bool {
            if expected != found {
                out.push(Problem::ArrayLength {
                    array: array.into(),
                    expected,
                    found,
                });
            }
            expected == found
        }
        let mut ok = len(
            out,
            "face_offsets",
            self.n_faces() + 1,
            self.face_offsets.len(),
        );
        len(out, "cell_cut", self.n_cells(), self.cell_cut.len());
        len(out, "cell_region", self.n_cells(), self.cell_region.len());
        if self.neighbour.len() > self.owner.len() {
            ok &= len(
                out,
                "neighbour (at most owner)",
                self.owner.len(),
                self.neighbour.len(),
            );
        }
        if !ok {
            return false;
        }
        if self.face_offsets[0] != 0 {
            out.push(Problem::FaceOffsets {
                face: 0,
                start: self.face_offsets[0],
                end: 0,
            });
            ok = false;
        }
        let nv = self.face_vertices.len() as u64;
        for f in 0..self.n_faces() {
            let (s, e) = (self.face_offsets[f], self.face_offsets[f + 1]);
            if e < s || e as u64 > nv {
                out.push(Problem::FaceOffsets {
                    face: f as u32,
                    start: s,
                    end: e,
                });
                ok = false;
            }
        }
        if ok {
            let last = *self.face_offsets.last().unwrap() as usize;
            ok &= len(out, "face_vertices", last, nv as usize);
        }
        ok
    }

    /// Per face: ids in range, distinct vertices, owner != neighbour.
    fn check_faces(&self, out: &mut Vec<Problem>) {
        let np = self.points.len() as u32;
        let nc = self.n_cells() as u32;
        let nf = self.n_faces();
        let per_chunk: Vec<Vec<Problem>> = (0..nf.div_ceil(CHUNK))
            .into_par_iter()
            .map(|k| {
                let (mut probs, mut sorted) = (Vec::new(), Vec::new());
                for f in k * CHUNK..((k + 1) * CHUNK).min(nf) {
                    let vs = self.face(f);
                    let fu = f as u32;
                    let mut in_range = true;
                    for &v in vs {
                        if v >= np {
                            probs.push(Problem::VertexOutOfRange {
                                face: fu,
                                vertex: v,
                            });
                            in_range = false;
                        }
                    }
                    let o = self.owner[f];
                    let n = self.neighbour.get(f).copied();
                    for c in std::iter::once(o).chain(n) {
                        if c >= nc {
                            probs.push(Problem::CellOutOfRange { face: fu, cell: c });
                        }
                    }
                    if !in_range {
                        continue;
                    }
                    sorted.clear();
                    sorted.extend_from_slice(vs);
                    sorted.sort_unstable();
                    sorted.dedup();
                    let degenerate = sorted.len() < 3 || sorted.len() != vs.len();
                    if degenerate || n == Some(o) {
                        let at = vertex_average(&self.points, vs);
                        if degenerate {
                            probs.push(Problem::DegenerateFace {
                                face: fu,
                                vertices: vs.len() as u32,
                                distinct: sorted.len() as u32,
                                at,
                            });
                        }
                        if n == Some(o) {
                            probs.push(Problem::OwnerIsNeighbour {
                                face: fu,
                                cell: o,
                                at,
                            });
                        }
                    }
                }
                probs
            })
            .collect();
        out.extend(per_chunk.into_iter().flatten());
    }

    fn check_patches(&self, out: &mut Vec<Problem>) {
        let mut expected = self.n_interior_faces() as u64;
        for (i, p) in self.patches.iter().enumerate() {
            if p.start as u64 != expected {
                out.push(Problem::PatchLayout {
                    patch: i as u32,
                    start: p.start,
                    count: p.count,
                    expected_start: expected as u32,
                });
            }
            expected = p.start as u64 + p.count as u64;
        }
        let nf = self.n_faces() as u64;
        if expected < nf {
            out.push(Problem::BoundaryNotCovered {
                first: expected as u32,
                count: (nf - expected) as u32,
            });
        } else if expected > nf && !self.patches.is_empty() {
            let last = self.patches.len() - 1;
            let p = &self.patches[last];
            out.push(Problem::PatchLayout {
                patch: last as u32,
                start: p.start,
                count: p.count,
                expected_start: p.start,
            });
        }
    }

    fn check_duplicate_faces(&self, out: &mut Vec<Problem>) {
        // Equal vertex sets have equal smallest vertices: bucket the faces by their smallest
        // vertex (CSR of u32, faces ascending within a bucket), then within a bucket sort by a
        // hash of the sorted vertex set and compare equal hashes exactly.
        let np = self.points.len();
        let nf = self.n_faces();
        let mut start = vec![0u32; np + 1];
        let mut empty: Vec<u32> = Vec::new();
        for f in 0..nf {
            match self.face(f).iter().min() {
                Some(&v) => start[v as usize + 1] += 1,
                None => empty.push(f as u32),
            }
        }
        for v in 0..np {
            start[v + 1] += start[v];
        }
        let mut faces = vec![0u32; start[np] as usize];
        for f in 0..nf {
            if let Some(&v) = self.face(f).iter().min() {
                faces[start[v as usize] as usize] = f as u32;
                start[v as usize] += 1;
            }
        }
        // start[v] now ends bucket v: shift back to starts
        for v in (1..=np).rev() {
            start[v] = start[v - 1];
        }
        start[0] = 0;
        let sorted = |f: u32, buf: &mut Vec<u32>| {
            buf.clear();
            buf.extend_from_slice(self.face(f as usize));
            buf.sort_unstable();
        };
        let mut found: Vec<(u32, u32)> = (0..np.div_ceil(CHUNK))
            .into_par_iter()
            .flat_map_iter(|k| {
                let mut local = Vec::new();
                let mut keys: Vec<(u64, u32)> = Vec::new();
                let (mut x, mut y) = (Vec::new(), Vec::new());
                for v in k * CHUNK..((k + 1) * CHUNK).min(np) {
                    let bucket = &faces[start[v] as usize..start[v + 1] as usize];
                    if bucket.len() < 2 {
                        continue;
                    }
                    keys.clear();
                    for &f in bucket {
                        sorted(f, &mut x);
                        // FNV-1a over the sorted ids (any fixed hash works: collisions are
                        // re-checked)
                        let mut h: u64 = 0xcbf2_9ce4_8422_2325;
                        for &v in x.iter() {
                            h = (h ^ v as u64).wrapping_mul(0x0100_0000_01b3);
                        }
                        keys.push((h, f));
                    }
                    keys.sort_unstable();
                    let mut i = 0;
                    while i < keys.len() {
                        let mut j = i + 1;
                        while j < keys.len() && keys[j].0 == keys[i].0 {
                            j += 1;
                        }
                        // within a group of equal hashes (ascending face ids), report each
                        // face against the lowest earlier face with the same vertex set
                        for k in i + 1..j {
                            sorted(keys[k].1, &mut x);
                            for &(_, other) in &keys[i..k] {
                                sorted(other, &mut y);
                                if x == y {
                                    local.push((keys[k].1, other));
                                    break;
                                }
                            }
                        }
                        i = j;
                    }
                }
                local
            })
            .collect();
        // faces without vertices: all share the empty vertex set
        found.extend(empty.iter().skip(1).map(|&f| (f, empty[0])));
        found.sort_unstable();
        for (face, other) in found {
            let at = vertex_average(&self.points, self.face(face as usize));
            out.push(Problem::DuplicateFace { face, other, at });
        }
    }

    fn check_duplicate_points(&self, out: &mut Vec<Problem>) {
        let pts = &self.points;
        // exact coordinate bits (+ 0.0 turns -0.0 into 0.0: equal coordinates, equal bits)
        let bits = |p: Vec3| {
            [
                (p.x + 0.0).to_bits(),
                (p.y + 0.0).to_bits(),
                (p.z + 0.0).to_bits(),
            ]
        };
        // (hash of the bits, id) pairs sorted: equal points sit in one run of equal hashes,
        // ids ascending; 16 bytes a point, no comparison reads the points
        let mut keyed: Vec<(u64, u32)> = pts
            .par_iter()
            .enumerate()
            .map(|(i, &p)| {
                let [x, y, z] = bits(p);
                (mix(mix(mix(x) ^ y) ^ z), i as u32)
            })
            .collect();
        keyed.par_sort_unstable();
        let mut found = Vec::new();
        let mut i = 0;
        while i < keyed.len() {
            let mut j = i + 1;
            while j < keyed.len() && keyed[j].0 == keyed[i].0 {
                j += 1;
            }
            // each point against the lowest earlier point of the run with the same bits
            for k in i + 1..j {
                let b = bits(pts[keyed[k].1 as usize]);
                if let Some(&(_, other)) = keyed[i..k]
                    .iter()
                    .find(|&&(_, o)| bits(pts[o as usize]) == b)
                {
                    found.push((keyed[k].1, other));
                }
            }
            i = j;
        }
        found.sort_unstable();
        for (point, other) in found {
            out.push(Problem::DuplicatePoint {
                point,
                other,
                at: pts[point as usize],
            });
        }
    }

    /// Closure, volume and directed-edge matching of one cell; pushes its problems to
    /// `probs` and returns its volume and centroid (those of
    /// [`crate::geometry::cell_volume_centroid`]).
    fn check_cell(
        &self,
        c: u32,
        faces: &[u32],
        averages: &mut Vec<Vec3>,
        edges: &mut (Vec<u64>, Vec<u64>),
        probs: &mut Vec<Problem>,
    ) -> (f64, Vec3) {
        if faces.is_empty() {
            probs.push(Problem::EmptyCell { cell: c });
            // what cell_volume_centroid gives a cell without faces
            return (0.0, Vec3::ZERO);
        }
        let g = cell_volume_centroid_with(self, c, faces, averages);
        let residual = g.area_sum.length();
        if residual > REL_TOL * g.area_mag {
            probs.push(Problem::OpenCell {
                cell: c,
                residual,
                area: g.area_mag,
                at: g.centroid,
            });
        }
        if g.volume.is_nan() || g.volume <= 0.0 {
            probs.push(Problem::NonPositiveVolume {
                cell: c,
                volume: g.volume,
                at: g.centroid,
            });
        }
        // directed edges split by direction (lower to higher id, and back): the cell's edges
        // are matched exactly when the two sorted lists are equal; only a cell where they
        // differ pays for the signed sums that name the unmatched edges
        let (up, down) = (&mut edges.0, &mut edges.1);
        up.clear();
        down.clear();
        for &f in faces {
            let vs = self.face(f as usize);
            let out = self.owner[f as usize] == c;
            for i in 0..vs.len() {
                let (mut a, mut b) = (vs[i], vs[(i + 1) % vs.len()]);
                if !out {
                    std::mem::swap(&mut a, &mut b);
                }
                if a < b {
                    up.push((a as u64) << 32 | b as u64);
                } else {
                    down.push((b as u64) << 32 | a as u64);
                }
            }
        }
        up.sort_unstable();
        down.sort_unstable();
        if up == down {
            return (g.volume, g.centroid);
        }
        let mut edges: Vec<(u64, i32)> = up.iter().map(|&k| (k, 1)).collect();
        edges.extend(down.iter().map(|&k| (k, -1)));
        edges.sort_unstable();
        let mut i = 0;
        while i < edges.len() {
            let key = edges[i].0;
            let mut sum = 0;
            while i < edges.len() && edges[i].0 == key {
                sum += edges[i].1;
                i += 1;
            }
            if sum != 0 {
                let (lo, hi) = ((key >> 32) as u32, key as u32);
                let (from, to) = if sum > 0 { (lo, hi) } else { (hi, lo) };
                let at = 0.5 * (self.points[lo as usize] + self.points[hi as usize]);
                probs.push(Problem::UnmatchedEdge {
                    cell: c,
                    from,
                    to,
                    at,
                });
            }
        }
        (g.volume, g.centroid)
    }

    /// Geometric T-junction check: points lying strictly inside an edge of some face.
    ///
    /// The unique undirected edges are enumerated by their lower end point, a slab of lower
    /// end points at a time: per slab, a CSR of the upper end points (u32) filled from every
    /// face, each row sorted and deduplicated in place. Points are binned on a uniform grid
    /// (sorted `(bin, point)` pairs, each row of bins along x found by a [`RowTable`]); every
    /// edge tests the points of the bins its box (widened by the tolerance) touches. The grid
    /// spacing only affects speed.
    fn check_vertices_on_edges(&self, out: &mut Vec<Problem>) {
        self.vertices_on_edges(out, SLAB)
    }

    /// [`Self::check_vertices_on_edges`] holding at most `slab` edge occurrences at once, or a
    /// quarter of them when that is more (each slab scans every face).
    fn vertices_on_edges(&self, out: &mut Vec<Problem>, slab: usize) {
        let pts = &self.points;
        let np = pts.len();
        let nf = self.n_faces();
        if np == 0 || self.face_vertices.is_empty() {
            return;
        }
        let lower = |vs: &[u32], i: usize| {
            let (a, b) = (vs[i], vs[(i + 1) % vs.len()]);
            (a.min(b), a.max(b))
        };
        // edge occurrences per lower end point (atomic counts: the same at any thread count)
        let count: Vec<AtomicU32> = (0..np).map(|_| AtomicU32::new(0)).collect();
        (0..nf.div_ceil(CHUNK)).into_par_iter().for_each(|k| {
            for f in k * CHUNK..((k + 1) * CHUNK).min(nf) {
                let vs = self.face(f);
                for i in 0..vs.len() {
                    count[lower(vs, i).0 as usize].fetch_add(1, Ordering::Relaxed);
                }
            }
        });
        let count: Vec<u32> = count.into_iter().map(AtomicU32::into_inner).collect();
        // grid spacing: the median length of a deterministic sample of edges (the first edge
        // of every `step`-th face), at least 2^-20 of the box diagonal; origin shifted half a
        // cell so that lattice points sit at cell centres
        let bbox = Aabb::from_points(pts.iter().copied());
        let step = (nf / 65536).max(1);
        let mut lens: Vec<f64> = (0..nf)
            .step_by(step)
            .filter(|&f| !self.face(f).is_empty())
            .map(|f| {
                let (a, b) = lower(self.face(f), 0);
                (pts[b as usize] - pts[a as usize]).length()
            })
            .collect();
        let diag = bbox.diagonal();
        let g = if lens.is_empty() {
            0.0
        } else {
            let mid = lens.len() / 2;
            *lens.select_nth_unstable_by(mid, |a, b| a.total_cmp(b)).1
        };
        let g = if g > 0.0 && g.is_finite() {
            g.max(diag * (-20f64).exp2())
        } else {
            diag.max(1.0)
        };
        let origin = bbox.min - Vec3::splat(0.5 * g);
        // floor without a libm call (x86-64 without SSE4.1 has no rounding instruction)
        let floor = |x: f64| {
            let t = x as i64;
            t - ((t as f64) > x) as i64
        };
        let cell_of = |p: Vec3| -> [i64; 3] {
            let q = (p - origin) / g;
            [floor(q.x), floor(q.y), floor(q.z)]
        };
        let ext = cell_of(bbox.max);
        let (nx, ny) = (ext[0] + 1, ext[1] + 1);
        let key = |c: [i64; 3]| ((c[2] * ny + c[1]) * nx + c[0]) as u64;
        let mut binned: Vec<(u64, u32)> = (0..np)
            .into_par_iter()
            .map(|i| (key(cell_of(pts[i])), i as u32))
            .collect();
        binned.par_sort_unstable();
        let binned = &binned;
        // where each point sits in `binned`, to start a row of bins at an end point's bin
        let mut pos = vec![0u32; np];
        for (i, &(_, v)) in binned.iter().enumerate() {
            pos[v as usize] = i as u32;
        }
        let pos = &pos;
        let rows_of = RowTable::new(binned, nx as u64);
        let rows_of = &rows_of;
        let bin_start = |v: u32| {
            let mut i = pos[v as usize] as usize;
            let k = binned[i].0;
            while i > 0 && binned[i - 1].0 == k {
                i -= 1;
            }
            (k, i)
        };

        // the points strictly inside edge (a, b), ascending
        let test = |a: u32, b: u32, probs: &mut Vec<Problem>| {
            let (pa, pb) = (pts[a as usize], pts[b as usize]);
            let d = pb - pa;
            let l2 = d.length_squared();
            if l2 == 0.0 || !l2.is_finite() {
                return;
            }
            let first = probs.len();
            let tol = REL_TOL * l2.sqrt();
            let lo = cell_of(pa.min(pb) - Vec3::splat(tol)).map(|v| v.max(0));
            let hi = cell_of(pa.max(pb) + Vec3::splat(tol));
            let hi = [hi[0].min(ext[0]), hi[1].min(ext[1]), hi[2].min(ext[2])];
            if hi[0] < lo[0] {
                return; // only with non-finite coordinates
            }
            let known = [bin_start(a), bin_start(b)];
            for z in lo[2]..=hi[2] {
                for y in lo[1]..=hi[1] {
                    // a row of bins along x is contiguous in key order: find its first bin
                    // (an end point's bin or a binary search), then walk forward
                    let k0 = key([lo[0], y, z]);
                    let mut s = match known.iter().find(|kn| kn.0 == k0) {
                        Some(kn) => kn.1,
                        None => match rows_of.get(k0 / nx as u64) {
                            Some((r0, r1)) => r0 + binned[r0..r1].partition_point(|q| q.0 < k0),
                            None => continue, // no point in this row of bins
                        },
                    };
                    for kk in k0..=k0 + (hi[0] - lo[0]) as u64 {
                        while s < binned.len() && binned[s].0 < kk {
                            s += 1;
                        }
                        while s < binned.len() && binned[s].0 == kk {
                            let v = binned[s].1;
                            s += 1;
                            if v == a || v == b {
                                continue;
                            }
                            let p = pts[v as usize];
                            let t = (p - pa).dot(d) / l2;
                            if t <= REL_TOL || t >= 1.0 - REL_TOL {
                                continue;
                            }
                            if (p - (pa + t * d)).length_squared() <= tol * tol {
                                probs.push(Problem::VertexOnEdge {
                                    vertex: v,
                                    face: u32::MAX,
                                    edge: [a, b],
                                    at: p,
                                });
                            }
                        }
                    }
                }
            }
            probs[first..].sort_by_key(|p| match p {
                Problem::VertexOnEdge { vertex, .. } => *vertex,
                _ => 0,
            });
        };

        // each slab rescans every face: hold at least a quarter of all occurrences at once so
        // there are at most about five scans whatever the size
        let total_occ: usize = count.iter().map(|&n| n as usize).sum();
        let slab = slab.max(total_occ.div_ceil(4));
        let mut found: Vec<Problem> = Vec::new();
        let mut rows: Vec<u32>;
        let mut offs: Vec<u32> = Vec::new();
        let mut p0 = 0usize;
        while p0 < np {
            // slab [p0, p1): at most SLAB occurrences (or a single point)
            let (mut p1, mut total) = (p0, 0usize);
            while p1 < np && (p1 == p0 || total + (count[p1] as usize) <= slab) {
                total += count[p1] as usize;
                p1 += 1;
            }
            offs.clear();
            offs.push(0);
            for p in p0..p1 {
                offs.push(offs[p - p0] + count[p]);
            }
            // filled in parallel: a row's order depends on the threads, but every row is
            // sorted before it is read
            let filled: Vec<AtomicU32> = (0..total).map(|_| AtomicU32::new(0)).collect();
            let next: Vec<AtomicU32> = offs[..p1 - p0].iter().map(|&o| AtomicU32::new(o)).collect();
            (0..nf.div_ceil(CHUNK)).into_par_iter().for_each(|k| {
                for f in k * CHUNK..((k + 1) * CHUNK).min(nf) {
                    let vs = self.face(f);
                    for i in 0..vs.len() {
                        let (a, b) = lower(vs, i);
                        if (p0..p1).contains(&(a as usize)) {
                            let slot = next[a as usize - p0].fetch_add(1, Ordering::Relaxed);
                            filled[slot as usize].store(b, Ordering::Relaxed);
                        }
                    }
                }
            });
            drop(next);
            rows = filled.into_iter().map(AtomicU32::into_inner).collect();
            // split the rows into chunks of CHUNK lower points, sorted and tested in parallel
            let mut parts: Vec<(usize, &mut [u32])> = Vec::new();
            let mut rest: &mut [u32] = &mut rows;
            let mut p = p0;
            while p < p1 {
                let q = (p + CHUNK).min(p1);
                let len = (offs[q - p0] - offs[p - p0]) as usize;
                let (head, tail) = rest.split_at_mut(len);
                parts.push((p, head));
                rest = tail;
                p = q;
            }
            let offs = &offs;
            let per_chunk: Vec<Vec<Problem>> = parts
                .into_par_iter()
                .map(|(p, part)| {
                    let mut probs = Vec::new();
                    let base = offs[p - p0] as usize;
                    let q = (p + CHUNK).min(p1);
                    for a in p..q {
                        let s = offs[a - p0] as usize - base;
                        let e = offs[a + 1 - p0] as usize - base;
                        let row = &mut part[s..e];
                        row.sort_unstable();
                        let mut prev = None;
                        for &b in row.iter() {
                            if prev != Some(b) {
                                test(a as u32, b, &mut probs);
                                prev = Some(b);
                            }
                        }
                    }
                    probs
                })
                .collect();
            found.extend(per_chunk.into_iter().flatten());
            p0 = p1;
        }
        if found.is_empty() {
            return;
        }
        // name, for each reported edge, the lowest face using it
        let mut want: Vec<u64> = found
            .iter()
            .filter_map(|p| match p {
                Problem::VertexOnEdge { edge: [a, b], .. } => Some((*a as u64) << 32 | *b as u64),
                _ => None,
            })
            .collect();
        want.sort_unstable();
        want.dedup();
        let mut face_of = vec![u32::MAX; want.len()];
        for f in 0..self.n_faces() {
            let vs = self.face(f);
            for i in 0..vs.len() {
                let (a, b) = lower(vs, i);
                let k = (a as u64) << 32 | b as u64;
                if let Ok(j) = want.binary_search(&k) {
                    face_of[j] = face_of[j].min(f as u32);
                }
            }
        }
        for p in found.iter_mut() {
            if let Problem::VertexOnEdge {
                edge: [a, b], face, ..
            } = p
            {
                let k = (*a as u64) << 32 | *b as u64;
                *face = face_of[want.binary_search(&k).unwrap()];
            }
        }
        out.extend(found);
    }
}

/// Where each row of bins (`bin key / nx`, a run of bins along x) starts and ends in the sorted
/// `(bin, point)` pairs: an open-addressing table (linear probing, [`mix`] hash), so that an
/// edge finds a row of its box without a binary search over all points.
struct RowTable {
    slots: Vec<(u64, u32, u32)>,
    mask: usize,
}

impl RowTable {
    const EMPTY: u64 = u64::MAX;

    fn new(binned: &[(u64, u32)], nx: u64) -> RowTable {
        let mut runs = Vec::new();
        let mut i = 0;
        while i < binned.len() {
            let r = binned[i].0 / nx;
            let j = i + binned[i..].partition_point(|q| q.0 / nx == r);
            runs.push((r, i as u32, j as u32));
            i = j;
        }
        let cap = (2 * runs.len()).next_power_of_two().max(2);
        let mask = cap - 1;
        let mut slots = vec![(Self::EMPTY, 0, 0); cap];
        for run in runs {
            let mut h = mix(run.0) as usize & mask;
            while slots[h].0 != Self::EMPTY {
                h = (h + 1) & mask;
            }
            slots[h] = run;
        }
        RowTable { slots, mask }
    }

    /// The range of row `r` in the pairs, if any point lies in it.
    fn get(&self, r: u64) -> Option<(usize, usize)> {
        let mut h = mix(r) as usize & self.mask;
        loop {
            let s = self.slots[h];
            if s.0 == r {
                return Some((s.1 as usize, s.2 as usize));
            }
            if s.0 == Self::EMPTY {
                return None;
            }
            h = (h + 1) & self.mask;
        }
    }
}

/// Sum of `f(i)` over `range`: per chunk of [`CHUNK`] in parallel, then the chunks in order.
pub(crate) fn chunked_sum(range: std::ops::Range<usize>, f: impl Fn(usize) -> f64 + Sync) -> f64 {
    let n = range.len();
    let parts: Vec<f64> = (0..n.div_ceil(CHUNK))
        .into_par_iter()
        .map(|k| {
            (range.start + k * CHUNK..range.start + ((k + 1) * CHUNK).min(n))
                .map(&f)
                .sum()
        })
        .collect();
    parts.into_iter().sum()
}

fn vertex_average(points: &[Vec3], vs: &[u32]) -> Vec3 {
    let mut c = Vec3::ZERO;
    for &v in vs {
        c += points[v as usize];
    }
    c / vs.len().max(1) as f64
}

/// Signed volume of the cone from `r` over the fan triangulation of polygon `vs`.
fn fan_volume(points: &[Vec3], vs: &[u32], r: Vec3) -> f64 {
    let c0 = vertex_average(points, vs) - r;
    let mut v = 0.0;
    for i in 0..vs.len() {
        let a = points[vs[i] as usize] - r;
        let b = points[vs[(i + 1) % vs.len()] as usize] - r;
        v += c0.dot(a.cross(b)) / 6.0;
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testmesh::{self, broken};

    fn kinds(r: &ValidationReport) -> Vec<&'static str> {
        let mut k: Vec<&'static str> = r
            .problems
            .iter()
            .map(|p| match p {
                Problem::ArrayLength { .. } => "array_length",
                Problem::FaceOffsets { .. } => "face_offsets",
                Problem::VertexOutOfRange { .. } => "vertex_out_of_range",
                Problem::CellOutOfRange { .. } => "cell_out_of_range",
                Problem::DegenerateFace { .. } => "degenerate_face",
                Problem::OwnerIsNeighbour { .. } => "owner_is_neighbour",
                Problem::DuplicateFace { .. } => "duplicate_face",
                Problem::PatchLayout { .. } => "patch_layout",
                Problem::BoundaryNotCovered { .. } => "boundary_not_covered",
                Problem::EmptyCell { .. } => "empty_cell",
                Problem::OpenCell { .. } => "open_cell",
                Problem::NonPositiveVolume { .. } => "non_positive_volume",
                Problem::DuplicatePoint { .. } => "duplicate_point",
                Problem::UnmatchedEdge { .. } => "unmatched_edge",
                Problem::VertexOnEdge { .. } => "vertex_on_edge",
                Problem::VolumeMismatch { .. } => "volume_mismatch",
            })
            .collect();
        k.dedup();
        k
    }

    #[test]
    fn good_meshes_are_valid() {
        let r = testmesh::block(1, 2.0).validate();
        assert!(r.is_valid(), "{:?}", r.problems);
        assert!((r.cells_volume - 8.0).abs() < 1e-12); // exact: cube volume a^3
        assert_eq!(r.patch_areas.len(), 6);
        for p in &r.patch_areas {
            assert!((p.area - 4.0).abs() < 1e-12); // exact: square area a^2
        }
        let r = testmesh::block(4, 0.25).validate();
        assert!(r.is_valid(), "{:?}", r.problems);
        assert_eq!(
            (r.n_cells, r.n_interior_faces, r.n_boundary_faces),
            (64, 144, 96)
        ); // exact: 3 n^2 (n-1), 6 n^2
        assert!((r.boundary_volume - 1.0).abs() < 1e-12);
        let m = testmesh::refined_block(3, 1.0, &[[1, 1, 1], [0, 0, 0], [1, 0, 0]]);
        let r = m.validate();
        assert!(r.is_valid(), "{:?}", r.problems);
        assert_eq!(r.n_cells, 27 - 3 + 24);
        assert!((r.cells_volume - 27.0).abs() < 1e-12); // exact: 3^3
        let r = testmesh::clipped_cube().validate();
        assert!(r.is_valid(), "{:?}", r.problems);
        assert!((r.cells_volume - (1.0 - 1.0 / 48.0)).abs() < 1e-14); // exact: 1 - (1/2)^3/6
        let l = testmesh::l_cell().validate();
        assert!(l.is_valid(), "{:?}", l.problems);
        assert!((l.cells_volume - 3.0).abs() < 1e-14); // exact: three unit cubes
        assert!((l.patch_areas[0].area - 14.0).abs() < 1e-14); // exact: 2*3 + perimeter 8 * 1
        let tri = r.patch_areas.iter().find(|p| p.name == "wall").unwrap();
        // exact: equilateral triangle of side sqrt(2)/2: sqrt(3)/4 * 1/2
        assert!((tri.area - 3f64.sqrt() / 8.0).abs() < 1e-14);
    }

    #[test]
    fn hanging_faces_list_midpoints() {
        // the coarse cell next to the refined one has its shared side split in four
        let m = testmesh::refined_block(2, 1.0, &[[0, 0, 0]]);
        let cf = CellFaces::new(&m);
        let coarse = (0..m.n_cells()).find(|&c| m.cell_level[c] == 0).unwrap();
        let nbr_fine = cf
            .of(coarse)
            .iter()
            .filter(|&&f| {
                (f as usize) < m.n_interior_faces() && {
                    let o = m.owner[f as usize] as usize;
                    let n = m.neighbour[f as usize] as usize;
                    m.cell_level[if o == coarse { n } else { o }] == 1
                }
            })
            .count();
        assert_eq!(nbr_fine, 4);
        // its four sides touching the refined cell along an edge carry that edge's midpoint
        let nverts: usize = cf
            .of(coarse)
            .iter()
            .map(|&f| m.face(f as usize).len())
            .sum();
        // exact by construction: 4 sub-faces of 4 vertices + 4 sides of 5 + the far side of 4
        assert_eq!(nverts, 16 + 20 + 4);
    }

    #[test]
    fn broken_meshes_are_caught() {
        let r = broken::missing_face().validate();
        assert!(!r.is_valid());
        let k = kinds(&r);
        assert!(
            k.contains(&"open_cell") && k.contains(&"unmatched_edge"),
            "{k:?}"
        );
        assert!(k.contains(&"volume_mismatch"), "{k:?}");
        assert!(r
            .problems
            .iter()
            .any(|p| matches!(p, Problem::OpenCell { cell: 1, .. })));

        let r = broken::flipped_face().validate();
        let open: Vec<u32> = r
            .problems
            .iter()
            .filter_map(|p| match p {
                Problem::OpenCell { cell, .. } => Some(*cell),
                _ => None,
            })
            .collect();
        assert_eq!(open, vec![0, 1]);
        assert!(kinds(&r).contains(&"unmatched_edge"));

        let r = broken::duplicated_point().validate();
        assert!(r
            .problems
            .iter()
            .any(|p| matches!(p, Problem::DuplicatePoint { point: 12, .. })));
        assert!(kinds(&r).contains(&"unmatched_edge"));

        let m_t = broken::t_junction();
        let r = m_t.validate();
        let k = kinds(&r);
        assert!(
            k.contains(&"unmatched_edge") && k.contains(&"vertex_on_edge"),
            "{k:?}"
        );
        // closure still holds: a T-junction is invisible to the area sum
        assert!(!k.contains(&"open_cell"));
        for p in &r.problems {
            if let Problem::VertexOnEdge { at, face, edge, .. } = p {
                assert!(m_t.face(*face as usize).contains(&edge[0]));
                // the hanging vertices are edge midpoints of the refined cell [0,1]^3
                assert!(at.to_array().iter().any(|c| (c - 0.5).abs() < 1e-12));
            }
        }

        let mut m = testmesh::block(2, 1.0);
        // a copy of the last boundary face appended to the last patch, vertex order rotated
        let f = m.n_faces() - 1;
        let mut vs = m.face(f).to_vec();
        vs.rotate_left(1);
        m.face_vertices.extend(vs);
        m.face_offsets.push(m.face_vertices.len() as u32);
        m.owner.push(m.owner[f]);
        m.patches.last_mut().unwrap().count += 1;
        let r = m.validate();
        let got: Vec<_> = r
            .problems
            .iter()
            .filter_map(|p| match p {
                Problem::DuplicateFace { face, other, .. } => Some((*face, *other)),
                _ => None,
            })
            .collect();
        assert_eq!(got, vec![(f as u32 + 1, f as u32)]);

        let mut m = testmesh::block(1, 1.0);
        m.points[0] = Vec3::new(-0.0, 0.0, 0.0);
        m.points.push(Vec3::ZERO);
        let r = m.validate();
        assert!(r.problems.iter().any(|p| matches!(
            p,
            Problem::DuplicatePoint {
                point: 8,
                other: 0,
                ..
            }
        )));

        let r = broken::open_cell().validate();
        let k = kinds(&r);
        assert!(
            k.contains(&"open_cell") && k.contains(&"unmatched_edge"),
            "{k:?}"
        );
    }

    #[test]
    fn array_defects_are_caught() {
        let good = testmesh::block(2, 1.0);
        let mut m = good.clone();
        m.face_vertices[3] = 1000;
        let r = m.validate();
        assert!(!r.geometry_checked);
        assert_eq!(
            r.problems,
            vec![Problem::VertexOutOfRange {
                face: 0,
                vertex: 1000
            }]
        );

        let mut m = good.clone();
        m.neighbour[2] = m.owner[2];
        assert!(kinds(&m.validate()).contains(&"owner_is_neighbour"));

        let mut m = good.clone();
        m.face_offsets.pop();
        assert!(kinds(&m.validate()).contains(&"array_length"));

        let mut m = good.clone();
        m.patches[1].start += 1;
        assert!(kinds(&m.validate()).contains(&"patch_layout"));

        let mut m = good.clone();
        m.patches.pop();
        assert!(kinds(&m.validate()).contains(&"boundary_not_covered"));

        let mut m = good.clone();
        let a = m.face_offsets[0] as usize;
        m.face_vertices[a + 1] = m.face_vertices[a];
        assert!(kinds(&m.validate()).contains(&"degenerate_face"));

        let mut m = good.clone();
        m.cell_level.push(0);
        m.cell_cut.push(0);
        m.cell_region.push(0);
        assert!(kinds(&m.validate()).contains(&"empty_cell"));
    }

    #[test]
    fn slabs_and_chunks_do_not_change_the_report() {
        // a T-junction mesh and a refined block (hanging vertices on coarse faces' edges,
        // which must not be flagged): several slabs (a quarter of the occurrences each) give the
        // same problems as one
        for m in [
            broken::t_junction(),
            testmesh::refined_block(3, 1.0, &[[1, 1, 1], [0, 0, 0]]),
        ] {
            let (mut one, mut all) = (Vec::new(), Vec::new());
            m.vertices_on_edges(&mut one, 1);
            m.vertices_on_edges(&mut all, usize::MAX);
            assert_eq!(one, all);
        }
        let mut probs = Vec::new();
        broken::t_junction().vertices_on_edges(&mut probs, 1);
        assert!(!probs.is_empty());
        // more cells, faces and points than a chunk: same report on one thread
        let mut m = testmesh::block(20, 0.05);
        assert!(m.n_cells() > CHUNK && m.n_faces() > 2 * CHUNK && m.points.len() > CHUNK);
        let last = m.points.len() - 1;
        m.points[last] = m.points[0]; // a duplicate point far from point 0 in id order
        let one = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let a = one.install(|| m.validate());
        assert_eq!(a, m.validate());
        // the kept geometry changes nothing in the report and is CellGeometry::new's, chunk
        // by chunk, at any thread count
        let (r, g) = m.validate_keeping_geometry();
        assert_eq!(r, a);
        let g = g.unwrap();
        assert_eq!(g, CellGeometry::new(&m));
        assert_eq!(one.install(|| m.validate_keeping_geometry().1.unwrap()), g);
        assert!(a.problems.iter().any(|p| matches!(
            p,
            Problem::DuplicatePoint { point, other: 0, .. } if *point as usize == last
        )));
        let r = testmesh::block(20, 0.05).validate();
        assert!(r.is_valid());
        assert!((r.cells_volume - 1.0).abs() < 1e-12); // exact: unit cube
        assert!((r.boundary_volume - 1.0).abs() < 1e-12);
    }

    #[test]
    fn non_finite_points_are_reported_not_panicking() {
        for bad in [f64::NAN, f64::INFINITY] {
            let mut m = testmesh::refined_block(2, 1.0, &[[0, 0, 0]]);
            m.points[3].x = bad;
            let r = m.validate();
            assert!(!r.is_valid());
            assert!(kinds(&r).contains(&"non_positive_volume") || kinds(&r).contains(&"open_cell"));
        }
    }

    #[test]
    fn row_table_finds_every_row_and_no_other() {
        // sorted (bin, point) pairs with gaps, rows of nx = 7 bins; each row's range checked
        // against a linear scan, absent rows against None
        let nx = 7u64;
        let mut z = 12345u64;
        let mut binned: Vec<(u64, u32)> = (0..5000u32)
            .map(|i| {
                z = mix(z);
                ((z % 4000) * (1 + z % 3 / 2), i)
            })
            .collect();
        binned.sort_unstable();
        let t = RowTable::new(&binned, nx);
        for r in 0..binned.last().unwrap().0 / nx + 3 {
            let lo = binned.iter().position(|q| q.0 / nx == r);
            let hi = binned.iter().rposition(|q| q.0 / nx == r);
            match (lo, hi) {
                (Some(lo), Some(hi)) => assert_eq!(t.get(r), Some((lo, hi + 1)), "row {r}"),
                _ => assert_eq!(t.get(r), None, "row {r}"),
            }
        }
    }

    #[test]
    fn report_is_thread_count_independent() {
        let m = testmesh::broken::t_junction();
        let one = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let a = one.install(|| m.validate());
        let b = m.validate();
        assert_eq!(a, b);
        let j = serde_json::to_string(&a).unwrap();
        assert!(j.contains("vertex_on_edge"));
    }
}
