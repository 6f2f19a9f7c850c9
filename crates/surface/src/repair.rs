//! Surface repair: vertex welding, removal of degenerate and duplicate triangles, consistent
//! orientation of each component and outward orientation of closed components.
//!
//! Steps, each deterministic at any thread count:
//! 1. Weld. Exactly equal positions merge first (parallel sort); the distinct positions are then
//!    clustered greedily in lexicographic order on a hash grid of cell size `32 tol` (a position
//!    looks into a neighbour cell only when within `tol` of that face): it joins the nearest earlier
//!    representative within `tol`, else becomes one. Representatives keep their position, so
//!    welding never drifts and merged vertices move by at most `tol`. Common practice.
//! 2. Drop degenerate triangles: a repeated vertex, or three exactly collinear corners (all
//!    three coordinate-plane projections have exact `orient2d` zero).
//! 3. Drop duplicates: triangles on the same three vertices, in either orientation; the lowest
//!    index is kept.
//! 4. Orient: breadth-first search over each component (linked across manifold edges, see
//!    [`crate::topology`]); a neighbour whose shared edge runs the same way is flipped. Each
//!    component keeps the orientation most of its triangles had (ties: its lowest triangle's).
//!    A contradiction on a cycle marks the component non-orientable.
//! 5. Closed orientable components (no open or non-manifold edge) are turned to a positive
//!    enclosed volume (divergence theorem), i.e. outward.
//!
//! Unreferenced vertices are removed; tags follow their triangles.

use crate::geom::{Aabb, Vec3};
use crate::predicates::orient2d;
use crate::surface::Surface;
use crate::topology::{components, EdgeMap, NONE};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};

/// Options of [`repair`].
///
/// ```
/// use octocut_surface::{repair, RepairOptions, Surface};
/// let mut s = Surface::unit_cube();
/// let report = repair(&mut s, &RepairOptions::default());
/// assert_eq!(report.reoriented, 0);
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct RepairOptions {
    /// Weld distance relative to the bounding-box diagonal. Default `1e-6`: a few `f32` rounding
    /// steps (`2^-23` relative) of coordinates of the size of the part, which is the noise of
    /// the same vertex written by different facets, and far below any meaningful feature.
    /// `0` welds exactly equal positions only.
    pub weld_tolerance: f64,
}

impl Default for RepairOptions {
    fn default() -> Self {
        RepairOptions {
            weld_tolerance: 1e-6,
        }
    }
}

/// What [`repair`] found and changed.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct RepairReport {
    pub triangles_in: usize,
    pub vertices_in: usize,
    /// Absolute weld distance used.
    pub weld_distance: f64,
    /// Vertices merged into an exactly equal position.
    pub vertices_merged_exact: usize,
    /// Vertices merged into a different position within the weld distance.
    pub vertices_merged_tolerance: usize,
    /// Vertices no kept triangle references, removed.
    pub vertices_unreferenced: usize,
    /// Triangles dropped for a repeated vertex (after welding).
    pub degenerate_repeated: usize,
    /// Triangles dropped for three exactly collinear corners.
    pub degenerate_collinear: usize,
    /// Triangles dropped as duplicates with the same orientation.
    pub duplicates: usize,
    /// Triangles dropped as duplicates with the reversed orientation.
    pub duplicates_reversed: usize,
    /// Components linked across manifold edges.
    pub components: usize,
    /// Components without open or non-manifold edges.
    pub closed_components: usize,
    /// Triangles whose orientation was reversed.
    pub reoriented: usize,
    /// Closed components that were inside out and got turned outward.
    pub components_turned_outward: usize,
    /// Components that cannot be oriented consistently.
    pub non_orientable_components: usize,
    /// A vertex on the first non-orientable component.
    pub non_orientable_at: Option<Vec3>,
    pub triangles_out: usize,
    pub vertices_out: usize,
}

/// Repairs `surface` in place (see the module doc) and reports what changed.
pub fn repair(surface: &mut Surface, opts: &RepairOptions) -> RepairReport {
    let mut r = RepairReport {
        triangles_in: surface.triangles.len(),
        vertices_in: surface.vertices.len(),
        ..Default::default()
    };
    let bbox = surface.bounding_box();
    let tol = opts.weld_tolerance * bbox.diagonal();
    r.weld_distance = if tol.is_finite() && tol > 0.0 {
        tol
    } else {
        0.0
    };
    let rep = weld(surface, r.weld_distance, &bbox, &mut r);
    for t in surface.triangles.iter_mut() {
        *t = t.map(|i| rep[i as usize]);
    }
    drop_degenerate_and_duplicates(surface, &mut r);
    compact_vertices(surface, &mut r);
    orient(surface, &mut r);
    r.triangles_out = surface.triangles.len();
    r.vertices_out = surface.vertices.len();
    r
}

/// f64 bits mapped so that unsigned order is numeric order (`-0.0` taken as `0.0`).
#[inline]
fn ordered_bits(x: f64) -> u64 {
    let b = (x + 0.0).to_bits();
    if b >> 63 == 1 {
        !b
    } else {
        b | (1 << 63)
    }
}

/// Multiply-rotate hasher for grid cells (keys are small integer triples).
#[derive(Default)]
struct CellHasher(u64);

impl Hasher for CellHasher {
    fn finish(&self) -> u64 {
        // final avalanche (Stafford's mix 13, as in splitmix64) so low and high bits both vary
        let mut x = self.0;
        x = (x ^ (x >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        x = (x ^ (x >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        x ^ (x >> 31)
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.write_u64(b as u64);
        }
    }
    fn write_usize(&mut self, x: usize) {
        self.write_u64(x as u64);
    }
    fn write_i64(&mut self, x: i64) {
        self.write_u64(x as u64);
    }
    fn write_u64(&mut self, x: u64) {
        self.0 = (self.0.rotate_left(5) ^ x).wrapping_mul(0x51_7c_c1_b7_27_22_0a_95);
    }
}

/// Replaces `surface.vertices` by the weld representatives and returns the map old -> new.
fn weld(surface: &mut Surface, tol: f64, bbox: &Aabb, r: &mut RepairReport) -> Vec<u32> {
    let n = surface.vertices.len();
    let mut keys: Vec<([u64; 3], u32)> = surface
        .vertices
        .par_iter()
        .enumerate()
        .map(|(i, v)| {
            (
                [ordered_bits(v.x), ordered_bits(v.y), ordered_bits(v.z)],
                i as u32,
            )
        })
        .collect();
    keys.par_sort_unstable();
    // exact: unique positions in lexicographic order
    let mut unique_of = vec![0u32; n];
    let mut unique: Vec<Vec3> = Vec::new();
    for (i, (k, v)) in keys.iter().enumerate() {
        if i == 0 || keys[i - 1].0 != *k {
            unique.push(surface.vertices[*v as usize]);
        }
        unique_of[*v as usize] = unique.len() as u32 - 1;
    }
    drop(keys);
    r.vertices_merged_exact = n - unique.len();
    let mut rep_of_unique: Vec<u32> = (0..unique.len() as u32).collect();
    let mut reps = unique;
    if tol > 0.0 && !bbox.is_empty() {
        // cells of 32 tol: only a point within tol of a cell face looks past its own cell
        let h = 32.0 * tol;
        let margin = tol * (1.0 + 1e-9) / h;
        let cell = |p: Vec3| ((p - bbox.min) / h).floor();
        let mut grid: HashMap<[i64; 3], u32, BuildHasherDefault<CellHasher>> =
            HashMap::with_capacity_and_hasher(reps.len(), Default::default());
        let mut next: Vec<u32> = Vec::with_capacity(reps.len());
        let mut kept: Vec<Vec3> = Vec::with_capacity(reps.len());
        for (u, &p) in reps.iter().enumerate() {
            let c = cell(p);
            let f = (p - bbox.min) / h - c;
            let base = [c.x as i64, c.y as i64, c.z as i64];
            // per axis: 0, or -1 / +1 when within tol of the low / high face
            let off = [f.x, f.y, f.z].map(|x| {
                if x < margin {
                    -1
                } else if x > 1.0 - margin {
                    1
                } else {
                    0
                }
            });
            let scan = |mut q: u32, best: &mut (f64, u32)| {
                while q != NONE {
                    let d = (kept[q as usize] - p).length();
                    if d <= tol && (d < best.0 || (d == best.0 && q < best.1)) {
                        *best = (d, q);
                    }
                    q = next[q as usize];
                }
            };
            let mut best = (f64::INFINITY, NONE);
            for m in 1..8 {
                if (0..3).any(|a| m >> a & 1 == 1 && off[a] == 0) {
                    continue;
                }
                let key = [0, 1, 2].map(|a| base[a] + if m >> a & 1 == 1 { off[a] } else { 0 });
                if let Some(&q) = grid.get(&key) {
                    scan(q, &mut best);
                }
            }
            // the own cell last, through one entry lookup that also serves the insertion
            let head = grid.entry(base).or_insert(NONE);
            scan(*head, &mut best);
            if best.1 != NONE {
                rep_of_unique[u] = best.1;
                r.vertices_merged_tolerance += 1;
            } else {
                let id = kept.len() as u32;
                kept.push(p);
                next.push(*head);
                *head = id;
                rep_of_unique[u] = id;
            }
        }
        reps = kept;
    }
    surface.vertices = reps;
    unique_of
        .into_par_iter()
        .map(|u| rep_of_unique[u as usize])
        .collect()
}

/// Exactly collinear corners: all three coordinate-plane projections degenerate.
fn collinear(a: Vec3, b: Vec3, c: Vec3) -> bool {
    orient2d([a.x, a.y], [b.x, b.y], [c.x, c.y]) == 0
        && orient2d([a.y, a.z], [b.y, b.z], [c.y, c.z]) == 0
        && orient2d([a.z, a.x], [b.z, b.x], [c.z, c.x]) == 0
}

fn drop_degenerate_and_duplicates(surface: &mut Surface, r: &mut RepairReport) {
    let v = &surface.vertices;
    // 0 keep, 1 repeated, 2 collinear, 3 duplicate, 4 reversed duplicate
    let mut status: Vec<u8> = surface
        .triangles
        .par_iter()
        .map(|&[a, b, c]| {
            if a == b || b == c || c == a {
                1
            } else if collinear(v[a as usize], v[b as usize], v[c as usize]) {
                2
            } else {
                0
            }
        })
        .collect();
    // sorted vertex triple, parity of the sorting permutation, triangle id
    let mut keys: Vec<([u32; 3], bool, u32)> = surface
        .triangles
        .par_iter()
        .enumerate()
        .filter(|(t, _)| status[*t] == 0)
        .map(|(t, &[a, b, c])| {
            // rotate the smallest first; then the order of the other two gives the orientation
            let (x, y, z) = if a < b && a < c {
                (a, b, c)
            } else if b < c {
                (b, c, a)
            } else {
                (c, a, b)
            };
            let flipped = z < y;
            ([x, y.min(z), y.max(z)], flipped, t as u32)
        })
        .collect();
    keys.par_sort_unstable_by_key(|k| (k.0, k.2));
    let mut first = 0; // the kept (lowest-index) triangle of the current group
    for i in 1..keys.len() {
        if keys[i].0 != keys[first].0 {
            first = i;
        } else {
            status[keys[i].2 as usize] = if keys[i].1 == keys[first].1 { 3 } else { 4 };
        }
    }
    for s in &status {
        match s {
            1 => r.degenerate_repeated += 1,
            2 => r.degenerate_collinear += 1,
            3 => r.duplicates += 1,
            4 => r.duplicates_reversed += 1,
            _ => {}
        }
    }
    let mut k = 0;
    for (t, &st) in status.iter().enumerate() {
        if st == 0 {
            surface.triangles[k] = surface.triangles[t];
            surface.tags[k] = surface.tags[t];
            k += 1;
        }
    }
    surface.triangles.truncate(k);
    surface.tags.truncate(k);
}

fn compact_vertices(surface: &mut Surface, r: &mut RepairReport) {
    let mut new_id = vec![NONE; surface.vertices.len()];
    for t in &surface.triangles {
        for &i in t {
            new_id[i as usize] = 0;
        }
    }
    let mut verts = Vec::new();
    for (i, id) in new_id.iter_mut().enumerate() {
        if *id == 0 {
            *id = verts.len() as u32;
            verts.push(surface.vertices[i]);
        }
    }
    r.vertices_unreferenced = surface.vertices.len() - verts.len();
    surface.vertices = verts;
    for t in surface.triangles.iter_mut() {
        *t = t.map(|i| new_id[i as usize]);
    }
}

fn orient(surface: &mut Surface, r: &mut RepairReport) {
    let n = surface.triangles.len();
    let tris = &surface.triangles;
    let map = EdgeMap::new(tris);
    let nb = map.manifold_neighbours(n);
    let (label, count) = components(&nb);
    r.components = count;
    // BFS relative flips; flip[t] = 1 when t must be reversed relative to its component's seed.
    let mut flip = vec![u8::MAX; n];
    let mut comp_tris: Vec<u32> = Vec::with_capacity(n); // triangles grouped by component
    let mut comp_start = Vec::with_capacity(count + 1);
    let mut bad = vec![false; count];
    let mut closed = vec![true; count];
    let mut queue_head;
    for seed in 0..n {
        if flip[seed] != u8::MAX {
            continue;
        }
        let c = label[seed] as usize;
        comp_start.push(comp_tris.len());
        flip[seed] = 0;
        comp_tris.push(seed as u32);
        queue_head = comp_start[c];
        while queue_head < comp_tris.len() {
            let t = comp_tris[queue_head] as usize;
            queue_head += 1;
            for k in 0..3 {
                let h = nb[3 * t + k];
                if h == NONE {
                    closed[c] = false;
                    continue;
                }
                let u = (h / 3) as usize;
                let (a, _) = (tris[t][k], tris[t][(k + 1) % 3]);
                let (ua, _) = crate::topology::half_edge_vertices(tris, h);
                let same_dir = (ua == a) as u8;
                let want = flip[t] ^ same_dir;
                if flip[u] == u8::MAX {
                    flip[u] = want;
                    comp_tris.push(u as u32);
                } else if flip[u] != want {
                    bad[c] = true;
                }
            }
        }
    }
    comp_start.push(n);
    let center = surface.bounding_box().center();
    let v = &surface.vertices;
    for c in 0..count {
        let members = &comp_tris[comp_start[c]..comp_start[c + 1]];
        let flipped = members.iter().filter(|&&t| flip[t as usize] == 1).count();
        let mut invert = 2 * flipped > members.len();
        if bad[c] {
            r.non_orientable_components += 1;
            if r.non_orientable_at.is_none() {
                r.non_orientable_at = Some(v[tris[members[0] as usize][0] as usize]);
            }
        } else if closed[c] {
            r.closed_components += 1;
            let vol: f64 = members
                .iter()
                .map(|&t| {
                    let [a, b, d] = tris[t as usize].map(|i| v[i as usize] - center);
                    let s = a.dot(b.cross(d));
                    if (flip[t as usize] == 1) != invert {
                        -s
                    } else {
                        s
                    }
                })
                .sum();
            if vol < 0.0 {
                invert = !invert;
                r.components_turned_outward += 1;
            }
        }
        if invert {
            for &t in members {
                flip[t as usize] ^= 1;
            }
        }
    }
    for (t, tri) in surface.triangles.iter_mut().enumerate() {
        if flip[t] == 1 {
            tri.swap(1, 2);
            r.reoriented += 1;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cube_soup() -> Surface {
        let c = Surface::unit_cube();
        let tris: Vec<[Vec3; 3]> = (0..12).map(|t| c.corners(t)).collect();
        Surface::from_soup(&tris, "cube")
    }

    #[test]
    fn soup_cube_welds_to_8_vertices() {
        // exact: a cube has 8 corners; 36 soup vertices merge to 8
        let mut s = cube_soup();
        let r = repair(&mut s, &RepairOptions::default());
        assert_eq!(s.vertices.len(), 8);
        assert_eq!(r.vertices_merged_exact, 28);
        assert_eq!(r.closed_components, 1);
        assert_eq!(r.reoriented, 0);
        assert!((s.enclosed_volume() - 1.0).abs() < 1e-12); // exact: unit cube volume 1
    }

    #[test]
    fn tolerance_weld_merges_near_points_only() {
        let mut s = cube_soup();
        s.vertices[0] += Vec3::splat(1e-9); // within 1e-6 * sqrt(3)
        s.vertices[1] += Vec3::splat(0.01); // far beyond
        let r = repair(&mut s, &RepairOptions::default());
        assert_eq!(r.vertices_merged_tolerance, 1);
        assert_eq!(s.vertices.len(), 9);
    }

    #[test]
    fn flipped_and_duplicate_and_degenerate() {
        let mut s = Surface::unit_cube();
        s.triangles[3].swap(0, 1);
        s.triangles[7].swap(1, 2);
        let extra = [
            s.triangles[0],
            [s.triangles[5][0], s.triangles[5][2], s.triangles[5][1]],
        ];
        s.triangles.extend(extra);
        s.triangles.push([0, 0, 1]);
        s.vertices.push(Vec3::new(0.5, 0.0, 0.0)); // collinear with corners 0 and 1
        s.triangles.push([0, 8, 1]);
        s.tags.resize(s.triangles.len(), crate::TagId(0));
        let r = repair(&mut s, &RepairOptions::default());
        assert_eq!((r.duplicates, r.duplicates_reversed), (1, 1));
        assert_eq!((r.degenerate_repeated, r.degenerate_collinear), (1, 1));
        assert_eq!(r.reoriented, 2);
        assert_eq!(r.vertices_unreferenced, 1);
        assert_eq!(s.triangles.len(), 12);
        assert!((s.enclosed_volume() - 1.0).abs() < 1e-12);
    }

    #[test]
    fn inside_out_cube_turned_outward() {
        let mut s = Surface::unit_cube();
        s.triangles.iter_mut().for_each(|t| t.swap(0, 1));
        let r = repair(&mut s, &RepairOptions::default());
        assert_eq!(r.components_turned_outward, 1);
        assert_eq!(r.reoriented, 12);
        assert!((s.enclosed_volume() - 1.0).abs() < 1e-12);
    }

    #[test]
    fn mobius_strip_is_non_orientable() {
        // A Moebius band of 2k quads: closing the strip with a half twist (topology, common fact)
        let k = 6;
        let mut verts = Vec::new();
        for i in 0..k {
            let a = std::f64::consts::TAU * i as f64 / k as f64;
            let tw = 0.5 * a;
            for s in [-0.3, 0.3] {
                let rr = 1.0 + s * tw.cos();
                verts.push(Vec3::new(rr * a.cos(), rr * a.sin(), s * tw.sin()));
            }
        }
        let mut tris = Vec::new();
        for i in 0..k as u32 {
            let (a0, a1) = (2 * i, 2 * i + 1);
            let (b0, b1) = if i + 1 < k as u32 {
                (2 * i + 2, 2 * i + 3)
            } else {
                (1, 0)
            };
            tris.push([a0, b0, b1]);
            tris.push([a0, b1, a1]);
        }
        let n = tris.len();
        let mut s = Surface {
            vertices: verts,
            triangles: tris,
            tags: vec![crate::TagId(0); n],
            tag_names: vec!["m".into()],
        };
        let r = repair(&mut s, &RepairOptions::default());
        assert_eq!(r.non_orientable_components, 1);
        assert_eq!(r.closed_components, 0);
    }
}
