//! Closing each cut leaf: chaining the face cut paths into wall loops, splitting the leaf's
//! fluid part into connected pieces and triangulating the walls.
//!
//! Method: the chords of a leaf's clipped faces, reversed to run along the wall, form closed
//! loops (each crossing on the leaf's boundary starts exactly one chord and ends exactly one, as
//! the two faces sharing its edge traverse it in opposite directions). Face polygons sharing a
//! point, and chords with their polygon and loop, are joined by union-find; each component is
//! one cell. Two pierce points of a loop on the same sharp edge (same facet normals, the segment
//! between them on the surface) are joined through the cell, splitting the loop into parts on
//! either side of the edge. A part whose crossing and pierce-point normals differ by more than
//! the feature angle is fanned to the dual-contouring feature vertex (Ju et al. 2002), else a
//! planar single-tag part is kept as one face and any other is split into triangles from one
//! of its vertices ([`crate::wallsplit`]) or, when no vertex sees the whole part or that split
//! strays from the surface, fanned to the surface point nearest its centroid. Volumes follow
//! from the divergence
//! theorem over the closed piece boundary. Invariant: every piece is a closed oriented surface.

use crate::clip::Clip;
use crate::crossing::Crossing;
use crate::feature::{qef_unclamped, qef_vertex};
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

/// A polygon, the side of its face the closed leaf is on, and the piece it bounds: 8 bytes
/// (the side in the polygon id's top bit; polygons have at least three of the fewer than
/// 2^32 point slots of `Clip::poly_off`, so their ids stay below 2^31).
///
/// ```ignore
/// let x = PolyPiece::new(7, true, 3);
/// assert_eq!((x.poly(), x.is_e(), x.piece), (7, true, 3));
/// ```
#[derive(Clone, Copy, Debug)]
pub(crate) struct PolyPiece {
    poly_side: u32,
    pub piece: u32,
}

impl PolyPiece {
    const E_SIDE: u32 = 1 << 31;
    #[inline]
    pub fn new(poly: u32, is_e: bool, piece: u32) -> PolyPiece {
        assert!(poly < Self::E_SIDE, "polygon id {poly} above 2^31");
        PolyPiece {
            poly_side: poly | if is_e { Self::E_SIDE } else { 0 },
            piece,
        }
    }
    /// The global polygon id.
    #[inline]
    pub fn poly(self) -> u32 {
        self.poly_side & !Self::E_SIDE
    }
    /// True when the closed leaf is the face's `e` side.
    #[inline]
    pub fn is_e(self) -> bool {
        self.poly_side & Self::E_SIDE != 0
    }
}

/// Output of closing a run of cut leaves.
#[derive(Default)]
pub(crate) struct CutChunk {
    /// Pieces per cut leaf, in leaf order.
    pub n_pieces: Vec<u32>,
    pub piece_volume: Vec<f64>,
    /// The piece (index within the chunk) each polygon of the closed leaves bounds.
    pub poly_piece: Vec<PolyPiece>,
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
    edge_pts: Vec<(usize, [Vec3; 2])>,
    joins: Vec<(usize, usize)>,
    sub: Vec<u32>,
    alive: Vec<bool>,
    ends: Vec<u32>,
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

/// Do all points `p` lie on one face plane of `cell` (edge `h`)? Points on the leaf's boundary
/// sit on it to round-off, and every point off a face plane is at least `T_EPS h` from it.
fn on_one_face(cell: &Aabb, h: f64, p: &[Vec3]) -> bool {
    let tol = 1e-6 * h;
    (0..3).any(|a| {
        p.iter().all(|q| (q[a] - cell.min[a]).abs() <= tol)
            || p.iter().all(|q| (q[a] - cell.max[a]).abs() <= tol)
    })
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
            let is_e = topo.faces[f as usize].e() == leaf;
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
            out.poly_piece.push(PolyPiece::new(p, is_e, first + pc));
            s.pos.clear();
            s.pos.extend(clip.poly(p).iter().map(|&q| self.pts.get(q)));
            let v = fan_volume(&s.pos, r);
            out.piece_volume[(first + pc) as usize] += if is_e { v } else { -v };
        }
        out.n_pieces.push(n_pieces);
        let (np0, nw0, wp0) = (out.new_pts.len(), out.wall_len.len(), out.wall_pts.len());
        for l in 0..s.loop_elem.len() {
            let root = s.uf.0.find(s.loop_elem[l]) as usize;
            let pc = first + s.piece_of[root];
            let lp = s.loop_off[l] as usize..s.loop_off[l + 1] as usize;
            let v = self.emit_wall(s, lp, pc, &cell, h, r, out);
            out.piece_volume[pc as usize] += v;
        }
        if n_pieces > 1 && out.new_pts.len() > np0 {
            self.separate_apexes(np0, nw0, wp0, &cell, h, r, out);
        }
    }

    /// Pieces of one leaf may meet along a sharp edge (a concave edge between two bodies):
    /// an apex of one piece on that edge can lie on a wall edge of another piece (a
    /// T-junction). Such an apex moves `1e-3 h` towards its own wall's vertex mean, the
    /// piece volume following.
    #[allow(clippy::too_many_arguments)]
    fn separate_apexes(
        &self,
        np0: usize,
        nw0: usize,
        wp0: usize,
        cell: &Aabb,
        h: f64,
        r: Vec3,
        out: &mut CutChunk,
    ) {
        let pos = |out: &CutChunk, id: u32| {
            if id & LOCAL != 0 {
                out.new_pts[(id & !LOCAL) as usize]
            } else {
                self.pts.get(id)
            }
        };
        let inner = cell.inflated(-crate::crossing::T_EPS * h);
        for k in np0..out.new_pts.len() {
            let a = LOCAL | k as u32;
            let pa = out.new_pts[k];
            // the apex's piece, its wall's vertex mean, and whether another piece's wall edge
            // runs through it
            let (mut piece, mut mean, mut n, mut hit) = (u32::MAX, Vec3::ZERO, 0.0, false);
            let mut off = wp0;
            for w in nw0..out.wall_len.len() {
                let f = &out.wall_pts[off..off + out.wall_len[w] as usize];
                off += f.len();
                if f.contains(&a) {
                    piece = out.wall_piece[w];
                    for &q in f.iter().filter(|&&q| q != a) {
                        mean += pos(out, q);
                        n += 1.0;
                    }
                }
            }
            let mut off = wp0;
            for w in nw0..out.wall_len.len() {
                let f = &out.wall_pts[off..off + out.wall_len[w] as usize];
                off += f.len();
                if out.wall_piece[w] == piece || f.contains(&a) {
                    continue;
                }
                for i in 0..f.len() {
                    let (p, q) = (pos(out, f[i]), pos(out, f[(i + 1) % f.len()]));
                    let d = q - p;
                    let t = (pa - p).dot(d) / d.length_squared().max(f64::MIN_POSITIVE);
                    if t > 0.0 && t < 1.0 && (p + t * d - pa).length() <= 1e-7 * h {
                        hit = true;
                    }
                }
            }
            if !hit || n == 0.0 {
                continue;
            }
            let to = (mean / n - pa).normalize_or_zero();
            let moved = (pa + 1e-3 * h * to).clamp(inner.min, inner.max);
            // volume change of the apex's fan triangles
            let mut off = wp0;
            for w in nw0..out.wall_len.len() {
                let len = out.wall_len[w] as usize;
                let f = &out.wall_pts[off..off + len];
                off += len;
                if !f.contains(&a) {
                    continue;
                }
                let at = |x: Vec3| {
                    let v: Vec<Vec3> = f
                        .iter()
                        .map(|&q| if q == a { x } else { pos(out, q) })
                        .collect();
                    fan_volume(&v, r)
                };
                let dv = at(moved) - at(pa);
                out.piece_volume[out.wall_piece[w] as usize] += dv;
            }
            out.new_pts[k] = moved;
        }
    }

    /// The two facet normals meeting at point `id` if it is a pierce point.
    fn pair_of(&self, id: u32) -> Option<[Vec3; 2]> {
        if id < self.pts.pierce_base {
            return None;
        }
        let pr = *self.clip.pair.get((id - self.pts.pierce_base) as usize)?;
        (pr[1] != Vec3::ZERO).then_some(pr)
    }

    /// Triangulates one wall loop; returns its volume contribution.
    ///
    /// Two pierce points of the loop on the same sharp edge (same two facet normals, the
    /// segment between them on the surface) are joined through the cell, splitting the loop
    /// into parts that each lie on one side of the edge; each part is then triangulated alone.
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
        // pierce points of the loop and the edge segments joining pairs of them
        s.edge_pts.clear();
        for k in 0..m {
            if let Some(pr) = self.pair_of(s.loop_pts[lp.start + k]) {
                s.edge_pts.push((k, pr));
            }
        }
        s.joins.clear();
        if s.edge_pts.len() >= 2 {
            let same = |a: [Vec3; 2], b: [Vec3; 2]| {
                let c = 1.0 - 1e-9;
                (a[0].dot(b[0]) > c && a[1].dot(b[1]) > c)
                    || (a[0].dot(b[1]) > c && a[1].dot(b[0]) > c)
            };
            let ne = s.edge_pts.len();
            let mut used = [false; 64];
            for i in 0..ne.min(64) {
                if used[i] {
                    continue;
                }
                for j in i + 1..ne.min(64) {
                    let (ki, kj) = (s.edge_pts[i].0, s.edge_pts[j].0);
                    if used[j] || kj - ki == 1 || (ki == 0 && kj == m - 1) {
                        continue;
                    }
                    if !same(s.edge_pts[i].1, s.edge_pts[j].1) {
                        continue;
                    }
                    let (a, b) = (
                        self.pts.get(s.loop_pts[lp.start + ki]),
                        self.pts.get(s.loop_pts[lp.start + kj]),
                    );
                    let on = |q: Vec3| {
                        self.index
                            .closest_point(q)
                            .is_some_and(|c| c.distance <= 1e-6 * h)
                    };
                    if on(0.5 * (a + b)) && on(0.25 * (3.0 * a + b)) && on(0.25 * (a + 3.0 * b)) {
                        used[i] = true;
                        used[j] = true;
                        s.joins.push((ki, kj));
                        break;
                    }
                }
            }
            // the joins must not cross (nested or disjoint in loop order)
            let crossing = s.joins.iter().any(|&(a, b)| {
                s.joins
                    .iter()
                    .any(|&(c, d)| (a < c && c < b && b < d) || (c < a && a < d && d < b))
            });
            if crossing {
                s.joins.clear();
            }
        }
        if s.joins.is_empty() {
            let ids = std::mem::take(&mut s.sub);
            let mut ids = ids;
            ids.clear();
            ids.extend_from_slice(&s.loop_pts[lp]);
            let v = self.emit_part(s, &ids, &[], piece, cell, h, r, out);
            s.sub = ids;
            return v;
        }
        // split: the parts are the loop's arcs between joins, innermost first
        s.joins.sort_unstable_by_key(|&(a, b)| (b - a, a));
        let mut alive = std::mem::take(&mut s.alive);
        alive.clear();
        alive.resize(m, true);
        let mut ids = std::mem::take(&mut s.sub);
        let mut ends = std::mem::take(&mut s.ends);
        ends.clear();
        let mut vol = 0.0;
        for j in 0..s.joins.len() {
            let (a, b) = s.joins[j];
            ids.clear();
            let arc = &s.loop_pts[lp.start + a..=lp.start + b];
            ids.extend(arc.iter().zip(&alive[a..=b]).filter(|x| *x.1).map(|x| *x.0));
            for flag in alive.iter_mut().take(b).skip(a + 1) {
                *flag = false;
            }
            ends.push(s.loop_pts[lp.start + a]);
            ends.push(s.loop_pts[lp.start + b]);
            vol += self.emit_part(s, &ids, &ends, piece, cell, h, r, out);
        }
        ids.clear();
        let all = &s.loop_pts[lp.clone()];
        ids.extend(all.iter().zip(&alive).filter(|x| *x.1).map(|x| *x.0));
        vol += self.emit_part(s, &ids, &ends, piece, cell, h, r, out);
        s.sub = ids;
        s.alive = alive;
        s.ends = ends;
        vol
    }

    /// Triangulates one closed part of a wall loop (`ids`, in order); pierce points in `joined`
    /// end an edge segment of the part and bring no facet planes. Returns its volume term.
    #[allow(clippy::too_many_arguments)]
    fn emit_part(
        &self,
        s: &mut Scratch,
        ids: &[u32],
        joined: &[u32],
        piece: u32,
        cell: &Aabb,
        h: f64,
        r: Vec3,
        out: &mut CutChunk,
    ) -> f64 {
        let m = ids.len();
        if m < 3 {
            return 0.0;
        }
        s.pos.clear();
        s.planes.clear();
        let mut tag = u32::MAX;
        let mut mixed = false;
        for &id in ids {
            let p = self.pts.get(id);
            s.pos.push(p);
            let plane = match self.pts.crossing(id) {
                Some(c) => Some((c.normal, c.triangle)),
                None if id >= self.pts.pierce_base => {
                    self.clip.poke_plane(id - self.pts.pierce_base)
                }
                None => None,
            };
            if let Some((normal, triangle)) = plane {
                s.planes.push((p, normal));
                let t = self.tag_of_triangle(triangle);
                if tag == u32::MAX {
                    tag = t;
                } else if t != tag {
                    mixed = true;
                }
            } else if let Some(pr) = self.pair_of(id) {
                if !joined.contains(&id) {
                    s.planes.push((p, pr[0]));
                    s.planes.push((p, pr[1]));
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
        // a loop lying in one face plane of the leaf is not emitted as it stands: the cell on
        // the other side sees the same points and would emit the same face (the apex, strictly
        // inside the leaf, lifts the fan off the plane)
        let flat = on_one_face(cell, h, &s.pos);
        if (m == 3 && !feature || planar && !mixed) && !flat {
            out.wall_pts.extend_from_slice(ids);
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
        let (apex, wanted) = if feature {
            (
                qef_vertex(&s.planes, mass, &inner),
                qef_unclamped(&s.planes, mass),
            )
        } else {
            let p = match self.index.closest_point(mass) {
                Some(c) if c.distance < 0.5 * h => c.point,
                _ => mass,
            };
            (p.clamp(inner.min, inner.max), p)
        };
        // an apex that the cell clamp pushed next to a loop point (a feature vertex outside
        // the cell, near a pierce point) would leave sliver triangles: fan from that point
        let (kn, dn) = s
            .pos
            .iter()
            .map(|p| (*p - apex).length())
            .enumerate()
            .min_by(|a, b| a.1.total_cmp(&b.1))
            .unwrap_or((0, f64::INFINITY));
        if apex != wanted && dn < 1e-3 * h {
            let p0 = s.pos[kn];
            // no sliver, and no diagonal from the fan point lying in a face plane of the leaf:
            // there it could pass through another loop point (a T-junction) or bound a
            // triangle that the neighbour's wall repeats
            let fan_ok = !flat
                && (1..m - 1).all(|i| {
                    let (a, b) = (s.pos[(kn + i) % m], s.pos[(kn + i + 1) % m]);
                    (a - p0).cross(b - p0).length() > 1e-6 * h * h
                })
                && (2..m - 1).all(|i| !on_one_face(cell, h, &[p0, s.pos[(kn + i) % m]]));
            if fan_ok {
                for i in 1..m - 1 {
                    let (ia, ib) = ((kn + i) % m, (kn + i + 1) % m);
                    let (a, b) = (s.pos[ia], s.pos[ib]);
                    out.wall_pts.extend_from_slice(&[ids[kn], ids[ia], ids[ib]]);
                    out.wall_len.push(3);
                    out.wall_piece.push(piece);
                    out.wall_tag.push(if mixed {
                        self.nearest_tag((a + b + p0) / 3.0)
                    } else {
                        tag
                    });
                    vol += fan_volume(&[p0, a, b], r);
                }
                return vol;
            }
        }
        // a smooth loop splits into triangles of its own vertices when a vertex sees all others
        // and that fan stays within `FAN_GAP` of the one to the surface point
        if !feature && !flat {
            let root = crate::wallsplit::fan_root(&s.pos, cell, h, Some(apex), &mut s.masks)
                .filter(|&root| crate::wallsplit::fan_gap(&s.pos, root, apex) <= FAN_GAP * h);
            if let Some(root) = root {
                for i in 1..m - 1 {
                    let t = [root, (root + i) % m, (root + i + 1) % m];
                    let q = t.map(|j| s.pos[j]);
                    out.wall_pts.extend(t.map(|j| ids[j]));
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
            out.wall_pts
                .extend_from_slice(&[ids[i], ids[(i + 1) % m], apex_id]);
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
