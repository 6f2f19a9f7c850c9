//! Conforming face topology of a linear octree: mesh vertices on the finest integer grid,
//! elementary faces with their hanging vertices, and each leaf's list of faces.
//!
//! Method (common practice for face-based octree meshes): every interior face is the face
//! between two leaves at the finer one's size, every boundary face a leaf face on the domain box;
//! each is enumerated once, from its finer (or, at equal size, its lower) side. A face polygon
//! lists its four corners and every mesh vertex (corner of any leaf) lying on its edges, read
//! from the vertices sorted along each axis (no hash map), so no face has a T-junction.
//! Invariants: faces are oriented counter-clockwise seen from outside the enumerating leaf `e`;
//! every leaf's faces tile its boundary exactly once. Needs fewer than 2^29 leaves (slot ids).

use crate::concat::concat;
use crate::util::counting_sort_by;
use octocut_octree::{OctKey, Octree};
use rayon::prelude::*;

/// `EFace::n` at or above this value is a box side `n - SIDE_BASE` (0 xmin .. 5 zmax).
pub(crate) const SIDE_BASE: u32 = u32::MAX - 5;

/// One elementary face: the face of leaf `e` across direction `dir` (0 -x, 1 +x, .. 5 +z).
/// Packed in 8 bytes: `e` in the low 29 bits of the first word (fewer than 2^29 leaves, see
/// the module doc), `dir` in its top 3 bits.
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct EFace {
    e_dir: u32,
    pub n: u32,
}

const E_BITS: u32 = 29;

impl EFace {
    #[inline]
    pub fn new(e: u32, n: u32, dir: u8) -> EFace {
        debug_assert!(e < 1 << E_BITS && dir < 6);
        EFace {
            e_dir: e | (dir as u32) << E_BITS,
            n,
        }
    }
    /// The enumerating leaf.
    #[inline]
    pub fn e(&self) -> u32 {
        self.e_dir & ((1 << E_BITS) - 1)
    }
    #[inline]
    pub fn dir(&self) -> u8 {
        (self.e_dir >> E_BITS) as u8
    }
    #[inline]
    pub fn is_boundary(&self) -> bool {
        self.n >= SIDE_BASE
    }
    #[inline]
    pub fn axis(&self) -> usize {
        (self.dir() / 2) as usize
    }
}

pub(crate) struct Topology {
    /// Grid coordinates of every mesh vertex, by point id.
    pub grid: Vec<[u32; 3]>,
    pub faces: Vec<EFace>,
    /// The face polygons, in blocks of `1 << block_bits` consecutive faces.
    pub blocks: Vec<FaceBlock>,
    pub block_bits: u32,
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

    /// The polygon of face `f` (panics once the blocks are taken).
    pub fn face(&self, f: u32) -> &[u32] {
        self.blocks[(f >> self.block_bits) as usize]
            .face((f & ((1 << self.block_bits) - 1)) as usize)
    }

    /// Takes the face polygons out (`face` panics afterwards), keeping the face list, the
    /// leaf face lists and the grid: the clip frees each block once its faces are clipped.
    pub fn take_face_blocks(&mut self) -> Vec<FaceBlock> {
        std::mem::take(&mut self.blocks)
    }

    /// Frees the vertex data (coordinates, face polygons, leaf face lists), keeping the face
    /// list.
    pub fn release_vertex_data(&mut self) {
        self.grid = Vec::new();
        self.blocks = Vec::new();
        self.leaf_off = Vec::new();
        self.leaf_faces = Vec::new();
    }

    pub fn build(tree: &Octree) -> Topology {
        let leaves = tree.leaves();
        let (grid, corners, lines) = Vertices::build(leaves);
        crate::tmark("topo.verts");
        // faces, chunk-parallel, concatenated in leaf order
        let ext = tree.domain.grid_extent();
        let chunk = crate::util::gather_chunk(leaves.len(), 512, 1 << 17);
        let chunks: Vec<(Vec<EFace>, Vec<u32>, Vec<u32>)> = (0..leaves.len())
            .collect::<Vec<_>>()
            .par_chunks(chunk)
            .map(|ids| {
                let mut faces = Vec::with_capacity(ids.len() * 3);
                let mut lens = Vec::with_capacity(ids.len() * 3);
                let mut pts = Vec::with_capacity(ids.len() * 12);
                for &l in ids {
                    let k = leaves[l];
                    let (a, e) = (k.anchor(), k.edge() as i64);
                    for d in 0..6u8 {
                        // across a negative direction with the leaf's anchor odd in its own
                        // size, the same-size box is a sibling (or, at level 0, a base cell):
                        // never coarser, so the face is enumerated from the other side
                        if d % 2 == 0 && (a[(d / 2) as usize] / e as u32) % 2 == 1 {
                            continue;
                        }
                        // the leaf holding the anchor cell of the same-size box across `d`
                        let mut b = [0u32; 3];
                        let mut inside = true;
                        for i in 0..3 {
                            let v = a[i] as i64 + DIRS[d as usize][i] as i64 * e;
                            inside &= v >= 0 && v < ext[i] as i64;
                            b[i] = v.max(0) as u32;
                        }
                        let n = if !inside {
                            SIDE_BASE + d as u32
                        } else {
                            let c = tree
                                .locate_from(b, l as u32)
                                .expect("a tiling octree holds every grid cell");
                            let lc = leaves[c as usize].level();
                            // finer neighbours enumerate the face themselves
                            if lc > k.level() || (lc == k.level() && d % 2 == 0) {
                                continue;
                            }
                            c
                        };
                        let before = pts.len();
                        face_polygon(&lines, k, &corners[l], d, &mut pts);
                        faces.push(EFace::new(l as u32, n, d));
                        lens.push((pts.len() - before) as u32);
                    }
                }
                (faces, lens, pts)
            })
            .collect();
        // a leaf's corners are vertices of its faces' polygons: the corner table (32 bytes a
        // leaf) is not kept past the enumeration (memory through the classification)
        drop(lines);
        drop(corners);
        crate::tmark("topo.enum");
        let (face_parts, lens, pts): (Vec<_>, Vec<_>, Vec<_>) =
            chunks
                .into_iter()
                .fold((Vec::new(), Vec::new(), Vec::new()), |mut acc, c| {
                    acc.0.push(c.0);
                    acc.1.push(c.1);
                    acc.2.push(c.2);
                    acc
                });
        let faces = concat(&face_parts);
        drop(face_parts);
        let block_bits = block_bits(faces.len());
        let blocks = face_blocks(lens, pts, block_bits);
        crate::tmark("topo.concat");
        crate::tmark("topo.faces");
        Topology {
            grid,
            faces,
            blocks,
            block_bits,
            leaf_off: Vec::new(),
            leaf_faces: Vec::new(),
        }
    }

    /// Fills the face lists of the leaves for which `need` holds (each in increasing face
    /// order); the others get empty lists. Built after the classification, for the leaves
    /// that are closed, so that the lists of all leaves never coexist with the clip's arrays
    /// (peak memory).
    pub fn build_leaf_faces(&mut self, n_leaves: usize, need: impl Fn(u32) -> bool) {
        let faces = &self.faces;
        // counts, offsets, then the faces in face order (the `e` side before the `n` side)
        let mut leaf_off = vec![0u32; n_leaves + 1];
        for f in faces {
            if need(f.e()) {
                leaf_off[f.e() as usize + 1] += 1;
            }
            if !f.is_boundary() && need(f.n) {
                leaf_off[f.n as usize + 1] += 1;
            }
        }
        for i in 0..n_leaves {
            leaf_off[i + 1] += leaf_off[i];
        }
        let mut fill = leaf_off.clone();
        let mut leaf_faces = vec![0u32; leaf_off[n_leaves] as usize];
        let mut put = |l: u32, i: usize| {
            leaf_faces[fill[l as usize] as usize] = i as u32;
            fill[l as usize] += 1;
        };
        for (i, f) in faces.iter().enumerate() {
            if need(f.e()) {
                put(f.e(), i);
            }
            if !f.is_boundary() && need(f.n) {
                put(f.n, i);
            }
        }
        self.leaf_off = leaf_off;
        self.leaf_faces = leaf_faces;
    }
}

/// The polygons of `1 << block_bits` consecutive faces (fewer in the last block), CSR in one
/// allocation: `n + 1` offsets local to the block, then the points (one large block is
/// returned to the system when freed, not left as holes in the heap).
///
/// ```ignore
/// let b = FaceBlock::new(&[0, 4, 9], &(0..9).collect::<Vec<_>>());
/// assert_eq!((b.len(), b.face(1)), (2, &[4, 5, 6, 7, 8][..]));
/// ```
#[derive(Debug, Default)]
pub(crate) struct FaceBlock {
    n: usize,
    data: Vec<u32>,
}

impl FaceBlock {
    #[cfg(test)]
    pub fn new(off: &[u32], pts: &[u32]) -> FaceBlock {
        let mut data = off.to_vec();
        data.extend_from_slice(pts);
        FaceBlock {
            n: off.len() - 1,
            data,
        }
    }
    pub fn len(&self) -> usize {
        self.n
    }
    pub fn face(&self, j: usize) -> &[u32] {
        let b = self.n + 1;
        &self.data[b + self.data[j] as usize..b + self.data[j + 1] as usize]
    }
}

/// Block size of `nf` face polygons: a power of two near the parallel chunk size (at least
/// 2048), so that a block is one unit of the clip's parallel work.
fn block_bits(nf: usize) -> u32 {
    let c = crate::util::gather_chunk(nf, 2048, 1 << 19);
    usize::BITS - 1 - c.leading_zeros()
}

/// The polygons of the faces given per chunk (`lens[i]` and `pts[i]` of chunk `i`, chunks in
/// face order) regrouped into blocks of `1 << bits` faces: built in parallel waves of one
/// block per thread, each chunk freed once the blocks after it no longer read it, so that
/// the chunks and the blocks are never all resident together (peak memory).
fn face_blocks(mut lens: Vec<Vec<u32>>, mut pts: Vec<Vec<u32>>, bits: u32) -> Vec<FaceBlock> {
    // each chunk's first face
    let mut first = Vec::with_capacity(lens.len() + 1);
    first.push(0usize);
    for l in &lens {
        first.push(first.last().unwrap() + l.len());
    }
    let nf = *first.last().unwrap();
    // the (chunk, local first face, local end face, first point) pieces of faces f0..f1
    let pieces = |lens: &[Vec<u32>], f0: usize, f1: usize| {
        let mut out = Vec::new();
        let mut c = first.partition_point(|&s| s <= f0) - 1;
        let mut f = f0;
        while f < f1 {
            if f < first[c + 1] {
                let (j0, j1) = (f - first[c], f1.min(first[c + 1]) - first[c]);
                let p0: u32 = lens[c][..j0].iter().sum();
                out.push((c, j0, j1, p0 as usize));
                f = first[c] + j1;
            }
            c += 1;
        }
        out
    };
    let block = |lens: &[Vec<u32>], pts: &[Vec<u32>], b: usize| {
        let (f0, f1) = (b << bits, ((b + 1) << bits).min(nf));
        let ps = pieces(lens, f0, f1);
        let n: u32 = ps
            .iter()
            .map(|&(c, j0, j1, _)| lens[c][j0..j1].iter().sum::<u32>())
            .sum();
        let mut data = Vec::with_capacity(f1 - f0 + 1 + n as usize);
        data.push(0);
        let mut at = 0u32;
        for &(c, j0, j1, _) in &ps {
            for &l in &lens[c][j0..j1] {
                at += l;
                data.push(at);
            }
        }
        for (c, j0, j1, p0) in ps {
            let len: u32 = lens[c][j0..j1].iter().sum();
            data.extend_from_slice(&pts[c][p0..p0 + len as usize]);
        }
        FaceBlock { n: f1 - f0, data }
    };
    let nb = nf.div_ceil(1 << bits);
    let wave = rayon::current_num_threads().max(1);
    let mut out: Vec<FaceBlock> = Vec::with_capacity(nb);
    let mut done = 0; // chunks freed
    while out.len() < nb {
        let (b0, b1) = (out.len(), (out.len() + wave).min(nb));
        let w: Vec<FaceBlock> = (b0..b1)
            .into_par_iter()
            .map(|b| block(&lens, &pts, b))
            .collect();
        out.extend(w);
        // chunks that end at or before the next block's first face
        let next = (b1 << bits).min(nf);
        while done < lens.len() && first[done + 1] <= next {
            lens[done] = Vec::new();
            pts[done] = Vec::new();
            done += 1;
        }
    }
    out
}

/// Mesh vertices sorted along each axis: `order[a]` lists point ids by (the two other
/// coordinates, then coordinate `a`), so the vertices on an axis-parallel segment are
/// contiguous there; `rank[a][p]` is point `p`'s position in `order[a]`.
pub(crate) struct Lines {
    order: [Vec<u32>; 3],
    rank: [Vec<u32>; 3],
}

struct Vertices;

impl Vertices {
    /// Grid coordinates by point id (ids in order of first appearance over the leaves' corners),
    /// each leaf's corner ids, and the axis orders. By sorting, without a hash map.
    fn build(leaves: &[OctKey]) -> (Vec<[u32; 3]>, Vec<[u32; 8]>, Lines) {
        let corner = |l: usize, i: usize| {
            let k = leaves[l];
            let (a, e) = (k.anchor(), k.edge());
            [
                a[0] + e * (i as u32 & 1),
                a[1] + e * ((i as u32 >> 1) & 1),
                a[2] + e * ((i as u32 >> 2) & 1),
            ]
        };
        // (grid key, leaf corner slot), sorted: equal points together, first slot first; packed
        // into a u64 (z, y, x, slot bits) when it fits, which sorts the same and twice as fast
        let n = leaves.len() * 8;
        // every coordinate is a multiple of the finest leaf edge (anchors are multiples of
        // their own edge, edges are powers of two), so keys drop its `shift` zero bits: a grid
        // key of the refinement in use, not of the finest possible level
        let (max_c, min_e) = leaves
            .par_iter()
            .map(|k| {
                let (a, e) = (k.anchor(), k.edge());
                (a.iter().map(|&c| c + e).max().unwrap_or(0), e)
            })
            .reduce(|| (0, u32::MAX), |x, y| (x.0.max(y.0), x.1.min(y.1)));
        let shift = if leaves.is_empty() {
            0
        } else {
            min_e.trailing_zeros()
        };
        let max_c = max_c >> shift;
        let cb = 32 - max_c.leading_zeros();
        let sb = usize::BITS - n.leading_zeros();
        // the eight corners of leaf `l`, its anchor decoded once
        let corners8 = |l: usize| {
            let k = leaves[l];
            let (a, e) = (k.anchor(), k.edge());
            std::array::from_fn::<[u32; 3], 8, _>(|i| {
                [
                    a[0] + e * (i as u32 & 1),
                    a[1] + e * ((i as u32 >> 1) & 1),
                    a[2] + e * ((i as u32 >> 2) & 1),
                ]
            })
        };
        let slot_group = if 3 * cb + sb <= 64 {
            let pack = |l: usize| {
                let c = corners8(l);
                std::array::from_fn(|i| {
                    let g = c[i].map(|x| (x >> shift) as u64);
                    let key = g[2] << (2 * cb) | g[1] << cb | g[0];
                    key << sb | (8 * l + i) as u64
                })
            };
            group_slots(n, pack, |x| x >> sb, |x| (x & ((1 << sb) - 1)) as usize)
        } else {
            // keys too wide for a u64 with the slot bits
            let pack = |l: usize| {
                let c = corners8(l);
                std::array::from_fn(|i| {
                    grid_key(c[i].map(|x| x >> shift)) << 32 | (8 * l + i) as u128
                })
            };
            group_slots(n, pack, |x| x >> 32, |x| x as u32 as usize)
        };
        let (slot_group, first) = slot_group;
        crate::tmark("topo.sort");
        // point ids by first appearance: groups ordered by their first slot (the smallest slot
        // holding them); sorted (first slot, group) pairs give each group its id
        let ng = first.len();
        let mut by_first: Vec<u64> = first
            .par_iter()
            .enumerate()
            .map(|(g, &s)| (s as u64) << 32 | g as u64)
            .collect();
        by_first.par_sort_unstable();
        let grid: Vec<[u32; 3]> = by_first
            .par_iter()
            .map(|&x| {
                let s = (x >> 32) as usize;
                corner(s / 8, s % 8)
            })
            .collect();
        let mut group_id = vec![0u32; ng];
        for (p, &x) in by_first.iter().enumerate() {
            group_id[x as u32 as usize] = p as u32;
        }
        drop((by_first, first));
        let corners: Vec<[u32; 8]> = slot_group
            .par_chunks(8)
            .map(|c| std::array::from_fn(|i| group_id[c[i] as usize]))
            .collect();
        drop(slot_group);
        crate::tmark("topo.ids");
        // groups are in (z, y, x) order: that is the x-axis order. The other two follow by
        // stable counting sorts on one coordinate at a time (least significant first): by x
        // then z gives (z, x, y), by y then x gives (x, y, z)
        let order0: Vec<u32> = group_id;
        let sorted =
            |ids: &[u32], a: usize| counting_sort_by(ids, max_c, |p| grid[p as usize][a] >> shift);
        let (order1, order2) = rayon::join(
            || sorted(&sorted(&order0, 0), 2),
            || sorted(&sorted(&order0, 1), 0),
        );
        let order = [order0, order1, order2];
        let rank = std::array::from_fn(|a| {
            let mut r = vec![0u32; ng];
            for (i, &p) in order[a].iter().enumerate() {
                r[p as usize] = i as u32;
            }
            r
        });
        (grid, corners, Lines { order, rank })
    }
}

/// The group (distinct key, numbered in key order) of each of the `n` slots, and the first
/// (smallest) slot of each group. `pack(l)` gives the (key, slot) values of leaf `l`'s eight
/// slots `8 l ..`, `key` and `slot` take one apart.
///
/// Two rounds: each block of [`SLOT_BLOCK`] consecutive slots keeps one representative per
/// key, its first slot, found with a small open-addressing table (linear probing; in cache);
/// then the representatives of all blocks are sorted together in parallel. Neighbouring
/// leaves share most corners, so the sort sees a fraction of the slots. The groups are those
/// of one global sort.
fn group_slots<T: Ord + Copy + Default + Send + Sync + Into<u128>>(
    n: usize,
    pack: impl Fn(usize) -> [T; 8] + Sync + Send,
    key: impl Fn(T) -> T + Sync + Send,
    slot: impl Fn(T) -> usize + Sync + Send,
) -> (Vec<u32>, Vec<u32>) {
    let nb = n.div_ceil(SLOT_BLOCK);
    let hash = |k: T| {
        let k: u128 = k.into();
        crate::util::mix(k as u64 ^ (k >> 64) as u64)
    };
    // per block: representatives in order of first slot, and each slot's representative index
    let mut blocks: Vec<(Vec<T>, Vec<u32>)> = (0..nb)
        .into_par_iter()
        .map_init(
            || vec![0u32; 2 * SLOT_BLOCK],
            |table, b| {
                let (lo, hi) = (b * SLOT_BLOCK, ((b + 1) * SLOT_BLOCK).min(n));
                let mask = table.len() - 1;
                table.fill(0);
                let mut reps: Vec<T> = Vec::with_capacity((hi - lo) / 2);
                let mut local = Vec::with_capacity(hi - lo);
                for x in (lo / 8..hi / 8).flat_map(&pack) {
                    let k = key(x);
                    let mut h = hash(k) as usize & mask;
                    loop {
                        // 0 is empty, else a representative index + 1
                        let t = table[h];
                        if t == 0 {
                            reps.push(x);
                            table[h] = reps.len() as u32;
                            local.push(reps.len() as u32 - 1);
                            break;
                        }
                        if key(reps[t as usize - 1]) == k {
                            local.push(t - 1);
                            break;
                        }
                        h = (h + 1) & mask;
                    }
                }
                (reps, local)
            },
        )
        .collect();
    // representatives numbered block after block
    let mut rep_base = Vec::with_capacity(nb);
    let mut nr = 0usize;
    for b in &blocks {
        rep_base.push(nr);
        nr += b.0.len();
    }
    let mut all: Vec<T> = {
        let reps: Vec<Vec<T>> = blocks
            .iter_mut()
            .map(|b| std::mem::take(&mut b.0))
            .collect();
        crate::concat::concat(&reps)
    };
    crate::tmark("slots.blocks");
    all.par_sort_unstable();
    crate::tmark("slots.sort");
    // group of every representative, in parallel: a position's group is the number of key
    // starts up to it, less one (runs of positions count their starts first); the flat
    // representative numbers go block after block
    const RUN: usize = 1 << 16;
    let is_start = |i: usize| i == 0 || key(all[i - 1]) != key(all[i]);
    let run_range = |r: usize| r * RUN..((r + 1) * RUN).min(all.len());
    let starts: Vec<u32> = (0..all.len().div_ceil(RUN))
        .into_par_iter()
        .map(|r| run_range(r).filter(|&i| is_start(i)).count() as u32)
        .collect();
    let mut run_base = Vec::with_capacity(starts.len());
    let mut ng = 0u32;
    for &c in &starts {
        run_base.push(ng);
        ng += c;
    }
    // (key, slot) order: the first value of a key holds its smallest slot
    let first: Vec<u32> =
        crate::concat::filter_map_sized(all.len(), |i| is_start(i).then(|| slot(all[i]) as u32));
    let mut pos_group = vec![0u32; all.len()];
    pos_group
        .par_chunks_mut(RUN)
        .enumerate()
        .for_each(|(r, out)| {
            // the group of the position before the run (none before position 0)
            let mut cur = run_base[r].wrapping_sub(1);
            for (x, i) in out.iter_mut().zip(run_range(r)) {
                if is_start(i) {
                    cur = cur.wrapping_add(1);
                }
                *x = cur;
            }
        });
    let rep_group = crate::util::scatter(nr, all.len(), |i| {
        let s = slot(all[i]);
        let (b, o) = (s / SLOT_BLOCK, s % SLOT_BLOCK);
        (rep_base[b] + blocks[b].1[o] as usize, pos_group[i])
    });
    drop(pos_group);
    drop(all);
    let mut group = vec![0u32; n];
    group
        .par_chunks_mut(SLOT_BLOCK)
        .zip(blocks.par_iter().zip(rep_base.par_iter()))
        .for_each(|(g, ((_, local), &base))| {
            for (x, &r) in g.iter_mut().zip(local) {
                *x = rep_group[base + r as usize];
            }
        });
    (group, first)
}

/// Slots deduplicated together in the first round of [`group_slots`] (a power of two and a
/// multiple of 8: whole leaves).
const SLOT_BLOCK: usize = 4096;

/// Appends the polygon of leaf `k`'s face in direction `d`, counter-clockwise seen from outside.
fn face_polygon(lines: &Lines, k: OctKey, ids: &[u32; 8], d: u8, out: &mut Vec<u32>) {
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
        let (p, q) = (corner(i), corner((i + 1) % 4));
        let (pid, qid) = (id(p), id(q));
        out.push(pid);
        // every mesh vertex strictly between p and q, in order from p
        let ax = if p[u] != q[u] { u } else { v };
        let (rp, rq) = (lines.rank[ax][pid as usize], lines.rank[ax][qid as usize]);
        let ord = &lines.order[ax];
        if rp < rq {
            out.extend_from_slice(&ord[rp as usize + 1..rq as usize]);
        } else {
            out.extend(ord[rq as usize + 1..rp as usize].iter().rev());
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_support::{icosphere, refined_tree};
    use crate::util::mix;
    use octocut_octree::Domain;
    use octocut_surface::{Aabb, SurfaceIndex, Vec3};

    #[test]
    fn slot_groups_equal_one_global_sort() {
        // reference: distinct keys numbered in key order, each with its smallest slot, from a
        // sorted map (the definition); keys repeat within and across blocks
        for (leaves, modulus) in [(1usize, 3u64), (700, 500), (3000, 20_000), (2048, 7)] {
            let n = 8 * leaves;
            let sb = usize::BITS - n.leading_zeros();
            let key_of = |s: usize| mix(s as u64 / 3) % modulus;
            let pack =
                |l: usize| std::array::from_fn(|i| key_of(8 * l + i) << sb | (8 * l + i) as u64);
            let (group, first) =
                group_slots(n, pack, |x| x >> sb, |x| (x & ((1 << sb) - 1)) as usize);
            let mut map = std::collections::BTreeMap::new();
            for s in 0..n {
                map.entry(key_of(s)).or_insert(s as u32);
            }
            let number: std::collections::HashMap<u64, u32> = map
                .keys()
                .enumerate()
                .map(|(g, &k)| (k, g as u32))
                .collect();
            assert_eq!(
                first,
                map.values().copied().collect::<Vec<_>>(),
                "{leaves} leaves"
            );
            let want: Vec<u32> = (0..n).map(|s| number[&key_of(s)]).collect();
            assert_eq!(group, want, "{leaves} leaves");
        }
    }

    #[test]
    fn face_blocks_regroup_the_chunks_in_face_order() {
        // reference: the serial concatenation of the chunks' polygons (common practice)
        let mut rng = 12345u64;
        let mut next = |m: u64| {
            rng = crate::util::mix(rng);
            rng % m
        };
        for trial in 0..40 {
            let nchunks = 1 + next(6) as usize;
            let mut lens: Vec<Vec<u32>> = Vec::new();
            let mut pts: Vec<Vec<u32>> = Vec::new();
            let mut want: Vec<Vec<u32>> = Vec::new();
            let mut id = 0u32;
            for _ in 0..nchunks {
                // empty chunks too
                let nf = if next(4) == 0 { 0 } else { next(40) as usize };
                let (mut l, mut p) = (Vec::new(), Vec::new());
                for _ in 0..nf {
                    let n = 3 + next(6) as u32;
                    let poly: Vec<u32> = (id..id + n).collect();
                    id += n;
                    l.push(n);
                    p.extend_from_slice(&poly);
                    want.push(poly);
                }
                lens.push(l);
                pts.push(p);
            }
            let bits = (trial % 5) as u32;
            let blocks = face_blocks(lens, pts, bits);
            assert_eq!(
                blocks.len(),
                want.len().div_ceil(1 << bits),
                "trial {trial}"
            );
            let got: Vec<Vec<u32>> = blocks
                .iter()
                .flat_map(|b| (0..b.len()).map(|j| b.face(j).to_vec()))
                .collect();
            assert_eq!(got, want, "trial {trial}");
            assert!(blocks[..blocks.len().saturating_sub(1)]
                .iter()
                .all(|b| b.len() == 1 << bits));
        }
        let b = FaceBlock::new(&[0, 4, 9], &(0..9).collect::<Vec<_>>());
        assert_eq!((b.len(), b.face(1)), (2, &[4, 5, 6, 7, 8][..]));
    }

    #[test]
    fn faces_list_exactly_the_vertices_on_their_edges() {
        // brute force (common practice for conforming octree faces): a face polygon holds its
        // corners plus every leaf corner lying on its boundary, in order, and no other point
        let index = SurfaceIndex::new(icosphere(Vec3::new(0.51, 0.48, 0.5), 0.3, 1));
        let d = Domain::new(Aabb::new(Vec3::ZERO, Vec3::ONE), 1.0).unwrap();
        let tree = refined_tree(d, &index, 4);
        let mut t = Topology::build(&tree);
        t.build_leaf_faces(tree.leaves().len(), |_| true);
        let mut all: Vec<[u32; 3]> = t.grid.clone();
        all.sort_unstable();
        all.dedup();
        assert_eq!(all.len(), t.grid.len(), "one id per grid point");
        let leaves = tree.leaves();
        for (f, face) in t.faces.iter().enumerate() {
            let pts = t.face(f as u32);
            let k = leaves[face.e() as usize];
            let (a, e) = (k.anchor(), k.edge());
            let ax = face.axis();
            let plane = a[ax] + if face.dir() % 2 == 1 { e } else { 0 };
            let on_boundary = |g: [u32; 3]| {
                let (u, v) = ((ax + 1) % 3, (ax + 2) % 3);
                g[ax] == plane
                    && (a[u]..=a[u] + e).contains(&g[u])
                    && (a[v]..=a[v] + e).contains(&g[v])
                    && (g[u] == a[u] || g[u] == a[u] + e || g[v] == a[v] || g[v] == a[v] + e)
            };
            let want = t.grid.iter().filter(|&&g| on_boundary(g)).count();
            assert_eq!(pts.len(), want, "face {f}");
            assert!(pts.iter().all(|&p| on_boundary(t.grid[p as usize])));
            // consecutive points are collinear steps along one axis
            for i in 0..pts.len() {
                let (p, q) = (
                    t.grid[pts[i] as usize],
                    t.grid[pts[(i + 1) % pts.len()] as usize],
                );
                assert_eq!((0..3).filter(|&c| p[c] != q[c]).count(), 1, "face {f}");
            }
        }
        // every leaf's faces tile its boundary: areas sum to 6 e^2
        for l in 0..leaves.len() as u32 {
            let e = leaves[l as usize].edge() as u64;
            let area: u64 = t
                .faces_of(l)
                .iter()
                .map(|&f| {
                    let fe = leaves[t.faces[f as usize].e() as usize].edge() as u64;
                    fe * fe
                })
                .sum();
            assert_eq!(area, 6 * e * e, "leaf {l}");
        }
    }
}
