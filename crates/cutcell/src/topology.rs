//! Conforming face topology of a linear octree: mesh vertices on the finest integer grid,
//! elementary faces with their hanging vertices, and each leaf's list of faces.
//!
//! Method (common practice for face-based octree meshes): every interior face is the face
//! between two leaves at the finer one's size, every boundary face a leaf face on the domain box;
//! each is enumerated once, from its finer (or, at equal size, its lower) side. A face polygon
//! lists its four corners and every mesh vertex (corner of any leaf) lying on its edges, found
//! by recursive midpoint look-up, so no face has a T-junction. Invariants: faces are oriented
//! counter-clockwise seen from outside the enumerating leaf `e`; every leaf's faces tile its
//! boundary exactly once.

use crate::util::FxMap;
use octocut_octree::{OctKey, Octree};
use rayon::prelude::*;

/// `EFace::n` at or above this value is a box side `n - SIDE_BASE` (0 xmin .. 5 zmax).
pub(crate) const SIDE_BASE: u32 = u32::MAX - 5;

/// One elementary face: the face of leaf `e` across direction `dir` (0 -x, 1 +x, .. 5 +z).
#[derive(Clone, Copy, Debug)]
pub(crate) struct EFace {
    pub e: u32,
    pub n: u32,
    pub dir: u8,
}

impl EFace {
    #[inline]
    pub fn is_boundary(&self) -> bool {
        self.n >= SIDE_BASE
    }
    #[inline]
    pub fn axis(&self) -> usize {
        (self.dir / 2) as usize
    }
}

pub(crate) struct Topology {
    /// Grid coordinates of every mesh vertex, by point id.
    pub grid: Vec<[u32; 3]>,
    /// Point ids of each leaf's 8 corners (bit 0 x, bit 1 y, bit 2 z).
    pub corners: Vec<[u32; 8]>,
    pub faces: Vec<EFace>,
    pub face_off: Vec<u32>,
    pub face_pts: Vec<u32>,
    pub leaf_off: Vec<u32>,
    pub leaf_faces: Vec<u32>,
}

#[inline]
pub(crate) fn grid_key(g: [u32; 3]) -> u128 {
    g[0] as u128 | (g[1] as u128) << 32 | (g[2] as u128) << 64
}

pub(crate) const DIRS: [[i32; 3]; 6] = [
    [-1, 0, 0],
    [1, 0, 0],
    [0, -1, 0],
    [0, 1, 0],
    [0, 0, -1],
    [0, 0, 1],
];

impl Topology {
    pub fn faces_of(&self, leaf: u32) -> &[u32] {
        &self.leaf_faces
            [self.leaf_off[leaf as usize] as usize..self.leaf_off[leaf as usize + 1] as usize]
    }

    pub fn face(&self, f: u32) -> &[u32] {
        &self.face_pts[self.face_off[f as usize] as usize..self.face_off[f as usize + 1] as usize]
    }

    pub fn build(tree: &Octree) -> Topology {
        let leaves = tree.leaves();
        let mut map: FxMap<u128, u32> = FxMap::default();
        map.reserve(leaves.len() + leaves.len() / 2);
        let mut grid = Vec::with_capacity(leaves.len() + leaves.len() / 2);
        let mut corners = Vec::with_capacity(leaves.len());
        for k in leaves {
            let a = k.anchor();
            let e = k.edge();
            let c: [u32; 8] = std::array::from_fn(|i| {
                let g = [
                    a[0] + e * (i as u32 & 1),
                    a[1] + e * ((i as u32 >> 1) & 1),
                    a[2] + e * ((i as u32 >> 2) & 1),
                ];
                *map.entry(grid_key(g)).or_insert_with(|| {
                    grid.push(g);
                    (grid.len() - 1) as u32
                })
            });
            corners.push(c);
        }
        // faces, chunk-parallel, concatenated in leaf order
        const CHUNK: usize = 512;
        let chunks: Vec<(Vec<EFace>, Vec<u32>, Vec<u32>)> = (0..leaves.len())
            .collect::<Vec<_>>()
            .par_chunks(CHUNK)
            .map(|ids| {
                let mut faces = Vec::with_capacity(ids.len() * 3);
                let mut lens = Vec::with_capacity(ids.len() * 3);
                let mut pts = Vec::with_capacity(ids.len() * 12);
                let mut nb = Vec::new();
                for &l in ids {
                    let k = leaves[l];
                    for d in 0..6u8 {
                        tree.neighbours(l as u32, DIRS[d as usize], &mut nb);
                        let n = if nb.is_empty() {
                            SIDE_BASE + d as u32
                        } else if nb.len() == 1 && leaves[nb[0] as usize].level() <= k.level() {
                            if leaves[nb[0] as usize].level() == k.level() && d % 2 == 0 {
                                continue;
                            }
                            nb[0]
                        } else {
                            continue;
                        };
                        let before = pts.len();
                        face_polygon(&map, k, &corners[l], d, &mut pts);
                        faces.push(EFace {
                            e: l as u32,
                            n,
                            dir: d,
                        });
                        lens.push((pts.len() - before) as u32);
                    }
                }
                (faces, lens, pts)
            })
            .collect();
        let nf: usize = chunks.iter().map(|c| c.0.len()).sum();
        let mut faces = Vec::with_capacity(nf);
        let mut face_off = Vec::with_capacity(nf + 1);
        let mut face_pts = Vec::with_capacity(chunks.iter().map(|c| c.2.len()).sum());
        face_off.push(0u32);
        for (f, lens, pts) in chunks {
            faces.extend(f);
            for l in lens {
                let last = *face_off.last().unwrap();
                face_off.push(last + l);
            }
            face_pts.extend(pts);
        }
        // leaf -> faces
        let mut leaf_off = vec![0u32; leaves.len() + 1];
        for f in &faces {
            leaf_off[f.e as usize + 1] += 1;
            if !f.is_boundary() {
                leaf_off[f.n as usize + 1] += 1;
            }
        }
        for i in 0..leaves.len() {
            leaf_off[i + 1] += leaf_off[i];
        }
        let mut fill = leaf_off.clone();
        let mut leaf_faces = vec![0u32; leaf_off[leaves.len()] as usize];
        for (i, f) in faces.iter().enumerate() {
            leaf_faces[fill[f.e as usize] as usize] = i as u32;
            fill[f.e as usize] += 1;
            if !f.is_boundary() {
                leaf_faces[fill[f.n as usize] as usize] = i as u32;
                fill[f.n as usize] += 1;
            }
        }
        Topology {
            grid,
            corners,
            faces,
            face_off,
            face_pts,
            leaf_off,
            leaf_faces,
        }
    }
}

/// Appends the polygon of leaf `k`'s face in direction `d`, counter-clockwise seen from outside.
fn face_polygon(map: &FxMap<u128, u32>, k: OctKey, ids: &[u32; 8], d: u8, out: &mut Vec<u32>) {
    let axis = (d / 2) as usize;
    let positive = d % 2 == 1;
    let a = k.anchor();
    let e = k.edge();
    let u = (axis + 1) % 3;
    let v = (axis + 2) % 3;
    let offs: [(u32, u32); 4] = if positive {
        [(0, 0), (e, 0), (e, e), (0, e)]
    } else {
        [(0, 0), (0, e), (e, e), (e, 0)]
    };
    let corner = |i: usize| {
        let mut g = a;
        if positive {
            g[axis] += e;
        }
        g[u] += offs[i].0;
        g[v] += offs[i].1;
        g
    };
    // point id of a face corner: the leaf corner with the same offsets
    let id = |g: [u32; 3]| {
        let bit = |ax: usize| ((g[ax] != a[ax]) as usize) << ax;
        ids[bit(0) | bit(1) | bit(2)]
    };
    for i in 0..4 {
        let p = corner(i);
        push_edge(map, p, id(p), corner((i + 1) % 4), e, out);
    }
}

/// Pushes `p` (point id `pid`) and every mesh vertex strictly between `p` and `q` (edge of `len`
/// units), in order.
fn push_edge(
    map: &FxMap<u128, u32>,
    p: [u32; 3],
    pid: u32,
    q: [u32; 3],
    len: u32,
    out: &mut Vec<u32>,
) {
    if len >= 2 {
        let m = [(p[0] + q[0]) / 2, (p[1] + q[1]) / 2, (p[2] + q[2]) / 2];
        if let Some(&mid) = map.get(&grid_key(m)) {
            push_edge(map, p, pid, m, len / 2, out);
            push_edge(map, m, mid, q, len / 2, out);
            return;
        }
    }
    out.push(pid);
}
