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
#[derive(Default)]
pub(crate) struct RawFaces {
    pub off: Vec<u32>,
    pub pts: Vec<u32>,
    pub a: Vec<u32>,
    pub b: Vec<u32>,
    /// Boundary kind: side `0..6` or `6 + wall tag`.
    pub kind: Vec<u32>,
}

impl RawFaces {
    pub fn push(&mut self, pts: &[u32], a: u32, b: u32, kind: u32) {
        if self.off.is_empty() {
            self.off.push(0);
        }
        self.pts.extend_from_slice(pts);
        self.off.push(self.pts.len() as u32);
        self.a.push(a);
        self.b.push(b);
        self.kind.push(kind);
    }
    /// Reserves room for `faces` more faces with `pts` more point ids in all.
    pub fn reserve(&mut self, faces: usize, pts: usize) {
        self.off.reserve(faces + 1);
        self.pts.reserve(pts);
        self.a.reserve(faces);
        self.b.reserve(faces);
        self.kind.reserve(faces);
    }
    pub fn len(&self) -> usize {
        self.a.len()
    }
    pub fn face(&self, f: usize) -> &[u32] {
        &self.pts[self.off[f] as usize..self.off[f + 1] as usize]
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

pub(crate) fn assemble(inp: AssembleInput) -> VolumeMesh {
    let f = &inp.faces;
    // interior (owner, neighbour, raw face, reversed); boundary (kind, then patch, owner, raw face)
    let mut interior: Vec<(u32, u32, u32, bool)> = Vec::new();
    let mut boundary: Vec<(u32, u32, u32)> = Vec::new();
    let mut tags_used: Vec<u32> = Vec::new();
    for i in 0..f.len() {
        let ca = inp.cell_id[f.a[i] as usize];
        if ca == u32::MAX {
            continue;
        }
        if f.b[i] == BOUNDARY {
            boundary.push((f.kind[i], ca, i as u32));
            if f.kind[i] >= 6 {
                tags_used.push(f.kind[i] - 6);
            }
        } else {
            let cb = inp.cell_id[f.b[i] as usize];
            if cb == u32::MAX || cb == ca {
                continue;
            }
            // owner is the lower cell id; the polygon is reversed when it points into it
            interior.push(if ca < cb {
                (ca, cb, i as u32, false)
            } else {
                (cb, ca, i as u32, true)
            });
        }
    }
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
        .into_iter()
        .map(|(k, c, i)| (patch_of(k), c, i))
        .collect();
    boundary.par_sort_unstable();
    let nfaces = interior.len() + boundary.len();
    let mut face_offsets = Vec::with_capacity(nfaces + 1);
    face_offsets.push(0u32);
    let n_pts: usize = interior
        .iter()
        .map(|x| x.2)
        .chain(boundary.iter().map(|x| x.2))
        .map(|i| (f.off[i as usize + 1] - f.off[i as usize]) as usize)
        .sum();
    let mut face_vertices = Vec::with_capacity(n_pts);
    let mut owner = Vec::with_capacity(nfaces);
    let mut neighbour = Vec::with_capacity(interior.len());
    let np = inp.points.len();
    let mut new_id = vec![u32::MAX; np];
    let mut used = vec![false; np];
    let mut emit = |fv: &mut Vec<u32>, fo: &mut Vec<u32>, i: u32, rev: bool| {
        let p = f.face(i as usize);
        let start = fv.len();
        fv.extend_from_slice(p);
        if rev {
            fv[start..].reverse();
        }
        for &q in p {
            used[q as usize] = true;
        }
        fo.push(fv.len() as u32);
    };
    for &(o, n, i, rev) in &interior {
        emit(&mut face_vertices, &mut face_offsets, i, rev);
        owner.push(o);
        neighbour.push(n);
    }
    let n_patches = tags_used.len() + 6;
    let mut counts = vec![0u32; n_patches];
    for &(p, c, i) in &boundary {
        emit(&mut face_vertices, &mut face_offsets, i, false);
        owner.push(c);
        counts[p as usize] += 1;
    }
    let n_interior = interior.len() as u32;
    drop(interior);
    drop(boundary);
    drop(inp.faces);
    let mut points = Vec::with_capacity(used.iter().filter(|&&u| u).count());
    for q in 0..np {
        if used[q] {
            new_id[q] = points.len() as u32;
            points.push(inp.points[q]);
        }
    }
    for v in &mut face_vertices {
        *v = new_id[*v as usize];
    }
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
