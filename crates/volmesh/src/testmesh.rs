//! Hand-made meshes for tests and benchmarks: a [`MeshBuilder`], conforming meshes of lattice
//! cubes (a uniform block, a block with refined cells carrying hanging faces), a cube with a
//! clipped corner, and deliberately broken meshes that validation must reject.
//!
//! The cube generator [`from_boxes`] makes a conforming mesh the way a 2:1 octree mesh is
//! conforming: a side shared with several smaller cells is split into one face per neighbour,
//! and every face lists, in order, all mesh points lying on its edges (the edge midpoints that
//! smaller neighbours put there), so no vertex lies inside an edge.

use crate::mesh::{Patch, PatchKind, VolumeMesh, NO_REGION};
use octocut_surface::Vec3;

/// Collects faces in any order and lays them out as a [`VolumeMesh`] wants: interior faces
/// first, then boundary faces grouped by patch in patch order.
///
/// ```
/// use octocut_volmesh::testmesh::MeshBuilder;
/// use octocut_volmesh::PatchKind;
/// let mut b = MeshBuilder::default();
/// let wall = b.patch("wall", PatchKind::Wall { tag: 0 });
/// let p: Vec<u32> = [[0., 0., 0.], [1., 0., 0.], [0., 1., 0.], [0., 0., 1.]]
///     .iter().map(|&q| b.point(q.into())).collect();
/// b.cell(0, 0);
/// for f in [[0, 2, 1], [0, 1, 3], [1, 2, 3], [0, 3, 2]] {
///     b.boundary_face(f.iter().map(|&i| p[i]).collect(), 0, wall);
/// }
/// let m = b.build();
/// assert!(m.validate().is_valid());
/// ```
#[derive(Clone, Debug, Default)]
pub struct MeshBuilder {
    pub points: Vec<Vec3>,
    interior: Vec<(Vec<u32>, u32, u32)>,
    boundary: Vec<(Vec<u32>, u32, usize)>,
    patches: Vec<(String, PatchKind)>,
    levels: Vec<u8>,
    cuts: Vec<u8>,
}

impl MeshBuilder {
    /// Adds a point, returns its id.
    pub fn point(&mut self, p: Vec3) -> u32 {
        self.points.push(p);
        self.points.len() as u32 - 1
    }
    /// Adds a patch, returns its index.
    pub fn patch(&mut self, name: &str, kind: PatchKind) -> usize {
        self.patches.push((name.to_string(), kind));
        self.patches.len() - 1
    }
    /// Adds a cell with its level and cut flag, returns its id.
    pub fn cell(&mut self, level: u8, cut: u8) -> u32 {
        self.levels.push(level);
        self.cuts.push(cut);
        self.levels.len() as u32 - 1
    }
    /// An interior face, counter-clockwise seen from outside `owner`.
    pub fn interior_face(&mut self, verts: Vec<u32>, owner: u32, neighbour: u32) {
        self.interior.push((verts, owner, neighbour));
    }
    /// A boundary face of `patch`, counter-clockwise seen from outside `owner`.
    pub fn boundary_face(&mut self, verts: Vec<u32>, owner: u32, patch: usize) {
        self.boundary.push((verts, owner, patch));
    }
    /// The mesh; empty patches are dropped.
    pub fn build(self) -> VolumeMesh {
        let mut m = VolumeMesh {
            points: self.points,
            ..Default::default()
        };
        m.face_offsets.push(0);
        let push = |m: &mut VolumeMesh, v: &[u32], o: u32| {
            m.face_vertices.extend_from_slice(v);
            m.face_offsets.push(m.face_vertices.len() as u32);
            m.owner.push(o);
        };
        for (v, o, n) in &self.interior {
            push(&mut m, v, *o);
            m.neighbour.push(*n);
        }
        for (p, (name, kind)) in self.patches.iter().enumerate() {
            let start = m.owner.len() as u32;
            for (v, o, _) in self.boundary.iter().filter(|b| b.2 == p) {
                push(&mut m, v, *o);
            }
            let count = m.owner.len() as u32 - start;
            if count > 0 {
                m.patches.push(Patch {
                    name: name.clone(),
                    kind: kind.clone(),
                    start,
                    count,
                });
            }
        }
        m.cell_region = vec![NO_REGION; self.levels.len()];
        m.cell_level = self.levels;
        m.cell_cut = self.cuts;
        m
    }
}

/// An axis-aligned lattice cube: minimum corner and edge in lattice units, and its level.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct LatticeCube {
    pub min: [u32; 3],
    pub edge: u32,
    pub level: u8,
}

const NONE: u32 = u32::MAX;

/// The conforming mesh of non-overlapping lattice cubes filling a box whose minimum corner is
/// the lattice origin; lattice unit `unit`. Cell `i` is `cubes[i]`. Interior faces are owned by
/// the lower cell id; boundary faces go to six patches `xmin..zmax` ([`PatchKind::Side`]).
///
/// # Panics
/// When cubes overlap or a cube side is only partly on the boundary (test support only).
pub fn from_boxes(cubes: &[LatticeCube], unit: f64) -> VolumeMesh {
    let mut dim = [0usize; 3];
    for c in cubes {
        for (d, &m) in dim.iter_mut().zip(&c.min) {
            *d = (*d).max((m + c.edge) as usize);
        }
    }
    let cidx = |p: [usize; 3]| (p[2] * dim[1] + p[1]) * dim[0] + p[0];
    let pdim = [dim[0] + 1, dim[1] + 1, dim[2] + 1];
    let pidx = |p: [usize; 3]| (p[2] * pdim[1] + p[1]) * pdim[0] + p[0];
    let mut occ = vec![NONE; dim[0] * dim[1] * dim[2]];
    for (i, c) in cubes.iter().enumerate() {
        let e = c.edge as usize;
        let m = c.min.map(|v| v as usize);
        for z in m[2]..m[2] + e {
            for y in m[1]..m[1] + e {
                for x in m[0]..m[0] + e {
                    let o = &mut occ[cidx([x, y, z])];
                    assert_eq!(*o, NONE, "overlapping cubes");
                    *o = i as u32;
                }
            }
        }
    }
    let mut b = MeshBuilder::default();
    let mut pid = vec![NONE; pdim[0] * pdim[1] * pdim[2]];
    for c in cubes {
        b.cell(c.level, 0);
        for k in 0..8 {
            let p = [0, 1, 2].map(|a| (c.min[a] + c.edge * ((k >> a) & 1)) as usize);
            if pid[pidx(p)] == NONE {
                let q = Vec3::new(p[0] as f64, p[1] as f64, p[2] as f64) * unit;
                pid[pidx(p)] = b.point(q);
            }
        }
    }
    let names = ["xmin", "xmax", "ymin", "ymax", "zmin", "zmax"];
    for (s, n) in names.iter().enumerate() {
        b.patch(n, PatchKind::Side { side: s as u8 });
    }
    let mut nbrs: Vec<u32> = Vec::new();
    for (i, c) in cubes.iter().enumerate() {
        for side in 0..6 {
            let a = side / 2;
            let plus = side % 2 == 1;
            let (u, v) = ((a + 1) % 3, (a + 2) % 3);
            let plane = c.min[a] + if plus { c.edge } else { 0 };
            // the unit cubes just across the side
            nbrs.clear();
            let mut empty = 0;
            for j in 0..c.edge {
                for k in 0..c.edge {
                    let mut q = [0i64; 3];
                    q[a] = plane as i64 - if plus { 0 } else { 1 };
                    q[u] = (c.min[u] + j) as i64;
                    q[v] = (c.min[v] + k) as i64;
                    let inside = (0..3).all(|t| q[t] >= 0 && (q[t] as usize) < dim[t]);
                    let o = if inside {
                        occ[cidx(q.map(|t| t as usize))]
                    } else {
                        NONE
                    };
                    if o == NONE {
                        empty += 1;
                    } else if !nbrs.contains(&o) {
                        nbrs.push(o);
                    }
                }
            }
            assert!(empty == 0 || nbrs.is_empty(), "side partly on the boundary");
            let rect = |lo: [u32; 2], hi: [u32; 2]| -> Vec<u32> {
                // corners counter-clockwise about +a in the (u, v) plane, then walked for points
                let mut corners = [
                    [lo[0], lo[1]],
                    [hi[0], lo[1]],
                    [hi[0], hi[1]],
                    [lo[0], hi[1]],
                ];
                if !plus {
                    corners.reverse();
                }
                let mut out = Vec::new();
                for e in 0..4 {
                    let (p0, p1) = (corners[e], corners[(e + 1) % 4]);
                    let steps = p0[0].abs_diff(p1[0]).max(p0[1].abs_diff(p1[1]));
                    for t in 0..steps {
                        let at = |x0: u32, x1: u32| match x1.cmp(&x0) {
                            std::cmp::Ordering::Greater => x0 + t,
                            std::cmp::Ordering::Less => x0 - t,
                            std::cmp::Ordering::Equal => x0,
                        };
                        let mut g = [0usize; 3];
                        g[a] = plane as usize;
                        g[u] = at(p0[0], p1[0]) as usize;
                        g[v] = at(p0[1], p1[1]) as usize;
                        let id = pid[pidx(g)];
                        if id != NONE {
                            out.push(id);
                        }
                    }
                }
                out
            };
            if nbrs.is_empty() {
                let lo = [c.min[u], c.min[v]];
                let verts = rect(lo, [lo[0] + c.edge, lo[1] + c.edge]);
                b.boundary_face(verts, i as u32, side);
            }
            for &n in nbrs.iter() {
                if (n as usize) < i {
                    continue;
                }
                let d = &cubes[n as usize];
                let lo = [c.min[u].max(d.min[u]), c.min[v].max(d.min[v])];
                let hi = [
                    (c.min[u] + c.edge).min(d.min[u] + d.edge),
                    (c.min[v] + c.edge).min(d.min[v] + d.edge),
                ];
                b.interior_face(rect(lo, hi), i as u32, n);
            }
        }
    }
    b.build()
}

/// A block of `n^3` cubes of edge `h` (level 0), minimum corner at the origin.
pub fn block(n: u32, h: f64) -> VolumeMesh {
    let mut cubes = Vec::with_capacity((n * n * n) as usize);
    for z in 0..n {
        for y in 0..n {
            for x in 0..n {
                cubes.push(LatticeCube {
                    min: [x, y, z],
                    edge: 1,
                    level: 0,
                });
            }
        }
    }
    from_boxes(&cubes, h)
}

/// A block of `n^3` cubes of edge `h` (level 0) where each coarse cell listed in `refine` is
/// replaced by its eight children of edge `h/2` (level 1): hanging faces at every coarse/fine
/// contact, balanced 2:1 by construction.
pub fn refined_block(n: u32, h: f64, refine: &[[u32; 3]]) -> VolumeMesh {
    let mut cubes = Vec::new();
    for z in 0..n {
        for y in 0..n {
            for x in 0..n {
                if refine.contains(&[x, y, z]) {
                    for k in 0..8u32 {
                        let min = [
                            2 * x + (k & 1),
                            2 * y + ((k >> 1) & 1),
                            2 * z + ((k >> 2) & 1),
                        ];
                        cubes.push(LatticeCube {
                            min,
                            edge: 1,
                            level: 1,
                        });
                    }
                } else {
                    cubes.push(LatticeCube {
                        min: [2 * x, 2 * y, 2 * z],
                        edge: 2,
                        level: 0,
                    });
                }
            }
        }
    }
    from_boxes(&cubes, h / 2.0)
}

/// The unit cube `[0,1]^3` with the corner at `(1,1,1)` cut off by the plane `x+y+z = 2.5`: one
/// cut cell (level 0, cut 1) with three pentagons, three squares and a triangle on patch
/// `wall` (Wall tag 0); the other faces on patch `sides`. Volume `1 - 1/48` (exact: the cut
/// tetrahedron has legs 1/2, volume (1/2)^3/6).
pub fn clipped_cube() -> VolumeMesh {
    let mut b = MeshBuilder::default();
    let sides = b.patch("sides", PatchKind::Side { side: 0 });
    let wall = b.patch("wall", PatchKind::Wall { tag: 0 });
    let c = b.cell(0, 1);
    let p = |b: &mut MeshBuilder, x: f64, y: f64, z: f64| b.point(Vec3::new(x, y, z));
    let p000 = p(&mut b, 0., 0., 0.);
    let p100 = p(&mut b, 1., 0., 0.);
    let p010 = p(&mut b, 0., 1., 0.);
    let p001 = p(&mut b, 0., 0., 1.);
    let p110 = p(&mut b, 1., 1., 0.);
    let p101 = p(&mut b, 1., 0., 1.);
    let p011 = p(&mut b, 0., 1., 1.);
    let qx = p(&mut b, 0.5, 1., 1.);
    let qy = p(&mut b, 1., 0.5, 1.);
    let qz = p(&mut b, 1., 1., 0.5);
    // each face counter-clockwise seen from outside
    b.boundary_face(vec![p000, p010, p110, p100], c, sides); // z = 0
    b.boundary_face(vec![p000, p001, p011, p010], c, sides); // x = 0
    b.boundary_face(vec![p000, p100, p101, p001], c, sides); // y = 0
    b.boundary_face(vec![p100, p110, qz, qy, p101], c, sides); // x = 1
    b.boundary_face(vec![p010, p011, qx, qz, p110], c, sides); // y = 1
    b.boundary_face(vec![p001, p101, qy, qx, p011], c, sides); // z = 1
    b.boundary_face(vec![qx, qy, qz], c, wall); // x + y + z = 2.5
    b.build()
}

/// One non-convex cell: the L-shaped prism `([0,2]x[0,1] U [0,1]x[1,2]) x [0,1]` (level 0, cut
/// 1), two hexagons and six quads on patch `wall`. Volume 3 (exact: three unit cubes).
pub fn l_cell() -> VolumeMesh {
    let mut b = MeshBuilder::default();
    let wall = b.patch("wall", PatchKind::Wall { tag: 0 });
    let c = b.cell(0, 1);
    let ring = [[0., 0.], [2., 0.], [2., 1.], [1., 1.], [1., 2.], [0., 2.]]; // counter-clockwise
    let lo: Vec<u32> = ring
        .iter()
        .map(|q| b.point(Vec3::new(q[0], q[1], 0.0)))
        .collect();
    let hi: Vec<u32> = ring
        .iter()
        .map(|q| b.point(Vec3::new(q[0], q[1], 1.0)))
        .collect();
    b.boundary_face(lo.iter().rev().copied().collect(), c, wall);
    b.boundary_face(hi.clone(), c, wall);
    for i in 0..6 {
        let j = (i + 1) % 6;
        b.boundary_face(vec![lo[i], lo[j], hi[j], hi[i]], c, wall);
    }
    b.build()
}

/// Deliberately broken meshes, each with one defect validation must report.
pub mod broken {
    use super::*;

    /// A 2x1x1 block with its last boundary face removed (cell 1 not closed).
    pub fn missing_face() -> VolumeMesh {
        let mut m = from_boxes(&two_cubes(), 1.0);
        let f = m.n_faces() - 1;
        let start = m.face_offsets[f] as usize;
        m.face_vertices.truncate(start);
        m.face_offsets.pop();
        m.owner.pop();
        m.patches.last_mut().unwrap().count -= 1;
        m
    }

    /// A 2x1x1 block with its interior face's vertex order reversed.
    pub fn flipped_face() -> VolumeMesh {
        let mut m = from_boxes(&two_cubes(), 1.0);
        let (a, b) = (m.face_offsets[0] as usize, m.face_offsets[1] as usize);
        m.face_vertices[a..b].reverse();
        m
    }

    /// A 2x1x1 block where one face of cell 1 uses a copy of a shared point.
    pub fn duplicated_point() -> VolumeMesh {
        let mut m = from_boxes(&two_cubes(), 1.0);
        // the last face belongs to cell 1; give its first vertex a twin
        let f = m.n_faces() - 1;
        let k = m.face_offsets[f] as usize;
        let v = m.face_vertices[k];
        m.points.push(m.points[v as usize]);
        m.face_vertices[k] = m.points.len() as u32 - 1;
        m
    }

    /// A block with one refined cell whose coarse neighbour's side faces do not list the edge
    /// midpoints the fine cells put on their common edges.
    pub fn t_junction() -> VolumeMesh {
        let good = refined_block(2, 1.0, &[[0, 0, 0]]);
        let mut m = good.clone();
        // drop, from every face that is not shared with a fine cell, the vertices that are
        // not corners of one of its cells
        let corner = |p: Vec3| p.to_array().iter().all(|c| (c - c.round()).abs() < 1e-12);
        let mut fv = Vec::new();
        let mut fo = vec![0u32];
        for f in 0..good.n_faces() {
            let fine_owner = good.cell_level[good.owner[f] as usize] == 1;
            let fine_nbr =
                f < good.n_interior_faces() && good.cell_level[good.neighbour[f] as usize] == 1;
            for &v in good.face(f) {
                if fine_owner || fine_nbr || corner(good.points[v as usize]) {
                    fv.push(v);
                }
            }
            fo.push(fv.len() as u32);
        }
        m.face_vertices = fv;
        m.face_offsets = fo;
        m
    }

    /// A single cube whose top face uses a point lifted off the cube (cell not closed).
    pub fn open_cell() -> VolumeMesh {
        let mut m = block(1, 1.0);
        let zmax = m
            .patches
            .iter()
            .find(|p| p.kind == PatchKind::Side { side: 5 })
            .unwrap();
        let k = m.face_offsets[zmax.start as usize] as usize;
        let v = m.face_vertices[k];
        m.points
            .push(m.points[v as usize] + Vec3::new(0.0, 0.0, 0.25));
        m.face_vertices[k] = m.points.len() as u32 - 1;
        m
    }

    fn two_cubes() -> Vec<LatticeCube> {
        vec![
            LatticeCube {
                min: [0, 0, 0],
                edge: 1,
                level: 0,
            },
            LatticeCube {
                min: [1, 0, 0],
                edge: 1,
                level: 0,
            },
        ]
    }
}
