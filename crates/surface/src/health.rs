//! The health report of a (repaired) surface: what is wrong with it and where.
//!
//! Computes, on the surface after [`crate::repair`]: components across manifold edges and the
//! enclosed volume of each closed one (divergence theorem: the sum of signed tetrahedra to a
//! reference point, exact for a closed surface whatever the point), open (boundary) edges
//! chained into loops, non-manifold edges, edge length extremes, per-tag counts, and the pairs of
//! intersecting triangles. The pair search is a broad phase on bounding-volume hierarchies of
//! the triangles' boxes (parry3d's `Bvh`, binned SAH build after Wald 2007, one per Morton-order
//! chunk, so each overlapping pair of boxes comes once) and the exact narrow
//! phase of [`crate::tritri`] under its adjacency rule (triangles sharing a vertex or an edge
//! intersect only beyond it). Deterministic at any thread count: work is split into fixed
//! chunks whose results are joined in order.

use crate::geom::{Aabb, Vec3};
use crate::repair::RepairReport;
use crate::surface::Surface;
use crate::topology::{components, EdgeMap, NONE};
use crate::tritri::{mesh_intersection_point, mesh_triangles_intersect};
use parry3d_f64::bounding_volume::Aabb as PAabb;
use parry3d_f64::partitioning::{Bvh, BvhBuildStrategy, BvhWorkspace};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// How many intersecting pairs the report lists (all are counted).
pub const LISTED_PAIRS: usize = 10;
/// How many closed components the report lists with their volume (all are counted).
pub const LISTED_COMPONENTS: usize = 100;

/// One closed component and its enclosed volume.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ClosedComponent {
    /// Its lowest triangle id (after repair).
    pub first_triangle: u32,
    pub triangles: usize,
    pub volume: f64,
}

/// A chain of open edges.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct EdgeLoop {
    pub edges: usize,
    pub length: f64,
    /// False when the chain ends without returning to its start (open edges meeting at a
    /// vertex shared with other open chains, or a non-manifold configuration).
    pub closed: bool,
    /// A vertex on the loop.
    pub at: Vec3,
}

/// An edge's length and midpoint.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct EdgeLength {
    pub length: f64,
    pub at: Vec3,
}

/// A pair of intersecting triangles (ids after repair) and a point they share.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct IntersectingPair {
    pub a: u32,
    pub b: u32,
    pub at: Vec3,
}

/// Triangles of one tag.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TagCount {
    pub name: String,
    pub triangles: usize,
}

/// The health report; see the module doc.
///
/// ```
/// use octocut_surface::{health, repair, RepairOptions, Surface};
/// let mut s = Surface::unit_cube();
/// let r = repair(&mut s, &RepairOptions::default());
/// let h = health(&s, &r);
/// assert_eq!(h.open_edges, 0);
/// assert_eq!(h.intersecting_pairs, 0);
/// assert!((h.enclosed_volume - 1.0).abs() < 1e-12); // exact: unit cube
/// ```
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct HealthReport {
    pub triangles_before: usize,
    pub vertices_before: usize,
    pub triangles: usize,
    pub vertices: usize,
    pub bounding_box: Aabb,
    pub area: f64,
    pub components: usize,
    pub closed_component_count: usize,
    /// The first [`LISTED_COMPONENTS`] closed components by lowest triangle.
    pub closed_components: Vec<ClosedComponent>,
    /// Sum of the enclosed volumes of all closed components.
    pub enclosed_volume: f64,
    pub open_edges: usize,
    pub open_edge_length: f64,
    pub open_loops: usize,
    /// The open loop with the greatest length.
    pub longest_open_loop: Option<EdgeLoop>,
    pub non_manifold_edges: usize,
    /// Most triangles on one edge.
    pub non_manifold_max_triangles: usize,
    /// Midpoint of the first non-manifold edge.
    pub non_manifold_at: Option<Vec3>,
    pub non_orientable_components: usize,
    pub non_orientable_at: Option<Vec3>,
    pub reoriented: usize,
    pub components_turned_outward: usize,
    pub duplicates_removed: usize,
    pub degenerates_removed: usize,
    pub vertices_welded: usize,
    pub intersecting_pairs: usize,
    /// The first [`LISTED_PAIRS`] intersecting pairs in (a, b) order.
    pub intersections: Vec<IntersectingPair>,
    pub shortest_edge: Option<EdgeLength>,
    pub longest_edge: Option<EdgeLength>,
    pub tags: Vec<TagCount>,
}

impl HealthReport {
    /// True when the surface is closed, manifold, consistently oriented and free of
    /// self-intersections: fit to mesh as is.
    pub fn is_watertight(&self) -> bool {
        self.open_edges == 0
            && self.non_manifold_edges == 0
            && self.non_orientable_components == 0
            && self.intersecting_pairs == 0
            && self.triangles > 0
    }
}

/// The health report of `surface`, the output of [`crate::repair`] with its report `repair`.
pub fn health(surface: &Surface, repair: &RepairReport) -> HealthReport {
    let tris = &surface.triangles;
    let v = &surface.vertices;
    let n = tris.len();
    let map = EdgeMap::new(tris);
    let nb = map.manifold_neighbours(n);
    let (label, ncomp) = components(&nb);
    let bbox = surface.bounding_box();
    let center = bbox.center();

    // closed components and volumes, summed in triangle order per component
    let mut open = vec![false; ncomp];
    let mut vol = vec![0.0f64; ncomp];
    let mut size = vec![0usize; ncomp];
    let mut first = vec![NONE; ncomp];
    for t in 0..n {
        let c = label[t] as usize;
        open[c] |= nb[3 * t..3 * t + 3].contains(&NONE);
        let [a, b, d] = tris[t].map(|i| v[i as usize] - center);
        vol[c] += a.dot(b.cross(d)) / 6.0;
        size[c] += 1;
        if first[c] == NONE {
            first[c] = t as u32;
        }
    }
    let closed: Vec<usize> = (0..ncomp).filter(|&c| !open[c]).collect();
    let enclosed_volume = closed.iter().map(|&c| vol[c]).sum::<f64>() + 0.0; // no -0

    // edges: open, non-manifold, lengths
    let edge_len = |e: usize| {
        let (a, b) = map.vertices_of(e);
        let (pa, pb) = (v[a as usize], v[b as usize]);
        ((pa - pb).length(), 0.5 * (pa + pb))
    };
    let mut open_edges = Vec::new();
    let (mut nm, mut nm_max, mut nm_at) = (0, 0, None);
    for e in 0..map.edge_count() {
        match map.incidences_of(e).len() {
            1 => open_edges.push(e as u32),
            2 => {}
            k => {
                nm += 1;
                nm_max = nm_max.max(k);
                nm_at.get_or_insert(edge_len(e).1);
            }
        }
    }
    let open_edge_length = open_edges.iter().map(|&e| edge_len(e as usize).0).sum();
    let (open_loops, longest_open_loop) = open_loops(&map, &open_edges, v);
    let extreme = |pick_max: bool| {
        (0..map.edge_count())
            .into_par_iter()
            .map(|e| (edge_len(e).0, e))
            .reduce_with(|x, y| {
                let o = x.0.total_cmp(&y.0).then(y.1.cmp(&x.1));
                if (o == std::cmp::Ordering::Greater) == pick_max {
                    x
                } else {
                    y
                }
            })
            .map(|(l, e)| EdgeLength {
                length: l,
                at: edge_len(e).1,
            })
    };

    let (intersecting_pairs, intersections) = intersecting_pairs(surface);

    let mut tags: Vec<TagCount> = surface
        .tag_names
        .iter()
        .map(|name| TagCount {
            name: name.clone(),
            triangles: 0,
        })
        .collect();
    for g in &surface.tags {
        if let Some(tc) = tags.get_mut(g.0 as usize) {
            tc.triangles += 1;
        }
    }

    HealthReport {
        triangles_before: repair.triangles_in,
        vertices_before: repair.vertices_in,
        triangles: n,
        vertices: v.len(),
        bounding_box: bbox,
        area: surface.area(),
        components: ncomp,
        closed_component_count: closed.len(),
        closed_components: closed
            .iter()
            .take(LISTED_COMPONENTS)
            .map(|&c| ClosedComponent {
                first_triangle: first[c],
                triangles: size[c],
                volume: vol[c],
            })
            .collect(),
        enclosed_volume,
        open_edges: open_edges.len(),
        open_edge_length,
        open_loops,
        longest_open_loop,
        non_manifold_edges: nm,
        non_manifold_max_triangles: nm_max,
        non_manifold_at: nm_at,
        non_orientable_components: repair.non_orientable_components,
        non_orientable_at: repair.non_orientable_at,
        reoriented: repair.reoriented,
        components_turned_outward: repair.components_turned_outward,
        duplicates_removed: repair.duplicates + repair.duplicates_reversed,
        degenerates_removed: repair.degenerate_repeated + repair.degenerate_collinear,
        vertices_welded: repair.vertices_merged_exact + repair.vertices_merged_tolerance,
        intersecting_pairs,
        intersections,
        shortest_edge: extreme(false),
        longest_edge: extreme(true),
        tags,
    }
}

/// Chains the open edges into loops through shared vertices: (number of chains, the longest).
fn open_loops(map: &EdgeMap, open: &[u32], v: &[Vec3]) -> (usize, Option<EdgeLoop>) {
    // CSR vertex -> incident open edges (indices into `open`)
    let mut start = vec![0u32; v.len() + 1];
    for &e in open {
        let (a, b) = map.vertices_of(e as usize);
        start[a as usize + 1] += 1;
        start[b as usize + 1] += 1;
    }
    for i in 0..v.len() {
        start[i + 1] += start[i];
    }
    let mut fill = start.clone();
    let mut at_vertex = vec![0u32; 2 * open.len()];
    for (k, &e) in open.iter().enumerate() {
        let (a, b) = map.vertices_of(e as usize);
        for x in [a, b] {
            at_vertex[fill[x as usize] as usize] = k as u32;
            fill[x as usize] += 1;
        }
    }
    let mut used = vec![false; open.len()];
    let mut count = 0;
    let mut best: Option<EdgeLoop> = None;
    for k0 in 0..open.len() {
        if used[k0] {
            continue;
        }
        count += 1;
        used[k0] = true;
        let (s, mut cur) = map.vertices_of(open[k0] as usize);
        let mut length = (v[s as usize] - v[cur as usize]).length();
        let mut edges = 1;
        while cur != s {
            let range = start[cur as usize] as usize..start[cur as usize + 1] as usize;
            let Some(&k) = at_vertex[range].iter().find(|&&k| !used[k as usize]) else {
                break;
            };
            used[k as usize] = true;
            let (a, b) = map.vertices_of(open[k as usize] as usize);
            let next = if a == cur { b } else { a };
            length += (v[next as usize] - v[cur as usize]).length();
            edges += 1;
            cur = next;
        }
        if best.as_ref().is_none_or(|b| length > b.length) {
            best = Some(EdgeLoop {
                edges,
                length,
                closed: cur == s,
                at: v[s as usize],
            });
        }
    }
    (count, best)
}

/// Part of the spread of Morton codes: bits of `x` (21 used) to every third bit.
fn spread(x: u64) -> u64 {
    let mut x = x & 0x1f_ffff;
    x = (x | x << 32) & 0x1f_0000_0000_ffff;
    x = (x | x << 16) & 0x1f_0000_ff00_00ff;
    x = (x | x << 8) & 0x100f_00f0_0f00_f00f;
    x = (x | x << 4) & 0x10c3_0c30_c30c_30c3;
    (x | x << 2) & 0x1249_2492_4924_9249
}

/// Counts the intersecting triangle pairs and lists the first [`LISTED_PAIRS`].
///
/// Broad phase: the triangles are split into spatially coherent chunks along the Morton curve
/// of their box centres (Morton 1966; common practice for parallel BVH builds), one BVH per chunk
/// built in parallel; box pairs come from each tree against itself and from each pair of trees
/// whose root boxes overlap. Narrow phase: [`mesh_triangles_intersect`].
fn intersecting_pairs(surface: &Surface) -> (usize, Vec<IntersectingPair>) {
    intersecting_pairs_chunked(surface, 1 << 16)
}

/// [`intersecting_pairs`] with chunks of at most `max_chunk` triangles.
fn intersecting_pairs_chunked(
    surface: &Surface,
    max_chunk: usize,
) -> (usize, Vec<IntersectingPair>) {
    let n = surface.triangles.len();
    let v = &surface.vertices;
    if n < 2 {
        return (0, Vec::new());
    }
    let boxes: Vec<Aabb> = (0..n)
        .into_par_iter()
        .map(|t| Aabb::from_points(surface.corners(t)))
        .collect();
    let whole = surface.bounding_box();
    let scale = (1u64 << 21) as f64 - 1.0;
    let ext = whole.extent().max(Vec3::splat(f64::MIN_POSITIVE));
    let mut order: Vec<(u64, u32)> = boxes
        .par_iter()
        .enumerate()
        .map(|(t, b)| {
            let c = ((b.center() - whole.min) / ext * scale).clamp(Vec3::ZERO, Vec3::splat(scale));
            (
                spread(c.x as u64) | spread(c.y as u64) << 1 | spread(c.z as u64) << 2,
                t as u32,
            )
        })
        .collect();
    order.par_sort_unstable();
    let chunk = n.div_ceil(n.div_ceil(max_chunk.max(1)));
    let ids: Vec<Vec<u32>> = order
        .chunks(chunk)
        .map(|c| c.iter().map(|e| e.1).collect())
        .collect();
    drop(order);
    let trees: Vec<Bvh> = ids
        .par_iter()
        .map(|c| {
            let leaves = c.iter().enumerate().map(|(k, &t)| {
                let b = &boxes[t as usize];
                (k, PAabb::new(b.min, b.max))
            });
            Bvh::from_iter(BvhBuildStrategy::default(), leaves)
        })
        .collect();
    let roots: Vec<Aabb> = ids
        .iter()
        .map(|c| {
            c.iter()
                .fold(Aabb::empty(), |a, &t| a.union(&boxes[t as usize]))
        })
        .collect();
    let mut tasks = Vec::new();
    for a in 0..ids.len() {
        for b in a..ids.len() {
            if roots[a].intersects(&roots[b]) {
                tasks.push((a, b));
            }
        }
    }
    let test = |i: u32, j: u32, out: &mut Vec<(u32, u32)>| {
        let (i, j) = (i.min(j), i.max(j));
        if boxes[i as usize].intersects(&boxes[j as usize])
            && mesh_triangles_intersect(
                v,
                surface.triangles[i as usize],
                surface.triangles[j as usize],
            )
        {
            out.push((i, j));
        }
    };
    let hits: Vec<Vec<(u32, u32)>> = tasks
        .par_iter()
        .map(|&(a, b)| {
            let mut out = Vec::new();
            let (ia, ib) = (&ids[a], &ids[b]);
            if a == b {
                let mut ws = BvhWorkspace::default();
                trees[a].traverse_bvtt_single_tree::<false>(&mut ws, &mut |x, y| {
                    test(ia[x as usize], ia[y as usize], &mut out)
                });
            } else {
                for (x, y) in trees[a].leaf_pairs(&trees[b], |p, q| p.intersects(q)) {
                    test(ia[x as usize], ib[y as usize], &mut out);
                }
            }
            out
        })
        .collect();
    let mut hits: Vec<(u32, u32)> = hits.into_iter().flatten().collect();
    hits.sort_unstable();
    let total = hits.len();
    let listed = hits
        .iter()
        .take(LISTED_PAIRS)
        .map(|&(a, b)| {
            let at = mesh_intersection_point(
                v,
                surface.triangles[a as usize],
                surface.triangles[b as usize],
            )
            .unwrap_or(Vec3::NAN);
            IntersectingPair { a, b, at }
        })
        .collect();
    (total, listed)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::{repair, RepairOptions};

    #[test]
    fn open_box_has_one_loop_of_four_edges() {
        // a unit cube without its top face (2 triangles): the rim is one loop of 4 unit edges
        let mut s = Surface::unit_cube();
        s.triangles.remove(3);
        s.triangles.remove(2);
        s.tags.truncate(10);
        let r = repair(&mut s, &RepairOptions::default());
        let h = health(&s, &r);
        assert_eq!((h.open_edges, h.open_loops), (4, 1));
        let l = h.longest_open_loop.clone().unwrap();
        assert!(l.closed && l.edges == 4 && (l.length - 4.0).abs() < 1e-12);
        assert_eq!(h.closed_component_count, 0);
        assert!(!h.is_watertight());
    }

    #[test]
    fn cube_edge_extremes_and_tags() {
        let mut s = Surface::unit_cube();
        let r = repair(&mut s, &RepairOptions::default());
        let h = health(&s, &r);
        // exact: cube edges have length 1, face diagonals sqrt 2
        assert_eq!(h.shortest_edge.unwrap().length, 1.0);
        assert_eq!(h.longest_edge.unwrap().length, 2f64.sqrt());
        assert_eq!(
            h.tags,
            vec![TagCount {
                name: "cube".into(),
                triangles: 12
            }]
        );
        assert!(h.is_watertight());
    }

    #[test]
    fn chunked_broad_phase_matches_all_pairs() {
        // reference: the O(n^2) loop over all pairs with the same exact narrow phase
        let mut s = Surface::uv_sphere(Vec3::ZERO, 1.0, 12, 24);
        s.append(Surface::uv_sphere(Vec3::new(0.7, 0.2, 0.1), 0.8, 10, 20));
        let r = repair(&mut s, &RepairOptions::default());
        let n = s.triangles.len();
        let mut all = Vec::new();
        for i in 0..n {
            for j in i + 1..n {
                if mesh_triangles_intersect(&s.vertices, s.triangles[i], s.triangles[j]) {
                    all.push((i as u32, j as u32));
                }
            }
        }
        assert!(all.len() > 10);
        for chunk in [1 << 16, 64, 7] {
            let (count, listed) = intersecting_pairs_chunked(&s, chunk);
            assert_eq!(count, all.len());
            let got: Vec<(u32, u32)> = listed.iter().map(|p| (p.a, p.b)).collect();
            assert_eq!(got, all[..LISTED_PAIRS]);
        }
        assert_eq!(health(&s, &r).intersecting_pairs, all.len());
    }

    #[test]
    fn shifted_copy_intersects() {
        let mut s = Surface::unit_cube();
        let mut o = Surface::unit_cube();
        o.vertices
            .iter_mut()
            .for_each(|p| *p += Vec3::new(0.5, 0.3, 0.2));
        s.append(o);
        let r = repair(&mut s, &RepairOptions::default());
        let h = health(&s, &r);
        assert!(h.intersecting_pairs > 0);
        for p in &h.intersections {
            let d1 = (crate::index::closest_point_on_triangle(p.at, &s.corners(p.a as usize))
                - p.at)
                .length();
            let d2 = (crate::index::closest_point_on_triangle(p.at, &s.corners(p.b as usize))
                - p.at)
                .length();
            assert!(d1 < 1e-12 && d2 < 1e-12);
        }
        assert_eq!(h.closed_component_count, 2);
        assert!((h.enclosed_volume - 2.0).abs() < 1e-12); // exact: two unit cubes
    }
}
