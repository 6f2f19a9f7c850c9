//! Clipping of elementary face polygons by vertex classes.
//!
//! Walks each face polygon, keeps fluid vertices and inserts the edge crossing wherever the
//! class changes (the polygon-clipping walk of Sutherland and Hodgman 1974, with the classes
//! in place of a clip plane). A face with several fluid runs is ambiguous; it is decided by the
//! class of the face centre (one winding-number sample), so both cells sharing the face agree.
//! Where the surface normals at the two crossings of a cut differ by more than the feature
//! angle, the point where the body's sharp edge pierces the face (intersection of the two
//! tangent planes with the face plane, as in dual contouring, Ju et al. 2002) is put into the
//! cut path. Output per face: fluid polygons (oriented like the face) and directed cut paths
//! ("chords", exit crossing to entry crossing, as the polygon traverses them).

use crate::crossing::EdgeTable;
use crate::topology::Topology;
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
    pub pierce: Vec<Vec3>,
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

    /// The pierce point of the body's sharp edge between crossings `x` and `y` on face `f`.
    fn pierce(&self, f: u32, pts: &[u32], x: u32, y: u32) -> Option<Vec3> {
        let cx = &self.edges.crossings[(x - self.n_grid) as usize];
        let cy = &self.edges.crossings[(y - self.n_grid) as usize];
        if cx.normal.dot(cy.normal) >= self.cos_feature
            || cx.normal == Vec3::ZERO
            || cy.normal == Vec3::ZERO
        {
            return None;
        }
        let ax = self.topo.faces[f as usize].axis();
        let p0 = self.gpos(pts[0]);
        let mut n3 = Vec3::ZERO;
        n3[ax] = 1.0;
        let (n1, n2) = (cx.normal, cy.normal);
        let det = n1.dot(n2.cross(n3));
        if det.abs() < 1e-6 {
            return None;
        }
        let (d1, d2, d3) = (n1.dot(cx.point), n2.dot(cy.point), p0[ax]);
        let p = (d1 * n2.cross(n3) + d2 * n3.cross(n1) + d3 * n1.cross(n2)) / det;
        // strictly inside the face square, away from both crossings
        let (mut lo, mut hi) = (Vec3::splat(f64::INFINITY), Vec3::splat(f64::NEG_INFINITY));
        for &q in pts {
            let g = self.gpos(q);
            lo = lo.min(g);
            hi = hi.max(g);
        }
        let h = (hi - lo).max_element();
        let m = 1e-3 * h;
        // a pierce point just outside the face (the sharp edge passes by) is pulled inside: the
        // chord then follows the edge's tip as the face clips it; far outside it is not used
        let mut p = p;
        for i in 0..3 {
            if i != ax {
                if p[i] < lo[i] - 0.5 * h || p[i] > hi[i] + 0.5 * h {
                    return None;
                }
                p[i] = p[i].clamp(lo[i] + m, hi[i] - m);
            }
        }
        if (p - cx.point).length() < m || (p - cy.point).length() < m {
            return None;
        }
        Some(p)
    }

    fn clip_face(&self, f: u32, out: &mut Chunk, runs: &mut Vec<Run>) {
        let pts = self.topo.face(f);
        let n = pts.len();
        let nfl = pts.iter().filter(|&&p| self.fluid[p as usize]).count();
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
        let fl = |i: usize| self.fluid[pts[i % n] as usize];
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
                let entry = self.crossing_id(pts[(start + n - 1) % n], pts[start % n]);
                let exit = self.crossing_id(pts[end % n], pts[(end + 1) % n]);
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
        let single = k == 1 || self.centre_fluid(pts);
        let push_run = |out: &mut Chunk, r: &Run| {
            out.poly_pts.push(r.entry);
            for j in r.start..=r.end {
                out.poly_pts.push(pts[j % n]);
            }
            out.poly_pts.push(r.exit);
        };
        let chord = |out: &mut Chunk, x: u32, y: u32, poly: u32, allow_pierce: bool| -> u32 {
            out.chord_pts.push(x);
            let mut len = 2;
            let mut extra = 0;
            if allow_pierce && self.pierce_cuts {
                if let Some(p) = self.pierce(f, pts, x, y) {
                    let id = LOCAL | out.pierce.len() as u32;
                    out.pierce.push(p);
                    out.chord_pts.push(id);
                    out.poly_pts.push(id);
                    len += 1;
                    extra = 1;
                }
            }
            out.chord_pts.push(y);
            out.chord_len.push(len);
            out.chord_poly.push(poly);
            extra
        };
        if single {
            let before = out.poly_pts.len();
            for (j, r) in runs.iter().enumerate() {
                push_run(out, r);
                let next = &runs[(j + 1) % k];
                chord(out, r.exit, next.entry, 0, k == 1);
            }
            out.n_polys.push(1);
            out.poly_len.push((out.poly_pts.len() - before) as u32);
            out.n_chords.push(k as u32);
        } else {
            for (j, r) in runs.iter().enumerate() {
                let before = out.poly_pts.len();
                push_run(out, r);
                chord(out, r.exit, r.entry, j as u32, false);
                out.poly_len.push((out.poly_pts.len() - before) as u32);
            }
            out.n_polys.push(k as u32);
            out.n_chords.push(k as u32);
        }
    }

    pub fn run(&self, pierce_base: u32) -> Clip {
        let nf = self.topo.faces.len() as u32;
        let ids: Vec<u32> = (0..nf).collect();
        let chunks: Vec<Chunk> = ids
            .par_chunks(2048)
            .map(|fs| {
                let mut out = Chunk::default();
                let mut runs = Vec::new();
                for &f in fs {
                    self.clip_face(f, &mut out, &mut runs);
                }
                out
            })
            .collect();
        let mut c = Clip {
            face_poly: Vec::with_capacity(nf as usize + 1),
            poly_off: vec![0],
            poly_pts: Vec::new(),
            face_chord: Vec::with_capacity(nf as usize + 1),
            chord_off: vec![0],
            chord_pts: Vec::new(),
            chord_poly: Vec::new(),
            pierce: Vec::new(),
        };
        c.face_poly.push(0);
        c.face_chord.push(0);
        let remap = |p: u32, base: u32| {
            if p & LOCAL != 0 {
                pierce_base + base + (p & !LOCAL)
            } else {
                p
            }
        };
        for ch in chunks {
            let base = c.pierce.len() as u32;
            c.pierce.extend_from_slice(&ch.pierce);
            let mut pl = ch.poly_len.iter();
            let mut cl = ch.chord_len.iter();
            let mut cp = ch.chord_poly.iter();
            for (&np, &nc) in ch.n_polys.iter().zip(&ch.n_chords) {
                let first_poly = *c.face_poly.last().unwrap();
                for _ in 0..np {
                    let l = *pl.next().unwrap();
                    c.poly_off.push(c.poly_off.last().unwrap() + l);
                }
                c.face_poly.push(first_poly + np);
                for _ in 0..nc {
                    let l = *cl.next().unwrap();
                    c.chord_off.push(c.chord_off.last().unwrap() + l);
                    c.chord_poly.push(first_poly + cp.next().unwrap());
                }
                c.face_chord.push(c.face_chord.last().unwrap() + nc);
            }
            c.poly_pts
                .extend(ch.poly_pts.iter().map(|&p| remap(p, base)));
            c.chord_pts
                .extend(ch.chord_pts.iter().map(|&p| remap(p, base)));
        }
        c
    }
}
