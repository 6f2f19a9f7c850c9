//! Assembly of the final face-based mesh from the cells and their faces.
//!
//! Relabels cells by merge group (in order of first member), drops faces whose two sides fell
//! into one group, orients every interior face out of its owner (the lower cell id), sorts
//! interior faces by (owner, neighbour) and boundary faces by (patch, owner) — common practice
//! for face-based finite-volume meshes — and keeps only the points faces use, in id order.
//! Invariant: the output depends only on the input order, never on thread scheduling.

use octocut_surface::Vec3;
use octocut_volmesh::{Patch, PatchKind, VolumeMesh, NO_REGION};
use rayon::prelude::*;

/// `RawFaces::other` value of a boundary face.
pub(crate) const BOUNDARY: u32 = u32::MAX;

/// Faces before assembly; each polygon is oriented out of cell `a`.
///
/// The vertex lists are two CSR segments, so that the clipped face polygons can be taken over
/// as they are and the wall faces added without moving them: faces `0..first.len()` are in
/// `first`, the rest in `second`.
#[derive(Default)]
pub(crate) struct RawFaces {
    pub first: Csr,
    pub second: Csr,
    pub a: Vec<u32>,
    pub b: Vec<u32>,
    /// Boundary kind: side `0..6` or `6 + wall tag`.
    pub kind: Vec<u32>,
}

/// Vertex lists as offsets (starting at 0) and concatenated ids.
pub(crate) struct Csr {
    pub off: Vec<u32>,
    pub pts: Vec<u32>,
}

impl Default for Csr {
    fn default() -> Self {
        Csr {
            off: vec![0],
            pts: Vec::new(),
        }
    }
}

impl Csr {
    pub fn len(&self) -> usize {
        self.off.len() - 1
    }
    pub fn get(&self, f: usize) -> &[u32] {
        &self.pts[self.off[f] as usize..self.off[f + 1] as usize]
    }
    fn push(&mut self, pts: &[u32]) {
        self.pts.extend_from_slice(pts);
        self.off.push(self.pts.len() as u32);
    }
}

impl RawFaces {
    /// Appends a face (to the second segment).
    pub fn push(&mut self, pts: &[u32], a: u32, b: u32, kind: u32) {
        self.second.push(pts);
        self.a.push(a);
        self.b.push(b);
        self.kind.push(kind);
    }
    pub fn len(&self) -> usize {
        self.a.len()
    }
    #[inline]
    pub fn face(&self, f: usize) -> &[u32] {
        let n = self.first.len();
        if f < n {
            self.first.get(f)
        } else {
            self.second.get(f - n)
        }
    }
    /// The faces whose kind is not `kind`, in order (all in the second segment).
    pub fn without_kind(self, kind: u32) -> RawFaces {
        let mut out = RawFaces::default();
        for i in 0..self.len() {
            if self.kind[i] != kind {
                out.push(self.face(i), self.a[i], self.b[i], self.kind[i]);
            }
        }
        out
    }
}

pub(crate) struct AssembleInput<'a> {
    pub points: &'a [Vec3],
    /// Consumed: freed once the faces are copied out.
    pub faces: RawFaces,
    /// Final cell id of every raw cell, or `u32::MAX` if dropped.
    pub cell_id: &'a [u32],
    pub n_cells: usize,
    pub cell_level: Vec<u8>,
    pub cell_cut: Vec<u8>,
    pub cell_region: Vec<u16>,
    pub tag_names: &'a [String],
    pub side_names: &'a [String; 6],
}

pub(crate) fn assemble(mut inp: AssembleInput) -> VolumeMesh {
    let f = &inp.faces;
    // interior (owner, neighbour, raw face, reversed); boundary (kind, then patch, owner, raw face)
    let mut interior: Vec<(u32, u32, u32, bool)> = crate::concat::filter_map_sized(f.len(), |i_| {
        let i = i_ as u32;
        let ca = inp.cell_id[f.a[i_] as usize];
        if ca == u32::MAX || f.b[i_] == BOUNDARY {
            return None;
        }
        let cb = inp.cell_id[f.b[i_] as usize];
        if cb == u32::MAX || cb == ca {
            return None;
        }
        // owner is the lower cell id; the polygon is reversed when it points into it
        Some(if ca < cb {
            (ca, cb, i, false)
        } else {
            (cb, ca, i, true)
        })
    });
    let boundary: Vec<(u32, u32, u32)> = crate::concat::filter_map_sized(f.len(), |i_| {
        let ca = inp.cell_id[f.a[i_] as usize];
        (ca != u32::MAX && f.b[i_] == BOUNDARY).then_some((f.kind[i_], ca, i_ as u32))
    });
    // only the vertex lists are read from here on (memory at the stage's late peak)
    inp.faces.a = Vec::new();
    inp.faces.b = Vec::new();
    inp.faces.kind = Vec::new();
    let mut tags_used: Vec<u32> = boundary
        .iter()
        .filter(|b| b.0 >= 6)
        .map(|b| b.0 - 6)
        .collect();
    tags_used.sort_unstable();
    tags_used.dedup();
    // patch order: walls by tag, then the six sides
    let patch_of = |kind: u32| -> u32 {
        if kind >= 6 {
            tags_used.binary_search(&(kind - 6)).unwrap() as u32
        } else {
            tags_used.len() as u32 + kind
        }
    };
    interior.par_sort_unstable();
    let mut boundary: Vec<(u32, u32, u32)> = boundary
        .into_par_iter()
        .map(|(k, c, i)| (patch_of(k), c, i))
        .collect();
    boundary.par_sort_unstable();
    let n_interior = interior.len() as u32;
    // final face order: raw face, with `REVERSED` set when its polygon is reversed (4 bytes a
    // face at the stage's late peak; faces have at least three of the fewer than 2^32 vertex
    // slots, so their ids stay below 2^31)
    const REVERSED: u32 = 1 << 31;
    debug_assert!(inp.faces.first.len() + inp.faces.second.len() < REVERSED as usize);
    let order: Vec<u32> = interior
        .par_iter()
        .map(|x| x.2 | if x.3 { REVERSED } else { 0 })
        .chain(boundary.par_iter().map(|x| x.2))
        .collect();
    let owner: Vec<u32> = interior
        .par_iter()
        .map(|x| x.0)
        .chain(boundary.par_iter().map(|x| x.1))
        .collect();
    let neighbour: Vec<u32> = interior.par_iter().map(|x| x.1).collect();
    let n_patches = tags_used.len() + 6;
    let mut counts = vec![0u32; n_patches];
    for &(p, _, _) in &boundary {
        counts[p as usize] += 1;
    }
    drop(interior);
    drop(boundary);
    let f = &inp.faces;
    // vertex lists copied in parallel, a run of faces at a time (each run's vertices are one
    // contiguous range)
    const RUN: usize = 4096;
    let len = |i: u32| f.face((i & !REVERSED) as usize).len() as u32;
    // offsets: each run's total, then the runs filled in parallel from their starts (no list
    // of lengths kept: memory at the stage's late peak)
    let run_total: Vec<u32> = order
        .par_chunks(RUN)
        .map(|r| r.iter().map(|&i| len(i)).sum())
        .collect();
    let mut face_offsets = vec![0u32; order.len() + 1];
    {
        let mut start = Vec::with_capacity(run_total.len());
        let mut acc = 0u32;
        for &t in &run_total {
            start.push(acc);
            acc += t;
        }
        face_offsets[order.len()] = acc;
        face_offsets[1..]
            .par_chunks_mut(RUN)
            .zip(order.par_chunks(RUN))
            .zip(start)
            .for_each(|((o, r), mut a)| {
                for (x, &i) in o.iter_mut().zip(r) {
                    a += len(i);
                    *x = a;
                }
            });
    }
    let run_pts = run_total.iter().map(|&x| x as usize);
    let mut face_vertices = vec![0u32; *face_offsets.last().unwrap() as usize];
    let np = inp.points.len();
    let used: Vec<std::sync::atomic::AtomicBool> = (0..np)
        .into_par_iter()
        .map(|_| std::sync::atomic::AtomicBool::new(false))
        .collect();
    crate::concat::split_by(&mut face_vertices, run_pts)
        .into_par_iter()
        .zip(order.par_chunks(RUN))
        .for_each(|(out, r)| {
            let mut at = 0;
            for &i in r {
                let (rev, i) = (i & REVERSED != 0, i & !REVERSED);
                let p = f.face(i as usize);
                let o = &mut out[at..at + p.len()];
                o.copy_from_slice(p);
                if rev {
                    o.reverse();
                }
                for &q in p {
                    used[q as usize].store(true, std::sync::atomic::Ordering::Relaxed);
                }
                at += p.len();
            }
        });
    drop(order);
    drop(run_total);
    drop(inp.faces);
    let used: Vec<bool> = used.into_iter().map(|u| u.into_inner()).collect();
    let mut new_id = vec![u32::MAX; np];
    let mut points = Vec::with_capacity(used.iter().filter(|&&u| u).count());
    for q in 0..np {
        if used[q] {
            new_id[q] = points.len() as u32;
            points.push(inp.points[q]);
        }
    }
    face_vertices
        .par_iter_mut()
        .with_min_len(4096)
        .for_each(|v| *v = new_id[*v as usize]);
    let mut patches = Vec::with_capacity(n_patches);
    let mut start = n_interior;
    for (p, &count) in counts.iter().enumerate() {
        let (name, kind) = if p < tags_used.len() {
            let t = tags_used[p];
            let name = inp
                .tag_names
                .get(t as usize)
                .cloned()
                .unwrap_or_else(|| format!("wall{t}"));
            (name, PatchKind::Wall { tag: t })
        } else {
            let s = (p - tags_used.len()) as u8;
            (
                inp.side_names[s as usize].clone(),
                PatchKind::Side { side: s },
            )
        };
        patches.push(Patch {
            name,
            kind,
            start,
            count,
        });
        start += count;
    }
    debug_assert_eq!(inp.cell_level.len(), inp.n_cells);
    let _ = NO_REGION;
    VolumeMesh {
        points,
        face_offsets,
        face_vertices,
        owner,
        neighbour,
        patches,
        cell_level: inp.cell_level,
        cell_cut: inp.cell_cut,
        cell_region: inp.cell_region,
        region_names: Vec::new(),
    }
}
