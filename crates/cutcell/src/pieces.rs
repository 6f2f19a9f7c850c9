//! Closing each cut leaf: chaining the face cut paths into wall loops, splitting the leaf's
//! fluid part into connected pieces and triangulating the walls.
//!
//! Method: the chords of a leaf's clipped faces, reversed to run along the wall, form closed
//! loops (each crossing on the leaf's boundary starts exactly one chord and ends exactly one, as
//! the two faces sharing its edge traverse it in opposite directions). Face polygons sharing a
//! point, and chords with their polygon and loop, are joined by union-find; each component is
//! one cell. A loop whose crossing normals differ by more than the feature angle is fanned to
//! the dual-contouring feature vertex (Ju et al. 2002), else a planar single-tag loop is kept
//! as one face and any other is split into triangles from one of its vertices
//! ([`crate::wallsplit`]) or, when no vertex sees the whole loop or that split strays from the
//! surface, fanned to the surface point nearest its centroid. Volumes follow from the divergence
//! theorem over the closed piece boundary. Invariant: every piece is a closed oriented surface.

use crate::clip::Clip;
use crate::crossing::Crossing;
use crate::feature::qef_vertex;
use crate::topology::Topology;
use crate::util::UnionFind;
use octocut_octree::{Domain, Octree};
use octocut_surface::{Aabb, SurfaceIndex, Vec3};

/// Flag of a point id local to one chunk's new points.
pub(crate) const LOCAL: u32 = 1 << 31;

/// Positions of all point ids known before the cells are closed.
pub(crate) struct Points<'a> {
    pub domain: &'a Domain,
    pub grid: &'a [[u32; 3]],
    pub crossings: &'a [Crossing],
    pub pierce: &'a [Vec3],
    pub n_grid: u32,
    pub pierce_base: u32,
}

impl Points<'_> {
    #[inline]
    pub fn get(&self, id: u32) -> Vec3 {
        if id < self.n_grid {
            self.domain.point(self.grid[id as usize])
        } else if id < self.pierce_base {
            self.crossings[(id - self.n_grid) as usize].point
        } else {
            self.pierce[(id - self.pierce_base) as usize]
        }
    }
    #[inline]
    pub fn crossing(&self, id: u32) -> Option<&Crossing> {
        (id >= self.n_grid && id < self.pierce_base)
            .then(|| &self.crossings[(id - self.n_grid) as usize])
    }
}

/// Output of closing a run of cut leaves.
#[derive(Default)]
pub(crate) struct CutChunk {
    /// Pieces per cut leaf, in leaf order.
    pub n_pieces: Vec<u32>,
    pub piece_volume: Vec<f64>,
    /// (global polygon, leaf is the face's `e` side, piece index within the chunk)
    pub poly_piece: Vec<(u32, bool, u32)>,
    pub wall_len: Vec<u32>,
    pub wall_pts: Vec<u32>,
    pub wall_piece: Vec<u32>,
    pub wall_tag: Vec<u32>,
    pub new_pts: Vec<Vec3>,
    /// (leaf, reason)
    pub warnings: Vec<(u32, &'static str)>,
}

#[derive(Default)]
pub(crate) struct Scratch {
    polys: Vec<(u32, bool)>,
    chords: Vec<(u32, bool, u32)>,
    uf: UnionFind0,
    pt_elem: Vec<(u32, u32)>,
    starts: Vec<(u32, u32)>,
    visited: Vec<bool>,
    loop_off: Vec<u32>,
    loop_pts: Vec<u32>,
    loop_elem: Vec<u32>,
    piece_of: Vec<u32>,
    pos: Vec<Vec3>,
    planes: Vec<(Vec3, Vec3)>,
    masks: Vec<u8>,
}

/// A reusable union-find (empty by default).
pub(crate) struct UnionFind0(pub UnionFind);
impl Default for UnionFind0 {
    fn default() -> Self {
        UnionFind0(UnionFind::new(0))
    }
}

pub(crate) struct CellCtx<'a> {
    pub tree: &'a Octree,
    pub index: &'a SurfaceIndex,
    pub topo: &'a Topology,
    pub clip: &'a Clip,
    pub pts: &'a Points<'a>,
    pub cos_feature: f64,
}

/// Largest mean gap (in leaf edges) between a loop's own-vertex fan and its fan to the nearest
/// surface point for the own-vertex fan to be used (our choice, tuned so that coarse cells on a
/// curved body keep the more accurate apex fan; at 1/128 of a unit sphere's radius almost no
/// loop needs it).
const FAN_GAP: f64 = 3e-3;

#[inline]
fn fan_volume(p: &[Vec3], r: Vec3) -> f64 {
    let mut v = 0.0;
    for i in 1..p.len().saturating_sub(1) {
        v += (p[0] - r).dot((p[i] - r).cross(p[i + 1] - r));
    }
    v / 6.0
}

impl CellCtx<'_> {
    fn tag_of_triangle(&self, t: u32) -> u32 {
        self.index
            .surface()
            .tags
            .get(t as usize)
            .map(|g| g.0)
            .unwrap_or(0)
    }

    fn nearest_tag(&self, p: Vec3) -> u32 {
        self.index
            .closest_point(p)
            .map(|c| self.tag_of_triangle(c.triangle))
            .unwrap_or(0)
    }

    /// Closes cut leaf `leaf`, appending its pieces and walls to `out`.
    pub fn close_leaf(&self, leaf: u32, s: &mut Scratch, out: &mut CutChunk) {
        let topo = self.topo;
        let clip = self.clip;
        let key = self.tree.leaves()[leaf as usize];
        let cell: Aabb = self.pts.domain.key_box(key);
        let h = cell.extent().x;
        let r = cell.center();
        s.polys.clear();
        s.chords.clear();
        for &f in topo.faces_of(leaf) {
            let is_e = topo.faces[f as usize].e == leaf;
            let base = s.polys.len() as u32;
            let pr = clip.polys_of(f);
            for p in pr.clone() {
                s.polys.push((p, is_e));
            }
            for c in clip.chords_of(f) {
                s.chords
                    .push((c, is_e, base + clip.chord_poly[c as usize] - pr.start));
            }
        }
        let np = s.polys.len();
        let nc = s.chords.len();
        s.uf.0.reset(np + nc);
        for (j, &(_, _, lp)) in s.chords.iter().enumerate() {
            s.uf.0.union(lp, (np + j) as u32);
        }
        s.pt_elem.clear();
        for (i, &(p, _)) in s.polys.iter().enumerate() {
            for &q in clip.poly(p) {
                s.pt_elem.push((q, i as u32));
            }
        }
        s.pt_elem.sort_unstable();
        for w in s.pt_elem.windows(2) {
            if w[0].0 == w[1].0 {
                s.uf.0.union(w[0].1, w[1].1);
            }
        }
        // wall direction of chord j: reversed when the leaf is the face's e side
        let ends = |c: u32, is_e: bool| {
            let ch = clip.chord(c);
            if is_e {
                (ch[ch.len() - 1], ch[0])
            } else {
                (ch[0], ch[ch.len() - 1])
            }
        };
        s.starts.clear();
        for (j, &(c, is_e, _)) in s.chords.iter().enumerate() {
            s.starts.push((ends(c, is_e).0, j as u32));
        }
        s.starts.sort_unstable();
        s.visited.clear();
        s.visited.resize(nc, false);
        s.loop_off.clear();
        s.loop_off.push(0);
        s.loop_pts.clear();
        s.loop_elem.clear();
        let mut broken = false;
        for j in 0..nc {
            if s.visited[j] {
                continue;
            }
            let mut cur = j;
            loop {
                s.visited[cur] = true;
                s.uf.0.union((np + j) as u32, (np + cur) as u32);
                let (c, is_e, _) = s.chords[cur];
                let ch = clip.chord(c);
                if is_e {
                    s.loop_pts.extend(ch[1..].iter().rev());
                } else {
                    s.loop_pts.extend(&ch[..ch.len() - 1]);
                }
                let end = ends(c, is_e).1;
                let k = s.starts.partition_point(|x| x.0 < end);
                if k >= nc || s.starts[k].0 != end {
                    broken = true;
                    break;
                }
                let next = s.starts[k].1 as usize;
                if next == j {
                    break;
                }
                if s.visited[next] {
                    broken = true;
                    break;
                }
                cur = next;
            }
            s.loop_off.push(s.loop_pts.len() as u32);
            s.loop_elem.push((np + j) as u32);
        }
        if broken {
            out.warnings.push((leaf, "wall loop could not be closed"));
        }
        // pieces, numbered by first polygon
        s.piece_of.clear();
        s.piece_of.resize(np + nc, u32::MAX);
        let first = out.piece_volume.len() as u32;
        let mut n_pieces = 0u32;
        for i in 0..np {
            let root = s.uf.0.find(i as u32) as usize;
            if s.piece_of[root] == u32::MAX {
                s.piece_of[root] = n_pieces;
                n_pieces += 1;
                out.piece_volume.push(0.0);
            }
            let pc = s.piece_of[root];
            let (p, is_e) = s.polys[i];
            out.poly_piece.push((p, is_e, first + pc));
            s.pos.clear();
            s.pos.extend(clip.poly(p).iter().map(|&q| self.pts.get(q)));
            let v = fan_volume(&s.pos, r);
            out.piece_volume[(first + pc) as usize] += if is_e { v } else { -v };
        }
        out.n_pieces.push(n_pieces);
        for l in 0..s.loop_elem.len() {
            let root = s.uf.0.find(s.loop_elem[l]) as usize;
            let pc = first + s.piece_of[root];
            let lp = s.loop_off[l] as usize..s.loop_off[l + 1] as usize;
            let v = self.emit_wall(s, lp, pc, &cell, h, r, out);
            out.piece_volume[pc as usize] += v;
        }
    }

    /// Triangulates one wall loop; returns its volume contribution.
    #[allow(clippy::too_many_arguments)]
    fn emit_wall(
        &self,
        s: &mut Scratch,
        lp: std::ops::Range<usize>,
        piece: u32,
        cell: &Aabb,
        h: f64,
        r: Vec3,
        out: &mut CutChunk,
    ) -> f64 {
        let m = lp.len();
        if m < 3 {
            return 0.0;
        }
        s.pos.clear();
        s.planes.clear();
        let mut tag = u32::MAX;
        let mut mixed = false;
        for k in lp.clone() {
            let id = s.loop_pts[k];
            let p = self.pts.get(id);
            s.pos.push(p);
            if let Some(c) = self.pts.crossing(id) {
                s.planes.push((c.point, c.normal));
                let t = self.tag_of_triangle(c.triangle);
                if tag == u32::MAX {
                    tag = t;
                } else if t != tag {
                    mixed = true;
                }
            }
        }
        if tag == u32::MAX {
            tag = self.nearest_tag(s.pos.iter().sum::<Vec3>() / m as f64);
        }
        let feature = s.planes.iter().enumerate().any(|(i, a)| {
            s.planes[i + 1..]
                .iter()
                .any(|b| a.1.dot(b.1) < self.cos_feature)
        });
        let mass = s.pos.iter().sum::<Vec3>() / m as f64;
        let mut vol = 0.0;
        let newell = {
            let mut n = Vec3::ZERO;
            for i in 0..m {
                n += s.pos[i].cross(s.pos[(i + 1) % m]);
            }
            n
        };
        let planar = !feature && {
            let nn = newell.normalize_or_zero();
            nn != Vec3::ZERO
                && s.pos
                    .iter()
                    .all(|p| nn.dot(*p - s.pos[0]).abs() <= 1e-9 * h)
        };
        if m == 3 && !feature || planar && !mixed {
            out.wall_pts.extend_from_slice(&s.loop_pts[lp.clone()]);
            out.wall_len.push(m as u32);
            out.wall_piece.push(piece);
            out.wall_tag.push(tag);
            return fan_volume(&s.pos, r);
        }
        // otherwise a smooth loop fans to the surface point nearest its centroid (on the surface,
        // so the wall interpolates it); a sharp one to the feature vertex
        // the apex stays strictly inside the leaf: on its boundary it would stand on a face or
        // edge of the leaf without being one of that face's vertices (a T-junction)
        let inner = cell.inflated(-crate::crossing::T_EPS * h);
        let apex = if feature {
            qef_vertex(&s.planes, mass, &inner)
        } else {
            match self.index.closest_point(mass) {
                Some(c) if c.distance < 0.5 * h => c.point.clamp(inner.min, inner.max),
                _ => mass.clamp(inner.min, inner.max),
            }
        };
        // a smooth loop splits into triangles of its own vertices when a vertex sees all others
        // and that fan stays within `FAN_GAP` of the one to the surface point
        if !feature {
            let root = crate::wallsplit::fan_root(&s.pos, cell, h, Some(apex), &mut s.masks)
                .filter(|&root| crate::wallsplit::fan_gap(&s.pos, root, apex) <= FAN_GAP * h);
            if let Some(root) = root {
                for i in 1..m - 1 {
                    let t = [root, (root + i) % m, (root + i + 1) % m];
                    let q = t.map(|j| s.pos[j]);
                    out.wall_pts.extend(t.map(|j| s.loop_pts[lp.start + j]));
                    out.wall_len.push(3);
                    out.wall_piece.push(piece);
                    out.wall_tag.push(if mixed {
                        self.nearest_tag((q[0] + q[1] + q[2]) / 3.0)
                    } else {
                        tag
                    });
                    vol += fan_volume(&q, r);
                }
                return vol;
            }
        }
        let apex_id = LOCAL | out.new_pts.len() as u32;
        out.new_pts.push(apex);
        for i in 0..m {
            let (a, b) = (s.pos[i], s.pos[(i + 1) % m]);
            out.wall_pts.extend_from_slice(&[
                s.loop_pts[lp.start + i],
                s.loop_pts[lp.start + (i + 1) % m],
                apex_id,
            ]);
            out.wall_len.push(3);
            out.wall_piece.push(piece);
            out.wall_tag.push(if mixed {
                self.nearest_tag((a + b + apex) / 3.0)
            } else {
                tag
            });
            vol += fan_volume(&[a, b, apex], r);
        }
        vol
    }
}
