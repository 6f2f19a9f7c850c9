//! Clipping of elementary face polygons by vertex classes.
//!
//! Walks each face polygon, keeps fluid vertices and inserts the edge crossing wherever the
//! class changes (the polygon-clipping walk of Sutherland and Hodgman 1974, with the classes
//! in place of a clip plane). A face with several fluid runs is ambiguous; it is decided by the
//! class of the face centre (one winding-number sample), so both cells sharing the face agree.
//! Where the surface normals at the two crossings of a cut differ by more than the feature
//! angle, the point where the body's sharp edge pierces the face (intersection of the two
//! tangent planes with the face plane, as in dual contouring, Ju et al. 2002) is put into the
//! cut path; where that point is off the surface and a third facet near the face meets both
//! planes on the surface (a body corner near the face), its two meeting points are. An edge
//! whose two vertices share a class and that the surface crosses exactly twice with the other
//! class between the hits (a sharp edge or a thin part poking through it, invisible to the
//! vertex classes) is a "poke": both hits become shared points and every face through the
//! edge clips as if a vertex of the other class sat between them, so the cells around the
//! edge agree; such a face with several fluid runs is one region when a straight segment
//! between two runs' fluid points misses the surface.
//! Output per face: fluid polygons (oriented like the face) and directed cut paths ("chords",
//! exit crossing to entry crossing, as the polygon traverses them).

use crate::crossing::{EdgeTable, T_EPS};
use crate::topology::{FaceBlock, Topology};
use octocut_octree::Domain;
use octocut_surface::{SurfaceIndex, Vec3};
use rayon::prelude::*;

pub(crate) struct Clip {
    pub face_poly: Vec<u32>,
    pub poly_off: Vec<u32>,
    pub poly_pts: Vec<u32>,
    pub face_chord: Vec<u32>,
    pub chord_off: Vec<u32>,
    pub chord_pts: Vec<u32>,
    pub chord_poly: Vec<u32>,
    /// Extra points: first the poke points (two per poke edge), then the pierce points.
    pub pierce: Vec<Vec3>,
    /// Unit surface normal and triangle of each poke point (the first entries of `pierce`).
    pub poke_plane: Vec<(Vec3, u32)>,
    /// Per entry of `pierce`: the two facet normals meeting there (zero for poke points).
    pub pair: Vec<[Vec3; 2]>,
    /// Faces whose lone runs gave up the sharp edge's pierce point to stay disjoint.
    pub fallbacks: usize,
}

impl Clip {
    pub fn polys_of(&self, f: u32) -> std::ops::Range<u32> {
        self.face_poly[f as usize]..self.face_poly[f as usize + 1]
    }
    pub fn chords_of(&self, f: u32) -> std::ops::Range<u32> {
        self.face_chord[f as usize]..self.face_chord[f as usize + 1]
    }
    pub fn poly(&self, p: u32) -> &[u32] {
        &self.poly_pts[self.poly_off[p as usize] as usize..self.poly_off[p as usize + 1] as usize]
    }
    /// Normal and triangle of extra point `k` (index into `pierce`) if it is a poke point.
    pub fn poke_plane(&self, k: u32) -> Option<(Vec3, u32)> {
        self.poke_plane.get(k as usize).copied()
    }
    /// Frees the chords (only closing the cut leaves reads them).
    pub fn release_chords(&mut self) {
        self.face_chord = Vec::new();
        self.chord_off = Vec::new();
        self.chord_pts = Vec::new();
        self.chord_poly = Vec::new();
    }
    pub fn chord(&self, c: u32) -> &[u32] {
        &self.chord_pts
            [self.chord_off[c as usize] as usize..self.chord_off[c as usize + 1] as usize]
    }
}

pub(crate) struct ClipCtx<'a> {
    pub domain: &'a Domain,
    pub index: &'a SurfaceIndex,
    pub topo: &'a Topology,
    pub fluid: &'a [bool],
    pub edges: &'a EdgeTable,
    pub fluid_inside: bool,
    pub cos_feature: f64,
    pub n_grid: u32,
    pub pierce_cuts: bool,
}

const LOCAL: u32 = 1 << 31;
/// Flag of a virtual solid vertex between the two hits of poke `(x & !VIRT) >> 1`, low bit set
/// when the face runs along the edge from its key's high end (grid ids stay below `1 << 30`).
const VIRT: u32 = 1 << 30;

/// Poke edges of the edge table (see the module doc).
#[derive(Default)]
struct Pokes {
    /// Sorted edge-table indices.
    edge: Vec<u32>,
    /// Two hits per poke, from the key's low end: (point, unit normal, triangle).
    hit: Vec<(Vec3, Vec3, u32)>,
    /// Grid point ends some poke edge (empty without pokes).
    vertex: Vec<bool>,
    /// Point id of the first poke point.
    base: u32,
}

#[derive(Default)]
struct Chunk {
    n_polys: Vec<u32>,
    poly_len: Vec<u32>,
    poly_pts: Vec<u32>,
    n_chords: Vec<u32>,
    chord_len: Vec<u32>,
    chord_pts: Vec<u32>,
    /// polygon of each chord, as an index among its face's polygons
    chord_poly: Vec<u32>,
    pierce: Vec<Vec3>,
    /// the two normals meeting at each pierce point
    pair: Vec<[Vec3; 2]>,
    found: Vec<(Vec3, [Vec3; 2])>,
    tris: Vec<u32>,
    /// faces whose lone runs fell back to the points beside their hits
    fallbacks: usize,
}

/// Output lengths of a [`Chunk`] before a face, to undo the face.
struct Mark {
    poly_len: usize,
    poly_pts: usize,
    chord_len: usize,
    chord_pts: usize,
    pierce: usize,
}

impl Chunk {
    fn mark(&self) -> Mark {
        Mark {
            poly_len: self.poly_len.len(),
            poly_pts: self.poly_pts.len(),
            chord_len: self.chord_len.len(),
            chord_pts: self.chord_pts.len(),
            pierce: self.pierce.len(),
        }
    }
    fn rollback(&mut self, m: &Mark) {
        self.poly_len.truncate(m.poly_len);
        self.poly_pts.truncate(m.poly_pts);
        self.chord_len.truncate(m.chord_len);
        self.chord_poly.truncate(m.chord_len);
        self.chord_pts.truncate(m.chord_pts);
        self.pierce.truncate(m.pierce);
        self.pair.truncate(m.pierce);
    }
}

struct Run {
    entry: u32,
    exit: u32,
    start: usize,
    end: usize,
}

impl ClipCtx<'_> {
    fn crossing_id(&self, p: u32, q: u32) -> u32 {
        let e = self
            .edges
            .find(p, q)
            .expect("clipped edge missing from the edge table");
        let c = self.edges.cross[e];
        debug_assert!(c != u32::MAX);
        self.n_grid + c
    }

    /// The crossing point between consecutive entries `a`, `b` of a face's (poked) vertex walk.
    fn cross_between(&self, pk: &Pokes, a: u32, b: u32) -> u32 {
        if b & VIRT != 0 {
            // the hit nearer `a`, the start of the edge in face order
            pk.base + (b & !VIRT)
        } else if a & VIRT != 0 {
            pk.base + ((a & !VIRT) ^ 1)
        } else {
            self.crossing_id(a, b)
        }
    }

    /// Position and unit normal of a chord end (a crossing or a poke point).
    fn plane(&self, pk: &Pokes, id: u32) -> (Vec3, Vec3) {
        if id >= pk.base {
            let h = pk.hit[(id - pk.base) as usize];
            (h.0, h.1)
        } else {
            let c = &self.edges.crossings[(id - self.n_grid) as usize];
            (c.point, c.normal)
        }
    }

    /// The poke edges among the edge table's edges, their points numbered from `base`.
    fn find_pokes(&self, base: u32) -> Pokes {
        let e = self.edges;
        let cand: Vec<u32> = (0..e.keys.len() as u32)
            .into_par_iter()
            .with_min_len(4096)
            .filter(|&i| {
                let k = e.keys[i as usize];
                e.hits[i as usize] == 2
                    && self.fluid[(k >> 32) as usize] == self.fluid[k as u32 as usize]
            })
            .collect();
        let s = self.index.surface();
        let found: Vec<Option<[(Vec3, Vec3, u32); 2]>> = cand
            .par_iter()
            .map_init(Vec::new, |buf, &i| {
                let k = e.keys[i as usize];
                let (a, b) = (self.gpos((k >> 32) as u32), self.gpos(k as u32));
                self.index.segment_crossings(a, b, buf);
                buf.dedup_by(|x, y| x.t == y.t);
                if buf.len() != 2 {
                    return None;
                }
                let t0 = buf[0].t.clamp(T_EPS, 1.0 - T_EPS);
                let t1 = buf[1].t.clamp(T_EPS, 1.0 - T_EPS);
                // the other class between the hits (one winding-number sample), hits apart
                let end_fluid = self.fluid[(k >> 32) as usize];
                let mid_fluid =
                    self.index.is_inside(a + 0.5 * (t0 + t1) * (b - a)) == self.fluid_inside;
                if t1 - t0 < T_EPS || mid_fluid == end_fluid {
                    return None;
                }
                let hit = |t: f64, tri: u32| {
                    let n = if (tri as usize) < s.triangles.len() {
                        s.area_normal(tri as usize).normalize_or_zero()
                    } else {
                        Vec3::ZERO
                    };
                    (a + t * (b - a), n, tri)
                };
                Some([hit(t0, buf[0].triangle), hit(t1, buf[1].triangle)])
            })
            .collect();
        let mut pk = Pokes {
            base,
            ..Default::default()
        };
        for (&i, h) in cand.iter().zip(found) {
            if let Some(h) = h {
                pk.edge.push(i);
                pk.hit.extend_from_slice(&h);
            }
        }
        if !pk.edge.is_empty() {
            pk.vertex = vec![false; self.topo.grid.len()];
            for &i in &pk.edge {
                let k = e.keys[i as usize];
                pk.vertex[(k >> 32) as usize] = true;
                pk.vertex[k as u32 as usize] = true;
            }
        }
        pk
    }

    /// Position of a point id of a face being clipped into `out`.
    fn pos(&self, pk: &Pokes, out: &Chunk, id: u32) -> Vec3 {
        if id & LOCAL != 0 {
            out.pierce[(id & !LOCAL) as usize]
        } else if id >= self.n_grid {
            self.plane(pk, id).0
        } else {
            self.gpos(id)
        }
    }

    /// Are the `k` polygons of face `f` pushed since `mark` pairwise apart (no edges meeting,
    /// none inside another, no vertex within `1e-7` face edges of another's edge)? Signs by
    /// the exact 2D orientation predicate in the face plane.
    /// `pts` is the face's polygon.
    #[allow(clippy::too_many_arguments)]
    fn disjoint(
        &self,
        f: u32,
        pts: &[u32],
        pk: &Pokes,
        out: &Chunk,
        mark: &Mark,
        k: usize,
    ) -> bool {
        use octocut_surface::predicates::orient2d;
        let ax = self.topo.faces[f as usize].axis();
        let (u, v) = ((ax + 1) % 3, (ax + 2) % 3);
        let h = (self.gpos(pts[0]) - self.gpos(pts[1])).length();
        let tol = 1e-7 * h;
        let mut polys: Vec<Vec<[f64; 2]>> = Vec::with_capacity(k);
        let mut off = mark.poly_pts;
        for &len in &out.poly_len[mark.poly_len..] {
            let ids = &out.poly_pts[off..off + len as usize];
            off += len as usize;
            polys.push(
                ids.iter()
                    .map(|&id| {
                        let p = self.pos(pk, out, id);
                        [p[u], p[v]]
                    })
                    .collect(),
            );
        }
        let near_seg = |p: [f64; 2], a: [f64; 2], b: [f64; 2]| {
            let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
            let l2 = dx * dx + dy * dy;
            let t = if l2 > 0.0 {
                (((p[0] - a[0]) * dx + (p[1] - a[1]) * dy) / l2).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let (ex, ey) = (a[0] + t * dx - p[0], a[1] + t * dy - p[1]);
            ex * ex + ey * ey <= tol * tol
        };
        let cross = |a: [f64; 2], b: [f64; 2], c: [f64; 2], d: [f64; 2]| {
            let (o1, o2) = (orient2d(a, b, c), orient2d(a, b, d));
            let (o3, o4) = (orient2d(c, d, a), orient2d(c, d, b));
            o1 * o2 <= 0 && o3 * o4 <= 0 && (o1, o2, o3, o4) != (0, 0, 0, 0)
        };
        // crossing-number test, exact signs
        let inside = |p: [f64; 2], q: &[[f64; 2]]| {
            let mut w = 0i32;
            for i in 0..q.len() {
                let (a, b) = (q[i], q[(i + 1) % q.len()]);
                if a[1] <= p[1] && b[1] > p[1] && orient2d(a, b, p) > 0 {
                    w += 1;
                } else if a[1] > p[1] && b[1] <= p[1] && orient2d(a, b, p) < 0 {
                    w -= 1;
                }
            }
            w != 0
        };
        for i in 0..polys.len() {
            for j in i + 1..polys.len() {
                let (p, q) = (&polys[i], &polys[j]);
                if inside(p[0], q) || inside(q[0], p) {
                    return false;
                }
                for a in 0..p.len() {
                    let (a0, a1) = (p[a], p[(a + 1) % p.len()]);
                    for b in 0..q.len() {
                        let (b0, b1) = (q[b], q[(b + 1) % q.len()]);
                        if cross(a0, a1, b0, b1) || near_seg(a0, b0, b1) || near_seg(b0, a0, a1) {
                            return false;
                        }
                    }
                }
            }
        }
        true
    }

    fn gpos(&self, p: u32) -> Vec3 {
        self.domain.point(self.topo.grid[p as usize])
    }

    fn centre_fluid(&self, pts: &[u32]) -> bool {
        let mut lo = [u32::MAX; 3];
        let mut hi = [0u32; 3];
        for &p in pts {
            let g = self.topo.grid[p as usize];
            for i in 0..3 {
                lo[i] = lo[i].min(g[i]);
                hi[i] = hi[i].max(g[i]);
            }
        }
        let c = 0.5 * (self.domain.point(lo) + self.domain.point(hi));
        self.index.is_inside(c) == self.fluid_inside
    }

    /// Does the segment `a`-`b` miss the surface (a straight fluid path between two runs)?
    fn straight_path(&self, a: Vec3, b: Vec3) -> bool {
        let mut hits = Vec::new();
        self.index.segment_crossings(a, b, &mut hits);
        hits.is_empty()
    }

    /// The pierce points of the body's sharp edges between chord ends `x` and `y` (point, unit
    /// normal) on face `f`, into `found` as (point, the two normals meeting there): one where
    /// the two tangent planes meet on the face; two where a third facet lies between them (a
    /// corner of the body near the face: the trace runs x, (1,3), (3,2), y).
    fn pierce(
        &self,
        f: u32,
        pts: &[u32],
        x: (Vec3, Vec3),
        y: (Vec3, Vec3),
        found: &mut Vec<(Vec3, [Vec3; 2])>,
        tris: &mut Vec<u32>,
    ) {
        found.clear();
        let (px, nx) = x;
        let (py, ny) = y;
        if nx.dot(ny) >= self.cos_feature || nx == Vec3::ZERO || ny == Vec3::ZERO {
            return;
        }
        let ax = self.topo.faces[f as usize].axis();
        let d3 = self.gpos(pts[0])[ax];
        let mut n3 = Vec3::ZERO;
        n3[ax] = 1.0;
        // where the planes (n1, through q1) and (n2, through q2) meet the face plane
        let meet = |n1: Vec3, q1: Vec3, n2: Vec3, q2: Vec3| {
            let det = n1.dot(n2.cross(n3));
            (det.abs() >= 1e-6).then(|| {
                (n1.dot(q1) * n2.cross(n3) + n2.dot(q2) * n3.cross(n1) + d3 * n1.cross(n2)) / det
            })
        };
        let Some(p) = meet(nx, px, ny, py) else {
            return;
        };
        let (mut lo, mut hi) = (Vec3::splat(f64::INFINITY), Vec3::splat(f64::NEG_INFINITY));
        for &q in pts {
            let g = self.gpos(q);
            lo = lo.min(g);
            hi = hi.max(g);
        }
        let h = (hi - lo).max_element();
        let m = 1e-3 * h;
        // strictly inside the face square, away from the chord ends
        let inside = |q: Vec3| {
            (0..3).all(|i| i == ax || (q[i] >= lo[i] + m && q[i] <= hi[i] - m))
                && (q - px).length() >= m
                && (q - py).length() >= m
        };
        let on_surface = |q: Vec3| {
            self.index
                .closest_point(q)
                .is_some_and(|c| c.distance <= 1e-6 * h)
        };
        if !(inside(p) && on_surface(p)) {
            // a third facet between the two planes: try each distinct facet plane near the face
            let s = self.index.surface();
            let mut b = octocut_surface::Aabb::new(lo, hi);
            b.min[ax] -= m;
            b.max[ax] += m;
            self.index.triangles_in_box(&b, tris);
            for &t in tris.iter() {
                let n = s.area_normal(t as usize).normalize_or_zero();
                if n == Vec3::ZERO || n.dot(nx) >= self.cos_feature || n.dot(ny) >= self.cos_feature
                {
                    continue;
                }
                let q = s.corners(t as usize)[0];
                let (Some(k1), Some(k2)) = (meet(nx, px, n, q), meet(n, q, ny, py)) else {
                    continue;
                };
                if inside(k1)
                    && inside(k2)
                    && (k1 - k2).length() >= m
                    && on_surface(k1)
                    && on_surface(k2)
                    && on_surface(0.5 * (k1 + k2))
                {
                    found.push((k1, [nx, n]));
                    found.push((k2, [n, ny]));
                    return;
                }
            }
        }
        // a pierce point just outside the face (the sharp edge passes by) is pulled inside: the
        // chord then follows the edge's tip as the face clips it; far outside it is not used
        let mut p = p;
        for i in 0..3 {
            if i != ax {
                if p[i] < lo[i] - 0.5 * h || p[i] > hi[i] + 0.5 * h {
                    return;
                }
                p[i] = p[i].clamp(lo[i] + m, hi[i] - m);
            }
        }
        if (p - px).length() < m || (p - py).length() < m {
            return;
        }
        found.push((p, [nx, ny]));
    }

    /// Clips face `f`, whose polygon is `pts`.
    fn clip_face(
        &self,
        f: u32,
        pts: &[u32],
        out: &mut Chunk,
        runs: &mut Vec<Run>,
        aug: &mut Vec<u32>,
        pk: &Pokes,
    ) {
        // the vertex walk, with a virtual vertex of the other class inside every poke edge
        aug.clear();
        if !pk.edge.is_empty() && pts.iter().any(|&p| pk.vertex[p as usize]) {
            let n = pts.len();
            for i in 0..n {
                let (p, q) = (pts[i], pts[(i + 1) % n]);
                aug.push(p);
                if pk.vertex[p as usize] && pk.vertex[q as usize] {
                    if let Some(e) = self.edges.find(p, q) {
                        if let Ok(j) = pk.edge.binary_search(&(e as u32)) {
                            aug.push(VIRT | (j as u32) << 1 | (p > q) as u32);
                        }
                    }
                }
            }
        }
        let poked = aug.len() > pts.len();
        let seq: &[u32] = if poked { aug } else { pts };
        let n = seq.len();
        // a virtual vertex follows its edge's first end in the walk
        let fl = |i: usize| {
            let p = seq[i % n];
            if p & VIRT == 0 {
                self.fluid[p as usize]
            } else {
                !self.fluid[seq[(i + n - 1) % n] as usize]
            }
        };
        let nfl = (0..n).filter(|&i| fl(i)).count();
        if nfl == 0 {
            out.n_polys.push(0);
            out.n_chords.push(0);
            return;
        }
        if nfl == n {
            out.n_polys.push(1);
            out.poly_len.push(n as u32);
            out.poly_pts.extend_from_slice(pts);
            out.n_chords.push(0);
            return;
        }
        let s = (0..n).find(|&i| !fl(i + n - 1) && fl(i)).unwrap();
        runs.clear();
        let mut i = s;
        while i < s + n {
            if fl(i) {
                let start = i;
                while fl(i + 1) {
                    i += 1;
                }
                let end = i;
                let entry = self.cross_between(pk, seq[(start + n - 1) % n], seq[start % n]);
                let exit = self.cross_between(pk, seq[end % n], seq[(end + 1) % n]);
                runs.push(Run {
                    entry,
                    exit,
                    start,
                    end,
                });
            }
            i += 1;
        }
        let k = runs.len();
        // a run of one virtual fluid vertex: its polygon needs a point besides the two hits
        let lone = |r: &Run| r.start == r.end && seq[r.start % n] & VIRT != 0;
        // a run of one hanging vertex on a straight side of the face (its walk neighbours in
        // line with it) would be a zero-area polygon: like a lone run it takes a point inside
        let thin = |r: &Run| {
            lone(r)
                || r.start == r.end && {
                    let at = |i: usize| seq[i % n];
                    let (a, b, c) = (at(r.start + n - 1), at(r.start), at(r.start + 1));
                    a & VIRT == 0 && c & VIRT == 0 && {
                        let g = |p: u32| self.topo.grid[p as usize].map(|x| x as i64);
                        let (ga, gb, gc) = (g(a), g(b), g(c));
                        let (u, w) = (
                            [0, 1, 2].map(|i| gb[i] - ga[i]),
                            [0, 1, 2].map(|i| gc[i] - gb[i]),
                        );
                        (0..3).all(|i| {
                            u[(i + 1) % 3] * w[(i + 2) % 3] == u[(i + 2) % 3] * w[(i + 1) % 3]
                        })
                    }
                }
        };
        // a fluid point of a run: its first vertex, or the middle of its poke interval
        let inner = |r: &Run| {
            if lone(r) {
                0.5 * (self.plane(pk, r.entry).0 + self.plane(pk, r.exit).0)
            } else {
                self.gpos(seq[r.start % n])
            }
        };
        // ambiguous: one fluid region when the centre is fluid; with pokes, when a straight
        // fluid path joins the first two runs
        let single = k == 1
            || if poked {
                self.straight_path(inner(&runs[0]), inner(&runs[1]))
            } else {
                self.centre_fluid(pts)
            };
        let push_run = |out: &mut Chunk, r: &Run| {
            out.poly_pts.push(r.entry);
            for j in r.start..=r.end {
                if seq[j % n] & VIRT == 0 {
                    out.poly_pts.push(seq[j % n]);
                }
            }
            out.poly_pts.push(r.exit);
        };
        // `near`: a lone run takes the point beside its hits, not the sharp edge's pierce point
        let chord =
            |out: &mut Chunk, x: u32, y: u32, poly: u32, pierce: bool, lone: bool, near: bool| {
                out.chord_pts.push(x);
                let mut len = 2;
                if (pierce && self.pierce_cuts) || lone {
                    let mut found = std::mem::take(&mut out.found);
                    let mut tris = std::mem::take(&mut out.tris);
                    let (px, py) = (self.plane(pk, x), self.plane(pk, y));
                    found.clear();
                    if !near {
                        self.pierce(f, pts, px, py, &mut found, &mut tris);
                    }
                    if found.is_empty() && lone {
                        // no pierce point: a point just inside the face off the hits' midpoint
                        let mid = 0.5 * (px.0 + py.0);
                        let mut c = Vec3::ZERO;
                        for &q in pts {
                            c += self.gpos(q);
                        }
                        let c = c / pts.len() as f64;
                        let h = (self.gpos(pts[0]) - self.gpos(pts[1])).length();
                        let p = mid + (c - mid).normalize_or_zero() * 1e-3 * h;
                        found.push((p, [Vec3::ZERO; 2]));
                    }
                    for &(p, pair) in &found {
                        let id = LOCAL | out.pierce.len() as u32;
                        out.pierce.push(p);
                        out.pair.push(pair);
                        out.chord_pts.push(id);
                        out.poly_pts.push(id);
                        len += 1;
                    }
                    out.found = found;
                    out.tris = tris;
                }
                out.chord_pts.push(y);
                out.chord_len.push(len);
                out.chord_poly.push(poly);
            };
        if single {
            let before = out.poly_pts.len();
            for (j, r) in runs.iter().enumerate() {
                push_run(out, r);
                let next = &runs[(j + 1) % k];
                chord(out, r.exit, next.entry, 0, k == 1, k == 1 && thin(r), false);
            }
            out.n_polys.push(1);
            out.poly_len.push((out.poly_pts.len() - before) as u32);
            out.n_chords.push(k as u32);
        } else {
            // separate runs must stay disjoint: a lone run's pierce point lies anywhere on the
            // face and its polygon may overlap another run's (a sharp edge nearly in the face
            // plane); then every lone run of the face takes the point beside its hits instead
            let mark = out.mark();
            for near in [false, true] {
                for (j, r) in runs.iter().enumerate() {
                    let before = out.poly_pts.len();
                    push_run(out, r);
                    chord(out, r.exit, r.entry, j as u32, false, thin(r), near);
                    out.poly_len.push((out.poly_pts.len() - before) as u32);
                }
                if near || !runs.iter().any(thin) || self.disjoint(f, pts, pk, out, &mark, k) {
                    break;
                }
                out.rollback(&mark);
                out.fallbacks += 1;
            }
            out.n_polys.push(k as u32);
            out.n_chords.push(k as u32);
        }
    }

    /// Clips every face; `blocks` are the topology's face polygons (`Topology::blocks`, blocks
    /// of `1 << block_bits` faces), each freed once its faces are clipped, so that the
    /// polygons and the clipped faces are never resident together (peak memory).
    pub fn run(&self, pierce_base: u32, blocks: Vec<FaceBlock>, block_bits: u32) -> Clip {
        let nf = self.topo.faces.len() as u32;
        assert_eq!(
            blocks.iter().map(FaceBlock::len).sum::<usize>(),
            nf as usize
        );
        let pk = self.find_pokes(pierce_base);
        let chunks: Vec<Chunk> = blocks
            .into_par_iter()
            .enumerate()
            .map(|(b, blk)| {
                let mut out = Chunk::default();
                let (mut runs, mut aug) = (Vec::new(), Vec::new());
                let f0 = (b as u32) << block_bits;
                for j in 0..blk.len() {
                    let f = f0 + j as u32;
                    self.clip_face(f, blk.face(j), &mut out, &mut runs, &mut aug, &pk);
                }
                out
            })
            .collect();
        crate::tmark("clip.faces");
        let npk = pk.hit.len();
        // every face records its polygon and chord counts once
        assert_eq!(
            chunks.iter().map(|ch| ch.n_polys.len()).sum::<usize>(),
            nf as usize
        );
        let fallbacks = chunks.iter().map(|c| c.fallbacks).sum();
        // exact sizes up front; each chunk's outputs are disjoint ranges of the arrays, from
        // the counts of the chunks before it
        let total = |f: &dyn Fn(&Chunk) -> usize| chunks.iter().map(f).sum::<usize>();
        let mut c = Clip {
            face_poly: vec![0; nf as usize + 1],
            poly_off: vec![0; total(&|ch| ch.poly_len.len()) + 1],
            poly_pts: vec![0; total(&|ch| ch.poly_pts.len())],
            face_chord: vec![0; nf as usize + 1],
            chord_off: vec![0; total(&|ch| ch.chord_len.len()) + 1],
            chord_pts: vec![0; total(&|ch| ch.chord_pts.len())],
            chord_poly: vec![0; total(&|ch| ch.chord_poly.len())],
            pierce: pk.hit.iter().map(|h| h.0).collect(),
            poke_plane: pk.hit.iter().map(|h| (h.1, h.2)).collect(),
            pair: vec![[Vec3::ZERO; 2]; npk],
            fallbacks,
        };
        c.pierce
            .resize(npk + total(&|ch| ch.pierce.len()), Vec3::ZERO);
        c.pair.resize(c.pierce.len(), [Vec3::ZERO; 2]);
        let mut bases = Vec::with_capacity(chunks.len());
        let mut at = Bases {
            pierce: npk as u32,
            ..Bases::default()
        };
        for ch in &chunks {
            bases.push(at);
            at.poly += ch.poly_len.len() as u32;
            at.pts += ch.poly_pts.len() as u32;
            at.chord += ch.chord_len.len() as u32;
            at.chord_pts += ch.chord_pts.len() as u32;
            at.pierce += ch.pierce.len() as u32;
        }
        let outs: Vec<ChunkOut> = {
            use crate::concat::take_front as take;
            let (mut face_poly, mut poly_off) = (&mut c.face_poly[1..], &mut c.poly_off[1..]);
            let (mut poly_pts, mut face_chord) = (&mut c.poly_pts[..], &mut c.face_chord[1..]);
            let (mut chord_off, mut chord_pts) = (&mut c.chord_off[1..], &mut c.chord_pts[..]);
            let mut chord_poly = &mut c.chord_poly[..];
            let (mut pierce, mut pair) = (&mut c.pierce[npk..], &mut c.pair[npk..]);
            chunks
                .iter()
                .map(|ch| ChunkOut {
                    face_poly: take(&mut face_poly, ch.n_polys.len()),
                    poly_off: take(&mut poly_off, ch.poly_len.len()),
                    poly_pts: take(&mut poly_pts, ch.poly_pts.len()),
                    face_chord: take(&mut face_chord, ch.n_chords.len()),
                    chord_off: take(&mut chord_off, ch.chord_len.len()),
                    chord_pts: take(&mut chord_pts, ch.chord_pts.len()),
                    chord_poly: take(&mut chord_poly, ch.chord_poly.len()),
                    pierce: take(&mut pierce, ch.pierce.len()),
                    pair: take(&mut pair, ch.pair.len()),
                })
                .collect()
        };
        // a wave of one chunk per thread at a time, each chunk freed once copied: only a
        // wave's chunks and the filled part of the arrays are resident together (peak memory)
        let wave = rayon::current_num_threads().max(1);
        let mut work = chunks.into_iter().zip(bases).zip(outs);
        loop {
            let w: Vec<_> = work.by_ref().take(wave).collect();
            if w.is_empty() {
                break;
            }
            w.into_par_iter()
                .for_each(|((ch, b), out)| ch.copy_into(&b, out, pierce_base));
        }
        c
    }
}

/// Where a chunk's outputs start in the gathered arrays: polygons, polygon points, chords,
/// chord points and extra points before it.
#[derive(Clone, Copy, Default)]
struct Bases {
    poly: u32,
    pts: u32,
    chord: u32,
    chord_pts: u32,
    pierce: u32,
}

/// A chunk's ranges of the gathered arrays (the offset arrays without their leading 0).
struct ChunkOut<'a> {
    face_poly: &'a mut [u32],
    poly_off: &'a mut [u32],
    poly_pts: &'a mut [u32],
    face_chord: &'a mut [u32],
    chord_off: &'a mut [u32],
    chord_pts: &'a mut [u32],
    chord_poly: &'a mut [u32],
    pierce: &'a mut [Vec3],
    pair: &'a mut [[Vec3; 2]],
}

impl Chunk {
    /// Writes this chunk's faces into its ranges, offsets and local extra points made global.
    fn copy_into(self, b: &Bases, out: ChunkOut, pierce_base: u32) {
        out.pierce.copy_from_slice(&self.pierce);
        out.pair.copy_from_slice(&self.pair);
        let (mut poly, mut pts, mut chord, mut cpts) = (b.poly, b.pts, b.chord, b.chord_pts);
        let (mut pi, mut ci) = (0usize, 0usize);
        for (j, (&np, &nc)) in self.n_polys.iter().zip(&self.n_chords).enumerate() {
            let first_poly = poly;
            for _ in 0..np {
                pts += self.poly_len[pi];
                out.poly_off[pi] = pts;
                pi += 1;
                poly += 1;
            }
            out.face_poly[j] = poly;
            for _ in 0..nc {
                cpts += self.chord_len[ci];
                out.chord_off[ci] = cpts;
                out.chord_poly[ci] = first_poly + self.chord_poly[ci];
                ci += 1;
                chord += 1;
            }
            out.face_chord[j] = chord;
        }
        let remap = |p: u32| {
            if p & LOCAL != 0 {
                pierce_base + b.pierce + (p & !LOCAL)
            } else {
                p
            }
        };
        for (o, &p) in out.poly_pts.iter_mut().zip(&self.poly_pts) {
            *o = remap(p);
        }
        for (o, &p) in out.chord_pts.iter_mut().zip(&self.chord_pts) {
            *o = remap(p);
        }
    }
}
